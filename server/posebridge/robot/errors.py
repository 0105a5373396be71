"""The exception type for robot descriptions that cannot be loaded, and its chain-choice case."""

from __future__ import annotations

from posebridge.errors import InputError

__all__ = ["ChainChoiceError", "RobotDescriptionError"]


class RobotDescriptionError(InputError):
    """A robot description file is missing, malformed or inconsistent.

    ``problems`` lists every finding as ``"<file>:<line>: <field>: <message>"``
    (line omitted where unknown); ``str(error)`` joins them, one per line.
    """

    def __init__(self, problems: list[str]) -> None:
        self.problems = list(problems)
        super().__init__("\n".join(self.problems))

    @property
    def detail(self) -> str:
        """The findings joined by ``"; "`` (the HTTP API's message)."""
        return "; ".join(self.problems)


class ChainChoiceError(RobotDescriptionError):
    """A URDF whose chain end must be chosen: several (or no) leaf links below ``from_link``.

    Attributes
    ----------
    leaves : tuple of str
        The leaf links below ``from_link``, sorted (the ``to_link`` choices).
    """

    def __init__(self, problems: list[str], leaves: list[str]) -> None:
        super().__init__(problems)
        self.leaves = tuple(sorted(leaves))

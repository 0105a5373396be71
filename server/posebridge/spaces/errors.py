"""The one exception type for bad input to the workspace and joint-space maps."""

from __future__ import annotations

from posebridge.errors import InputError

__all__ = ["SpacesInputError"]


class SpacesInputError(InputError):
    """A map request with a bad argument.

    Unknown joint, grid too large, a robot outside the family a function handles; the message names
    the argument.
    """

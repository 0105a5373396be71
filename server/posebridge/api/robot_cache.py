"""Which robot a request may use, decided once, and a small cache of loaded robots.

A request names a robot by a string (``robot`` of ``/api/fk``, ``/api/ik``,
``/api/robots/model``). :meth:`RobotCache.resolve` is the one place that
turns that string into something to load, and the one place that decides
whether the asker may have it:

* a name the server already serves — a bundled robot name (``pb-arm6``) or
  the served cell's robot (:meth:`RobotCache.pin`, e.g. ``cell:my-arm``) —
  is open to everyone;
* anything else is a request-supplied file path, open only where paths are
  allowed (the owner of a server started without ``--share``). The path is
  resolved first (symbolic links, ``..``, ``.``, repeated and trailing
  slashes: :func:`os.path.realpath`), and the decision and the load both use
  the resolved path: it must be an existing regular file whose own name ends
  in ``.toml`` or ``.urdf`` (any case); NUL and other control characters are
  refused before the file system is asked.

Where paths are not allowed, nothing about the string is interpreted: it is
either one of the served names or refused (403), so no spelling of a path
(trailing ``/``, ``/.``, ``//``, ``..``, URL encoding, case, NUL bytes) can
reach the file system, and no file content can appear in an error message.
"""

from __future__ import annotations

import os
import threading
from collections import OrderedDict
from dataclasses import dataclass
from pathlib import Path

from posebridge.geometry.robot_meshes import load_robot_with_meshes
from posebridge.messages import printable
from posebridge.resources import data_folder
from posebridge.robot.errors import RobotDescriptionError
from posebridge.robot.library import bundled_robots
from posebridge.robot.model import Robot

__all__ = ["RobotCache", "RobotPathNotAllowedError", "RobotSource"]

_FILE_SUFFIXES = (".toml", ".urdf")
_SHOWN_CHARS = 120


class RobotPathNotAllowedError(PermissionError):
    """A request named a robot this server does not serve to the asker (a file path)."""


@dataclass(frozen=True)
class RobotSource:
    """What a robot spec resolved to: a served robot or one resolved file.

    Attributes
    ----------
    spec : str
        The spec as given.
    robot : Robot or None
        The served robot (pinned cell robot), when there is no file to load.
    path : Path or None
        The resolved file (bundled description or an allowed path).
    """

    spec: str
    robot: Robot | None
    path: Path | None


def _shown(spec: str) -> str:
    """Shorten a spec for a message: control characters escaped, long ones shortened."""
    text = printable(spec)
    return repr(text if len(text) <= _SHOWN_CHARS else text[:_SHOWN_CHARS] + "...")


class RobotCache:
    """Robots by spec (module docstring), loaded files kept least recently used first out.

    Handlers run in a thread pool, so access is serialised by a lock. A file
    robot is reloaded when its modification time changes.

    Parameters
    ----------
    size : int
        Loaded robot files kept at most.
    paths_allowed : bool
        Whether this server reads robot files named by path at all (off on a
        shared server); even then only for requests that may use paths
        (:meth:`get`'s ``paths_allowed``).
    """

    def __init__(self, *, size: int, paths_allowed: bool) -> None:
        self._size = size
        self._paths_allowed = paths_allowed
        self._robots: OrderedDict[tuple[Path, int], Robot] = OrderedDict()
        self._pinned: dict[str, Robot] = {}
        self._lock = threading.Lock()
        self._bundled = {robot.name: robot.path for robot in bundled_robots()}

    def pin(self, spec: str, robot: Robot) -> None:
        """Serve ``robot`` under ``spec`` until pinned again (the cell's robot); never dropped."""
        with self._lock:
            self._pinned[spec] = robot

    def served_names(self) -> list[str]:
        """Every spec open to every asker: the bundled names and the pinned specs, sorted."""
        with self._lock:
            return sorted({*self._bundled, *self._pinned})

    def resolve(self, spec: str, *, paths_allowed: bool) -> RobotSource:
        """Decide what ``spec`` names and whether the asker may have it (module docstring).

        Parameters
        ----------
        spec : str
        paths_allowed : bool, keyword-only
            The asker may name files by path (the owner); the server's own
            setting must allow it too.

        Raises
        ------
        RobotPathNotAllowedError
            ``spec`` is not a served name and paths are not allowed.
        RobotDescriptionError
            A path that does not resolve to a ``.toml``/``.urdf`` file.
        """
        with self._lock:
            pinned = self._pinned.get(spec)
        if pinned is not None:
            return RobotSource(spec, pinned, None)
        bundled = self._bundled.get(spec)
        if bundled is not None:
            return RobotSource(spec, None, bundled)
        if not (paths_allowed and self._paths_allowed):
            raise RobotPathNotAllowedError(
                f"robot: this server serves only its robots by name "
                f"({', '.join(self.served_names())}); file paths are not accepted "
                f"(got {_shown(spec)})"
            )
        return RobotSource(spec, None, self._resolved_file(spec))

    def _resolved_file(self, spec: str) -> Path:
        if any(ord(c) < 32 or ord(c) == 127 for c in spec):
            raise RobotDescriptionError(
                [f"robot: a robot file path has no control characters, got {_shown(spec)}"]
            )
        path = Path(spec)
        # a bare file name of a bundled description (pb-arm6.urdf) when no such file is here
        bundled = data_folder("robots") / path.name
        if path.name == spec and not path.exists() and bundled.is_file():
            path = bundled
        resolved = Path(os.path.realpath(path))
        if resolved.suffix.lower() not in _FILE_SUFFIXES:
            raise RobotDescriptionError(
                [
                    f"unknown robot {_shown(spec)}; bundled robots: "
                    f"{', '.join(sorted(self._bundled))}, or give a .toml/.urdf path"
                ]
            )
        if not resolved.is_file():
            raise RobotDescriptionError([f"robot: {_shown(spec)}: no such robot file"])
        return resolved

    def get(self, spec: str, *, paths_allowed: bool) -> Robot:
        """Return the robot for ``spec``, loaded on first use.

        Errors are those of :meth:`resolve`, and :class:`RobotDescriptionError` for an invalid
        description.
        """
        source = self.resolve(spec, paths_allowed=paths_allowed)
        if source.robot is not None:
            return source.robot
        assert source.path is not None
        try:
            key = (source.path, source.path.stat().st_mtime_ns)
        except OSError as error:
            raise RobotDescriptionError([f"robot: {_shown(spec)}: no such robot file"]) from error
        with self._lock:
            robot = self._robots.get(key)
            if robot is not None:
                self._robots.move_to_end(key)
                return robot
        robot = load_robot_with_meshes(source.path)
        with self._lock:
            self._robots[key] = robot
            self._robots.move_to_end(key)
            while len(self._robots) > self._size:
                self._robots.popitem(last=False)
        return robot

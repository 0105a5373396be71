"""A small least-recently-used cache of loaded robots, kept in the app state."""

from __future__ import annotations

import threading
from collections import OrderedDict
from pathlib import Path

from posebridge.robot.errors import RobotDescriptionError
from posebridge.robot.library import load_robot
from posebridge.robot.model import Robot

__all__ = ["RobotCache", "RobotPathNotAllowedError"]

_FILE_SUFFIXES = (".toml", ".urdf")


class RobotPathNotAllowedError(PermissionError):
    """A request named a robot file by path on a server that does not read local paths."""


class RobotCache:
    """Loaded robots by their spec (bundled name or file path), least recently used dropped.

    Handlers run in a thread pool, so access is serialised by a lock. A file
    robot is reloaded when its modification time changes.

    Parameters
    ----------
    size : int
        Robots kept at most.
    paths_allowed : bool
        Whether specs naming a ``.toml``/``.urdf`` file are accepted.
    """

    def __init__(self, *, size: int, paths_allowed: bool) -> None:
        self._size = size
        self._paths_allowed = paths_allowed
        self._robots: OrderedDict[tuple[str, float], Robot] = OrderedDict()
        self._pinned: dict[str, Robot] = {}
        self._lock = threading.Lock()

    def pin(self, spec: str, robot: Robot) -> None:
        """Serve ``robot`` under ``spec`` until pinned again (the cell's robot); never dropped."""
        with self._lock:
            self._pinned[spec] = robot

    def get(self, spec: str) -> Robot:
        """The robot for ``spec``, loaded on first use.

        Raises
        ------
        RobotDescriptionError
            Unknown name, missing file or invalid description.
        RobotPathNotAllowedError
            ``spec`` is a file path and paths are not allowed.
        """
        with self._lock:
            pinned = self._pinned.get(spec)
        if pinned is not None:
            return pinned
        key = (spec, self._modification_time(spec))
        with self._lock:
            robot = self._robots.get(key)
            if robot is not None:
                self._robots.move_to_end(key)
                return robot
        robot = load_robot(spec)
        with self._lock:
            self._robots[key] = robot
            self._robots.move_to_end(key)
            while len(self._robots) > self._size:
                self._robots.popitem(last=False)
        return robot

    def _modification_time(self, spec: str) -> float:
        if not spec.lower().endswith(_FILE_SUFFIXES):
            return 0.0
        if not self._paths_allowed:
            raise RobotPathNotAllowedError(
                f"robot: file paths are not accepted by this server, give a bundled robot name (got {spec!r})"
            )
        try:
            return Path(spec).stat().st_mtime
        except OSError as error:
            raise RobotDescriptionError([f"{spec}: no such robot file"]) from error

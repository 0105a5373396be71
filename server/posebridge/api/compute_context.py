"""What one computation of a request may use: robots, the cell version and the asker's rights.

Route handlers hand their computations to :func:`posebridge.api.deps.compute_for`
as a module-level function ``function(context, *args)`` with picklable
arguments, so that the same function runs for the owner on the server's
thread pool (the server's robot cache and cell store) and for a reviewer in
the reviewer worker process (:mod:`posebridge.api.lanes`: its own robot
cache, a mirror of the cell version the server read, and no file paths).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

from posebridge.api.cell_store import CellSnapshot
from posebridge.api.robot_cache import RobotCache
from posebridge.robot.model import Robot

__all__ = ["ComputeContext", "cell_robot_spec"]


def cell_robot_spec(snapshot: CellSnapshot, robots: RobotCache) -> str:
    """Pin the cell's robot in ``robots`` and return its name for the kinematics routes.

    The bundled name, else ``cell:<robot name>``, under which every asker may use it.
    """
    source = snapshot.cell.robot
    spec = source.name if source.name is not None else f"cell:{snapshot.scene.robot.name}"
    robots.pin(spec, snapshot.scene.robot)
    return spec


@dataclass(frozen=True)
class ComputeContext:
    """The robots and the cell a computation reads, and whether it may name robot files.

    Attributes
    ----------
    robots : RobotCache
    read_cell : callable
        ``read_cell()``: the cell version the computation works on.
    paths_allowed : bool
        The asker may name robot files by path (the owner).
    """

    robots: RobotCache
    read_cell: Callable[[], CellSnapshot]
    paths_allowed: bool

    def cell(self) -> CellSnapshot:
        """Return the cell version of this computation (``CellFileError`` if it cannot be read)."""
        return self.read_cell()

    def robot(self, spec: str) -> Robot:
        """Return the robot named ``spec``, under the asker's rights (errors as :meth:`RobotCache.get`)."""
        return self.robots.get(spec, paths_allowed=self.paths_allowed)

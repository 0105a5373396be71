"""Plain export of a path's timed motion: fixed-period rows of joints, TCP pose, branch, margins.

The path is sampled as the path check samples it
(:func:`posebridge.planning.path_sampling.sample_path`), timed blended through
its waypoints (:func:`posebridge.planning.blended_timing.blended_cycle_time`,
TOPP-RA; rest to rest where a waypoint is an exact stop) and sampled at a fixed
period (:func:`posebridge.planning.blended_timing.sample_motion`), in SI units
(:class:`MotionExportData`); :func:`posebridge.results.motion_export.motion_export_result`
makes the rows. Every row holds, in the boundary's units:

* ``time_s``, ``segment`` (``k``: from waypoint ``k`` to ``k + 1``);
* every joint, named with its unit: ``<joint>_deg`` (revolute) or ``<joint>_mm``
  (prismatic);
* the TCP pose in the world: ``tcp_x_mm`` ... ``tcp_z_mm`` and roll-pitch-yaw
  about fixed X, Y, Z (``tcp_roll_deg``, ``tcp_pitch_deg``, ``tcp_yaw_deg``);
* ``branch`` (shoulder, elbow, wrist in plain words);
* ``limit_margin_deg`` (smallest margin of the revolute joints) and
  ``limit_margin_mm`` (of the prismatic joints), each only when the robot has
  such joints, and ``limit_joint``: the joint nearest its limit, revolute and
  prismatic margins compared after dividing by the path check's default warning
  margins (5 deg, 10 mm);
* ``clearance_mm`` to the cell and its ``closest_pair``
  (:func:`posebridge.cell.clearance.clearance_to_cell`).

A header block names the cell, robot, tool, path, posebridge version, the
period, both cycle times and every waypoint's speed and blend. Plain numbers
only: no controller program format. A CSV export (header block as ``#``
comment lines) reads back as a joint log
(:mod:`posebridge.cell.joint_log`), so the pose check can replay it.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import TYPE_CHECKING

from posebridge.arrays import FloatArray, Int8Array
from posebridge.cell.clearance import CellClearance, clearance_to_cell
from posebridge.cell.joint_log import MAX_LOG_ROWS
from posebridge.cell.scene import ResolvedPath, Scene
from posebridge.kinematics.branches import label_branches
from posebridge.kinematics.fk import fk_tool
from posebridge.kinematics.metrics import limit_margins
from posebridge.planning.errors import PlanningInputError
from posebridge.planning.path_sampling import (
    DEFAULT_RESOLUTION_M,
    DEFAULT_RESOLUTION_RAD,
    path_of,
    sample_path,
)

if TYPE_CHECKING:
    # toppra (through blended_timing) imports matplotlib: imported on first use below
    from posebridge.planning.blended_timing import BlendedCycleTime, MotionSamples

__all__ = [
    "DEFAULT_PERIOD_MS",
    "MAX_EXPORT_ROWS",
    "MIN_PERIOD_MS",
    "MotionExportData",
    "export_motion",
]

DEFAULT_PERIOD_MS = 4.0
"""Sampling period of an export when none is given, ms (common practice, no source)."""
MIN_PERIOD_MS = 0.5
"""Shortest period accepted, ms."""
MAX_EXPORT_ROWS = MAX_LOG_ROWS
"""Most rows of an export: as many as a joint log may hold, so every export reads back."""


@dataclass(frozen=True, eq=False)
class MotionExportData:
    """A path's timed motion at a fixed period (module docstring), SI units.

    Attributes
    ----------
    scene : Scene
    path : ResolvedPath
    period_ms : float
        The row period as given.
    timing : BlendedCycleTime
    motion : MotionSamples
        Time, segment and joint values per row (R rows).
    T_world_tool : array, shape (R, 4, 4)
        TCP pose in the world, m.
    labels : tuple of three arrays of int8, shape (R,)
        Shoulder, elbow and wrist signs (:func:`posebridge.kinematics.branches.label_branches`).
    margin : array, shape (R, n)
        Joint-limit margins, rad or m.
    clearance : CellClearance
        To the cell, per row.
    """

    scene: Scene
    path: ResolvedPath
    period_ms: float
    timing: BlendedCycleTime
    motion: MotionSamples
    T_world_tool: FloatArray
    labels: tuple[Int8Array, Int8Array, Int8Array]
    margin: FloatArray
    clearance: CellClearance


def export_motion(
    scene: Scene,
    path: int,
    *,
    period_ms: float = DEFAULT_PERIOD_MS,
    resolution_m: float = DEFAULT_RESOLUTION_M,
    resolution_rad: float = DEFAULT_RESOLUTION_RAD,
) -> MotionExportData:
    """Return the timed motion of a cell path at a fixed period (module docstring).

    Parameters
    ----------
    scene : Scene
    path : int
        Index into ``scene.paths``.
    period_ms : float, keyword-only
        Row period, ms (at least :data:`MIN_PERIOD_MS`).
    resolution_m, resolution_rad : float, keyword-only
        Sampling of the path, as the path check samples.

    Returns
    -------
    MotionExportData

    Raises
    ------
    PlanningInputError
        Bad path or period, a path that cannot be timed (a waypoint or sample
        unreached), or more than :data:`MAX_EXPORT_ROWS` rows.
    """
    from posebridge.planning.blended_timing import blended_cycle_time, sample_motion

    if not math.isfinite(period_ms) or period_ms < MIN_PERIOD_MS:
        raise PlanningInputError(
            f"period_ms: expected a number of at least {MIN_PERIOD_MS}, got {period_ms!r}"
        )
    resolved = path_of(scene, path)
    robot = scene.robot
    sampled = sample_path(scene, resolved, resolution_m=resolution_m, resolution_rad=resolution_rad)
    timing = blended_cycle_time(scene, sampled)
    if math.isfinite(timing.total) and timing.total / (period_ms / 1000.0) + 2 > MAX_EXPORT_ROWS:
        raise PlanningInputError(
            f"period_ms: {period_ms!r} ms gives more than {MAX_EXPORT_ROWS} rows for "
            f"{timing.total:.3f} s; use a longer period"
        )
    motion = sample_motion(timing, period_ms / 1000.0)
    q = motion.q
    return MotionExportData(
        scene=scene,
        path=resolved,
        period_ms=float(period_ms),
        timing=timing,
        motion=motion,
        T_world_tool=scene.T_world_base @ fk_tool(robot, q, scene.T_flange_tool),
        labels=label_branches(robot, q),
        margin=limit_margins(robot, q).margin,
        clearance=clearance_to_cell(scene, q),
    )

"""Plain export of a path's timed motion: fixed-period rows of joints, TCP pose, branch, margins.

The path is sampled as the path check samples it
(:func:`posebridge.planning.path_sampling.sample_path`), timed blended through
its waypoints (:func:`posebridge.planning.blended_timing.blended_cycle_time`,
TOPP-RA; rest to rest where a waypoint is an exact stop) and sampled at a fixed
period (:func:`posebridge.planning.blended_timing.sample_motion`). Every row
holds, in the boundary's units:

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

import csv
import io
import json
import math
from importlib.metadata import version

import numpy as np

from posebridge.cell.clearance import clearance_to_cell
from posebridge.cell.joint_log import EXPORT_COLUMNS, MAX_LOG_ROWS, TIME_COLUMN
from posebridge.cell.scene import Scene
from posebridge.kinematics.branches import label_branches
from posebridge.kinematics.fk import fk_tool
from posebridge.kinematics.metrics import limit_margins
from posebridge.planning.errors import PlanningInputError
from posebridge.planning.path_sampling import path_of, sample_path, waypoint_label
from posebridge.results.planning import (
    MotionExportHeader,
    MotionExportReport,
    MotionExportWaypoint,
)
from posebridge.transforms import rpy_from_rotation_matrix
from posebridge.units import joints_user_from_si, mm_from_m

__all__ = [
    "DEFAULT_PERIOD_MS",
    "MAX_EXPORT_ROWS",
    "MIN_PERIOD_MS",
    "export_motion",
    "motion_csv",
    "motion_json",
]

DEFAULT_PERIOD_MS = 4.0
"""Sampling period of an export when none is given, ms (common practice, no source)."""
MIN_PERIOD_MS = 0.5
"""Shortest period accepted, ms."""
MAX_EXPORT_ROWS = MAX_LOG_ROWS
"""Most rows of an export: as many as a joint log may hold, so every export reads back."""
_WARNING_MARGIN = (5.0, 10.0)
"""The path check's default warning margins (deg, mm) that make the two units comparable."""
_WORDS = (
    ("front", "back", "on axis 1"),
    ("up", "down", "in line"),
    ("positive", "negative", "straight"),
)


def _branch_words(labels: tuple[np.ndarray, np.ndarray, np.ndarray]) -> list[str]:
    stacked = np.stack(labels, axis=1)
    choice = np.where(stacked > 0, 0, np.where(stacked < 0, 1, 2))
    return [", ".join(_WORDS[i][int(c)] for i, c in enumerate(row)) for row in choice]


def export_motion(
    scene: Scene,
    path: int,
    *,
    period_ms: float = DEFAULT_PERIOD_MS,
    cell_name: str = "",
    resolution_mm: float = 5.0,
    resolution_deg: float = 1.0,
) -> MotionExportReport:
    """Return the timed motion of a cell path at a fixed period (module docstring).

    Parameters
    ----------
    scene : Scene
    path : int
        Index into ``scene.paths``.
    period_ms : float, keyword-only
        Row period, ms (at least :data:`MIN_PERIOD_MS`).
    cell_name : str, keyword-only
        The cell's file name for the header.
    resolution_mm, resolution_deg : float, keyword-only
        Sampling of the path, as the path check samples.

    Returns
    -------
    MotionExportReport

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
    sampled = sample_path(
        scene, resolved, resolution_mm=resolution_mm, resolution_deg=resolution_deg
    )
    timing = blended_cycle_time(scene, sampled)
    if math.isfinite(timing.total) and timing.total / (period_ms / 1000.0) + 2 > MAX_EXPORT_ROWS:
        raise PlanningInputError(
            f"period_ms: {period_ms!r} ms gives more than {MAX_EXPORT_ROWS} rows for "
            f"{timing.total:.3f} s; use a longer period"
        )
    motion = sample_motion(timing, period_ms / 1000.0)
    q = motion.q
    T_world_tool = scene.T_world_base @ fk_tool(robot, q, scene.T_flange_tool)
    position = mm_from_m(T_world_tool[:, :3, 3])
    rpy = rpy_from_rotation_matrix(T_world_tool[:, :3, :3], degrees=True)
    branch = _branch_words(label_branches(robot, q))
    margin = limit_margins(robot, q).margin
    user_margin = joints_user_from_si(margin, robot.prismatic)
    prismatic = robot.prismatic
    scaled = user_margin / np.where(prismatic, _WARNING_MARGIN[1], _WARNING_MARGIN[0])
    nearest = np.argmin(scaled, axis=1)
    clearance = clearance_to_cell(scene, q)
    joints = joints_user_from_si(q, prismatic)
    joint_columns = [
        f"{name}_{'mm' if p else 'deg'}"
        for name, p in zip(robot.joint_names, prismatic, strict=True)
    ]
    margin_columns = []
    if not np.all(prismatic):
        margin_columns.append("limit_margin_deg")
    if np.any(prismatic):
        margin_columns.append("limit_margin_mm")
    columns = [TIME_COLUMN, "segment", *joint_columns, *EXPORT_COLUMNS[1:8], *margin_columns]
    columns += ["limit_joint", "clearance_mm", "closest_pair"]
    rows: list[list[float | int | str | None]] = []
    for r in range(q.shape[0]):
        row: list[float | int | str | None] = [float(motion.t[r]), int(motion.segment[r])]
        row += joints[r].tolist() + position[r].tolist() + rpy[r].tolist() + [branch[r]]
        if "limit_margin_deg" in margin_columns:
            row.append(float(np.min(user_margin[r, ~prismatic])))
        if "limit_margin_mm" in margin_columns:
            row.append(float(np.min(user_margin[r, prismatic])))
        distance = float(clearance.distance[r])
        capsule, other, _ = clearance.pair(r)
        row += [
            robot.joint_names[int(nearest[r])],
            float(mm_from_m(distance)) if math.isfinite(distance) else None,
            f"{capsule} - {other}" if capsule else "",
        ]
        rows.append(row)
    W = len(resolved.sources)
    header = MotionExportHeader(
        cell=cell_name,
        robot=robot.name,
        tool=scene.tool_name,
        path=resolved.name,
        posebridge_version=version("posebridge"),
        period_ms=float(period_ms),
        rows=len(rows),
        cycle_time_s=float(timing.total),
        rest_to_rest_cycle_time_s=float(timing.rest_to_rest_total),
        timing_note=timing.note,
        joint_names=list(robot.joint_names),
        joint_units=["mm" if p else "deg" for p in prismatic],
        frame="world; TCP orientation as roll-pitch-yaw about fixed X, then Y, then Z",
        waypoints=[
            MotionExportWaypoint(
                name=waypoint_label(scene, resolved, w),
                motion="linear" if resolved.linear[w] else "joint",
                speed_percent=(None if resolved.linear[w] else float(resolved.speed_percent[w])),
                speed_mm_s=(
                    float(mm_from_m(resolved.linear_speed[w])) if resolved.linear[w] else None
                ),
                blend_mm=float(mm_from_m(resolved.blend_radius[w])),
            )
            for w in range(W)
        ],
        velocity_limits_deg_s=np.round(
            joints_user_from_si(robot.velocity_max, prismatic), 9
        ).tolist(),
        acceleration_limits_deg_s2=np.round(
            joints_user_from_si(robot.acceleration_max, prismatic), 9
        ).tolist(),
    )
    return MotionExportReport(header=header, columns=columns, rows=rows)


def motion_json(report: MotionExportReport) -> str:
    """Return the export as JSON text: ``{"header": {...}, "columns": [...], "rows": [[...], ...]}``."""
    return json.dumps(report.model_dump(mode="json"), separators=(",", ":"), allow_nan=False)


def _cell(value: float | int | str | None) -> str:
    if value is None:
        return ""
    if isinstance(value, float):
        return f"{value:.6f}"
    return str(value)


def motion_csv(report: MotionExportReport) -> str:
    """Return the export as CSV text: the header block as ``# key: value`` lines, then the table.

    Header values are JSON (lists and strings as JSON); numbers with six decimals.
    """
    out = io.StringIO()
    out.write("# posebridge motion export\n")
    for key, value in report.header.model_dump(mode="json").items():
        out.write(f"# {key}: {json.dumps(value)}\n")
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow(report.columns)
    for row in report.rows:
        writer.writerow([_cell(v) for v in row])
    return out.getvalue()

"""The motion export's result (mm, deg): header, columns and rows; CSV and JSON text.

:func:`motion_export_result` turns :class:`~posebridge.planning.motion_export.MotionExportData`
(:func:`posebridge.planning.motion_export.export_motion`) into :class:`MotionExportReport`
with the columns listed in :mod:`posebridge.planning.motion_export`; :func:`motion_csv`
and :func:`motion_json` write it.
"""

from __future__ import annotations

import csv
import io
import json
import math
from importlib.metadata import version
from typing import Literal

import numpy as np
from pydantic import BaseModel, ConfigDict, Field

from posebridge.cell.joint_log import EXPORT_COLUMNS, TIME_COLUMN
from posebridge.planning.motion_export import MotionExportData
from posebridge.planning.path_sampling import waypoint_label
from posebridge.transforms import rpy_from_rotation_matrix
from posebridge.units import joints_user_from_si, mm_from_m

__all__ = [
    "MotionExportHeader",
    "MotionExportReport",
    "MotionExportWaypoint",
    "motion_csv",
    "motion_export_result",
    "motion_json",
]

_WARNING_MARGIN = (5.0, 10.0)
"""The path check's default warning margins (deg, mm) that make the two units comparable."""
_WORDS = (
    ("front", "back", "on axis 1"),
    ("up", "down", "in line"),
    ("positive", "negative", "straight"),
)


class _Report(BaseModel):
    model_config = ConfigDict(extra="forbid", allow_inf_nan=False)


class MotionExportWaypoint(_Report):
    """A waypoint's motion settings in an export header."""

    name: str
    motion: Literal["joint", "linear"] = Field(description="Motion into this waypoint.")
    speed_percent: float | None = Field(description="Joint moves: percent of the joint limits.")
    speed_mm_s: float | None = Field(description="Linear moves: requested TCP speed.")
    blend_mm: float


class MotionExportHeader(_Report):
    """The header block of a motion export."""

    cell: str
    robot: str
    tool: str
    path: str
    posebridge_version: str
    period_ms: float
    rows: int
    cycle_time_s: float = Field(description="Blended cycle time of the exported motion.")
    rest_to_rest_cycle_time_s: float = Field(description="The rest-to-rest upper bound.")
    timing_note: str
    joint_names: list[str]
    joint_units: list[Literal["deg", "mm"]]
    frame: str = Field(description="Frame and orientation convention of the TCP columns.")
    waypoints: list[MotionExportWaypoint]
    velocity_limits_deg_s: list[float] = Field(description="Per joint; mm/s for prismatic.")
    acceleration_limits_deg_s2: list[float] = Field(description="Per joint; mm/s^2 for prismatic.")


class MotionExportReport(_Report):
    """A path's timed motion sampled at a fixed period: header, column names and rows."""

    header: MotionExportHeader
    columns: list[str] = Field(description="Column names, each with its unit where it has one.")
    rows: list[list[float | int | str | None]] = Field(
        description="One row per period; null where a value is missing (no clearance pair)."
    )


def _branch_words(labels: tuple[np.ndarray, np.ndarray, np.ndarray]) -> list[str]:
    stacked = np.stack(labels, axis=1)
    choice = np.where(stacked > 0, 0, np.where(stacked < 0, 1, 2))
    return [", ".join(_WORDS[i][int(c)] for i, c in enumerate(row)) for row in choice]


def motion_export_result(data: MotionExportData, *, cell_name: str = "") -> MotionExportReport:
    """Build the export (mm, deg): header, columns and one row per period.

    Parameters
    ----------
    data : MotionExportData
        From :func:`posebridge.planning.motion_export.export_motion`.
    cell_name : str, keyword-only
        The cell's file name for the header.

    Returns
    -------
    MotionExportReport
    """
    scene = data.scene
    resolved = data.path
    timing = data.timing
    motion = data.motion
    robot = scene.robot
    q = motion.q
    T_world_tool = data.T_world_tool
    position = mm_from_m(T_world_tool[:, :3, 3])
    rpy = rpy_from_rotation_matrix(T_world_tool[:, :3, :3], degrees=True)
    branch = _branch_words(data.labels)
    prismatic = robot.prismatic
    user_margin = joints_user_from_si(data.margin, prismatic)
    scaled = user_margin / np.where(prismatic, _WARNING_MARGIN[1], _WARNING_MARGIN[0])
    nearest = np.argmin(scaled, axis=1)
    clearance = data.clearance
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
        period_ms=data.period_ms,
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

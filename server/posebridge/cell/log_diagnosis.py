"""Diagnosis of a controller joint log in a cell, in SI units.

:func:`diagnose_log` diagnoses every row of a
:class:`~posebridge.cell.joint_log.JointLog` at once
(:func:`~posebridge.cell.quality.evaluate_configurations` runs on the whole
batch), checks the joint changes between consecutive rows against the velocity
limits (needs ``time_s``) and picks the single **worst row** by
:data:`WORST_ROW_RULE`, diagnosed in full by
:func:`posebridge.cell.pose_diagnosis.diagnose_pose`. In a cell with external
axes every row is posed at the log's values for them (an axis without a column
at the cell's value): the tool pose and the clearance move with the track and
the turntables, the axes get their own velocity check. It returns a
:class:`LogDiagnosisData` in SI units;
:func:`posebridge.results.log_diagnosis.log_diagnosis_result` looks along its rows
(each joint's smallest margin, the minimum clearance and manipulability, the
closest approach to a singularity, stretches of rows in a condition, branch
changes between consecutive rows, the velocity jumps) and makes the boundary
model (mm, deg) with its findings.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

import numpy as np

from posebridge.cell.joint_log import JointLog
from posebridge.cell.pose_diagnosis import PoseDiagnosisData, diagnose_pose
from posebridge.cell.quality import ConfigurationQuality, evaluate_configurations, proximity_ratio
from posebridge.cell.scene import Scene
from posebridge.cell.thresholds import QualityThresholds
from posebridge.kinematics.fk import KinematicsInputError
from posebridge.units import BoolArray, FloatArray

__all__ = [
    "VELOCITY_TOLERANCE",
    "WORST_ROW_RULE",
    "LogDiagnosisData",
    "LogVelocity",
    "WorstRowKind",
    "diagnose_log",
]

VELOCITY_TOLERANCE = 0.01
"""A joint change counts as too fast above ``(1 + this) * velocity limit``: a 1 % allowance
for the rounding of logged values (common practice, no source)."""
WORST_ROW_RULE = (
    "The row with the deepest collision; if no row collides, the row farthest outside a joint "
    "limit (by fraction of the joint's range); if every row is within limits, the second row "
    "of the fastest joint change above its velocity limit; otherwise the row closest to a "
    "warning: smallest of clearance, limit margin and singularity distance each divided by its "
    "warning threshold. Ties go to the earliest row."
)

WorstRowKind = Literal["collision", "outside limits", "velocity", "proximity"]
"""Which clause of :data:`WORST_ROW_RULE` chose the worst row."""


@dataclass(frozen=True, eq=False)
class LogVelocity:
    """Joint changes between consecutive rows against the velocity limits, SI units.

    Joints are the cell's joint vector: the robot's joints, then the external axes (J).

    Attributes
    ----------
    change : array, shape (N - 1, J)
        Change from each row to the next, rad or m.
    speed : array, shape (N - 1, J)
        ``|change| / dt``, rad/s or m/s.
    limit : array, shape (J,)
        Velocity limits, rad/s or m/s (infinite or 0 where a joint has none).
    has_limit : array of bool, shape (J,)
    over : array of bool, shape (N - 1, J)
        Faster than ``(1 + VELOCITY_TOLERANCE) * limit``.
    """

    change: FloatArray
    speed: FloatArray
    limit: FloatArray
    has_limit: BoolArray
    over: BoolArray


@dataclass(frozen=True, eq=False)
class LogDiagnosisData:
    """Diagnosis of a joint log (module docstring), SI units.

    Attributes
    ----------
    scene : Scene
    log : JointLog
    external : array, shape (N, m)
        External axis values of every row, m or rad.
    quality : ConfigurationQuality
        Of every row (N).
    velocity : LogVelocity or None
        None when the log has no ``time_s`` column or fewer than two rows.
    fastest : tuple of (int, int, float) or None
        Row, joint (cell joint vector) and speed-to-limit ratio of the fastest change
        above its limit; None when there is none.
    worst_row : int
    worst_kind : WorstRowKind
        The clause of :data:`WORST_ROW_RULE` that chose it.
    worst : PoseDiagnosisData
        The worst row diagnosed in full.
    """

    scene: Scene
    log: JointLog
    external: FloatArray
    quality: ConfigurationQuality
    velocity: LogVelocity | None
    fastest: tuple[int, int, float] | None
    worst_row: int
    worst_kind: WorstRowKind
    worst: PoseDiagnosisData

    @property
    def thresholds(self) -> QualityThresholds:
        """The thresholds used."""
        return self.quality.thresholds


def _velocity(
    scene: Scene, log: JointLog, external: FloatArray
) -> tuple[LogVelocity | None, tuple[int, int, float] | None]:
    """Check the changes between rows against the velocity limits; find the fastest above one."""
    time_s = log.time_s
    if time_s is None or log.count < 2:
        return None, None
    values = np.concatenate([log.q, external], axis=1)
    limit = np.concatenate([scene.robot.velocity_max, scene.external.velocity_max])
    has_limit = np.isfinite(limit) & (limit > 0.0)
    change = np.diff(values, axis=0)
    dt = np.diff(time_s)
    speed = np.abs(change) / dt[:, None]
    over = (speed > (1.0 + VELOCITY_TOLERANCE) * np.where(has_limit, limit, np.inf)) & has_limit
    fastest = None
    if np.any(over):
        ratio = np.where(over, speed / np.where(has_limit, limit, 1.0), 0.0)
        p, j = np.unravel_index(int(np.argmax(ratio)), ratio.shape)
        fastest = (int(p) + 1, int(j), float(ratio[p, j]))
    return LogVelocity(change, speed, limit, has_limit, over), fastest


def _worst_row(
    quality: ConfigurationQuality, fastest: tuple[int, int, float] | None
) -> tuple[int, WorstRowKind]:
    """Pick the worst row by :data:`WORST_ROW_RULE`; return it and the clause that chose it."""
    clearance = quality.clearance
    if np.any(clearance < 0.0):
        return int(np.argmin(clearance)), "collision"
    if not np.all(quality.within_limits):
        return int(np.argmin(quality.margins.min_fraction)), "outside limits"
    if fastest is not None:
        return fastest[0], "velocity"
    return int(np.argmin(proximity_ratio(quality))), "proximity"


def diagnose_log(
    scene: Scene, log: JointLog, thresholds: QualityThresholds | None = None
) -> LogDiagnosisData:
    """Diagnose every row of a joint log in the cell, and what happens between rows.

    Method in the module docstring; every per-row quantity is computed for
    all rows at once.

    Parameters
    ----------
    scene : Scene
    log : JointLog
        From :func:`posebridge.cell.joint_log.read_joint_log`; its joints
        must be the scene robot's.
    thresholds : QualityThresholds, optional
        The cell's own (``scene.cell.thresholds``) if omitted.

    Returns
    -------
    LogDiagnosisData
        SI units; :func:`posebridge.results.log_diagnosis.log_diagnosis_result` makes the
        boundary model (mm, deg).
    """
    if tuple(log.joint_names) != scene.robot.joint_names:
        raise KinematicsInputError(
            f"joint log {log.source!r}: its joints ({', '.join(log.joint_names)}) are not "
            f"those of robot {scene.robot.name!r} ({', '.join(scene.robot.joint_names)})"
        )
    thresholds = scene.cell.thresholds if thresholds is None else thresholds
    m = scene.external.count
    external = (
        log.external
        if log.external.shape == (log.count, m)
        else np.broadcast_to(scene.external.values, (log.count, m)).copy()
    )
    quality = evaluate_configurations(scene, log.q, thresholds, external=external)
    velocity, fastest = _velocity(scene, log, external)
    worst_row, worst_kind = _worst_row(quality, fastest)
    worst = diagnose_pose(
        scene,
        log.q[worst_row],
        quality.thresholds,
        external=external[worst_row] if m else None,
    )
    return LogDiagnosisData(
        scene=scene,
        log=log,
        external=external,
        quality=quality,
        velocity=velocity,
        fastest=fastest,
        worst_row=worst_row,
        worst_kind=worst_kind,
        worst=worst,
    )

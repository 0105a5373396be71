"""Builders of the per-configuration result models from :class:`~posebridge.cell.quality.ConfigurationQuality`.

The ``*_model`` functions and :func:`branch_report` turn one configuration's SI
values into the boundary models of :mod:`posebridge.results.cell` (mm, deg);
:func:`quality_findings` lists its findings against
:class:`~posebridge.cell.thresholds.QualityThresholds`.
"""

from __future__ import annotations

import numpy as np
import numpy.typing as npt

from posebridge.cell.clearance import CellClearance
from posebridge.cell.quality import LIMIT_TOLERANCE, ConfigurationQuality
from posebridge.results.cell import (
    BranchReport,
    ClosestPair,
    Finding,
    JointMargin,
    PoseKind,
    SingularityProximity,
)
from posebridge.robot.model import Robot
from posebridge.units import deg_from_rad, joint_unit_labels, joints_user_from_si, mm_from_m

__all__ = [
    "branch_report",
    "closest_pair_model",
    "finite_or_none",
    "geometry_findings",
    "joint_margins_model",
    "quality_findings",
    "singularity_model",
]


def finite_or_none(value: float) -> float | None:
    """Return ``value`` as a float, None where it is not finite (nothing checked)."""
    return float(value) if np.isfinite(value) else None


def closest_pair_model(clearance: CellClearance, k: int) -> ClosestPair | None:
    """Return configuration ``k``'s closest pair in mm, or None when nothing was checked."""
    if not np.isfinite(clearance.distance[k]):
        return None
    capsule, other, kind = clearance.pair(k)
    witness = mm_from_m(clearance.witness_world[k])
    return ClosestPair(
        distance_mm=float(mm_from_m(clearance.distance[k])),
        capsule=capsule,
        other=other,
        other_kind=kind,  # type: ignore[arg-type]  # one of the PartKind words
        capsule_point_mm=witness[0].tolist(),
        other_point_mm=witness[1].tolist(),
    )


def singularity_model(quality: ConfigurationQuality, k: int) -> SingularityProximity | None:
    """Return configuration ``k``'s singularity distances in degrees and mm (None for non-arm robots)."""
    report = quality.singularity
    if report is None:
        return None
    return SingularityProximity(
        kind=report.label[k],  # type: ignore[arg-type]  # wrist, elbow, shoulder or none
        wrist_bend_deg=float(deg_from_rad(report.wrist_rad[k])),
        elbow_deg=float(deg_from_rad(report.elbow_rad[k])),
        shoulder_mm=float(mm_from_m(report.shoulder_m[k])),
        near_wrist=bool(report.near_wrist[k]),
        near_elbow=bool(report.near_elbow[k]),
        near_shoulder=bool(report.near_shoulder[k]),
    )


def joint_margins_model(quality: ConfigurationQuality, k: int) -> list[JointMargin]:
    """Return configuration ``k``'s per-joint limit margins in degrees or mm."""
    robot = quality.robot
    prismatic = robot.prismatic
    units = joint_unit_labels(prismatic)
    value = joints_user_from_si(quality.q[k], prismatic)
    lower = joints_user_from_si(robot.lower, prismatic)
    upper = joints_user_from_si(robot.upper, prismatic)
    margin = joints_user_from_si(quality.margins.margin[k], prismatic)
    margins = quality.margins
    rows = []
    for j, name in enumerate(robot.joint_names):
        continuous = bool(robot.continuous[j])
        nearer = "lower" if margins.to_lower[k, j] <= margins.to_upper[k, j] else "upper"
        rows.append(
            JointMargin(
                joint=name,
                unit=units[j],
                value=float(value[j]),
                lower=None if continuous else float(lower[j]),
                upper=None if continuous else float(upper[j]),
                margin=None if continuous else float(margin[j]),
                margin_fraction=None if continuous else float(margins.fraction[k, j]),
                nearer_limit=None if continuous else nearer,  # type: ignore[arg-type]
            )
        )
    return rows


def branch_report(
    quality: ConfigurationQuality,
    k: int,
    *,
    branch: str,
    revolutions: npt.ArrayLike,
    matches_required_branch: bool = True,
    score: float | None = None,
) -> BranchReport:
    """One configuration as a :class:`~posebridge.results.cell.BranchReport` (mm, deg).

    Parameters
    ----------
    quality : ConfigurationQuality
    k : int
        Which configuration.
    branch : str
        Its branch words (with extra revolutions).
    revolutions : array-like of int, shape (n,)
    matches_required_branch : bool, keyword-only
    score : float, optional, keyword-only
        :func:`branch_score` value, given for usable branches.
    """
    robot = quality.robot
    margins = quality.margins
    joint = int(margins.min_joint[k])
    has_limits = joint >= 0
    units = joint_unit_labels(robot.prismatic)
    margin_user = joints_user_from_si(margins.margin[k], robot.prismatic)
    within = bool(quality.within_limits[k])
    free = bool(quality.collision_free[k])
    return BranchReport(
        branch=branch,
        shoulder=int(quality.shoulder[k]),
        elbow=int(quality.elbow[k]),
        wrist=int(quality.wrist[k]),
        revolutions=[int(t) for t in np.asarray(revolutions)],
        joints_deg=joints_user_from_si(quality.q[k], robot.prismatic).tolist(),
        within_limits=within,
        min_margin=float(margin_user[joint]) if has_limits else None,
        min_margin_unit=units[joint] if has_limits else None,
        min_margin_joint=robot.joint_names[joint] if has_limits else None,
        min_margin_fraction=float(margins.min_fraction[k]) if has_limits else None,
        manipulability=float(quality.manipulability[k]),
        position_manipulability=float(quality.manipulability[k]),
        full_manipulability=(
            None if quality.full_manipulability is None else float(quality.full_manipulability[k])
        ),
        singularity=singularity_model(quality, k),
        clearance_mm=finite_or_none(float(mm_from_m(quality.clearance[k]))),
        environment_clearance_mm=finite_or_none(float(mm_from_m(quality.environment.distance[k]))),
        self_clearance_mm=finite_or_none(float(mm_from_m(quality.self_clearance.distance[k]))),
        collision_free=free,
        closest_environment=closest_pair_model(quality.environment, k),
        closest_self=closest_pair_model(quality.self_clearance, k),
        matches_required_branch=matches_required_branch,
        usable=within and free and matches_required_branch,
        score=score,
    )


def _pair_text(pair: ClosestPair) -> str:
    if pair.other_kind == "self":
        return f"{pair.capsule} and {pair.other}"
    return f"{pair.capsule} and {pair.other} ({pair.other_kind})"


def geometry_findings(robot: Robot) -> list[Finding]:
    """Return a warning finding for a robot without collision geometry, else none.

    Code ``robot-geometry-missing``: its clearances mean nothing.
    """
    message = robot.geometry_missing
    if message is None:
        return []
    return [
        Finding(severity="warning", code="robot-geometry-missing", target=None, message=message)
    ]


def quality_findings(
    quality: ConfigurationQuality,
    k: int,
    *,
    target: str | None = None,
    pose: PoseKind | None = None,
    branch: str | None = None,
    row: int | None = None,
    context: str = "",
) -> list[Finding]:
    """Return findings of configuration ``k`` against the thresholds.

    Errors: a joint outside its limits; a colliding pair (the cell or the arm
    itself). Warnings: a joint closer to a limit than ``limit_margin_deg``
    (``limit_margin_mm``); a pair closer than ``clearance_mm`` (the closest
    obstacle and the closest self pair, each on its own); a configuration
    near the wrist, elbow or shoulder singularity.

    Parameters
    ----------
    quality : ConfigurationQuality
    k : int
    target, pose, branch, row : keyword-only
        Copied into each finding.
    context : str, keyword-only
        Prefix of each message, e.g. ``"on branch front, up, negative: "``.
    """
    t = quality.thresholds
    found: list[Finding] = []

    def add(
        severity: str,
        code: str,
        message: str,
        value: float,
        unit: str,
        limit: float,
        cause: str | None = None,
    ) -> None:
        found.append(
            Finding(
                severity=severity,  # type: ignore[arg-type]  # error, warning or info
                code=code,
                target=target,
                pose=pose,
                branch=branch,
                row=row,
                message=context + message,
                value=value,
                unit=unit,
                threshold=limit,
                cause=cause,
            )
        )

    for j, margin in enumerate(joint_margins_model(quality, k)):
        if margin.margin is None:
            continue
        limit = t.limit_margin_mm if margin.unit == "mm" else t.limit_margin_deg
        bound = margin.lower if margin.nearer_limit == "lower" else margin.upper
        if quality.margins.margin[k, j] < -LIMIT_TOLERANCE:
            add(
                "error",
                "outside-limits",
                f"{margin.joint} = {margin.value:.1f} {margin.unit} is {-margin.margin:.1f} "
                f"{margin.unit} beyond its {margin.nearer_limit} limit {bound:g} {margin.unit}",
                margin.margin,
                margin.unit,
                0.0,
                margin.joint,
            )
        elif margin.margin < limit:
            add(
                "warning",
                "limit-margin",
                f"{margin.joint} = {margin.value:.1f} {margin.unit} is {margin.margin:.1f} "
                f"{margin.unit} from its {margin.nearer_limit} limit {bound:g} {margin.unit} "
                f"(warning below {limit:g} {margin.unit})",
                margin.margin,
                margin.unit,
                limit,
                margin.joint,
            )
    for pair in (
        closest_pair_model(quality.environment, k),
        closest_pair_model(quality.self_clearance, k),
    ):
        if pair is None:
            continue
        if pair.distance_mm < 0.0:
            what = "self-collision" if pair.other_kind == "self" else "collision"
            add(
                "error",
                "collision",
                f"{what}: {_pair_text(pair)} overlap by {-pair.distance_mm:.1f} mm",
                pair.distance_mm,
                "mm",
                0.0,
                f"{pair.capsule} – {pair.other}",
            )
        elif pair.distance_mm < t.clearance_mm:
            add(
                "warning",
                "clearance",
                f"{_pair_text(pair)} are {pair.distance_mm:.1f} mm apart "
                f"(warning below {t.clearance_mm:g} mm)",
                pair.distance_mm,
                "mm",
                t.clearance_mm,
                f"{pair.capsule} – {pair.other}",
            )
    proximity = singularity_model(quality, k)
    if proximity is not None:
        if proximity.near_wrist:
            add(
                "warning",
                "singularity",
                f"near the wrist singularity: wrist bend {proximity.wrist_bend_deg:.1f} deg from "
                f"straight (warning below {t.wrist_deg:g} deg)",
                proximity.wrist_bend_deg,
                "deg",
                t.wrist_deg,
            )
        if proximity.near_elbow:
            add(
                "warning",
                "singularity",
                f"near the elbow singularity: elbow {proximity.elbow_deg:.1f} deg from stretched "
                f"or folded (warning below {t.elbow_deg:g} deg)",
                proximity.elbow_deg,
                "deg",
                t.elbow_deg,
            )
        if proximity.near_shoulder:
            add(
                "warning",
                "singularity",
                f"near the shoulder singularity: wrist centre {proximity.shoulder_mm:.1f} mm from "
                f"the plane of axis 1 (warning below {t.shoulder_mm:g} mm)",
                proximity.shoulder_mm,
                "mm",
                t.shoulder_mm,
            )
    return found

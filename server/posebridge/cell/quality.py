"""Quality of joint configurations in a cell: limits, manipulability, singularity, clearance.

:func:`evaluate_configurations` computes, for a batch of configurations and
without a Python loop over them, everything the target check and the
diagnosis report per configuration:

* TCP pose in the world (:func:`posebridge.kinematics.fk.fk_tool` after
  ``T_world_base``);
* joint-limit margins (:func:`posebridge.kinematics.metrics.limit_margins`);
* Yoshikawa manipulability and inverse condition number of the TCP's
  translational Jacobian (:mod:`posebridge.kinematics.metrics`);
* shoulder/elbow/wrist branch labels (:func:`posebridge.kinematics.branches.label_branches`);
* wrist/elbow/shoulder singularity distances and class
  (:func:`posebridge.kinematics.singularity.classify_singularity`, six- and
  seven-axis arms only);
* clearance to the cell's obstacles and to the arm itself, with the closest
  pairs named (:func:`posebridge.cell.clearance.clearance_to_cell`).

:func:`branch_score` ranks usable IK branches (:data:`SCORE_RULE`) and
:func:`proximity_ratio` says how close a configuration is to any warning
threshold. The ``*_model`` functions turn one configuration's values into
the boundary models of :mod:`posebridge.cell.reports` (mm, deg), and
:func:`quality_findings` lists its findings against
:class:`~posebridge.cell.reports.QualityThresholds`.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np
import numpy.typing as npt

from posebridge.arrays import Int8Array, Int16Array
from posebridge.cell.clearance import CellClearance, clearance_along, clearance_to_cell
from posebridge.cell.reports import (
    BranchReport,
    ClosestPair,
    Finding,
    JointMargin,
    PoseKind,
    QualityThresholds,
    SingularityProximity,
)
from posebridge.cell.scene import Scene
from posebridge.kinematics.branches import (
    branch_geometry,
    branch_words,
    centred_revolutions,
    label_branches,
    part_word,
)
from posebridge.kinematics.fk import check_configurations, fk_tool
from posebridge.kinematics.ik.finishing import JOINT_CONTINUOUS, JOINT_REVOLUTE, joint_modes
from posebridge.kinematics.jacobian import jacobian_base
from posebridge.kinematics.metrics import (
    LimitMargins,
    characteristic_length_m,
    inverse_condition_number,
    jacobian_rows,
    limit_margins,
    manipulability_scaled_full,
    manipulability_yoshikawa,
)
from posebridge.kinematics.singularity import (
    SingularityReport,
    SingularityThresholds,
    classify_singularity,
)
from posebridge.robot.model import Robot
from posebridge.units import (
    BoolArray,
    FloatArray,
    deg_from_rad,
    joint_unit_labels,
    joints_si_from_user,
    joints_user_from_si,
    m_from_mm,
    mm_from_m,
    rad_from_deg,
)

__all__ = [
    "LIMIT_TOLERANCE",
    "SCORE_RULE",
    "ConfigurationQuality",
    "branch_report",
    "branch_score",
    "branch_score_terms",
    "branch_words",
    "closest_pair_model",
    "evaluate_configurations",
    "full_branch_words",
    "joint_margins_model",
    "margin_thresholds",
    "part_word",
    "proximity_ratio",
    "quality_findings",
    "revolution_counts",
    "singularity_model",
    "singularity_thresholds",
]

LIMIT_TOLERANCE = 1e-9
"""A joint this far (rad or m) past a limit still counts as within it (rounding of IK values)."""

SCORE_RULE = (
    "score = (s_margin + s_clearance + s_singularity) / 3, each term clipped to [0, 1]: "
    "s_margin = smallest limit margin as a fraction of the joint's range / score_margin_fraction; "
    "s_clearance = clearance / score_clearance_mm; "
    "s_singularity = min(wrist bend / wrist_deg, elbow angle / elbow_deg, "
    "shoulder distance / shoulder_mm) / score_singularity_ratio for six- and seven-axis arms, "
    "the inverse condition number of the translational Jacobian for other arms. "
    "Only usable branches (within limits, collision-free, on the required branch) are scored; "
    "the highest score is recommended, ties go to the IK order (front, up, positive first)."
)
"""How :func:`branch_score` ranks branches (common practice, no source)."""


@dataclass(frozen=True, eq=False)
class ConfigurationQuality:
    """Quality of N joint configurations in a cell (SI units).

    Attributes
    ----------
    robot : Robot
    q : array, shape (N, n)
        Joint values, rad or m.
    T_world_tool : array, shape (N, 4, 4)
        TCP pose in the world.
    T_base_tool : array, shape (N, 4, 4)
        TCP pose in the robot base frame.
    margins : LimitMargins
    manipulability : array, shape (N,)
        Yoshikawa manipulability of the translational Jacobian (position part
        only: it does not fall at the wrist singularity).
    full_manipulability : array, shape (N,), or None
        :func:`~posebridge.kinematics.metrics.manipulability_scaled_full` of
        the whole Jacobian, translational rows divided by the arm's
        characteristic length; zero at every singularity. None for arms of
        fewer than six joints (their full measure is always zero).
    inverse_condition : array, shape (N,)
        Inverse condition number of the translational Jacobian, in [0, 1].
    scheme : str
        Branch label scheme: ``"arm"``, ``"planar"`` or ``"none"``.
    shoulder, elbow, wrist : arrays of int8, shape (N,)
        Branch labels (+1, -1, 0).
    singularity : SingularityReport or None
        For ``"arm"`` robots only.
    environment : CellClearance
        Clearance to the cell's obstacles.
    self_clearance : CellClearance
        Clearance between the arm's own capsules.
    thresholds : QualityThresholds
    """

    robot: Robot
    q: FloatArray
    T_world_tool: FloatArray
    T_base_tool: FloatArray
    margins: LimitMargins
    manipulability: FloatArray
    full_manipulability: FloatArray | None
    inverse_condition: FloatArray
    scheme: str
    shoulder: Int8Array
    elbow: Int8Array
    wrist: Int8Array
    singularity: SingularityReport | None
    environment: CellClearance
    self_clearance: CellClearance
    thresholds: QualityThresholds

    @property
    def count(self) -> int:
        """Number of configurations ``N``."""
        return int(self.q.shape[0])

    @cached_property
    def clearance(self) -> FloatArray:
        """Smallest of the environment and self clearance, m, shape (N,) (``inf``: nothing checked)."""
        return np.minimum(self.environment.distance, self.self_clearance.distance)

    @cached_property
    def within_limits(self) -> BoolArray:
        """Every joint within its limits (up to :data:`LIMIT_TOLERANCE`), shape (N,)."""
        return np.all(self.margins.margin >= -LIMIT_TOLERANCE, axis=1)

    @cached_property
    def collision_free(self) -> BoolArray:
        """No pair penetrates (clearance >= 0), shape (N,)."""
        return self.clearance >= 0.0

    def singularity_ratio(self) -> FloatArray | None:
        """``min(wrist / wrist_thr, elbow / elbow_thr, shoulder / shoulder_thr)``, shape (N,).

        Below 1 the configuration is near a singularity; None for robots
        without the six-/seven-axis arm scheme.
        """
        report = self.singularity
        if report is None:
            return None
        limits = report.thresholds
        return np.minimum.reduce(
            [
                report.wrist_rad / limits.wrist_rad,
                report.elbow_rad / limits.elbow_rad,
                report.shoulder_m / limits.shoulder_m,
            ]
        )


def singularity_thresholds(thresholds: QualityThresholds) -> SingularityThresholds:
    """Return the singularity thresholds of ``thresholds`` in SI units."""
    return SingularityThresholds(
        wrist_rad=float(rad_from_deg(thresholds.wrist_deg)),
        elbow_rad=float(rad_from_deg(thresholds.elbow_deg)),
        shoulder_m=float(m_from_mm(thresholds.shoulder_mm)),
    )


def margin_thresholds(robot: Robot, thresholds: QualityThresholds) -> FloatArray:
    """Limit-margin warning threshold per joint, rad or m, shape (n,)."""
    values = np.where(robot.prismatic, thresholds.limit_margin_mm, thresholds.limit_margin_deg)
    return joints_si_from_user(values, robot.prismatic)


def evaluate_configurations(
    scene: Scene,
    q: npt.ArrayLike,
    thresholds: QualityThresholds | None = None,
    *,
    external: npt.ArrayLike | None = None,
) -> ConfigurationQuality:
    """Quality of joint configurations in the cell (module docstring), vectorised over the batch.

    Parameters
    ----------
    scene : Scene
    q : array-like, shape (N, n)
        Joint values, rad or m.
    thresholds : QualityThresholds, optional
        The cell's own (``scene.cell.thresholds``) if omitted.
    external : array-like, shape (N, m), optional, keyword-only
        External axis values of each configuration (m, rad): the tool pose and the
        clearance to the cell are taken with the base and fixtures where they put them
        (:func:`~posebridge.cell.clearance.clearance_along`); the scene's values if omitted.

    Returns
    -------
    ConfigurationQuality
    """
    thresholds = scene.cell.thresholds if thresholds is None else thresholds
    robot = scene.robot
    q = check_configurations(robot, q)
    T_base_tool = fk_tool(robot, q, scene.T_flange_tool)
    values = (
        np.broadcast_to(scene.external.values, (len(q), scene.external.count))
        if external is None
        else np.asarray(external, dtype=np.float64).reshape(len(q), scene.external.count)
    )
    T_world_base = scene.external.T_world_base(values, scene.T_world_base)
    J_full = jacobian_base(robot, q, scene.T_flange_tool)
    J = jacobian_rows(J_full, "position")
    scheme = branch_geometry(robot).scheme
    shoulder, elbow, wrist = label_branches(robot, q)
    singularity = (
        classify_singularity(robot, q, singularity_thresholds(thresholds))
        if scheme == "arm"
        else None
    )
    return ConfigurationQuality(
        robot=robot,
        q=q,
        T_world_tool=T_world_base @ T_base_tool,
        T_base_tool=T_base_tool,
        margins=limit_margins(robot, q),
        manipulability=manipulability_yoshikawa(J),
        full_manipulability=(
            manipulability_scaled_full(J_full, characteristic_length_m(robot, scene.T_flange_tool))
            if robot.dof >= 6
            else None
        ),
        inverse_condition=inverse_condition_number(J),
        scheme=scheme,
        shoulder=shoulder,
        elbow=elbow,
        wrist=wrist,
        singularity=singularity,
        environment=clearance_along(scene, q, values, scope="environment"),
        self_clearance=clearance_to_cell(scene, q, scope="self"),
        thresholds=thresholds,
    )


def branch_score_terms(quality: ConfigurationQuality) -> FloatArray:
    """Compute the three terms of :func:`branch_score`, each clipped to [0, 1], shape (N, 3).

    Columns: limit margin, clearance, distance from singularity (:data:`SCORE_RULE`).
    """
    t = quality.thresholds
    margin = np.clip(quality.margins.min_fraction / t.score_margin_fraction, 0.0, 1.0)
    clearance = np.clip(quality.clearance / float(m_from_mm(t.score_clearance_mm)), 0.0, 1.0)
    ratio = quality.singularity_ratio()
    if ratio is None:
        singular = np.clip(quality.inverse_condition, 0.0, 1.0)
    else:
        singular = np.clip(ratio / t.score_singularity_ratio, 0.0, 1.0)
    return np.stack([margin, clearance, singular], axis=1)


def branch_score(quality: ConfigurationQuality) -> FloatArray:
    """Recommendation score of each configuration, in [0, 1], shape (N,).

    The rule is :data:`SCORE_RULE`: the mean of three saturating terms
    (:func:`branch_score_terms`: limit margin, clearance, distance from
    singularity), so that once a branch is comfortably away from one hazard
    the others decide (common practice, no source).
    """
    return np.asarray(branch_score_terms(quality).mean(axis=1))


def proximity_ratio(quality: ConfigurationQuality) -> FloatArray:
    """How close each configuration is to its nearest warning threshold, shape (N,).

    ``min(clearance / clearance_mm, margin_j / limit_margin_j over limited
    joints, singularity ratio)``: below 1 some warning applies, below 0 the
    configuration collides or is outside its limits.
    """
    robot = quality.robot
    t = quality.thresholds
    terms = [quality.clearance / float(m_from_mm(t.clearance_mm))]
    limited = ~robot.continuous
    if np.any(limited):
        per_joint = quality.margins.margin[:, limited] / margin_thresholds(robot, t)[limited]
        terms.append(per_joint.min(axis=1))
    ratio = quality.singularity_ratio()
    if ratio is not None:
        terms.append(ratio)
    return np.minimum.reduce(terms)


def revolution_counts(robot: Robot, q: npt.ArrayLike) -> Int16Array:
    """Count the whole extra revolutions of each joint, shape (N, n).

    Counted as the IK result counts them (:mod:`posebridge.kinematics.ik.finishing`).

    Limited revolute joints: :func:`~posebridge.kinematics.branches.centred_revolutions` of
    ``q - (lower + upper) / 2``, revolutions away from the one centred on the range (so a
    joint whose range spans at most one revolution always has 0); continuous joints: ``k`` of ``q = wrapped + 2 pi k`` with the
    wrapped value in ``(-pi, pi]``; prismatic joints 0.
    """
    q = check_configurations(robot, q)
    modes = joint_modes(robot)
    centred = centred_revolutions(q - 0.5 * (robot.lower + robot.upper))
    wrapped = np.pi - np.mod(np.pi - q, 2.0 * np.pi)
    turns = np.rint((q - wrapped) / (2.0 * np.pi))
    counts = np.where(modes == JOINT_REVOLUTE, centred, 0.0)
    counts = np.where(modes == JOINT_CONTINUOUS, turns, counts)
    return counts.astype(np.int16)


def _revolution_words(robot: Robot, revolutions: npt.ArrayLike) -> list[str]:
    """``"j6 +1 rev"`` for every joint with extra whole revolutions."""
    return [
        f"{name} {int(count):+d} rev"
        for name, count in zip(robot.joint_names, np.asarray(revolutions), strict=True)
        if count != 0
    ]


def full_branch_words(quality: ConfigurationQuality, k: int, revolutions: npt.ArrayLike) -> str:
    """Branch words of configuration ``k`` followed by its extra revolutions."""
    words = [branch_words(quality.scheme, quality.shoulder[k], quality.elbow[k], quality.wrist[k])]
    extra = _revolution_words(quality.robot, revolutions)
    if quality.scheme == "none" and extra:
        return ", ".join(extra)
    return ", ".join(words + extra)


def _finite_or_none(value: float) -> float | None:
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
    """One configuration as a :class:`~posebridge.cell.reports.BranchReport` (mm, deg).

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
        clearance_mm=_finite_or_none(float(mm_from_m(quality.clearance[k]))),
        environment_clearance_mm=_finite_or_none(float(mm_from_m(quality.environment.distance[k]))),
        self_clearance_mm=_finite_or_none(float(mm_from_m(quality.self_clearance.distance[k]))),
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

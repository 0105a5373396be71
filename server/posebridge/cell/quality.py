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
threshold. Everything here is SI; :mod:`posebridge.results.quality` turns one
configuration's values into the boundary models (mm, deg) and its findings.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np
import numpy.typing as npt

from posebridge.arrays import Int8Array, Int16Array
from posebridge.cell.clearance import CellClearance, clearance_along, clearance_to_cell
from posebridge.cell.scene import Scene
from posebridge.cell.thresholds import QualityThresholds
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
)

__all__ = [
    "LIMIT_TOLERANCE",
    "SCORE_RULE",
    "ConfigurationQuality",
    "branch_score",
    "branch_score_terms",
    "branch_words",
    "evaluate_configurations",
    "full_branch_words",
    "margin_thresholds",
    "part_word",
    "proximity_ratio",
    "revolution_counts",
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
        wrist_rad=thresholds.wrist_rad,
        elbow_rad=thresholds.elbow_rad,
        shoulder_m=thresholds.shoulder_m,
    )


def margin_thresholds(robot: Robot, thresholds: QualityThresholds) -> FloatArray:
    """Limit-margin warning threshold per joint, rad or m, shape (n,)."""
    return thresholds.limit_margin(robot.prismatic)


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
    clearance = np.clip(quality.clearance / t.score_clearance_m, 0.0, 1.0)
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
    terms = [quality.clearance / t.clearance_m]
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


HALF_TOLERANCE = 1e-6
"""Revolutions (about 0.0004 deg) within which a joint counts as exactly half a revolution
from its range centre."""


def _revolution_words(robot: Robot, revolutions: npt.ArrayLike) -> list[str]:
    """``"j6 +1 rev"`` for every joint with extra whole revolutions."""
    return [
        f"{name} {int(count):+d} rev"
        for name, count in zip(robot.joint_names, np.asarray(revolutions), strict=True)
        if count != 0
    ]


def _half_revolution_words(robot: Robot, q: npt.ArrayLike) -> list[str]:
    """Name every limited revolute joint exactly half a revolution above its range centre.

    Such a joint counts no extra revolution, nor does its twin half a revolution below the
    centre (:func:`revolution_counts`); the word ``"j6 +half rev"`` on the upper one tells the
    two solutions apart.
    """
    offset = (np.asarray(q) - 0.5 * (robot.lower + robot.upper)) * (0.5 / np.pi)
    revolute = joint_modes(robot) == JOINT_REVOLUTE
    half = revolute & (np.abs(offset - 0.5) <= HALF_TOLERANCE)
    return [
        f"{name} +half rev"
        for name, at_half in zip(robot.joint_names, half, strict=True)
        if at_half
    ]


def full_branch_words(quality: ConfigurationQuality, k: int, revolutions: npt.ArrayLike) -> str:
    """Branch words of configuration ``k``, its extra revolutions and its half revolutions."""
    words = [branch_words(quality.scheme, quality.shoulder[k], quality.elbow[k], quality.wrist[k])]
    extra = _revolution_words(quality.robot, revolutions) + _half_revolution_words(
        quality.robot, quality.q[k]
    )
    if quality.scheme == "none" and extra:
        return ", ".join(extra)
    return ", ".join(words + extra)

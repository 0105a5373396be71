"""Check a cell path sample by sample: reach, branch continuity, singularities, limits, speed, clearance.

The path is sampled by :func:`posebridge.planning.path_sampling.sample_path`
(waypoint IK choice, joint moves in joint space, linear moves with slerp and
branch-continuous IK) and timed twice: rest to rest by
:func:`posebridge.planning.cycle_time.path_cycle_time` (the upper bound) and
blended through the waypoints by
:func:`posebridge.planning.blended_timing.blended_cycle_time` (the realistic
figure, per segment and in total).
All reached samples of all segments are then checked in batches:

* **reachability** of every linear-move sample (and every waypoint);
* **branch consistency**: a branch change or a configuration jump inside a
  linear move is an error (a joint move may change branch freely);
* **singularity proximity**: wrist, elbow and shoulder distances of
  :func:`posebridge.kinematics.singularity.classify_singularity` below
  the cell's thresholds (a warning on linear moves, where the joint speeds
  grow without bound near a singularity, and wherever the arm stops near one,
  at a waypoint, as the target check warns; information inside joint moves);
* **joint-limit margins** below ``limit_margin_deg`` (``limit_margin_mm`` for
  prismatic joints) are warnings, values outside the limits errors;
* **joint speed demand** of linear moves: where the requested TCP speed is
  above the highest speed the joint velocity limits allow (``dq/ds``,
  :func:`posebridge.planning.time_scaling.path_speed_limit`), a warning
  naming the limiting joint and that speed;
* **clearance** of every sample to the cell and between the arm's own parts,
  each on its own (:func:`posebridge.cell.clearance.clearance_along` with
  scope ``environment``: every sample in the scene posed at its own external
  axis values, the track's base and carriage and a turntable's fixtures where
  they are at that sample, one batch per distinct set of values, one for the
  whole path without external axes; :func:`~posebridge.cell.clearance.clearance_to_cell`
  with scope ``self``, one batch), so a close self pair never hides an obstacle: below
  ``collision_threshold_m`` an error naming the pair, below
  ``clearance_mm`` a warning.

The thresholds are the cell's (``Cell.thresholds``,
:class:`~posebridge.cell.thresholds.QualityThresholds`), the one set every
check of the cell uses, so a point the target check warns about is a
warning here too.

Every finding names its segment (index, from and to waypoint) and the
stretch along it where the condition holds (consecutive samples form one
finding), with the worst point as a fraction and as TCP travel (linear moves) or
the largest joint travel (joint moves). The result is SI (:class:`PathCheckData`);
:func:`posebridge.results.path_check.path_check_result` makes the boundary model
(mm, deg) and words each finding.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import TYPE_CHECKING, Literal

import numpy as np

from posebridge.cell.clearance import CellClearance, clearance_along, clearance_to_cell
from posebridge.cell.quality import margin_thresholds, singularity_thresholds
from posebridge.cell.scene import ResolvedPath, Scene
from posebridge.cell.thresholds import QualityThresholds
from posebridge.kinematics.fk import KinematicsInputError
from posebridge.kinematics.metrics import limit_margins
from posebridge.kinematics.singularity import (
    SingularityReport,
    SingularityThresholds,
    classify_singularity,
)
from posebridge.planning.cycle_time import (
    DEFAULT_LINEAR_ACCELERATION_M_S2,
    CycleTime,
    SegmentTiming,
    external_axis_motion,
    path_cycle_time,
    path_derivative,
)
from posebridge.planning.errors import PlanningInputError
from posebridge.planning.path_sampling import (
    DEFAULT_JUMP_RAD,
    DEFAULT_RESOLUTION_M,
    DEFAULT_RESOLUTION_RAD,
    SampledPath,
    SegmentSamples,
    sample_path,
)
from posebridge.planning.time_scaling import path_speed_limit
from posebridge.units import BoolArray, FloatArray

if TYPE_CHECKING:
    from posebridge.planning.blended_timing import BlendedCycleTime

__all__ = [
    "FindingKind",
    "PathCheckData",
    "PathFindingData",
    "SegmentCheck",
    "Severity",
    "check_path",
    "check_sampled_path",
]

FindingKind = Literal[
    "waypoint",
    "unreachable",
    "branch_change",
    "configuration_jump",
    "singularity",
    "joint_limit",
    "speed_limit",
    "collision",
    "low_clearance",
]
Severity = Literal["error", "warning", "info"]


@dataclass(frozen=True)
class PathFindingData:
    """One problem found along a path (SI units), tied to its segment and stretch.

    Attributes
    ----------
    kind : FindingKind
    severity : Severity
    segment_index : int or None
        Segment k runs from waypoint k to waypoint k + 1; None if the path has none.
    from_waypoint, to_waypoint : str
    fraction_start, fraction_end, fraction_worst : float
        Where the problem starts, ends and is worst along the segment (0..1).
    travel : float or None
        TCP or joint travel along the segment at the worst point: rad when
        ``travel_is_angle`` (a joint move or a pure reorientation), else m; None for a
        waypoint finding.
    travel_is_angle : bool
    reason : str or None
        Why no IK solution (unreachable) or why a waypoint has no configuration.
    singularity : str or None
        ``"wrist"``, ``"elbow"`` or ``"shoulder"`` (singularity findings).
    joint : str or None
        The joint at its limit or limiting the speed.
    capsule, obstacle : str or None
        The closest pair of a clearance finding (``obstacle`` is an arm capsule for
        self contact).
    obstacle_kind : str or None
        The obstacle's kind, ``"self"`` for the arm's own parts.
    distance_m : float or None
        Clearance (negative: penetration depth), prismatic limit margin (negative:
        outside) or shoulder singularity distance, at the worst point.
    angle_rad : float or None
        Revolute limit margin, wrist or elbow singularity distance or joint step.
    speed_m_s, requested_speed_m_s : float or None
        Highest feasible and requested TCP speed (speed limit findings).
    """

    kind: FindingKind
    severity: Severity
    segment_index: int | None
    from_waypoint: str
    to_waypoint: str
    fraction_start: float
    fraction_end: float
    fraction_worst: float
    travel: float | None = None
    travel_is_angle: bool = False
    reason: str | None = None
    singularity: str | None = None
    joint: str | None = None
    capsule: str | None = None
    obstacle: str | None = None
    obstacle_kind: str | None = None
    distance_m: float | None = None
    angle_rad: float | None = None
    speed_m_s: float | None = None
    requested_speed_m_s: float | None = None


@dataclass(frozen=True, eq=False)
class SegmentCheck:
    """One segment's samples, timing and worst values (SI units).

    Attributes
    ----------
    samples : SegmentSamples
    timing : SegmentTiming
        Rest to rest.
    length : float or None
        TCP path length of a sampled linear move, m.
    rotation : float or None
        Tool rotation of a sampled linear move, rad.
    joint_travel : array, shape (n,), or None
        End minus start configuration of a sampled joint move (rad, m for prismatic joints).
    limiting_joint : str or None
        The joint that caps a linear move's speed.
    blend : float
        Blend radius of the end waypoint, m.
    blended_duration : float
        s in the blended motion; NaN if not timed.
    min_clearance, environment_clearance, self_clearance : float
        Smallest clearance over the samples (both kinds, to the cell, between the arm's
        own parts), m; NaN when no sample was reached, inf when nothing was checked.
    """

    samples: SegmentSamples
    timing: SegmentTiming
    length: float | None
    rotation: float | None
    joint_travel: FloatArray | None
    limiting_joint: str | None
    blend: float
    blended_duration: float
    min_clearance: float
    environment_clearance: float
    self_clearance: float


@dataclass(frozen=True, eq=False)
class PathCheckData:
    """A path checked sample by sample, with its cycle time (module docstring), SI units.

    Attributes
    ----------
    scene : Scene
    sampled : SampledPath
    timing : CycleTime
        Rest to rest (the upper bound).
    blended : BlendedCycleTime
    segments : list of SegmentCheck
    findings : list of PathFindingData
        Waypoint findings first, then each segment's in path order.
    environment, own : CellClearance
        Clearance of every reached sample to the cell and between the arm's own parts.
    thresholds : QualityThresholds
        The set the check used.
    collision_threshold : float
        Clearance below which a sample is a collision, m.
    """

    scene: Scene
    sampled: SampledPath
    timing: CycleTime
    blended: BlendedCycleTime
    segments: list[SegmentCheck]
    findings: list[PathFindingData]
    environment: CellClearance
    own: CellClearance
    thresholds: QualityThresholds
    collision_threshold: float


@dataclass(frozen=True)
class _Thresholds:
    limit_margin: FloatArray
    clearance_warning: float
    collision: float
    singularity: SingularityThresholds


def _runs(mask: BoolArray) -> list[tuple[int, int]]:
    """Half-open index ranges of consecutive True values."""
    padded = np.concatenate([[False], mask, [False]]).astype(np.int8)
    edges = np.flatnonzero(np.diff(padded))
    return [(int(a), int(b)) for a, b in zip(edges[::2], edges[1::2], strict=True)]


def _smallest(distance: FloatArray) -> float:
    """Smallest value, NaN for none (no sample reached)."""
    return float(distance.min()) if distance.size else math.nan


class _SegmentFindings:
    """Builds the findings of one segment with its names and along-path positions."""

    def __init__(self, scene: Scene, sampled: SampledPath, segment: SegmentSamples) -> None:
        self.scene = scene
        self.segment = segment
        self.names = (
            sampled.waypoint_names[segment.index],
            sampled.waypoint_names[segment.index + 1],
        )
        self.findings: list[PathFindingData] = []

    def add(
        self,
        kind: FindingKind,
        severity: Severity,
        run: tuple[int, int],
        worst: int,
        **details: float | str | None,
    ) -> None:
        fraction = self.segment.fraction
        self.findings.append(
            PathFindingData(
                kind=kind,
                severity=severity,
                segment_index=self.segment.index,
                from_waypoint=self.names[0],
                to_waypoint=self.names[1],
                fraction_start=float(fraction[run[0]]),
                fraction_end=float(fraction[run[1] - 1]),
                fraction_worst=float(fraction[worst]),
                travel=float(self.segment.travel[worst]),
                travel_is_angle=self.segment.travel_is_angle,
                **details,  # type: ignore[arg-type]
            )
        )


def _continuity_findings(out: _SegmentFindings, segment: SegmentSamples) -> None:
    reached = segment.reachable
    for a, b in _runs(~reached):
        out.add("unreachable", "error", (a, b), a, reason=segment.reason[a])
    if segment.motion != "linear":
        return
    for a, b in _runs(segment.branch_change):
        out.add("branch_change", "error", (a, b), a)
    step = np.zeros(segment.q.shape[0])
    finite = np.flatnonzero(reached)
    if finite.size > 1:
        step[finite[1:]] = np.max(np.abs(np.diff(segment.q[finite], axis=0)), axis=1)
    for a, b in _runs(segment.jump):
        worst = a + int(np.argmax(step[a:b]))
        out.add("configuration_jump", "error", (a, b), worst, angle_rad=float(step[worst]))


def _singularity_findings(
    out: _SegmentFindings, segment: SegmentSamples, rows: slice, singular: SingularityReport | None
) -> None:
    if singular is None:
        return
    last = segment.q.shape[0] - 1
    kinds = (
        ("wrist", "near_wrist", "wrist_rad", True),
        ("elbow", "near_elbow", "elbow_rad", True),
        ("shoulder", "near_shoulder", "shoulder_m", False),
    )
    reached = np.flatnonzero(segment.reachable)
    for name, flag, field, angle in kinds:
        mask = np.zeros(segment.q.shape[0], dtype=bool)
        value = np.full(segment.q.shape[0], np.inf)
        mask[reached] = getattr(singular, flag)[rows]
        value[reached] = getattr(singular, field)[rows]
        for a, b in _runs(mask):
            worst = a + int(np.argmin(value[a:b]))
            # the arm stops at a waypoint: the same level as the target check there
            stops = a == 0 or b - 1 == last
            severity: Severity = "warning" if segment.motion == "linear" or stops else "info"
            size = float(value[worst])
            out.add(
                "singularity",
                severity,
                (a, b),
                worst,
                singularity=name,
                **({"angle_rad": size} if angle else {"distance_m": size}),
            )


def _limit_findings(
    out: _SegmentFindings, segment: SegmentSamples, margin: FloatArray, limit: FloatArray
) -> None:
    robot = out.scene.robot
    reached = np.flatnonzero(segment.reachable)
    full = np.full((segment.q.shape[0], robot.dof), np.inf)
    full[reached] = margin
    for j in range(robot.dof):
        for a, b in _runs(full[:, j] < limit[j]):
            worst = a + int(np.argmin(full[a:b, j]))
            value = float(full[worst, j])
            out.add(
                "joint_limit",
                "error" if value < 0.0 else "warning",
                (a, b),
                worst,
                joint=robot.joint_names[j],
                **({"distance_m": value} if robot.prismatic[j] else {"angle_rad": value}),
            )


def _speed_findings(out: _SegmentFindings, segment: SegmentSamples, timing: SegmentTiming) -> None:
    if segment.motion != "linear" or not timing.speed_capped or segment.travel_is_angle:
        return
    robot = out.scene.robot
    limit = path_speed_limit(path_derivative(segment), robot.velocity_max)
    requested = timing.speed_requested
    for a, b in _runs(limit.speed_max_per_sample < requested):
        worst = a + int(np.argmin(limit.speed_max_per_sample[a:b]))
        out.add(
            "speed_limit",
            "warning",
            (a, b),
            worst,
            joint=robot.joint_names[int(limit.limiting_joint_per_sample[worst])],
            speed_m_s=float(limit.speed_max_per_sample[worst]),
            requested_speed_m_s=float(requested),
        )


def _clearance_findings(
    out: _SegmentFindings,
    segment: SegmentSamples,
    clearance: CellClearance,
    rows: slice,
    limits: _Thresholds,
) -> None:
    reached = np.flatnonzero(segment.reachable)
    distance = np.full(segment.q.shape[0], np.inf)
    distance[reached] = clearance.distance[rows]
    index = np.full(segment.q.shape[0], -1)
    index[reached] = np.arange(rows.start, rows.stop)
    checks: tuple[tuple[FindingKind, Severity, BoolArray], ...] = (
        ("collision", "error", distance < limits.collision),
        (
            "low_clearance",
            "warning",
            (distance >= limits.collision) & (distance < limits.clearance_warning),
        ),
    )
    for kind, severity, mask in checks:
        for a, b in _runs(mask):
            worst = a + int(np.argmin(distance[a:b]))
            capsule, other, other_kind = clearance.pair(int(index[worst]))
            out.add(
                kind,
                severity,
                (a, b),
                worst,
                capsule=capsule,
                obstacle=other,
                obstacle_kind=other_kind,
                distance_m=float(distance[worst]),
            )


def _segment_check(
    scene: Scene,
    sampled: SampledPath,
    segment: SegmentSamples,
    timing: SegmentTiming,
    blended_duration: float,
    environment_clearance: float,
    self_clearance: float,
) -> SegmentCheck:
    linear = segment.motion == "linear"
    length = rotation = None
    travel = None
    if segment.sampled and linear:
        ends = segment.T_world_tool[[0, -1]]
        length = float(np.linalg.norm(ends[1, :3, 3] - ends[0, :3, 3]))
        relative = ends[0, :3, :3].T @ ends[1, :3, :3]
        rotation = float(np.arccos(np.clip((np.trace(relative) - 1) / 2, -1, 1)))
    elif segment.sampled:
        travel = segment.q[-1] - segment.q[0]
    joint = timing.limiting_joint
    return SegmentCheck(
        samples=segment,
        timing=timing,
        length=length,
        rotation=rotation,
        joint_travel=travel,
        limiting_joint=scene.robot.joint_names[joint] if linear and joint >= 0 else None,
        blend=float(sampled.path.blend_radius[segment.index + 1]),
        blended_duration=blended_duration,
        min_clearance=float(np.fmin(environment_clearance, self_clearance)),
        environment_clearance=environment_clearance,
        self_clearance=self_clearance,
    )


def _waypoint_findings(sampled: SampledPath) -> list[PathFindingData]:
    findings = []
    names = sampled.waypoint_names
    count = len(sampled.segments)
    for w, problem in enumerate(sampled.waypoint_problem):
        if not problem:
            continue
        segment = None if count == 0 else max(w - 1, 0)
        fraction = 1.0 if w > 0 else 0.0
        findings.append(
            PathFindingData(
                kind="waypoint",
                severity="error",
                segment_index=segment,
                from_waypoint=names[w - 1] if w > 0 else names[w],
                to_waypoint=names[w] if w > 0 else (names[1] if count else names[w]),
                fraction_start=fraction,
                fraction_end=fraction,
                fraction_worst=fraction,
                reason=f"waypoint {names[w]!r}: {problem}",
            )
        )
    return findings


def _blended_timing(
    scene: Scene, sampled: SampledPath, linear_acceleration_m_s2: float
) -> BlendedCycleTime:
    """:func:`~posebridge.planning.blended_timing.blended_cycle_time` of the sampled path.

    Imported here, on first use: ``toppra`` imports matplotlib (about a second).
    """
    from posebridge.planning.blended_timing import blended_cycle_time

    return blended_cycle_time(scene, sampled, linear_acceleration_m_s2=linear_acceleration_m_s2)


def check_sampled_path(
    scene: Scene,
    sampled: SampledPath,
    *,
    thresholds: QualityThresholds | None = None,
    collision_threshold_m: float = 0.0,
    linear_acceleration_m_s2: float = DEFAULT_LINEAR_ACCELERATION_M_S2,
    joint_jerk_max: FloatArray | None = None,
    linear_jerk_m_s3: float | None = None,
) -> PathCheckData:
    """Check an already sampled path; parameters as :func:`check_path`."""
    robot = scene.robot
    thresholds = scene.cell.thresholds if thresholds is None else thresholds
    clearance_warning = thresholds.clearance_m
    if not math.isfinite(collision_threshold_m) or collision_threshold_m > clearance_warning:
        raise PlanningInputError(
            "collision_threshold_m: expected a finite number not above the clearance "
            f"threshold ({thresholds.clearance_mm:g} mm), got {collision_threshold_m!r}"
        )
    limits = _Thresholds(
        limit_margin=margin_thresholds(robot, thresholds),
        clearance_warning=clearance_warning,
        collision=float(collision_threshold_m),
        singularity=singularity_thresholds(thresholds),
    )
    timing = path_cycle_time(
        robot,
        sampled,
        linear_acceleration_m_s2=linear_acceleration_m_s2,
        joint_jerk_max=joint_jerk_max,
        linear_jerk_m_s3=linear_jerk_m_s3,
        external=external_axis_motion(scene, sampled.path),
    )
    blended = _blended_timing(scene, sampled, linear_acceleration_m_s2)
    reached = [segment.q[segment.reachable] for segment in sampled.segments]
    all_q = np.concatenate(reached) if reached else np.zeros((0, robot.dof))
    margins = limit_margins(robot, all_q).margin
    singular = None
    if all_q.shape[0]:
        try:
            singular = classify_singularity(robot, all_q, limits.singularity)
        except KinematicsInputError:
            singular = None  # not a six- or seven-axis arm: no singularity classes
    reached_external = [segment.external[segment.reachable] for segment in sampled.segments]
    all_external = (
        np.concatenate(reached_external)
        if reached_external
        else np.zeros((0, scene.external.count))
    )
    # each sample in the scene posed at its own external values (one scene without axes)
    environment = clearance_along(scene, all_q, all_external, scope="environment")
    own = clearance_to_cell(scene, all_q, scope="self")
    findings = _waypoint_findings(sampled)
    segments = []
    start = 0
    for segment, q_reached, segment_timing in zip(
        sampled.segments, reached, timing.segments, strict=True
    ):
        rows = slice(start, start + q_reached.shape[0])
        start = rows.stop
        out = _SegmentFindings(scene, sampled, segment)
        if segment.sampled:
            _continuity_findings(out, segment)
            _singularity_findings(out, segment, rows, singular)
            _limit_findings(out, segment, margins[rows], limits.limit_margin)
            _speed_findings(out, segment, segment_timing)
            _clearance_findings(out, segment, environment, rows, limits)
            _clearance_findings(out, segment, own, rows, limits)
        findings.extend(out.findings)
        segments.append(
            _segment_check(
                scene,
                sampled,
                segment,
                segment_timing,
                float(blended.segment_durations[segment.index]),
                _smallest(environment.distance[rows]),
                _smallest(own.distance[rows]),
            )
        )
    return PathCheckData(
        scene=scene,
        sampled=sampled,
        timing=timing,
        blended=blended,
        segments=segments,
        findings=findings,
        environment=environment,
        own=own,
        thresholds=thresholds,
        collision_threshold=float(collision_threshold_m),
    )


def check_path(
    scene: Scene,
    path: int | ResolvedPath,
    *,
    resolution_m: float = DEFAULT_RESOLUTION_M,
    resolution_rad: float = DEFAULT_RESOLUTION_RAD,
    jump_rad: float = DEFAULT_JUMP_RAD,
    thresholds: QualityThresholds | None = None,
    collision_threshold_m: float = 0.0,
    linear_acceleration_m_s2: float = DEFAULT_LINEAR_ACCELERATION_M_S2,
    joint_jerk_max: FloatArray | None = None,
    linear_jerk_m_s3: float | None = None,
) -> PathCheckData:
    """Check a path of the cell sample by sample and time it (module docstring).

    :func:`posebridge.results.path_check.path_check_result` makes the boundary model
    (mm, deg, with the findings' messages) of the result.

    Parameters
    ----------
    scene : Scene
    path : int or ResolvedPath
        Index into ``scene.paths``, or a resolved path of this scene's robot.
    resolution_m, resolution_rad : float, keyword-only
        Sampling: largest TCP travel and rotation between linear-move samples,
        largest joint travel between joint-move samples (m for prismatic joints).
    jump_rad : float, keyword-only
        Revolute joint step between two linear-move samples counted as a configuration jump.
    thresholds : QualityThresholds, optional, keyword-only
        Limit margins, clearance and singularity distances below which a
        finding is given; the cell's own (``scene.cell.thresholds``, the same
        set the target check and the diagnosis use) if omitted.
    collision_threshold_m : float, keyword-only
        Clearance below which a sample is a collision (0: contact or penetration);
        not above ``thresholds.clearance_mm``.
    linear_acceleration_m_s2 : float, keyword-only
        Cartesian path acceleration of linear moves.
    joint_jerk_max : array, shape (n,), optional, keyword-only
        Joint jerk limits (rad/s^3, m/s^3 for prismatic joints) for double-S joint moves.
    linear_jerk_m_s3 : float, optional, keyword-only
        Path jerk for double-S linear moves.

    Returns
    -------
    PathCheckData
    """
    sampled = sample_path(
        scene, path, resolution_m=resolution_m, resolution_rad=resolution_rad, jump_rad=jump_rad
    )
    return check_sampled_path(
        scene,
        sampled,
        thresholds=thresholds,
        collision_threshold_m=collision_threshold_m,
        linear_acceleration_m_s2=linear_acceleration_m_s2,
        joint_jerk_max=joint_jerk_max,
        linear_jerk_m_s3=linear_jerk_m_s3,
    )

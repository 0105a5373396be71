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
  ``collision_threshold_mm`` an error naming the pair, below
  ``clearance_mm`` a warning.

The thresholds are the cell's (``Cell.thresholds``,
:class:`~posebridge.cell.thresholds.QualityThresholds`), the one set every
check of the cell uses, so a point the target check warns about is a
warning here too.

Every finding names its segment (index, from and to waypoint) and the
stretch along it where the condition holds (consecutive samples form one
finding), with the worst point as a fraction and in mm of TCP travel (linear
moves) or degrees of the largest joint travel (joint moves).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import TYPE_CHECKING

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
    ExternalAxisMotion,
    SegmentTiming,
    path_cycle_time,
    path_derivative,
)
from posebridge.planning.errors import PlanningInputError
from posebridge.planning.path_sampling import SampledPath, SegmentSamples, sample_path
from posebridge.planning.time_scaling import path_speed_limit
from posebridge.results.planning import (
    FindingKind,
    PathCheckReport,
    PathFinding,
    SegmentReport,
    Severity,
    WaypointReport,
    group_path_findings,
    path_finding_cause,
)
from posebridge.units import (
    BoolArray,
    FloatArray,
    deg_from_rad,
    joints_si_from_user,
    joints_user_from_si,
    m_from_mm,
    mm_from_m,
)

if TYPE_CHECKING:
    from posebridge.planning.blended_timing import BlendedCycleTime

__all__ = ["check_path", "check_sampled_path"]


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


def _optional(value: float) -> float | None:
    return float(value) if math.isfinite(value) else None


def _smallest(distance: FloatArray) -> float:
    """Smallest value, NaN for none (no sample reached)."""
    return float(distance.min()) if distance.size else math.nan


def _closest_words(clearance: CellClearance) -> str | None:
    """Return the pair at the smallest clearance as ``capsule – other``; None when none was checked."""
    if not clearance.distance.size or not np.isfinite(clearance.distance.min()):
        return None
    capsule, other, _ = clearance.pair(int(np.argmin(clearance.distance)))
    return f"{capsule} – {other}"


class _SegmentFindings:
    """Builds the findings of one segment with its names and along-path positions."""

    def __init__(self, scene: Scene, sampled: SampledPath, segment: SegmentSamples) -> None:
        self.scene = scene
        self.segment = segment
        self.names = (
            sampled.waypoint_names[segment.index],
            sampled.waypoint_names[segment.index + 1],
        )
        self.findings: list[PathFinding] = []

    def _position(self, s: int) -> tuple[float | None, float | None]:
        travel = float(self.segment.travel[s])
        if self.segment.travel_is_angle:
            return None, float(deg_from_rad(travel))
        return float(mm_from_m(travel)), None

    def add(
        self,
        kind: FindingKind,
        severity: Severity,
        run: tuple[int, int],
        worst: int,
        message: str,
        **details: float | str | None,
    ) -> None:
        fraction = self.segment.fraction
        position_mm, position_deg = self._position(worst)
        self.findings.append(
            PathFinding(
                kind=kind,
                severity=severity,
                segment_index=self.segment.index,
                from_waypoint=self.names[0],
                to_waypoint=self.names[1],
                fraction_start=float(fraction[run[0]]),
                fraction_end=float(fraction[run[1] - 1]),
                fraction_worst=float(fraction[worst]),
                position_mm=position_mm,
                position_deg=position_deg,
                message=message,
                cause=path_finding_cause(
                    details.get("capsule"), details.get("obstacle"), details.get("joint")
                ),
                **details,  # type: ignore[arg-type]
            )
        )


def _continuity_findings(out: _SegmentFindings, segment: SegmentSamples) -> None:
    reached = segment.reachable
    for a, b in _runs(~reached):
        out.add(
            "unreachable",
            "error",
            (a, b),
            a,
            f"no IK solution within the joint limits ({segment.reason[a]}) "
            f"from {100 * segment.fraction[a]:.0f} % to {100 * segment.fraction[b - 1]:.0f} %",
        )
    if segment.motion != "linear":
        return
    for a, b in _runs(segment.branch_change):
        out.add(
            "branch_change",
            "error",
            (a, b),
            a,
            "the arm changes branch inside the linear move (it passes through a singularity)",
        )
    step = np.zeros(segment.q.shape[0])
    finite = np.flatnonzero(reached)
    if finite.size > 1:
        step[finite[1:]] = np.max(np.abs(np.diff(segment.q[finite], axis=0)), axis=1)
    for a, b in _runs(segment.jump):
        worst = a + int(np.argmax(step[a:b]))
        out.add(
            "configuration_jump",
            "error",
            (a, b),
            worst,
            f"a joint jumps by {float(deg_from_rad(step[worst])):.1f} deg between two samples",
            angle_deg=float(deg_from_rad(step[worst])),
        )


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
            if angle:
                size = float(deg_from_rad(value[worst]))
                out.add(
                    "singularity",
                    severity,
                    (a, b),
                    worst,
                    f"near the {name} singularity ({size:.1f} deg from it)",
                    angle_deg=size,
                )
            else:
                size = float(mm_from_m(value[worst]))
                out.add(
                    "singularity",
                    severity,
                    (a, b),
                    worst,
                    f"near the {name} singularity ({size:.0f} mm from it)",
                    distance_mm=size,
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
            prismatic = bool(robot.prismatic[j])
            size = float(mm_from_m(value)) if prismatic else float(deg_from_rad(value))
            unit = "mm" if prismatic else "deg"
            outside = value < 0.0
            message = (
                f"{robot.joint_names[j]} is {abs(size):.1f} {unit} outside its limits"
                if outside
                else f"{robot.joint_names[j]} comes within {size:.1f} {unit} of its limit"
            )
            details = {"distance_mm": size} if prismatic else {"angle_deg": size}
            out.add(
                "joint_limit",
                "error" if outside else "warning",
                (a, b),
                worst,
                message,
                joint=robot.joint_names[j],
                **details,
            )


def _speed_findings(out: _SegmentFindings, segment: SegmentSamples, timing: SegmentTiming) -> None:
    if segment.motion != "linear" or not timing.speed_capped or segment.travel_is_angle:
        return
    robot = out.scene.robot
    limit = path_speed_limit(path_derivative(segment), robot.velocity_max)
    requested = timing.speed_requested
    for a, b in _runs(limit.speed_max_per_sample < requested):
        worst = a + int(np.argmin(limit.speed_max_per_sample[a:b]))
        joint = robot.joint_names[int(limit.limiting_joint_per_sample[worst])]
        cap = float(mm_from_m(limit.speed_max_per_sample[worst]))
        out.add(
            "speed_limit",
            "warning",
            (a, b),
            worst,
            f"{joint} reaches its velocity limit above {cap:.0f} mm/s "
            f"(requested {float(mm_from_m(requested)):.0f} mm/s); the move is timed slower",
            joint=joint,
            speed_mm_s=cap,
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
            size = float(mm_from_m(distance[worst]))
            what = f"the arm's own {other}" if other_kind == "self" else f"{other_kind} {other!r}"
            message = (
                f"{capsule} hits {what} ({-size:.1f} mm deep)"
                if size < 0.0
                else f"{capsule} comes within {size:.1f} mm of {what}"
            )
            out.add(
                kind,
                severity,
                (a, b),
                worst,
                message,
                obstacle=other,
                capsule=capsule,
                distance_mm=size,
            )


def _segment_report(
    scene: Scene,
    sampled: SampledPath,
    segment: SegmentSamples,
    timing: SegmentTiming,
    min_clearance: float,
    environment_clearance: float,
    self_clearance: float,
) -> SegmentReport:
    path = sampled.path
    w = segment.index + 1
    linear = segment.motion == "linear"
    length = rotation = travel = None
    if segment.sampled and linear:
        ends = segment.T_world_tool[[0, -1]]
        length = float(mm_from_m(np.linalg.norm(ends[1, :3, 3] - ends[0, :3, 3])))
        relative = ends[0, :3, :3].T @ ends[1, :3, :3]
        rotation = float(deg_from_rad(np.arccos(np.clip((np.trace(relative) - 1) / 2, -1, 1))))
    elif segment.sampled:
        delta = joints_user_from_si(segment.q[-1] - segment.q[0], scene.robot.prismatic)
        travel = float(np.max(np.abs(delta)))
    joint = timing.limiting_joint
    return SegmentReport(
        index=segment.index,
        motion=segment.motion,
        from_waypoint=sampled.waypoint_names[segment.index],
        to_waypoint=sampled.waypoint_names[w],
        samples=int(segment.q.shape[0]),
        length_mm=length,
        rotation_deg=rotation,
        joint_travel_deg=travel,
        duration_s=_optional(timing.duration),
        speed_percent=_optional(timing.speed_percent),
        speed_requested_mm_s=_optional(float(mm_from_m(timing.speed_requested))),
        speed_cap_mm_s=(
            None if segment.travel_is_angle else _optional(float(mm_from_m(timing.speed_cap)))
        ),
        speed_used_mm_s=(
            None if segment.travel_is_angle else _optional(float(mm_from_m(timing.speed_used)))
        ),
        speed_capped=timing.speed_capped,
        limiting_joint=scene.robot.joint_names[joint] if linear and joint >= 0 else None,
        acceleration_used_mm_s2=(
            None
            if segment.travel_is_angle
            else _optional(float(mm_from_m(timing.acceleration_used)))
        ),
        acceleration_capped=timing.acceleration_capped,
        blend_mm=float(mm_from_m(path.blend_radius[w])),
        min_clearance_mm=_optional(float(mm_from_m(min_clearance))),
        environment_clearance_mm=_optional(float(mm_from_m(environment_clearance))),
        self_clearance_mm=_optional(float(mm_from_m(self_clearance))),
    )


def _waypoint_findings(sampled: SampledPath) -> list[PathFinding]:
    findings = []
    names = sampled.waypoint_names
    count = len(sampled.segments)
    for w, problem in enumerate(sampled.waypoint_problem):
        if not problem:
            continue
        segment = None if count == 0 else max(w - 1, 0)
        fraction = 1.0 if w > 0 else 0.0
        findings.append(
            PathFinding(
                kind="waypoint",
                severity="error",
                segment_index=segment,
                from_waypoint=names[w - 1] if w > 0 else names[w],
                to_waypoint=names[w] if w > 0 else (names[1] if count else names[w]),
                fraction_start=fraction,
                fraction_end=fraction,
                fraction_worst=fraction,
                message=f"waypoint {names[w]!r}: {problem}",
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
    collision_threshold_mm: float = 0.0,
    linear_acceleration_mm_s2: float = float(mm_from_m(DEFAULT_LINEAR_ACCELERATION_M_S2)),
    joint_jerk_deg_s3: list[float] | None = None,
    linear_jerk_mm_s3: float | None = None,
) -> PathCheckReport:
    """Check an already sampled path; parameters as :func:`check_path`."""
    robot = scene.robot
    thresholds = scene.cell.thresholds if thresholds is None else thresholds
    clearance_warning_mm = thresholds.clearance_mm
    if not math.isfinite(collision_threshold_mm) or collision_threshold_mm > clearance_warning_mm:
        raise PlanningInputError(
            "collision_threshold_mm: expected a finite number not above the clearance "
            f"threshold ({clearance_warning_mm:g} mm), got {collision_threshold_mm!r}"
        )
    limits = _Thresholds(
        limit_margin=margin_thresholds(robot, thresholds),
        clearance_warning=float(m_from_mm(clearance_warning_mm)),
        collision=float(m_from_mm(collision_threshold_mm)),
        singularity=singularity_thresholds(thresholds),
    )
    timing = path_cycle_time(
        robot,
        sampled,
        linear_acceleration_m_s2=float(m_from_mm(linear_acceleration_mm_s2)),
        joint_jerk_max=(
            None
            if joint_jerk_deg_s3 is None
            else joints_si_from_user(joint_jerk_deg_s3, robot.prismatic)
        ),
        linear_jerk_m_s3=None if linear_jerk_mm_s3 is None else float(m_from_mm(linear_jerk_mm_s3)),
        external=(
            ExternalAxisMotion(
                sampled.path.external,
                scene.external.velocity_max,
                scene.external.acceleration_max,
            )
            if scene.external.count and sampled.path.external.shape[1] == scene.external.count
            else None
        ),
    )
    blended = _blended_timing(scene, sampled, float(m_from_mm(linear_acceleration_mm_s2)))
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
        segment_environment_m = _smallest(environment.distance[rows])
        segment_self_m = _smallest(own.distance[rows])
        report = _segment_report(
            scene,
            sampled,
            segment,
            segment_timing,
            float(np.fmin(segment_environment_m, segment_self_m)),
            segment_environment_m,
            segment_self_m,
        )
        report.blended_duration_s = _optional(float(blended.segment_durations[segment.index]))
        segments.append(report)
    path = sampled.path
    errors = sum(f.severity == "error" for f in findings)
    warnings = sum(f.severity == "warning" for f in findings)
    names = sampled.waypoint_names
    waypoints = [
        WaypointReport(
            index=w,
            name=names[w],
            source=path.sources[w],
            motion="linear" if path.linear[w] else "joint",
            joints_deg=(
                joints_user_from_si(sampled.waypoint_q[w], robot.prismatic).tolist()
                if np.all(np.isfinite(sampled.waypoint_q[w]))
                else None
            ),
            branch=sampled.waypoint_branch[w],
            problem=sampled.waypoint_problem[w],
            blended=bool(blended.blended[w]),
            pass_distance_mm=_optional(float(mm_from_m(blended.pass_distance[w]))),
        )
        for w in range(len(names))
    ]
    environment_m = _smallest(environment.distance)
    self_m = _smallest(own.distance)
    return PathCheckReport(
        path=path.name,
        robot_geometry_missing=robot.geometry_missing,
        robot=robot.name,
        tool=scene.tool_name,
        joint_names=list(robot.joint_names),
        resolution_mm=float(mm_from_m(sampled.resolution_m)),
        resolution_deg=float(deg_from_rad(sampled.resolution_rad)),
        ok=errors == 0,
        errors=errors,
        warnings=warnings,
        waypoints=waypoints,
        segments=segments,
        findings=findings,
        finding_groups=group_path_findings(findings),
        cycle_time_s=_optional(timing.total),
        linear_acceleration_mm_s2=float(mm_from_m(timing.linear_acceleration)),
        jerk_limited=timing.jerk_limited,
        blend_note=timing.note,
        blended_cycle_time_s=_optional(blended.total),
        blended_note=blended.note,
        min_clearance_mm=_optional(float(mm_from_m(np.fmin(environment_m, self_m)))),
        environment_clearance_mm=_optional(float(mm_from_m(environment_m))),
        self_clearance_mm=_optional(float(mm_from_m(self_m))),
        closest_environment=_closest_words(environment),
        closest_self=_closest_words(own),
        clearance_warning_mm=float(clearance_warning_mm),
        collision_threshold_mm=float(collision_threshold_mm),
        limit_margin_deg=float(thresholds.limit_margin_deg),
        thresholds=thresholds,
    )


def check_path(
    scene: Scene,
    path: int | ResolvedPath,
    *,
    resolution_mm: float = 5.0,
    resolution_deg: float = 1.0,
    jump_deg: float = 10.0,
    thresholds: QualityThresholds | None = None,
    collision_threshold_mm: float = 0.0,
    linear_acceleration_mm_s2: float = float(mm_from_m(DEFAULT_LINEAR_ACCELERATION_M_S2)),
    joint_jerk_deg_s3: list[float] | None = None,
    linear_jerk_mm_s3: float | None = None,
) -> PathCheckReport:
    """Check a path of the cell sample by sample and time it (module docstring).

    Parameters
    ----------
    scene : Scene
    path : int or ResolvedPath
        Index into ``scene.paths``, or a resolved path of this scene's robot.
    resolution_mm, resolution_deg : float, keyword-only
        Sampling: largest TCP travel and rotation between linear-move samples,
        largest joint travel between joint-move samples (mm for prismatic joints).
    jump_deg : float, keyword-only
        Joint step between two linear-move samples counted as a configuration jump.
    thresholds : QualityThresholds, optional, keyword-only
        Limit margins, clearance and singularity distances below which a
        finding is given; the cell's own (``scene.cell.thresholds``, the same
        set the target check and the diagnosis use) if omitted.
    collision_threshold_mm : float, keyword-only
        Clearance below which a sample is a collision (0: contact or penetration);
        not above ``thresholds.clearance_mm``.
    linear_acceleration_mm_s2 : float, keyword-only
        Cartesian path acceleration of linear moves.
    joint_jerk_deg_s3 : list of float, optional, keyword-only
        Joint jerk limits (mm/s^3 for prismatic joints) for double-S joint moves.
    linear_jerk_mm_s3 : float, optional, keyword-only
        Path jerk for double-S linear moves.

    Returns
    -------
    PathCheckReport
    """
    sampled = sample_path(
        scene, path, resolution_mm=resolution_mm, resolution_deg=resolution_deg, jump_deg=jump_deg
    )
    return check_sampled_path(
        scene,
        sampled,
        thresholds=thresholds,
        collision_threshold_mm=collision_threshold_mm,
        linear_acceleration_mm_s2=linear_acceleration_mm_s2,
        joint_jerk_deg_s3=joint_jerk_deg_s3,
        linear_jerk_mm_s3=linear_jerk_mm_s3,
    )

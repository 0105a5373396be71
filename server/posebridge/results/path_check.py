"""The path check's result (mm, deg): models, builder from the SI check, text table.

:func:`path_check_result` turns :class:`~posebridge.planning.path_check.PathCheckData`
(:func:`posebridge.planning.path_check.check_path`) into :class:`PathCheckReport`, with
each finding's message in millimetres and degrees; :func:`render_path_check` is its
plain-text summary for the CLI.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Literal

import numpy as np
from pydantic import BaseModel, ConfigDict, Field

from posebridge.cell.clearance import CellClearance
from posebridge.cell.thresholds import QualityThresholds
from posebridge.planning.path_check import (
    FindingKind,
    PathCheckData,
    PathFindingData,
    SegmentCheck,
    Severity,
)
from posebridge.results.text_table import number_text, table_lines
from posebridge.units import BoolArray, deg_from_rad, joints_user_from_si, mm_from_m

__all__ = [
    "PathCheckReport",
    "PathFinding",
    "PathFindingGroup",
    "SegmentReport",
    "WaypointReport",
    "group_path_findings",
    "path_check_result",
    "path_finding",
    "path_finding_cause",
    "render_path_check",
]


class _Report(BaseModel):
    model_config = ConfigDict(extra="forbid", allow_inf_nan=False)


class PathFinding(_Report):
    """One problem found along a path, tied to its segment and the position along it."""

    kind: FindingKind
    severity: Severity
    segment_index: int | None = Field(
        description="Segment k runs from waypoint k to waypoint k + 1; null if the path has none."
    )
    from_waypoint: str
    to_waypoint: str
    fraction_start: float = Field(ge=0.0, le=1.0, description="Where the problem starts (0..1).")
    fraction_end: float = Field(ge=0.0, le=1.0, description="Where it ends (0..1).")
    fraction_worst: float = Field(ge=0.0, le=1.0, description="Where it is worst (0..1).")
    position_mm: float | None = Field(
        default=None,
        description="TCP travel (linear move) or joint travel (prismatic) at the worst point.",
    )
    position_deg: float | None = Field(
        default=None,
        description="Largest joint travel (joint move) or rotation (pure reorientation) at the worst point.",
    )
    message: str
    joint: str | None = None
    obstacle: str | None = Field(
        default=None, description="Obstacle, or arm capsule for self contact, nearest the arm."
    )
    capsule: str | None = Field(default=None, description="Arm capsule of the closest pair.")
    distance_mm: float | None = Field(
        default=None,
        description="Clearance, prismatic limit margin or shoulder distance, at the worst point.",
    )
    angle_deg: float | None = Field(
        default=None,
        description="Limit margin, singularity distance or joint step, at the worst point.",
    )
    speed_mm_s: float | None = Field(
        default=None, description="Highest feasible TCP speed (speed limit findings)."
    )
    cause: str | None = Field(
        default=None,
        description="What the finding is about, for grouping: the pair ('gripper-body – "
        "press-die') of a collision or clearance finding, the joint of a limit finding.",
    )


class PathFindingGroup(_Report):
    """Path findings of one kind with one cause (an object pair, a joint), with the worst one.

    ``count`` says how many share severity, kind and cause.
    """

    severity: Severity
    kind: FindingKind
    cause: str = Field(
        description="The pair ('gripper-body – press-die') of a collision or clearance "
        "finding, the joint of a limit finding."
    )
    count: int = Field(description="How many findings share this severity, kind and cause.")
    worst: PathFinding = Field(
        description="The one with the smallest distance_mm (else angle_deg): the deepest "
        "penetration, the smallest clearance or margin."
    )


def path_finding_cause(capsule: object, obstacle: object, joint: object) -> str | None:
    """Return what a path finding is about, for grouping.

    ``"capsule – obstacle"`` when it names a pair, else its joint; ``None`` when it names
    neither (not grouped).
    """
    if capsule is not None and obstacle is not None:
        return f"{capsule} – {obstacle}"
    return None if joint is None else str(joint)


def group_path_findings(findings: Sequence[PathFinding]) -> list[PathFindingGroup]:
    """Group path findings that have a cause by (severity, kind, cause), in first-seen order.

    Each group has its count and its worst finding (smallest ``distance_mm``, else smallest
    ``angle_deg``; the first one of a group without values).
    """
    groups: dict[tuple[str, str, str], list[PathFinding]] = {}
    for finding in findings:
        if finding.cause is not None:
            groups.setdefault((finding.severity, finding.kind, finding.cause), []).append(finding)

    def badness(finding: PathFinding) -> float:
        value = finding.distance_mm if finding.distance_mm is not None else finding.angle_deg
        return math.inf if value is None else value

    return [
        PathFindingGroup(
            severity=members[0].severity,
            kind=members[0].kind,
            cause=cause,
            count=len(members),
            worst=min(members, key=badness),
        )
        for (_, _, cause), members in groups.items()
    ]


class WaypointReport(_Report):
    """One waypoint with the configuration chosen for it."""

    index: int
    name: str
    source: Literal["target", "pose", "joints"]
    motion: Literal["joint", "linear"] = Field(description="Motion into this waypoint.")
    joints_deg: list[float] | None = Field(
        description="Chosen joint values (prismatic joints in mm); null if none was found."
    )
    branch: str = Field(description="Shoulder, elbow and wrist in plain words; empty if none.")
    problem: str = Field(description="Why the waypoint has no usable configuration; empty if fine.")
    blended: bool = Field(
        default=False, description="The blended motion passes this waypoint without stopping."
    )
    pass_distance_mm: float | None = Field(
        default=None,
        description="Closest TCP distance to the waypoint in the blended motion (0 at a stop).",
    )


class SegmentReport(_Report):
    """One segment's samples, timing and worst values."""

    index: int
    motion: Literal["joint", "linear"]
    from_waypoint: str
    to_waypoint: str
    samples: int
    length_mm: float | None = Field(description="TCP path length of a linear move.")
    rotation_deg: float | None = Field(description="Tool rotation of a linear move.")
    joint_travel_deg: float | None = Field(
        description="Largest joint travel of a joint move (prismatic joints in mm)."
    )
    duration_s: float | None = Field(description="Rest-to-rest duration; null if not timed.")
    speed_percent: float | None = None
    speed_requested_mm_s: float | None = None
    speed_cap_mm_s: float | None = Field(
        default=None, description="Highest TCP speed the joint velocity limits allow on this line."
    )
    speed_used_mm_s: float | None = None
    speed_capped: bool = False
    limiting_joint: str | None = None
    acceleration_used_mm_s2: float | None = None
    acceleration_capped: bool = False
    blend_mm: float = Field(
        description="Blend radius of the end waypoint (applied to blended_duration_s only)."
    )
    blended_duration_s: float | None = Field(
        default=None,
        description="Duration in the blended (continuous) motion, from blend middle to blend "
        "middle; null if not timed. At most duration_s for a trapezoid timing.",
    )
    min_clearance_mm: float | None = Field(description="Smallest clearance over the samples.")
    environment_clearance_mm: float | None = Field(
        default=None, description="Smallest clearance to the cell over the samples."
    )
    self_clearance_mm: float | None = Field(
        default=None, description="Smallest clearance between the arm's own parts."
    )


class PathCheckReport(_Report):
    """A path checked sample by sample, with its cycle time."""

    path: str
    robot: str
    tool: str
    joint_names: list[str]
    resolution_mm: float
    resolution_deg: float
    ok: bool = Field(description="No finding of severity error.")
    errors: int
    warnings: int
    waypoints: list[WaypointReport]
    segments: list[SegmentReport]
    findings: list[PathFinding]
    finding_groups: list[PathFindingGroup] = Field(
        default=[],
        description="Findings of one cause (object pair, joint) counted, with the worst one.",
    )
    cycle_time_s: float | None = Field(
        description="Rest-to-rest cycle time (the upper bound): sum of the segment durations; "
        "null if any is missing."
    )
    blended_cycle_time_s: float | None = Field(
        default=None,
        description="Blended (continuous, time-optimal) cycle time through the waypoints; "
        "null if any segment cannot be timed.",
    )
    blended_note: str = Field(default="", description="How the blended cycle time is timed.")
    linear_acceleration_mm_s2: float
    jerk_limited: bool
    blend_note: str
    min_clearance_mm: float | None
    environment_clearance_mm: float | None = Field(
        default=None, description="Smallest clearance to the cell over every sample."
    )
    self_clearance_mm: float | None = Field(
        default=None, description="Smallest clearance between the arm's own parts."
    )
    closest_environment: str | None = Field(
        default=None, description="The pair at environment_clearance_mm, 'capsule – obstacle'."
    )
    closest_self: str | None = Field(
        default=None, description="The pair at self_clearance_mm, 'capsule – capsule'."
    )
    clearance_warning_mm: float = Field(description="thresholds.clearance_mm, kept for readers.")
    collision_threshold_mm: float
    limit_margin_deg: float = Field(description="thresholds.limit_margin_deg, kept for readers.")
    thresholds: QualityThresholds = Field(
        description="The cell's thresholds this check used (the same set as the target check)."
    )
    robot_geometry_missing: str | None = Field(
        default=None,
        description="Set (a warning text) when the robot has no collision geometry: every "
        "clearance in this result is then meaningless.",
    )


# --- builder from the SI check --------------------------------------------------------------


def _optional(value: float) -> float | None:
    return float(value) if math.isfinite(value) else None


def _optional_mm(value_m: float) -> float | None:
    return _optional(float(mm_from_m(value_m)))


def _closest_words(clearance: CellClearance) -> str | None:
    """Return the pair at the smallest clearance as ``capsule – other``; None when none was checked."""
    if not clearance.distance.size or not np.isfinite(clearance.distance.min()):
        return None
    capsule, other, _ = clearance.pair(int(np.argmin(clearance.distance)))
    return f"{capsule} – {other}"


def _mm(value_m: float | None) -> float:
    """Return millimetres of a value the finding's kind always carries."""
    assert value_m is not None
    return float(mm_from_m(value_m))


def _deg(value_rad: float | None) -> float:
    """Return degrees of a value the finding's kind always carries."""
    assert value_rad is not None
    return float(deg_from_rad(value_rad))


def _finding_message(finding: PathFindingData) -> str:
    """Return a finding's message, its quantities in mm and deg."""
    kind = finding.kind
    if kind == "waypoint":
        return str(finding.reason)
    if kind == "unreachable":
        return (
            f"no IK solution within the joint limits ({finding.reason}) "
            f"from {100 * finding.fraction_start:.0f} % to {100 * finding.fraction_end:.0f} %"
        )
    if kind == "branch_change":
        return "the arm changes branch inside the linear move (it passes through a singularity)"
    if kind == "configuration_jump":
        return f"a joint jumps by {_deg(finding.angle_rad):.1f} deg between two samples"
    if kind == "singularity":
        if finding.angle_rad is not None:
            size = _deg(finding.angle_rad)
            return f"near the {finding.singularity} singularity ({size:.1f} deg from it)"
        size = _mm(finding.distance_m)
        return f"near the {finding.singularity} singularity ({size:.0f} mm from it)"
    if kind == "joint_limit":
        if finding.distance_m is not None:
            size, unit = _mm(finding.distance_m), "mm"
        else:
            size, unit = _deg(finding.angle_rad), "deg"
        if size < 0.0:
            return f"{finding.joint} is {abs(size):.1f} {unit} outside its limits"
        return f"{finding.joint} comes within {size:.1f} {unit} of its limit"
    if kind == "speed_limit":
        return (
            f"{finding.joint} reaches its velocity limit above "
            f"{_mm(finding.speed_m_s):.0f} mm/s "
            f"(requested {_mm(finding.requested_speed_m_s):.0f} mm/s); "
            "the move is timed slower"
        )
    # collision, low_clearance
    size = _mm(finding.distance_m)
    other = finding.obstacle
    what = (
        f"the arm's own {other}"
        if finding.obstacle_kind == "self"
        else f"{finding.obstacle_kind} {other!r}"
    )
    if size < 0.0:
        return f"{finding.capsule} hits {what} ({-size:.1f} mm deep)"
    return f"{finding.capsule} comes within {size:.1f} mm of {what}"


def path_finding(finding: PathFindingData) -> PathFinding:
    """Build the boundary model (mm, deg) of one path finding, with its message."""
    position_mm = position_deg = None
    if finding.travel is not None:
        if finding.travel_is_angle:
            position_deg = float(deg_from_rad(finding.travel))
        else:
            position_mm = float(mm_from_m(finding.travel))
    return PathFinding(
        kind=finding.kind,
        severity=finding.severity,
        segment_index=finding.segment_index,
        from_waypoint=finding.from_waypoint,
        to_waypoint=finding.to_waypoint,
        fraction_start=finding.fraction_start,
        fraction_end=finding.fraction_end,
        fraction_worst=finding.fraction_worst,
        position_mm=position_mm,
        position_deg=position_deg,
        message=_finding_message(finding),
        joint=finding.joint,
        obstacle=finding.obstacle,
        capsule=finding.capsule,
        distance_mm=None if finding.distance_m is None else float(mm_from_m(finding.distance_m)),
        angle_deg=None if finding.angle_rad is None else float(deg_from_rad(finding.angle_rad)),
        speed_mm_s=None if finding.speed_m_s is None else float(mm_from_m(finding.speed_m_s)),
        cause=(
            None
            if finding.kind == "waypoint"
            else path_finding_cause(finding.capsule, finding.obstacle, finding.joint)
        ),
    )


def _segment_report(
    check: SegmentCheck, names: Sequence[str], prismatic: BoolArray
) -> SegmentReport:
    segment = check.samples
    timing = check.timing
    angle = segment.travel_is_angle
    travel = None
    if check.joint_travel is not None:
        travel = float(np.max(np.abs(joints_user_from_si(check.joint_travel, prismatic))))
    return SegmentReport(
        index=segment.index,
        motion=segment.motion,
        from_waypoint=names[segment.index],
        to_waypoint=names[segment.index + 1],
        samples=int(segment.q.shape[0]),
        length_mm=None if check.length is None else float(mm_from_m(check.length)),
        rotation_deg=None if check.rotation is None else float(deg_from_rad(check.rotation)),
        joint_travel_deg=travel,
        duration_s=_optional(timing.duration),
        speed_percent=_optional(timing.speed_percent),
        speed_requested_mm_s=_optional_mm(timing.speed_requested),
        speed_cap_mm_s=None if angle else _optional_mm(timing.speed_cap),
        speed_used_mm_s=None if angle else _optional_mm(timing.speed_used),
        speed_capped=timing.speed_capped,
        limiting_joint=check.limiting_joint,
        acceleration_used_mm_s2=None if angle else _optional_mm(timing.acceleration_used),
        acceleration_capped=timing.acceleration_capped,
        blend_mm=float(mm_from_m(check.blend)),
        blended_duration_s=_optional(check.blended_duration),
        min_clearance_mm=_optional_mm(check.min_clearance),
        environment_clearance_mm=_optional_mm(check.environment_clearance),
        self_clearance_mm=_optional_mm(check.self_clearance),
    )


def path_check_result(data: PathCheckData) -> PathCheckReport:
    """Build the boundary model (mm, deg) of a path check, with its findings' messages.

    Parameters
    ----------
    data : PathCheckData
        From :func:`posebridge.planning.path_check.check_path`.

    Returns
    -------
    PathCheckReport
    """
    scene = data.scene
    robot = scene.robot
    sampled = data.sampled
    path = sampled.path
    blended = data.blended
    timing = data.timing
    names = sampled.waypoint_names
    findings = [path_finding(finding) for finding in data.findings]
    errors = sum(f.severity == "error" for f in findings)
    warnings = sum(f.severity == "warning" for f in findings)
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
            pass_distance_mm=_optional_mm(blended.pass_distance[w]),
        )
        for w in range(len(names))
    ]
    environment_m = (
        float(data.environment.distance.min()) if data.environment.distance.size else math.nan
    )
    self_m = float(data.own.distance.min()) if data.own.distance.size else math.nan
    thresholds = data.thresholds
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
        segments=[_segment_report(s, names, robot.prismatic) for s in data.segments],
        findings=findings,
        finding_groups=group_path_findings(findings),
        cycle_time_s=_optional(timing.total),
        linear_acceleration_mm_s2=float(mm_from_m(timing.linear_acceleration)),
        jerk_limited=timing.jerk_limited,
        blend_note=timing.note,
        blended_cycle_time_s=_optional(blended.total),
        blended_note=blended.note,
        min_clearance_mm=_optional_mm(np.fmin(environment_m, self_m)),
        environment_clearance_mm=_optional_mm(environment_m),
        self_clearance_mm=_optional_mm(self_m),
        closest_environment=_closest_words(data.environment),
        closest_self=_closest_words(data.own),
        clearance_warning_mm=float(thresholds.clearance_mm),
        collision_threshold_mm=float(mm_from_m(data.collision_threshold)),
        limit_margin_deg=float(thresholds.limit_margin_deg),
        thresholds=thresholds,
    )


# --- text -------------------------------------------------------------------------------------


def render_path_check(report: PathCheckReport) -> str:
    """Plain-text summary, segment table and findings of a path check."""
    verdict = "OK" if report.ok else "PROBLEMS"
    lines = [
        f"Path {report.path!r} ({report.robot}, tool {report.tool}): {verdict}, "
        f"{report.errors} errors, {report.warnings} warnings",
        f"Cycle time: {number_text(report.cycle_time_s, 2)} s rest to rest (upper bound), "
        f"{number_text(report.blended_cycle_time_s, 2)} s blended",
        f"  rest to rest: {report.blend_note}",
        f"  {report.blended_note}",
        f"Environment clearance: {number_text(report.environment_clearance_mm)} mm"
        + (f" ({report.closest_environment})" if report.closest_environment else ""),
        f"Self-clearance: {number_text(report.self_clearance_mm)} mm"
        + (f" ({report.closest_self})" if report.closest_self else ""),
        "",
    ]
    rows = [
        [
            str(s.index),
            s.motion,
            f"{s.from_waypoint} -> {s.to_waypoint}",
            (
                number_text(s.length_mm) + " mm"
                if s.motion == "linear"
                else number_text(s.joint_travel_deg) + " deg joint travel"
            ),
            number_text(s.duration_s, 3),
            number_text(s.blended_duration_s, 3),
            (
                f"{number_text(s.speed_used_mm_s, 0)}/{number_text(s.speed_requested_mm_s, 0)} mm/s"
                + (" capped" if s.speed_capped else "")
                if s.motion == "linear"
                else f"{number_text(s.speed_percent, 0)} %"
            ),
            number_text(s.environment_clearance_mm),
            number_text(s.self_clearance_mm),
        ]
        for s in report.segments
    ]
    lines += table_lines(
        [
            "seg",
            "motion",
            "from -> to",
            "length",
            "time s",
            "blended s",
            "speed",
            "environment clearance mm",
            "self-clearance mm",
        ],
        rows,
    )
    if report.findings:
        lines += ["", "Findings:"]
        repeated = {
            (g.severity, g.kind, g.cause): g
            for g in group_path_findings(report.findings)
            if g.count > 1
        }
        shown: set[tuple[str, str, str]] = set()
        for f in report.findings:
            key = (f.severity, f.kind, f.cause or "")
            count = ""
            if key in repeated:
                if key in shown:
                    continue
                shown.add(key)
                group = repeated[key]
                count = f"{group.count} x, worst "
                f = group.worst
            where = (
                f"seg {f.segment_index} at {100.0 * f.fraction_worst:.0f} %"
                if f.segment_index is not None
                else "path"
            )
            lines.append(f"  [{f.severity}] {count}{f.kind} ({where}): {f.message}")
    if report.robot_geometry_missing:
        lines.insert(0, f"WARNING: {report.robot_geometry_missing}")
    return "\n".join(lines)

"""JSON-ready results of path checks, joint-move plans and base placement, and their text tables.

These pydantic models are the boundary shared by the command line and the
HTTP API: millimetres, degrees and seconds, with the unit in every field
name (prismatic joint values are millimetres inside ``joints_deg`` lists,
as everywhere at the boundary). The computations in this package work in
SI units and convert through :mod:`posebridge.units` when they build these
models.

Roles:

* :class:`PathCheckReport` — one cell path checked sample by sample, with
  its cycle time (:func:`posebridge.planning.path_check.check_path`);
* :class:`JointPlanReport` — a collision-free joint move found by
  RRT-Connect (:func:`posebridge.planning.rrt.plan_joint_move`);
* :class:`PlacementReport` — ranked base poses and the score grid
  (:func:`posebridge.planning.placement.search_base_placement`).

``render_*`` functions turn each report into a plain-text table for the CLI.
"""

from __future__ import annotations

from typing import Literal

from pydantic import BaseModel, ConfigDict, Field

from posebridge.cell.reports import QualityThresholds

__all__ = [
    "FindingKind",
    "JointPlanReport",
    "PathCheckReport",
    "PathFinding",
    "PlacementCandidateReport",
    "PlacementGridReport",
    "PlacementReport",
    "PlanStatus",
    "SegmentReport",
    "Severity",
    "TargetPlacementReport",
    "WaypointReport",
    "render_joint_plan",
    "render_path_check",
    "render_placement",
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
PlanStatus = Literal[
    "solved", "direct", "timeout", "start_in_collision", "goal_in_collision", "outside_limits"
]


class _Report(BaseModel):
    model_config = ConfigDict(extra="forbid", allow_inf_nan=False)


# --- path check ---------------------------------------------------------------------------


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
        description="Blend radius of the end waypoint (not applied to the time)."
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
    cycle_time_s: float | None = Field(
        description="Sum of the segment durations; null if any is missing."
    )
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


# --- joint-move planning ------------------------------------------------------------------


class JointPlanReport(_Report):
    """A collision-free joint move found by RRT-Connect, or why none was found."""

    status: PlanStatus
    message: str
    joint_names: list[str]
    start_deg: list[float]
    goal_deg: list[float]
    waypoints_deg: list[list[float]] = Field(
        description="Joint values of the simplified path, start and goal included (prismatic in mm)."
    )
    seed: int
    time_limit_s: float
    planning_time_s: float
    validity_checks: int
    safety_margin_mm: float
    motion_step_mm: float = Field(
        description="Largest displacement of any arm point between two checked configurations."
    )
    min_clearance_mm: float | None = Field(
        description="Smallest clearance along the result, from an exact dense re-check."
    )
    straight_move_obstacle: str | None = Field(
        default=None,
        description="What the straight joint move comes closest to inside the safety margin "
        "(its worst point), if it collides; for a refused start or goal, what that is too close to.",
    )
    straight_move_worst_mm: float | None = Field(
        default=None,
        description="Signed clearance at that worst point (negative: penetration depth).",
    )
    straight_move_worst_fraction: float | None = Field(
        default=None, description="Where the worst point is: fraction of the straight move, 0..1."
    )
    check: PathCheckReport | None = Field(
        default=None, description="The result re-checked as joint moves at 100 % speed."
    )
    robot_geometry_missing: str | None = Field(
        default=None,
        description="Set (a warning text) when the robot has no collision geometry: every "
        "clearance in this result is then meaningless.",
    )


# --- base placement -----------------------------------------------------------------------


class TargetPlacementReport(_Report):
    """One target at one candidate base pose."""

    name: str
    reached: bool = Field(description="Reached on the candidate's branch, within limits and free.")
    reason: str
    joints_deg: list[float] | None
    min_margin_deg: float | None
    manipulability: float | None
    clearance_mm: float | None


class PlacementCandidateReport(_Report):
    """One candidate base pose, its score and its per-target details."""

    rank: int
    x_mm: float
    y_mm: float
    yaw_deg: float
    pedestal_height_mm: float
    score: float
    reach_fraction: float
    targets_reached: int
    branch: str
    min_margin_deg: float | None
    manipulability: float | None
    min_clearance_mm: float | None
    cycle_time_s: float | None
    targets: list[TargetPlacementReport]


class PlacementGridReport(_Report):
    """The full score grid for a heatmap, shape (ny, nx, nyaw, nheights)."""

    x_mm: list[float]
    y_mm: list[float]
    yaw_deg: list[float]
    pedestal_height_mm: list[float]
    score: list[list[list[list[float]]]]
    reach_fraction: list[list[list[list[float]]]]


class PlacementReport(_Report):
    """Ranked base poses and the score grid."""

    robot: str
    targets: list[str]
    candidates_evaluated: int
    best: list[PlacementCandidateReport]
    grid: PlacementGridReport
    score_note: str
    cycle_time_note: str
    current_score: float | None = Field(description="Score of the cell's current base pose.")
    robot_geometry_missing: str | None = Field(
        default=None,
        description="Set (a warning text) when the robot has no collision geometry: every "
        "clearance in this result is then meaningless.",
    )


# --- text tables --------------------------------------------------------------------------


def _number(value: float | None, digits: int = 1) -> str:
    return "-" if value is None else f"{value:.{digits}f}"


def _table(header: list[str], rows: list[list[str]]) -> list[str]:
    widths = [
        max(len(h), *(len(r[i]) for r in rows)) if rows else len(h) for i, h in enumerate(header)
    ]
    lines = ["  ".join(h.ljust(w) for h, w in zip(header, widths, strict=True))]
    lines.append("  ".join("-" * w for w in widths))
    lines += ["  ".join(c.ljust(w) for c, w in zip(r, widths, strict=True)) for r in rows]
    return lines


def render_path_check(report: PathCheckReport) -> str:
    """Plain-text summary, segment table and findings of a path check."""
    verdict = "OK" if report.ok else "PROBLEMS"
    lines = [
        f"Path {report.path!r} ({report.robot}, tool {report.tool}): {verdict}, "
        f"{report.errors} errors, {report.warnings} warnings",
        f"Cycle time: {_number(report.cycle_time_s, 2)} s ({report.blend_note})",
        f"Environment clearance: {_number(report.environment_clearance_mm)} mm"
        + (f" ({report.closest_environment})" if report.closest_environment else ""),
        f"Self-clearance: {_number(report.self_clearance_mm)} mm"
        + (f" ({report.closest_self})" if report.closest_self else ""),
        "",
    ]
    rows = [
        [
            str(s.index),
            s.motion,
            f"{s.from_waypoint} -> {s.to_waypoint}",
            (
                _number(s.length_mm) + " mm"
                if s.motion == "linear"
                else _number(s.joint_travel_deg) + " deg joint travel"
            ),
            _number(s.duration_s, 3),
            (
                f"{_number(s.speed_used_mm_s, 0)}/{_number(s.speed_requested_mm_s, 0)} mm/s"
                + (" capped" if s.speed_capped else "")
                if s.motion == "linear"
                else f"{_number(s.speed_percent, 0)} %"
            ),
            _number(s.environment_clearance_mm),
            _number(s.self_clearance_mm),
        ]
        for s in report.segments
    ]
    lines += _table(
        [
            "seg",
            "motion",
            "from -> to",
            "length",
            "time s",
            "speed",
            "environment clearance mm",
            "self-clearance mm",
        ],
        rows,
    )
    if report.findings:
        lines += ["", "Findings:"]
        for f in report.findings:
            where = (
                f"seg {f.segment_index} at {100.0 * f.fraction_worst:.0f} %"
                if f.segment_index is not None
                else "path"
            )
            lines.append(f"  [{f.severity}] {f.kind} ({where}): {f.message}")
    if report.robot_geometry_missing:
        lines.insert(0, f"WARNING: {report.robot_geometry_missing}")
    return "\n".join(lines)


def render_joint_plan(report: JointPlanReport) -> str:
    """Plain-text summary and waypoint table of a joint-move plan."""
    lines = [
        f"Joint move plan: {report.status} - {report.message}",
        f"seed {report.seed}, {report.validity_checks} checks in {report.planning_time_s:.3f} s "
        f"(limit {report.time_limit_s:g} s), safety margin {report.safety_margin_mm:g} mm, "
        f"motion step {report.motion_step_mm:g} mm, min clearance {_number(report.min_clearance_mm)} mm",
    ]
    if report.waypoints_deg:
        rows = [[str(i)] + [f"{v:.2f}" for v in q] for i, q in enumerate(report.waypoints_deg)]
        lines += [""] + _table(["#"] + report.joint_names, rows)
    if report.robot_geometry_missing:
        lines.insert(0, f"WARNING: {report.robot_geometry_missing}")
    return "\n".join(lines)


def render_placement(report: PlacementReport, *, top: int = 10) -> str:
    """Plain-text table of the best base poses."""
    lines = [
        f"Base placement for {report.robot}: {report.candidates_evaluated} candidates, "
        f"{len(report.targets)} targets; current base score {_number(report.current_score, 3)}",
        report.score_note,
        "",
    ]
    rows = [
        [
            str(c.rank),
            f"{c.x_mm:.0f}",
            f"{c.y_mm:.0f}",
            f"{c.yaw_deg:.0f}",
            f"{c.pedestal_height_mm:.0f}",
            f"{c.score:.3f}",
            f"{c.targets_reached}/{len(c.targets)}",
            c.branch,
            _number(c.min_margin_deg),
            _number(c.min_clearance_mm),
            _number(c.cycle_time_s, 2),
        ]
        for c in report.best[:top]
    ]
    lines += _table(
        [
            "rank",
            "x mm",
            "y mm",
            "yaw deg",
            "height mm",
            "score",
            "reached",
            "branch",
            "margin deg",
            "clearance mm",
            "cycle s",
        ],
        rows,
    )
    if report.robot_geometry_missing:
        lines.insert(0, f"WARNING: {report.robot_geometry_missing}")
    return "\n".join(lines)

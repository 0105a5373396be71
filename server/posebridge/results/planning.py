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
* :class:`SequenceReport` — the fastest consistent IK solution sequence of
  a path and the edits that make the path follow it
  (:func:`posebridge.planning.sequence_report.optimise_path`);
* :class:`PlacementReport` — ranked base poses and the score grid
  (:func:`posebridge.planning.placement.search_base_placement`).

``render_*`` functions turn each report into a plain-text table for the CLI.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Literal

from pydantic import BaseModel, ConfigDict, Field

from posebridge.cell.thresholds import QualityThresholds

__all__ = [
    "FindingKind",
    "JointPlanReport",
    "MotionExportHeader",
    "MotionExportReport",
    "MotionExportWaypoint",
    "PathCheckReport",
    "PathFinding",
    "PlacementCandidateReport",
    "PlacementGridReport",
    "PlacementReport",
    "PlanStatus",
    "SegmentReport",
    "SequenceCandidatesReport",
    "SequenceChoiceReport",
    "SequenceReport",
    "SequenceViolation",
    "SequenceWaypointReport",
    "Severity",
    "TargetPlacementReport",
    "WaypointJoints",
    "WaypointReport",
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


# --- fastest solution sequence ------------------------------------------------------------


class SequenceViolation(_Report):
    """A constraint a choice of configurations breaks."""

    reason: str = Field(
        description="outside_limits, limit_margin, branch, collision, unreached, branch_change, "
        "configuration_jump, arrival_excluded or joint_speed."
    )
    waypoint_index: int | None = Field(description="The waypoint; null for a segment's.")
    segment_index: int | None = Field(description="The segment; null for a waypoint's.")
    message: str


class SequenceWaypointReport(_Report):
    """One waypoint's configuration in a sequence."""

    index: int
    name: str
    joints_deg: list[float] | None = Field(description="Prismatic joints in mm; null if none.")
    branch: str = Field(description="Shoulder, elbow and wrist in plain words; empty if none.")
    revolutions: list[int] = Field(description="Whole extra revolutions of each joint.")


class SequenceChoiceReport(_Report):
    """One configuration per waypoint and its rest-to-rest timing."""

    waypoints: list[SequenceWaypointReport]
    segment_durations_s: list[float | None] = Field(
        description="Rest-to-rest duration of each segment; null where it is not feasible."
    )
    cycle_time_s: float | None = Field(description="Rest to rest; null if a segment is missing.")
    same_branch_throughout: bool
    violations: list[SequenceViolation]


class WaypointJoints(_Report):
    """Joint values to write into one waypoint of a path (it becomes a joint-values waypoint)."""

    index: int = Field(ge=0, description="Waypoint position in the path, from 0.")
    joints_deg: list[float] = Field(description="Prismatic joints in mm.")


class SequenceCandidatesReport(_Report):
    """The candidate configurations of one waypoint and the ones left out."""

    joints_deg: list[list[float]]
    excluded: dict[str, int] = Field(description="How many IK solutions each reason removed.")


class SequenceReport(_Report):
    """The fastest consistent solution sequence of a path beside the cell's current choice."""

    path: str
    robot: str
    tool: str
    joint_names: list[str]
    feasible: bool = Field(description="A sequence meeting every constraint exists.")
    summary: str = Field(description="The result in words, e.g. '1.30 s faster, same branch'.")
    best: SequenceChoiceReport | None = Field(description="The fastest sequence; null if none.")
    current: SequenceChoiceReport = Field(description="The configurations the path uses today.")
    saving_s: float | None = Field(
        description="Current minus best rest-to-rest cycle time; null if either is not timed."
    )
    blocked_at: str | None = Field(description="First waypoint no feasible sequence reaches.")
    chosen_indices: list[int] = Field(description="Chosen candidate per waypoint (-1: none).")
    candidates: list[SequenceCandidatesReport]
    edits: list[WaypointJoints] = Field(
        description="Waypoints to give as joint values so that the path follows the best "
        "sequence (the fewest, in path order); empty when it already does or none is feasible."
    )
    edges_checked: int = Field(description="Segments between candidates collision-checked.")
    edges_total: int
    limit_margin_deg: float
    limit_margin_mm: float
    collision_threshold_mm: float
    note: str


# --- motion export -------------------------------------------------------------------------


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
    cycle_time_s: float | None = Field(
        description="Rest-to-rest estimate over the cell's paths (upper bound); null if a path "
        "waypoint is not reached."
    )
    blended_cycle_time_s: float | None = Field(
        default=None,
        description="Blended cycle time over the cell's paths with the base here (the paths "
        "sampled and timed as the path check does); only for the best-ranked few candidates "
        "(see cycle_time_note), null otherwise or if a path cannot be timed.",
    )
    targets: list[TargetPlacementReport]
    tie_rank: int = Field(
        default=0,
        description="Rank of the best candidate this one ties with (within score_noise); its "
        "own rank when it ties with no better one.",
    )


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
    current_cycle_time_s: float | None = Field(
        default=None, description="Cycle time estimate at the current base pose, if on the grid."
    )
    score_words: str = Field(default="", description="The score explained in plain words.")
    score_noise: float = Field(
        default=0.0,
        description="Median score change over one grid step at equal reach: scores this close tie.",
    )
    speed_note: str = Field(
        default="",
        description="Set when the best candidate's cycle is slower than the current base's.",
    )
    robot_geometry_missing: str | None = Field(
        default=None,
        description="Set (a warning text) when the robot has no collision geometry: every "
        "clearance in this result is then meaningless.",
    )


# --- text tables --------------------------------------------------------------------------

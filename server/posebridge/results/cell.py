"""Results of the checks users run on a cell, in boundary units (mm, deg), ready for JSON.

One family of pydantic models, shared by the command line (``posebridge
check``, ``posebridge diagnose``; ``--json`` dumps them with
``model_dump(mode="json")``, the plain output renders them with
:mod:`posebridge.results.cell_text`) and the HTTP API, so both print the same
fields:

* :class:`TargetCheckReport` from :func:`posebridge.cell.checks.check_targets`
  (built by :func:`posebridge.results.target_check.target_check_result`);
* :class:`PoseDiagnosis` from :func:`posebridge.cell.pose_diagnosis.diagnose_pose`
  (built by :func:`posebridge.results.diagnosis.pose_diagnosis_result`);
* :class:`LogDiagnosis` from :func:`posebridge.cell.log_diagnosis.diagnose_log`
  (built by :func:`posebridge.results.log_diagnosis.log_diagnosis_result`).

Units are in the field names. Joint values, margins and speeds are degrees
(deg/s) for revolute joints and millimetres (mm/s) for prismatic joints; the
``unit`` or ``joint_units`` fields say which. Orientations are roll-pitch-yaw
about fixed X, then Y, then Z (``R = Rz(yaw) Ry(pitch) Rx(roll)``) and
quaternions ``[w, x, y, z]``. Distances are signed: negative is the
penetration depth. ``null`` stands for "not applicable" (a continuous joint
has no margin, an arm without capsules no clearance).
"""

from __future__ import annotations

import math
from typing import Literal

from pydantic import BaseModel, ConfigDict, Field

from posebridge.cell.thresholds import QualityThresholds

__all__ = [
    "MAX_LISTED_EVENTS",
    "BranchChange",
    "BranchCoverage",
    "BranchReport",
    "ClosestPair",
    "ConsistentBranch",
    "ExternalAxisIntervals",
    "Finding",
    "FindingGroup",
    "JointExtreme",
    "JointMargin",
    "LogDiagnosis",
    "LogRows",
    "NearTarget",
    "ObjectDistance",
    "PoseCheck",
    "PoseDiagnosis",
    "PoseFrame",
    "RowStretch",
    "RowValue",
    "Severity",
    "SingularityProximity",
    "TargetCheck",
    "TargetCheckReport",
    "VelocityCheck",
    "VelocityJump",
    "WorstRow",
    "group_findings",
]

MAX_LISTED_EVENTS = 100
"""Most events of one kind (branch changes, jumps, stretches) listed in a log diagnosis; counts are exact."""

Severity = Literal["error", "warning", "info"]
PartKind = Literal["fixture", "keep-out", "pedestal", "floor", "self"]
PoseKind = Literal["target", "approach"]

_RPY = "Roll, pitch, yaw in degrees about fixed X, Y, Z: R = Rz(yaw) Ry(pitch) Rx(roll)."
_JOINTS = "Joint values: degrees for revolute joints, millimetres for prismatic joints."
_MANIPULABILITY = (
    "Position manipulability: Yoshikawa's sqrt(det(Jv Jv^T)) of the TCP's translational "
    "Jacobian only, in SI units (m^k per rad^k, k = min(3, joints)); 0 at a position "
    "singularity, but not at the wrist singularity (see full_manipulability)."
)


_FULL_MANIPULABILITY = (
    "Yoshikawa manipulability sqrt(det(J J^T)) of the whole 6-row TCP Jacobian with its "
    "translational rows divided by the arm's characteristic length (the sum of its "
    "joint-to-joint, flange and TCP distances), dimensionless: zero at every singularity, the "
    "wrist singularity included (the position part alone is not). null for arms of fewer "
    "than six joints."
)


class _Result(BaseModel):
    model_config = ConfigDict(extra="forbid")


class ClosestPair(_Result):
    """Closest pair of the arm and the cell (or of two arm capsules)."""

    distance_mm: float = Field(description="Signed distance; negative is the penetration depth.")
    capsule: str = Field(description="Arm or tool capsule.")
    other: str = Field(description="Obstacle name, or the second capsule for a self pair.")
    other_kind: PartKind
    capsule_point_mm: list[float] = Field(description="Closest point on the capsule, world frame.")
    other_point_mm: list[float] = Field(description="Closest point on the other, world frame.")


class ObjectDistance(_Result):
    """Clearance to one obstacle of the cell."""

    name: str
    kind: PartKind
    distance_mm: float = Field(description="Signed distance; negative is the penetration depth.")


class JointMargin(_Result):
    """Distance of one joint to its position limits."""

    joint: str
    unit: str = Field(description="deg or mm")
    value: float
    lower: float | None = Field(description="null for a continuous joint")
    upper: float | None
    margin: float | None = Field(description="Distance to the nearer limit; negative outside.")
    margin_fraction: float | None = Field(description="margin / (upper - lower); 0.5 mid-range.")
    nearer_limit: Literal["lower", "upper"] | None


class SingularityProximity(_Result):
    """How far a configuration is from the wrist, elbow and shoulder singularities."""

    kind: Literal["wrist", "elbow", "shoulder", "none"] = Field(
        description="The nearest kind below its threshold, or none."
    )
    wrist_bend_deg: float = Field(description="Wrist bend from straight (0..90).")
    elbow_deg: float = Field(description="Elbow angle from stretched or folded (0..90).")
    shoulder_mm: float = Field(
        description="Wrist centre from the plane through axis 1 parallel to axis 2."
    )
    near_wrist: bool
    near_elbow: bool
    near_shoulder: bool


class BranchReport(_Result):
    """One inverse-kinematics solution of a pose, with its quality."""

    branch: str = Field(
        description="Shoulder, elbow and wrist words, then any extra joint revolutions."
    )
    shoulder: int = Field(ge=-1, le=1, description="+1 front, -1 back, 0 undefined or n/a.")
    elbow: int = Field(ge=-1, le=1, description="+1 up (left), -1 down (right), 0 undefined.")
    wrist: int = Field(ge=-1, le=1, description="+1 positive, -1 negative, 0 straight or n/a.")
    revolutions: list[int] = Field(description="Whole extra revolutions per joint.")
    joints_deg: list[float] = Field(description=_JOINTS)
    within_limits: bool
    min_margin: float | None = Field(
        description="Margin of the joint nearest a limit (by fraction of range), in its unit."
    )
    min_margin_unit: str | None
    min_margin_joint: str | None
    min_margin_fraction: float | None
    manipulability: float = Field(
        description=_MANIPULABILITY + " The same as position_manipulability, kept for readers."
    )
    position_manipulability: float = Field(default=0.0, description=_MANIPULABILITY)
    full_manipulability: float | None = Field(default=None, description=_FULL_MANIPULABILITY)
    singularity: SingularityProximity | None = Field(
        description="null for arms other than six- and seven-axis arms."
    )
    clearance_mm: float | None = Field(
        description="Smallest of the two below; null: nothing checked."
    )
    environment_clearance_mm: float | None = Field(
        default=None, description="Clearance to the cell (closest_environment); null: none checked."
    )
    self_clearance_mm: float | None = Field(
        default=None,
        description="Clearance between the arm's own parts (closest_self; pairs whose distance "
        "no joint motion changes are left out); null: none checked.",
    )
    collision_free: bool
    closest_environment: ClosestPair | None = Field(description="Closest obstacle of the cell.")
    closest_self: ClosestPair | None = Field(description="Closest pair of the arm's own capsules.")
    matches_required_branch: bool
    usable: bool = Field(description="Within limits, collision-free and on the required branch.")
    score: float | None = Field(
        description="Recommendation score in [0, 1] of usable branches (see score_rule)."
    )


class PoseCheck(_Result):
    """The check of one pose: a target, or its approach pose."""

    kind: PoseKind
    position_mm: list[float] = Field(description="TCP position in the world.")
    rpy_deg: list[float] = Field(description="TCP orientation in the world. " + _RPY)
    reachable: bool = Field(description="A usable branch exists.")
    reason: str = Field(description="Empty when reachable, else why not.")
    branches: list[BranchReport]
    recommended: int | None = Field(description="Index into branches of the recommended one.")
    recommended_branch: str | None
    recommended_reason: str = Field(
        default="",
        description="Why this branch is recommended, in words (empty when none is).",
    )


class ExternalAxisIntervals(_Result):
    """Feasible intervals of one external axis for one target and branch."""

    axis: str = Field(description="External axis name (track or turntable).")
    unit: str = Field(description="mm or deg")
    branch: str = Field(description="Shoulder/elbow/wrist words.")
    intervals: list[list[float]] = Field(
        description="[start, end] of every value range where the branch reaches the target "
        "within the joint limits, the other axes at the chosen values."
    )


class TargetCheck(_Result):
    """The check of one target of the cell."""

    name: str
    fixture: str
    required_branch: str | None = Field(description="Required shoulder/elbow/wrist words, if any.")
    approach_offset_mm: float
    fixture_distance_mm: float | None = Field(
        default=None,
        description="Distance of the TCP point to the solid of its fixture (0 on or inside it); "
        "null for targets in the world frame or on a frame without solids.",
    )
    reachable: bool = Field(
        description="The target is reachable and so is its approach pose on the same branch."
    )
    usable_branches: list[str] = Field(
        description="Shoulder/elbow/wrist branches with a usable solution (target and approach)."
    )
    target: PoseCheck
    approach: PoseCheck | None = Field(description="null when the approach offset is 0.")
    external_axes: dict[str, float] = Field(
        default_factory=dict,
        description="External axis values the target is checked at (mm track, deg table).",
    )
    external_pinned: list[str] = Field(
        default_factory=list, description="External axes the cell pins for this target."
    )
    external_intervals: list[ExternalAxisIntervals] = Field(
        default_factory=list, description="Feasible intervals of the free external axes."
    )


class BranchCoverage(_Result):
    """Which targets one shoulder/elbow/wrist branch reaches, clear of the cell."""

    branch: str
    shoulder: int
    elbow: int
    wrist: int
    targets_clear: list[str]
    targets_breaking: list[str]


class ConsistentBranch(_Result):
    """Whether one branch reaches every target (and approach pose) clear of the cell."""

    consistent: bool
    branch: str | None = Field(description="The branch covering the most targets (first of ties).")
    breaking_targets: list[str] = Field(description="Targets that branch does not reach clear.")
    coverage: list[BranchCoverage] = Field(description="Every branch, most targets first.")


class Finding(_Result):
    """One finding of a check."""

    severity: Severity
    code: str = Field(
        description="Target check: unreachable, approach-branch, branch-limited, "
        "consistent-branch, inconsistent-branch, open-mesh; any configuration: outside-limits, "
        "limit-margin, collision, clearance, singularity, at-target, robot-geometry-missing; "
        "logs (stretches of rows): "
        "collision, low-clearance, outside-limits, low-limit-margin, near-wrist-singularity, "
        "near-elbow-singularity, near-shoulder-singularity; logs (between rows): branch-change, "
        "velocity, velocity-skipped."
    )
    target: str | None = Field(description="Target name, or null for the cell or a log.")
    pose: PoseKind | None = None
    branch: str | None = Field(default=None, description="Branch the finding is about.")
    row: int | None = Field(default=None, description="Log row (0-based data row).")
    message: str
    value: float | None = None
    unit: str | None = None
    threshold: float | None = None
    cause: str | None = Field(
        default=None,
        description="What the finding is about, for grouping: the pair ('gripper-body – "
        "press-die') of a collision or clearance finding, the joint of a limit finding.",
    )


class FindingGroup(_Result):
    """Findings of one kind with one cause (e.g. one object pair), counted, with the worst one."""

    severity: Severity
    code: str
    cause: str
    count: int = Field(description="How many findings share this severity, code and cause.")
    worst: Finding = Field(description="The one with the smallest value (deepest, closest).")


def group_findings(findings: list[Finding]) -> list[FindingGroup]:
    """Return findings with a cause grouped by (severity, code, cause), in first-seen order.

    The worst of a group is its finding with the smallest value (deepest penetration, smallest
    clearance or margin).
    """
    groups: dict[tuple[str, str, str], list[Finding]] = {}
    for finding in findings:
        if finding.cause is not None:
            groups.setdefault((finding.severity, finding.code, finding.cause), []).append(finding)
    return [
        FindingGroup(
            severity=members[0].severity,
            code=code,
            cause=cause,
            count=len(members),
            worst=min(members, key=lambda f: math.inf if f.value is None else f.value),
        )
        for (_, code, cause), members in groups.items()
    ]


class TargetCheckReport(_Result):
    """Target check of a whole cell."""

    cell: str = Field(description="Cell title.")
    robot: str
    tool: str
    joint_names: list[str]
    joint_units: list[str]
    thresholds: QualityThresholds
    score_rule: str
    targets: list[TargetCheck]
    external_axis_names: list[str] = Field(
        default_factory=list, description="Track and turntables after the robot's joints."
    )
    external_axis_units: list[str] = Field(default_factory=list)
    consistent_branch: ConsistentBranch
    findings: list[Finding] = Field(description="Errors first, then warnings, then info.")
    finding_groups: list[FindingGroup] = Field(
        default=[], description="Findings of one cause (object pair, joint) counted, worst first."
    )
    reachable_count: int
    error_count: int
    warning_count: int
    info_count: int
    robot_geometry_missing: str | None = Field(
        default=None,
        description="Set (a warning text) when the robot has no collision geometry: every "
        "clearance in this result is then meaningless.",
    )


class PoseFrame(_Result):
    """A tool pose in one frame."""

    position_mm: list[float]
    rpy_deg: list[float] = Field(description=_RPY)
    quaternion_wxyz: list[float] = Field(description="[w, x, y, z], w >= 0.")


class NearTarget(_Result):
    """How close a pose is to a target or approach pose of the cell."""

    name: str
    pose: PoseKind
    distance_mm: float = Field(description="TCP position distance.")
    angle_deg: float = Field(description="Rotation angle between the two orientations.")


class PoseDiagnosis(_Result):
    """Diagnosis of one joint configuration in the cell."""

    robot: str
    tool: str
    joint_names: list[str]
    joint_units: list[str]
    joints_deg: list[float] = Field(description=_JOINTS)
    tcp_world: PoseFrame
    tcp_base: PoseFrame
    branch: str
    shoulder: int
    elbow: int
    wrist: int
    within_limits: bool
    margins: list[JointMargin]
    min_margin_joint: str | None
    min_margin_fraction: float | None
    manipulability: float = Field(
        description=_MANIPULABILITY + " The same as position_manipulability, kept for readers."
    )
    position_manipulability: float = Field(default=0.0, description=_MANIPULABILITY)
    full_manipulability: float | None = Field(default=None, description=_FULL_MANIPULABILITY)
    singularity: SingularityProximity | None
    clearance_mm: float | None
    environment_clearance_mm: float | None = Field(
        default=None, description="Clearance to the cell (closest_environment)."
    )
    self_clearance_mm: float | None = Field(
        default=None, description="Clearance between the arm's own parts (closest_self)."
    )
    collision_free: bool
    closest: ClosestPair | None = Field(description="Closest pair overall (cell or self).")
    closest_environment: ClosestPair | None
    closest_self: ClosestPair | None
    closest_objects: list[ObjectDistance] = Field(description="Nearest obstacles, nearest first.")
    nearest_targets: list[NearTarget] = Field(description="Nearest target poses, nearest first.")
    branches: list[BranchReport] = Field(
        description="Every IK solution of this TCP pose (all revolutions within limits)."
    )
    input_branch: int | None = Field(
        description="Index into branches of the solution equal to the input joints."
    )
    findings: list[Finding]
    robot_geometry_missing: str | None = Field(
        default=None,
        description="Set (a warning text) when the robot has no collision geometry: every "
        "clearance in this result is then meaningless.",
    )
    external_axes: dict[str, float] = Field(
        default_factory=dict, description="External axis values (mm track, deg table)."
    )
    external_margins: list[JointMargin] = Field(
        default_factory=list, description="Limit margins of the external axes."
    )


class RowValue(_Result):
    """One row of a log picked for a reason."""

    row: int = Field(description="0-based data row.")
    line: int = Field(description="Line in the file (the header is line 1).")
    time_s: float | None
    value: float
    unit: str
    detail: str


class JointExtreme(_Result):
    """The row where one joint comes closest to a limit."""

    joint: str
    unit: str
    row: int
    line: int
    time_s: float | None
    value: float
    margin: float
    margin_fraction: float
    nearer_limit: Literal["lower", "upper"]


class RowStretch(_Result):
    """Consecutive rows sharing a condition (e.g. near the wrist singularity)."""

    condition: str = Field(
        description="collision, low clearance, outside limits, low limit margin, near wrist "
        "singularity, near elbow singularity, near shoulder singularity"
    )
    first_row: int
    last_row: int
    first_line: int
    last_line: int
    start_time_s: float | None
    end_time_s: float | None
    extreme_row: int = Field(description="The row where the condition is strongest.")
    extreme_value: float
    unit: str
    detail: str


class BranchChange(_Result):
    """A change of arm branch between consecutive rows."""

    row: int = Field(description="The row after the change.")
    line: int
    time_s: float | None
    part: Literal["shoulder", "elbow", "wrist"]
    before: str
    after: str


class VelocityJump(_Result):
    """A joint change between consecutive rows faster than the joint's velocity limit."""

    row: int = Field(description="The second row of the pair.")
    line: int
    time_from_s: float
    time_to_s: float
    joint: str
    unit: str
    change: float = Field(description="Joint change between the rows, deg or mm.")
    speed: float = Field(description="Change over time, deg/s or mm/s.")
    limit: float = Field(description="Velocity limit, deg/s or mm/s.")
    ratio: float = Field(description="speed / limit")


class VelocityCheck(_Result):
    """The velocity check of a log (needs a time_s column)."""

    checked: bool
    reason: str = Field(description="Why the check was skipped; empty when it ran.")
    jump_count: int
    jumps: list[VelocityJump] = Field(description=f"At most {MAX_LISTED_EVENTS}, by row.")


class WorstRow(_Result):
    """The single row a user should look at first."""

    row: int
    line: int
    time_s: float | None
    rule: str = Field(description="How the worst row is chosen.")
    reason: str = Field(description="Why this row.")
    diagnosis: PoseDiagnosis


class LogRows(_Result):
    """Per-row values of a log, one list per quantity (for plots)."""

    line: list[int]
    time_s: list[float] | None
    tcp_position_mm: list[list[float]] = Field(description="TCP position in the world.")
    branch: list[str] = Field(description="Shoulder, elbow, wrist words.")
    margins: list[list[float | None]] = Field(description="Per row, per joint margin (unit).")
    min_margin_fraction: list[float | None]
    manipulability: list[float]
    singularity: list[str] | None
    wrist_bend_deg: list[float] | None
    elbow_deg: list[float] | None
    shoulder_mm: list[float] | None
    clearance_mm: list[float | None]
    closest: list[str] = Field(description="Closest pair as 'capsule – other'.")
    environment_clearance_mm: list[float | None] = Field(
        default=[], description="Per row, clearance to the cell."
    )
    self_clearance_mm: list[float | None] = Field(
        default=[], description="Per row, clearance between the arm's own parts."
    )
    external: list[list[float]] = Field(
        default=[],
        description="Per row, the external axis values (mm for a track, deg for a turntable) "
        "in the order of external_names; empty without external axes.",
    )


class LogDiagnosis(_Result):
    """Diagnosis of a controller joint log in the cell."""

    source: str
    robot: str
    tool: str
    joint_names: list[str]
    joint_units: list[str]
    row_count: int
    duration_s: float | None
    thresholds: QualityThresholds
    smallest_margins: list[JointExtreme] = Field(
        description="Per joint with limits, its worst row."
    )
    min_clearance: RowValue | None
    min_manipulability: RowValue
    closest_singularity: RowValue | None = Field(
        description="Row with the smallest distance-to-threshold ratio over the three kinds."
    )
    stretches: list[RowStretch] = Field(description=f"At most {MAX_LISTED_EVENTS} per condition.")
    stretch_counts: dict[str, int]
    branch_change_count: int
    branch_changes: list[BranchChange] = Field(description=f"At most {MAX_LISTED_EVENTS}, by row.")
    velocity: VelocityCheck
    worst_row: WorstRow
    findings: list[Finding]
    robot_geometry_missing: str | None = Field(
        default=None,
        description="Set (a warning text) when the robot has no collision geometry: every "
        "clearance in this result is then meaningless.",
    )
    rows: LogRows | None = Field(description="Per-row values; null when not requested.")
    external_names: list[str] = Field(
        default=[], description="The cell's external axes (track, turntables), in order."
    )
    external_units: list[str] = Field(default=[], description="mm or deg per external axis.")
    external_logged: list[str] = Field(
        default=[],
        description="External axes the log has a column for; the others stay at "
        "external_defaults in every row.",
    )
    external_defaults: dict[str, float] = Field(
        default={},
        description="Value (mm, deg) of every external axis where the log has no column "
        "for it: the cell's value.",
    )

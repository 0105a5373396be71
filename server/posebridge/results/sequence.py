"""The fastest solution sequence's result (mm, deg): models, builder, text table.

:func:`sequence_result` turns :class:`~posebridge.planning.sequence_report.PathSequence`
(:func:`posebridge.planning.sequence_report.optimise_path`) into :class:`SequenceReport`:
both choices' joint values in mm/deg, the saving in words and the path edits as joint values;
:func:`render_sequence` is its plain-text table for the CLI.
"""

from __future__ import annotations

import math

import numpy as np
from pydantic import BaseModel, ConfigDict, Field

from posebridge.cell.scene import ResolvedPath, Scene
from posebridge.planning.path_sampling import waypoint_label
from posebridge.planning.sequence_report import PathSequence
from posebridge.planning.solution_sequence import (
    CANDIDATE_REASONS,
    SequenceChoice,
    SequenceResult,
    Violation,
)
from posebridge.results.text_table import number_text, table_lines
from posebridge.units import joints_user_from_si

__all__ = [
    "SEQUENCE_NOTE",
    "SequenceCandidatesReport",
    "SequenceChoiceReport",
    "SequenceReport",
    "SequenceViolation",
    "SequenceWaypointReport",
    "WaypointJoints",
    "render_sequence",
    "sequence_result",
]


class _Report(BaseModel):
    model_config = ConfigDict(extra="forbid", allow_inf_nan=False)


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


# --- builder from the SI search -----------------------------------------------------------

SEQUENCE_NOTE = (
    "fastest sequence: one IK solution per waypoint (branches x revolutions) chosen for the "
    "shortest rest-to-rest cycle time by dynamic programming over the layered graph of "
    "solutions (exact; Bellman 1957, Cormen et al. sec. 24.2), subject to the joint-limit "
    "margin, the targets' required branches, no branch change or jump inside a linear move, "
    "and no collision at the path check's sampling"
)

_REASON_WORDS = {
    "outside_limits": "outside the joint limits",
    "limit_margin": "closer to a joint limit than the margin",
    "branch": "not on the target's required branch",
    "collision": "in collision",
    "unreached": "not reached",
    "branch_change": "changes branch inside the linear move",
    "configuration_jump": "jumps (singularity crossing) inside the linear move",
    "arrival_excluded": "arrives on an excluded configuration",
    "joint_speed": "slowed below the requested speed by the joint velocity limits",
}


def _violation(scene: Scene, path: ResolvedPath, violation: Violation) -> SequenceViolation:
    words = _REASON_WORDS.get(violation.reason, violation.reason)
    if violation.waypoint >= 0:
        where = f"waypoint {waypoint_label(scene, path, violation.waypoint)}"
    else:
        k = violation.segment
        where = (
            f"segment {k + 1} ({waypoint_label(scene, path, k)} to "
            f"{waypoint_label(scene, path, k + 1)})"
        )
    return SequenceViolation(
        reason=violation.reason,
        waypoint_index=violation.waypoint if violation.waypoint >= 0 else None,
        segment_index=violation.segment if violation.segment >= 0 else None,
        message=f"{where}: {words}",
    )


def _branch_words(labels: np.ndarray, finite: bool) -> str:
    if not finite:
        return ""
    words = (
        ("front", "back", "on axis 1"),
        ("up", "down", "in line"),
        ("positive", "negative", "straight"),
    )
    return ", ".join(words[i][0 if v > 0 else 1 if v < 0 else 2] for i, v in enumerate(labels))


def _optional(value: float) -> float | None:
    return value if math.isfinite(value) else None


def _choice(scene: Scene, path: ResolvedPath, choice: SequenceChoice) -> SequenceChoiceReport:
    prismatic = scene.robot.prismatic
    waypoints = []
    for w in range(choice.q.shape[0]):
        finite = bool(np.all(np.isfinite(choice.q[w])))
        waypoints.append(
            SequenceWaypointReport(
                index=w,
                name=waypoint_label(scene, path, w),
                joints_deg=joints_user_from_si(choice.q[w], prismatic).tolist() if finite else None,
                branch=_branch_words(choice.labels[w], finite),
                revolutions=[int(r) for r in choice.revolutions[w]],
            )
        )
    return SequenceChoiceReport(
        waypoints=waypoints,
        segment_durations_s=[_optional(float(d)) for d in choice.segment_durations],
        cycle_time_s=_optional(choice.total),
        same_branch_throughout=choice.same_branch_throughout,
        violations=[_violation(scene, path, v) for v in choice.violations],
    )


def _summary(scene: Scene, path: ResolvedPath, result: SequenceResult) -> str:
    """Return the result in words: how much faster, and whether the branch stays the same."""
    if not result.feasible or result.best is None:
        blocked = result.blocked_at
        where = waypoint_label(scene, path, blocked) if blocked >= 0 else "the path"
        return f"no sequence meets every constraint (blocked at {where})"
    branch = (
        "same branch throughout"
        if result.best.same_branch_throughout
        else "changes branch between joint moves"
    )
    if result.current.violations:
        count = len(result.current.violations)
        breaks = f"the current choice breaks {count} constraint{'s' if count != 1 else ''}"
        if math.isfinite(result.saving) and result.saving < 0.0:
            return f"{-result.saving:.2f} s slower but valid, {branch} ({breaks})"
        if math.isfinite(result.saving):
            return f"{result.saving:.2f} s faster and valid, {branch} ({breaks})"
        return f"valid in {result.best.total:.2f} s, {branch} ({breaks})"
    saving = result.saving
    if not math.isfinite(saving) or saving <= 1e-3:
        return f"the current choice is already the fastest ({result.best.total:.2f} s), {branch}"
    return f"{saving:.2f} s faster, {branch}"


def sequence_result(
    data: PathSequence,
    *,
    limit_margin_deg: float | None = None,
    limit_margin_mm: float | None = None,
    collision_threshold_mm: float = 0.0,
) -> SequenceReport:
    """Build the boundary model (mm, deg) of a path's fastest solution sequence.

    Parameters
    ----------
    data : PathSequence
        From :func:`posebridge.planning.sequence_report.optimise_path`.
    limit_margin_deg, limit_margin_mm, collision_threshold_mm : float, keyword-only
        The limits the search was given, as the user gave them (echoed unchanged); the cell's
        ``thresholds.limit_margin_deg`` (``_mm``) when omitted, as the search took them.

    Returns
    -------
    SequenceReport
    """
    scene = data.scene
    resolved = data.path
    result = data.result
    robot = scene.robot
    edits = (
        []
        if result.best is None
        else [
            WaypointJoints(
                index=w, joints_deg=joints_user_from_si(result.best.q[w], robot.prismatic).tolist()
            )
            for w in data.edits
        ]
    )
    candidates = [
        SequenceCandidatesReport(
            joints_deg=joints_user_from_si(layer.q, robot.prismatic).tolist(),
            excluded={
                reason: sum(1 for e in layer.excluded if e.reason == reason)
                for reason in CANDIDATE_REASONS
            },
        )
        for layer in result.candidates
    ]
    return SequenceReport(
        path=resolved.name,
        robot=robot.name,
        tool=scene.tool_name,
        joint_names=list(robot.joint_names),
        feasible=result.feasible,
        summary=_summary(scene, resolved, result),
        best=None if result.best is None else _choice(scene, resolved, result.best),
        current=_choice(scene, resolved, result.current),
        saving_s=_optional(result.saving),
        blocked_at=(
            waypoint_label(scene, resolved, result.blocked_at) if result.blocked_at >= 0 else None
        ),
        chosen_indices=[int(i) for i in result.indices],
        candidates=candidates,
        edits=edits,
        edges_checked=result.edges_checked,
        edges_total=result.edges_total,
        limit_margin_deg=float(
            scene.cell.thresholds.limit_margin_deg if limit_margin_deg is None else limit_margin_deg
        ),
        limit_margin_mm=float(
            scene.cell.thresholds.limit_margin_mm if limit_margin_mm is None else limit_margin_mm
        ),
        collision_threshold_mm=float(collision_threshold_mm),
        note=SEQUENCE_NOTE,
    )


# --- text -------------------------------------------------------------------------------------


def render_sequence(report: SequenceReport) -> str:
    """Plain-text summary and per-waypoint table of a solution-sequence search."""
    lines = [f"Path {report.path!r} ({report.robot}, tool {report.tool}): {report.summary}"]
    lines.append(
        f"Cycle time rest to rest: current {number_text(report.current.cycle_time_s, 2)} s, "
        f"fastest {number_text(report.best.cycle_time_s if report.best else None, 2)} s"
    )
    lines.append("")
    rows = []
    for w, current in enumerate(report.current.waypoints):
        best = report.best.waypoints[w] if report.best else None
        rows.append(
            [
                str(w),
                current.name,
                current.branch or "-",
                best.branch if best and best.branch else "-",
                " ".join(f"{v:.1f}" for v in best.joints_deg) if best and best.joints_deg else "-",
                "yes" if any(e.index == w for e in report.edits) else "",
            ]
        )
    lines += table_lines(
        ["wp", "waypoint", "current branch", "fastest branch", "fastest joints", "rewrite"], rows
    )
    violations = report.current.violations
    if violations:
        lines += ["", "The current choice breaks:"]
        lines += [f"  {v.message}" for v in violations]
    lines += ["", report.note]
    return "\n".join(lines)

"""The fastest solution sequence at the user boundary: mm/deg report, saving in words, path edits.

:func:`optimise_path` runs :func:`posebridge.planning.solution_sequence.optimise_sequence`
(exact shortest path over the layered candidate graph, dynamic programming;
method and references there) with limits given in millimetres and degrees, and
turns the result into a :class:`~posebridge.results.planning.SequenceReport`
for the command line, the HTTP API and the page.

**Edits that make the path follow the sequence.** The path check chooses each
waypoint's configuration itself (:func:`posebridge.planning.path_sampling.sample_path`:
a joint-move waypoint nearest the previous one on its required branch, a
linear-move waypoint where the line arrives). To make it choose the optimiser's
sequence, waypoints are given as joint values, as few as possible: in path
order, the first waypoint whose configuration differs from the sequence's
(more than :data:`MATCH_TOLERANCE_RAD` on a joint) gets the sequence's joint
values, the path is sampled again with that change, and so on until every
waypoint matches. Waypoints already on the sequence keep their target or pose
(and move with it). A waypoint given as joint values no longer follows its
target when the target moves: that is the price of naming the configuration
exactly (the revolutions of a wide-range joint cannot be said in branch words).
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np

from posebridge.cell.model import Cell, validate_cell
from posebridge.cell.scene import ResolvedPath, Scene
from posebridge.planning.errors import PlanningInputError
from posebridge.planning.path_sampling import path_of, sample_path, waypoint_label
from posebridge.planning.solution_sequence import (
    CANDIDATE_REASONS,
    SequenceChoice,
    SequenceLimits,
    SequenceResult,
    Violation,
    optimise_sequence,
)
from posebridge.results.planning import (
    SequenceCandidatesReport,
    SequenceChoiceReport,
    SequenceReport,
    SequenceViolation,
    SequenceWaypointReport,
    WaypointJoints,
)
from posebridge.units import (
    FloatArray,
    joints_user_from_si,
    m_from_mm,
    rad_from_deg,
)

__all__ = [
    "MATCH_TOLERANCE_RAD",
    "SEQUENCE_NOTE",
    "optimise_path",
    "sequence_edits",
    "with_waypoint_joints",
]

MATCH_TOLERANCE_RAD = 1e-6
"""Largest joint difference (rad, or m for prismatic joints) at which two configurations match."""
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


def _matches(a: FloatArray, b: FloatArray) -> bool:
    return bool(np.all(np.isfinite(a)) and np.max(np.abs(a - b)) <= MATCH_TOLERANCE_RAD)


def sequence_edits(
    scene: Scene, path: int | ResolvedPath, q_best: FloatArray, **sampling: float
) -> list[int]:
    """Return the fewest waypoints to give as joint values so the path check follows ``q_best``.

    Method in the module docstring (greedy in path order, re-sampling after each edit).

    Parameters
    ----------
    scene : Scene
    path : int or ResolvedPath
    q_best : array, shape (W, n)
        rad or m, one configuration per waypoint.
    **sampling : float
        ``resolution_mm``, ``resolution_deg``, ``jump_deg``, ``jump_mm`` of
        :func:`~posebridge.planning.path_sampling.sample_path`.

    Returns
    -------
    list of int
        Waypoint indices, increasing.
    """
    resolved = path_of(scene, path)
    W = len(resolved.sources)
    edits: list[int] = []
    current = resolved
    for _ in range(W):
        q = sample_path(scene, current, **sampling).waypoint_q
        differing = [w for w in range(W) if not _matches(q[w], q_best[w])]
        if not differing:
            break
        w = differing[0]
        edits.append(w)
        sources = list(current.sources)
        sources[w] = "joints"
        given_q = current.q.copy()
        given_q[w] = q_best[w]
        given = current.joints_given.copy()
        given[w] = True
        target_index = current.target_index.copy()
        target_index[w] = -1
        current = replace(
            current,
            sources=tuple(sources),
            q=given_q,
            joints_given=given,
            target_index=target_index,
        )
    return edits


def optimise_path(
    scene: Scene,
    path: int,
    *,
    limit_margin_deg: float | None = None,
    limit_margin_mm: float | None = None,
    collision_threshold_mm: float = 0.0,
    resolution_mm: float = 5.0,
    resolution_deg: float = 1.0,
) -> SequenceReport:
    """Return the fastest consistent solution sequence of a cell path, as a JSON-ready report.

    Parameters
    ----------
    scene : Scene
    path : int
        Index into ``scene.paths``.
    limit_margin_deg, limit_margin_mm : float, keyword-only
        Smallest joint-limit margin every configuration keeps (revolute, prismatic);
        the cell's ``thresholds.limit_margin_deg`` (``_mm``) when omitted.
    collision_threshold_mm : float, keyword-only
        Clearance below which a configuration collides (0: contact).
    resolution_mm, resolution_deg : float, keyword-only
        Sampling of moves, as the path check samples.

    Returns
    -------
    SequenceReport
        Method in :mod:`posebridge.planning.solution_sequence`; edits in the module docstring.

    Raises
    ------
    PlanningInputError
        Bad path index, limits or speeds.
    """
    resolved = path_of(scene, path)
    thresholds = scene.cell.thresholds
    if limit_margin_deg is None:
        limit_margin_deg = thresholds.limit_margin_deg
    if limit_margin_mm is None:
        limit_margin_mm = thresholds.limit_margin_mm
    limits = SequenceLimits(
        limit_margin_rad=float(rad_from_deg(limit_margin_deg)),
        limit_margin_m=float(m_from_mm(limit_margin_mm)),
        collision_threshold_m=float(m_from_mm(collision_threshold_mm)),
        resolution_m=float(m_from_mm(resolution_mm)),
        resolution_rad=float(rad_from_deg(resolution_deg)),
    )
    result = optimise_sequence(scene, resolved, limits=limits)
    robot = scene.robot
    edits: list[WaypointJoints] = []
    if result.best is not None:
        indices = sequence_edits(
            scene,
            resolved,
            result.best.q,
            resolution_mm=resolution_mm,
            resolution_deg=resolution_deg,
        )
        edits = [
            WaypointJoints(
                index=w, joints_deg=joints_user_from_si(result.best.q[w], robot.prismatic).tolist()
            )
            for w in indices
        ]
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
        limit_margin_deg=float(limit_margin_deg),
        limit_margin_mm=float(limit_margin_mm),
        collision_threshold_mm=float(collision_threshold_mm),
        note=SEQUENCE_NOTE,
    )


def with_waypoint_joints(cell: Cell, path: int, edits: list[WaypointJoints]) -> Cell:
    """Return a copy of ``cell`` whose path ``path`` gives the edited waypoints as joint values.

    Motion, speed and blend radius of each waypoint stay; its target or pose is
    replaced by ``joints_deg`` (the cell file's units: degrees, mm for prismatic joints).

    Raises
    ------
    PlanningInputError
        An index outside the path, or joint values of the wrong length.
    """
    if not 0 <= path < len(cell.paths):
        raise PlanningInputError(f"path: expected an index in 0..{len(cell.paths) - 1}, got {path}")
    waypoints = list(cell.paths[path].waypoints)
    for edit in edits:
        if not 0 <= edit.index < len(waypoints):
            raise PlanningInputError(
                f"edits: waypoint {edit.index} is not in path {cell.paths[path].name!r} "
                f"(it has {len(waypoints)}, numbered from 0)"
            )
        waypoints[edit.index] = waypoints[edit.index].model_copy(
            update={
                "target": None,
                "approach": False,
                "pose": None,
                "joints_deg": list(edit.joints_deg),
            }
        )
    paths = list(cell.paths)
    paths[path] = paths[path].model_copy(update={"waypoints": waypoints})
    return validate_cell(cell.model_copy(update={"paths": paths}).model_dump(mode="json"))

"""The target check: can the robot reach every target of the cell, on which branch, how well.

:func:`check_targets` solves inverse kinematics for every target and every
approach pose (targets with an approach offset) with all revolution variants
(:func:`posebridge.kinematics.ik.solve_ik_all`), evaluates every solution in
one batch (:func:`posebridge.cell.quality.evaluate_configurations`: limit
margins, manipulability, singularity, clearance) and decides per pose:

* **usable** solution: within the joint limits, collision-free (clearance to
  the cell and to the arm itself >= 0) and on the target's required branch;
* **reachable**: a usable solution exists; otherwise the reason, checked in
  this order: out of reach / orientation not reachable (from IK), outside
  joint limits on every branch, required branch unavailable (no in-limit
  solution on it), every in-limit branch collides;
* **recommended** solution: the usable one with the highest
  :func:`~posebridge.cell.quality.branch_score` (rule in
  :data:`~posebridge.cell.quality.SCORE_RULE`), preferring, for a target, the
  shoulder/elbow/wrist branches on which its approach pose is usable too, and
  among those the cell's common branch (below) when the target is usable on it,
  so the recommended and the common branch never contradict each other; the
  approach pose's recommendation is then taken on the target's branch when
  it can be (a straight approach move cannot change branch). Each
  recommendation says why in words (``recommended_reason``): the score term
  that sets it apart from the next-best branch ("largest smallest limit margin,
  23.0 deg on j5"), and whether it is the common branch ("same branch as 5 of 6
  targets");
* **off its fixture**: a target whose TCP point is farther than
  ``fixture_distance_mm`` from the solid of its fixture
  (:func:`~posebridge.cell.target_fixture.target_fixture_distances`) gets a
  warning: it still moves with the fixture, but was probably dragged away from it.

Branches are compared by their shoulder/elbow/wrist labels; a label 0 (exactly
singular) is compatible with either sign. The **consistent branch** analysis
asks, for each of the robot's branches (eight for six- and seven-axis arms,
two for planar arms, one otherwise), which targets are usable on it with
their approach poses; the cell is consistent when one branch covers all.

With external axes (track, turntables) every target is checked at the values
of :func:`~posebridge.cell.external_kinematics.choose_external_value` (pinned
ones kept), and its report gives those values and the feasible intervals.

:func:`check_targets` returns a :class:`TargetCheckData` in SI units;
:func:`posebridge.results.target_check.target_check_result` turns it into the
boundary model (mm, deg) with its findings: errors (a target or approach pose
not reachable, a joint outside its limits, a collision), warnings (limit margin,
clearance, singularity below the thresholds of
:class:`~posebridge.cell.thresholds.QualityThresholds` on the recommended
solution and on the cell's common branch; an approach pose off the target's
branch; a target off its fixture; no consistent branch) and info (a target
reachable on one shoulder/elbow pair only; the consistent branch).
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from itertools import product
from typing import Literal

import numpy as np

from posebridge.arrays import Int16Array
from posebridge.cell.external_kinematics import ExternalChoice, choose_external_value
from posebridge.cell.model import Branch
from posebridge.cell.quality import (
    ConfigurationQuality,
    branch_score,
    branch_score_terms,
    evaluate_configurations,
    full_branch_words,
)
from posebridge.cell.scene import Scene, TargetSet, posed_scene
from posebridge.cell.target_fixture import target_fixture_distances
from posebridge.cell.thresholds import QualityThresholds
from posebridge.kinematics.branches import BRANCH_LABELS, branch_geometry, labels_match
from posebridge.kinematics.ik import solve_ik_all
from posebridge.kinematics.ik.solutions import REASON_NO_WITHIN_LIMITS
from posebridge.transforms import invert_transform
from posebridge.units import BoolArray, FloatArray, joint_value_text, length_text

__all__ = [
    "REASON_ALL_COLLIDE",
    "REASON_REQUIRED_BRANCH",
    "BranchCover",
    "CheckedPose",
    "CheckedTarget",
    "GroupCheck",
    "TargetCheckData",
    "branch_triple",
    "check_targets",
    "required_branch_words",
    "robot_branches",
]

REASON_REQUIRED_BRANCH = "required branch unavailable"
REASON_ALL_COLLIDE = "every in-limit branch collides"

Triple = tuple[int, int, int]
PoseKind = Literal["target", "approach"]


def required_branch_words(branch: Branch | None) -> str | None:
    """Return the required branch in words, e.g. ``"front, up"`` (None when any branch will do)."""
    if branch is None:
        return None
    words = [w for w in (branch.shoulder, branch.elbow, branch.wrist) if w is not None]
    return ", ".join(words) if words else None


def _compatible(a: Triple, b: Triple) -> bool:
    """Tell whether two branch triples match, a 0 label (exactly singular) matching either sign."""
    return all(x == y or x == 0 or y == 0 for x, y in zip(a, b, strict=True))


def robot_branches(scheme: str) -> list[Triple]:
    """Every branch of a label scheme, in the stable order (front, up, positive first)."""
    if scheme == "arm":
        return [(s, e, w) for s, e, w in product((1, -1), repeat=3)]
    if scheme == "planar":
        return [(0, 1, 0), (0, -1, 0)]
    return [(0, 0, 0)]


def branch_triple(quality: ConfigurationQuality, k: int) -> Triple:
    """Return the shoulder, elbow and wrist labels of configuration ``k``."""
    return (int(quality.shoulder[k]), int(quality.elbow[k]), int(quality.wrist[k]))


@dataclass(frozen=True, eq=False)
class CheckedPose:
    """One checked pose (a target or its approach pose), its IK solutions and the decision.

    Attributes
    ----------
    kind : "target" or "approach"
    target : int
        Index of the target in the checked scene.
    number : int
        Index of the pose in the IK batch (row of :attr:`GroupCheck.T_world`).
    slots : list of int
        Indices into the evaluated batch of its valid IK solutions, in IK order.
    reason : str
        Why it is not reachable (module docstring); empty when it is.
    recommended : int or None
        The recommended solution (index into the batch); None when not reachable.
    fallback : int or None
        For a pose not reachable: its best in-limit solution on the required branch, if any.
    recommended_reason : str
        Why the recommended solution was chosen, in words; empty when there is none.
    """

    kind: PoseKind
    target: int
    number: int
    slots: list[int]
    reason: str
    recommended: int | None
    fallback: int | None
    recommended_reason: str


@dataclass(frozen=True, eq=False)
class CheckedTarget:
    """The check of one target and its approach pose.

    Attributes
    ----------
    target : CheckedPose
    approach : CheckedPose or None
        None for a target without approach offset.
    usable_triples : list of tuple of int
        Branches (shoulder, elbow, wrist labels) on which the target and its approach pose
        are both usable.
    approach_off_branch : bool
        The approach pose is usable only off the target's recommended branch.
    fixture_distance_m : float
        Distance of the TCP point from its fixture's solid; NaN without one.
    """

    target: CheckedPose
    approach: CheckedPose | None
    usable_triples: list[Triple]
    approach_off_branch: bool
    fixture_distance_m: float


@dataclass(frozen=True)
class BranchCover:
    """Which targets one branch reaches clear (with their approach poses).

    Attributes
    ----------
    triple : tuple of int
        Shoulder, elbow and wrist labels.
    targets_clear, targets_breaking : list of str
        Target names usable on it, and the others.
    """

    triple: Triple
    targets_clear: list[str]
    targets_breaking: list[str]


@dataclass(frozen=True, eq=False)
class GroupCheck:
    """The target check of one scene (all its targets checked together), SI units.

    Attributes
    ----------
    scene : Scene
        The checked scene (posed at the group's external axis values).
    scheme : str
        The robot's branch label scheme.
    T_world : array, shape (P, 4, 4)
        Every checked pose in the world, m.
    quality : ConfigurationQuality
        Of every valid IK solution of every pose (S solutions).
    slot_revolutions : array of int, shape (S, n)
        Extra whole revolutions of each solution.
    matches : array of bool, shape (S,)
        On its target's required branch.
    usable : array of bool, shape (S,)
        Within limits, collision-free and on the required branch.
    score : array, shape (S,)
        :func:`~posebridge.cell.quality.branch_score`.
    targets : list of CheckedTarget
        In the scene's target order.
    coverage : list of BranchCover
        Every branch of the robot, most targets clear first.
    """

    scene: Scene
    scheme: str
    T_world: FloatArray
    quality: ConfigurationQuality
    slot_revolutions: Int16Array
    matches: BoolArray
    usable: BoolArray
    score: FloatArray
    targets: list[CheckedTarget]
    coverage: list[BranchCover]


@dataclass(frozen=True, eq=False)
class TargetCheckData:
    """The target check of a cell (module docstring), SI units.

    Attributes
    ----------
    scene : Scene
    thresholds : QualityThresholds
        The thresholds used.
    groups : list of GroupCheck
        One group of every target without external axes; with them, one per set of
        external values, each of the targets checked there.
    members : list of list of int
        Index in the scene of each group's targets.
    choices : list of ExternalChoice
        The external values chosen per target; empty without external axes.
    coverage : list of BranchCover
        Every branch of the robot over all targets, most targets clear first.
    """

    scene: Scene
    thresholds: QualityThresholds
    groups: list[GroupCheck]
    members: list[list[int]]
    choices: list[ExternalChoice]
    coverage: list[BranchCover]


@dataclass(frozen=True, eq=False)
class _Pose:
    """One pose of the IK batch before the decision (fields as in :class:`CheckedPose`)."""

    kind: PoseKind
    target: int
    number: int
    slots: list[int]
    reason_ik: str


def _sorted_coverage(
    scheme: str, names: tuple[str, ...], covered: dict[Triple, list[bool]]
) -> list[BranchCover]:
    """Coverage rows of every branch of ``scheme``, most targets clear first (stable).

    ``covered[triple][i]`` tells that target ``i`` is usable on the branch ``triple``.
    """
    rows = [
        BranchCover(
            triple=triple,
            targets_clear=[n for n, c in zip(names, covered[triple], strict=True) if c],
            targets_breaking=[n for n, c in zip(names, covered[triple], strict=True) if not c],
        )
        for triple in robot_branches(scheme)
    ]
    rows.sort(key=lambda row: -len(row.targets_clear))
    return rows


class _Checker:
    """The target check of one scene (module docstring); :meth:`run` returns its SI result."""

    def __init__(self, scene: Scene, thresholds: QualityThresholds) -> None:
        self.scene = scene
        self.thresholds = thresholds
        self.robot = scene.robot
        self.scheme = branch_geometry(scene.robot).scheme
        targets = scene.targets
        entries: list[tuple[PoseKind, int]] = []
        for i in range(len(targets.names)):
            entries.append(("target", i))
            if targets.approach_offset[i] > 0.0:
                entries.append(("approach", i))
        self.T_world = np.array(
            [
                (targets.T_world_target if kind == "target" else targets.T_world_approach)[i]
                for kind, i in entries
            ]
        ).reshape(-1, 4, 4)
        solutions = solve_ik_all(
            self.robot,
            invert_transform(scene.T_world_base) @ self.T_world,
            T_flange_tool=scene.T_flange_tool,
            all_revolutions=True,
        )
        pose_index, slot_index = np.nonzero(solutions.valid)  # row-major: grouped by pose
        self.slot_revolutions = solutions.revolutions[pose_index, slot_index]
        # the solution slots of each pose, from the group boundaries (one pass, not one per pose)
        starts = np.searchsorted(pose_index, np.arange(len(entries) + 1))
        self.poses = [
            _Pose(kind, i, p, list(range(starts[p], starts[p + 1])), solutions.reason[p])
            for p, (kind, i) in enumerate(entries)
        ]
        self.quality = evaluate_configurations(
            scene, solutions.q[pose_index, slot_index].reshape(-1, self.robot.dof), thresholds
        )
        self.score = branch_score(self.quality)
        self.score_terms = branch_score_terms(self.quality)
        self._labels = np.stack(
            [self.quality.shoulder, self.quality.elbow, self.quality.wrist], axis=1
        )
        self._branch_masks: dict[Triple, BoolArray] = {}
        self._any_masks: dict[tuple[Triple, ...], BoolArray] = {}
        self.matches = self._matches(pose_index)
        self.usable = self.quality.within_limits & self.quality.collision_free & self.matches

    def _matches(self, pose_index: np.ndarray) -> BoolArray:
        """Tell whether each solution is on its target's required branch, shape (S,).

        The required sign of each part per pose (0: any), spread to the solutions at once.
        """
        quality = self.quality
        labels = {"shoulder": quality.shoulder, "elbow": quality.elbow, "wrist": quality.wrist}
        matches = np.ones(quality.count, dtype=bool)
        for part, words in BRANCH_LABELS.items():
            wanted = np.zeros(len(self.poses), dtype=np.int8)
            for p, pose in enumerate(self.poses):
                required = self.scene.targets.branches[pose.target]
                word = None if required is None else getattr(required, part)
                if word is not None:
                    wanted[p] = words[word]
            per_solution = wanted[pose_index]
            if self.scheme != "arm":
                matches &= per_solution == 0
            else:
                matches &= (per_solution == 0) | (labels[part] == per_solution)
        return matches

    # --- one pose --------------------------------------------------------------------

    def _reason(self, pose: _Pose) -> str:
        slots = np.asarray(pose.slots, dtype=np.int64)
        if slots.size == 0:
            return pose.reason_ik
        within = self.quality.within_limits[slots]
        if not np.any(within):
            return REASON_NO_WITHIN_LIMITS
        if not np.any(within & self.matches[slots]):
            return REASON_REQUIRED_BRANCH
        if not np.any(self.usable[slots]):
            return REASON_ALL_COLLIDE
        return ""

    def _best(self, slots: list[int], keep: BoolArray | None = None) -> int | None:
        """Highest-scored slot among ``slots`` (where ``keep``), first of ties; None if empty."""
        candidates = [k for k in slots if keep is None or keep[k]]
        if not candidates:
            return None
        scores = self.score[candidates]
        return candidates[int(np.argmax(scores))]

    def _usable_triples(self, pose: _Pose) -> list[Triple]:
        return list(
            dict.fromkeys(branch_triple(self.quality, k) for k in pose.slots if self.usable[k])
        )

    def _checked(self, pose: _Pose, recommended: int | None, reason: str) -> CheckedPose:
        """Decide about ``pose``: its recommended solution and why, or why there is none."""
        fallback = None
        if recommended is None:
            fallback = self._best(pose.slots, self.quality.within_limits & self.matches)
        return CheckedPose(
            kind=pose.kind,
            target=pose.target,
            number=pose.number,
            slots=pose.slots,
            reason=self._reason(pose),
            recommended=recommended,
            fallback=fallback,
            recommended_reason=reason,
        )

    # --- the whole check ----------------------------------------------------------------

    def _on_branch(self, triple: Triple) -> BoolArray:
        """Return the solutions compatible with ``triple``, shape (S,); computed once per triple.

        A 0 label matches either sign.
        """
        mask = self._branch_masks.get(triple)
        if mask is None:
            mask = labels_match(self._labels, triple)
            self._branch_masks[triple] = mask
        return mask

    def _on_any(self, triples: list[Triple]) -> BoolArray:
        """Solutions compatible with any of ``triples``, shape (S,); once per set of triples."""
        key = tuple(triples)
        mask = self._any_masks.get(key)
        if mask is None:
            mask = np.zeros(self.quality.count, dtype=bool)
            for triple in triples:
                mask |= self._on_branch(triple)
            self._any_masks[key] = mask
        return mask

    def _choose(
        self, target: _Pose, approach: _Pose | None, triples: list[Triple], common: Triple | None
    ) -> tuple[int | None, int | None, bool]:
        """Recommended target and approach solutions (module docstring).

        The third value tells that the approach pose is usable only off the target's branch.
        """
        on_common = [t for t in triples if common is not None and _compatible(t, common)]
        triples = on_common or triples
        keep = self.usable & self._on_any(triples) if triples else self.usable
        best_target = self._best(target.slots, keep)
        if approach is None:
            return best_target, None, False
        if best_target is None:
            return None, self._best(approach.slots, self.usable), False
        own = branch_triple(self.quality, best_target)
        best_approach = self._best(approach.slots, self.usable & self._on_branch(own))
        if best_approach is None:
            best_approach = self._best(approach.slots, self.usable)
            return best_target, best_approach, best_approach is not None
        return best_target, best_approach, False

    def _term_words(self, k: int, term: int) -> str:
        """Describe the score term ``term`` (0 margin, 1 clearance, 2 singularity) of solution ``k``."""
        quality = self.quality
        if term == 0:
            joint = int(quality.margins.min_joint[k])
            margin = float(quality.margins.min_margin[k])
            value = joint_value_text(margin, bool(self.robot.prismatic[joint]))
            return f"largest smallest limit margin, {value} on {self.robot.joint_names[joint]}"
        if term == 1:
            return f"largest clearance, {length_text(float(quality.clearance[k]), 0)}"
        ratio = quality.singularity_ratio()
        if ratio is None:
            return "farthest from a singularity"
        return f"farthest from a singularity, {float(ratio[k]):.1f} times the warning distance"

    def _words(self, k: int) -> str:
        return full_branch_words(self.quality, k, self.slot_revolutions[k])

    def _why(
        self, pose: _Pose, best: int | None, anchor: Triple | None, on_text: str, off_text: str
    ) -> str:
        """Why ``best`` is recommended for ``pose``, in words (module docstring).

        ``anchor`` is the branch the pose should share (the cell's common branch for a
        target, the target's branch for its approach pose); ``on_text``/``off_text`` say
        whether it does.
        """
        if best is None:
            return ""
        own = branch_triple(self.quality, best)
        others = [
            k
            for k in pose.slots
            if self.usable[k] and not _compatible(branch_triple(self.quality, k), own)
        ]
        if not others:
            parts = ["the only usable branch"]
        else:
            runner = max(others, key=lambda k: float(self.score[k]))
            gain = self.score_terms[best] - self.score_terms[runner]
            if self.score[runner] > self.score[best]:
                parts = [
                    f"{self._words(runner)} scores higher ({float(self.score[runner]):.2f} against "
                    f"{float(self.score[best]):.2f}) but keeping one branch comes first"
                ]
            elif float(gain.max()) <= 0.0:
                parts = [f"ties with {self._words(runner)} on every score term; first in IK order"]
            else:
                parts = [self._term_words(best, int(np.argmax(gain)))]
        if anchor is not None:
            parts.append(on_text if _compatible(own, anchor) else off_text)
        return "; ".join(parts)

    def run(self) -> GroupCheck:
        scene = self.scene
        names = scene.targets.names
        by_target: dict[int, dict[str, _Pose]] = {}
        for pose in self.poses:
            by_target.setdefault(pose.target, {})[pose.kind] = pose
        usable_triples: dict[int, list[Triple]] = {}
        for i in range(len(names)):
            triples = self._usable_triples(by_target[i]["target"])
            approach = by_target[i].get("approach")
            if approach is not None:
                reached = self._usable_triples(approach)
                triples = [t for t in triples if any(_compatible(t, a) for a in reached)]
            usable_triples[i] = triples
        covered = {
            triple: [
                any(_compatible(triple, t) for t in usable_triples[i]) for i in range(len(names))
            ]
            for triple in robot_branches(self.scheme)
        }
        coverage = _sorted_coverage(self.scheme, names, covered)
        common = next(
            (row.triple for row in coverage[:1] if row.targets_clear),
            None,
        )
        common_text = (
            ""
            if not coverage
            else f"same branch as {len(coverage[0].targets_clear)} of {len(names)} targets"
        )
        fixture_distances = target_fixture_distances(scene)
        checked: list[CheckedTarget] = []
        for i in range(len(names)):
            target = by_target[i]["target"]
            approach = by_target[i].get("approach")
            best_target, best_approach, off_branch = self._choose(
                target, approach, usable_triples[i], common
            )
            checked.append(
                CheckedTarget(
                    target=self._checked(
                        target,
                        best_target,
                        self._why(
                            target,
                            best_target,
                            common,
                            common_text,
                            "the cell's common branch is not usable here",
                        ),
                    ),
                    approach=None
                    if approach is None
                    else self._checked(
                        approach,
                        best_approach,
                        self._why(
                            approach,
                            best_approach,
                            None
                            if best_target is None
                            else branch_triple(self.quality, best_target),
                            "the target's branch (a straight approach move keeps it)",
                            "not the target's branch",
                        ),
                    ),
                    usable_triples=usable_triples[i],
                    approach_off_branch=off_branch,
                    fixture_distance_m=float(fixture_distances[i]),
                )
            )
        return GroupCheck(
            scene=scene,
            scheme=self.scheme,
            T_world=self.T_world,
            quality=self.quality,
            slot_revolutions=self.slot_revolutions,
            matches=self.matches,
            usable=self.usable,
            score=self.score,
            targets=checked,
            coverage=coverage,
        )


def check_targets(scene: Scene, thresholds: QualityThresholds | None = None) -> TargetCheckData:
    """Check every target (and approach pose) of a cell: reach, branches, quality, consistency.

    Method in the module docstring.

    Parameters
    ----------
    scene : Scene
    thresholds : QualityThresholds, optional
        Warning thresholds and score references; the cell's own (``scene.cell.thresholds``)
        if omitted.

    Returns
    -------
    TargetCheckData
        SI units; :func:`posebridge.results.target_check.target_check_result` makes the
        report (mm, deg).
    """
    thresholds = scene.cell.thresholds if thresholds is None else thresholds
    if scene.external.count:
        return _check_with_external_axes(scene, thresholds)
    group = _Checker(scene, thresholds).run()
    return TargetCheckData(
        scene=scene,
        thresholds=thresholds,
        groups=[group],
        members=[list(range(len(scene.targets.names)))],
        choices=[],
        coverage=group.coverage,
    )


def _target_subset(targets: TargetSet, members: list[int]) -> TargetSet:
    return TargetSet(
        names=tuple(targets.names[i] for i in members),
        fixtures=tuple(targets.fixtures[i] for i in members),
        T_world_target=targets.T_world_target[members],
        approach_offset=targets.approach_offset[members],
        T_world_approach=targets.T_world_approach[members],
        branches=tuple(targets.branches[i] for i in members),
    )


def _check_with_external_axes(scene: Scene, thresholds: QualityThresholds) -> TargetCheckData:
    """Target check of a cell with external axes.

    Each target gets its external values from
    :func:`~posebridge.cell.external_kinematics.choose_external_value` (targets in file
    order, each starting from the previous one's values); targets sharing values are
    checked together in the scene posed there (the check above, common-branch choice
    per group), and the groups' branch coverage is merged into one consistent-branch
    analysis over all targets.
    """
    names = scene.targets.names
    previous = scene.external.values
    choices: list[ExternalChoice] = []
    for i in range(len(names)):
        choice = choose_external_value(scene, i, previous=previous, thresholds=thresholds)
        choices.append(choice)
        previous = choice.values
    by_values: dict[tuple[float, ...], list[int]] = {}
    for i, choice in enumerate(choices):
        by_values.setdefault(tuple(choice.values.tolist()), []).append(i)
    groups: list[GroupCheck] = []
    clear: dict[Triple, set[str]] = {}
    for values, members in by_values.items():
        posed = posed_scene(scene, np.array(values))
        posed = replace(posed, targets=_target_subset(posed.targets, members))
        group = _Checker(posed, thresholds).run()
        groups.append(group)
        for row in group.coverage:
            clear.setdefault(row.triple, set()).update(row.targets_clear)
    scheme = branch_geometry(scene.robot).scheme
    covered = {
        triple: [n in clear.get(triple, set()) for n in names] for triple in robot_branches(scheme)
    }
    return TargetCheckData(
        scene=scene,
        thresholds=thresholds,
        groups=groups,
        members=list(by_values.values()),
        choices=choices,
        coverage=_sorted_coverage(scheme, names, covered),
    )

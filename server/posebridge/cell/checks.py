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

Findings (:class:`~posebridge.results.cell.Finding`) are errors (a target or
approach pose not reachable, a joint outside its limits, a collision),
warnings (limit margin, clearance, singularity below the thresholds of
:class:`~posebridge.cell.thresholds.QualityThresholds` on the recommended
solution and on the cell's common branch; an approach pose off the target's
branch; no consistent branch) and info (a target reachable on one
shoulder/elbow pair only; the consistent branch).
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from itertools import product

import numpy as np

from posebridge.cell.external_kinematics import ExternalChoice, choose_external_value
from posebridge.cell.model import Branch
from posebridge.cell.quality import (
    SCORE_RULE,
    ConfigurationQuality,
    branch_score,
    branch_score_terms,
    branch_words,
    evaluate_configurations,
    full_branch_words,
    part_word,
)
from posebridge.cell.scene import Scene, TargetSet, posed_scene
from posebridge.cell.target_fixture import target_fixture_distances
from posebridge.cell.thresholds import QualityThresholds
from posebridge.kinematics.branches import BRANCH_LABELS, branch_geometry, labels_match
from posebridge.kinematics.ik import solve_ik_all
from posebridge.kinematics.ik.solutions import REASON_NO_WITHIN_LIMITS
from posebridge.results.cell import (
    BranchCoverage,
    ConsistentBranch,
    ExternalAxisIntervals,
    Finding,
    PoseCheck,
    PoseKind,
    TargetCheck,
    TargetCheckReport,
    group_findings,
)
from posebridge.results.quality import (
    branch_report,
    geometry_findings,
    quality_findings,
)
from posebridge.transforms import invert_transform, rpy_from_rotation_matrix
from posebridge.units import BoolArray, deg_from_rad, joint_unit_labels, mm_from_m

__all__ = [
    "REASON_ALL_COLLIDE",
    "REASON_REQUIRED_BRANCH",
    "check_targets",
    "required_branch_words",
]

REASON_REQUIRED_BRANCH = "required branch unavailable"
REASON_ALL_COLLIDE = "every in-limit branch collides"

Triple = tuple[int, int, int]

_SEVERITY_ORDER = {"error": 0, "warning": 1, "info": 2}


def required_branch_words(branch: Branch | None) -> str | None:
    """Return the required branch in words, e.g. ``"front, up"`` (None when any branch will do)."""
    if branch is None:
        return None
    words = [w for w in (branch.shoulder, branch.elbow, branch.wrist) if w is not None]
    return ", ".join(words) if words else None


def _compatible(a: Triple, b: Triple) -> bool:
    """Tell whether two branch triples match, a 0 label (exactly singular) matching either sign."""
    return all(x == y or x == 0 or y == 0 for x, y in zip(a, b, strict=True))


def _robot_branches(scheme: str) -> list[Triple]:
    """Every branch of a label scheme, in the stable order (front, up, positive first)."""
    if scheme == "arm":
        return [(s, e, w) for s, e, w in product((1, -1), repeat=3)]
    if scheme == "planar":
        return [(0, 1, 0), (0, -1, 0)]
    return [(0, 0, 0)]


@dataclass(frozen=True, eq=False)
class _Pose:
    """One checked pose (a target or its approach pose) and its IK solutions.

    Attributes
    ----------
    kind : "target" or "approach"
    target : int
        Index of the target in the scene.
    number : int
        Index of the pose in the IK batch.
    slots : list of int
        Indices into the evaluated batch of its valid IK solutions, in IK order.
    reason_ik : str
        The IK's reason when no solution is valid within limits.
    """

    kind: PoseKind
    target: int
    number: int
    slots: list[int]
    reason_ik: str


def _triple(quality: ConfigurationQuality, k: int) -> Triple:
    return (int(quality.shoulder[k]), int(quality.elbow[k]), int(quality.wrist[k]))


class _Checker:
    """The target check of one scene (module docstring); :meth:`run` builds the report."""

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
        self.findings: list[Finding] = []

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
        return list(dict.fromkeys(_triple(self.quality, k) for k in pose.slots if self.usable[k]))

    def _pose_check(self, pose: _Pose, recommended: int | None, reason: str) -> PoseCheck:
        quality = self.quality
        rpy = rpy_from_rotation_matrix(self.T_world[pose.number, :3, :3], degrees=True)
        reports = [
            branch_report(
                quality,
                k,
                branch=full_branch_words(quality, k, self.slot_revolutions[k]),
                revolutions=self.slot_revolutions[k],
                matches_required_branch=bool(self.matches[k]),
                score=float(self.score[k]) if self.usable[k] else None,
            )
            for k in pose.slots
        ]
        index = None if recommended is None else pose.slots.index(recommended)
        return PoseCheck(
            kind=pose.kind,
            position_mm=mm_from_m(self.T_world[pose.number, :3, 3]).tolist(),
            rpy_deg=rpy.tolist(),
            reachable=recommended is not None,
            reason=self._reason(pose),
            branches=reports,
            recommended=index,
            recommended_branch=None if index is None else reports[index].branch,
            recommended_reason=reason,
        )

    # --- findings ---------------------------------------------------------------------

    def _add_quality(self, k: int, name: str, kind: PoseKind, context: str) -> None:
        branch = full_branch_words(self.quality, k, self.slot_revolutions[k])
        self.findings.extend(
            quality_findings(
                self.quality, k, target=name, pose=kind, branch=branch, context=context
            )
        )

    def _unreachable(self, pose: _Pose, name: str) -> None:
        reason = self._reason(pose)
        detail = ""
        slots = pose.slots
        if reason == REASON_REQUIRED_BRANCH:
            required = required_branch_words(self.scene.targets.branches[pose.target])
            within = [
                branch_words(self.scheme, *_triple(self.quality, k))
                for k in slots
                if self.quality.within_limits[k]
            ]
            detail = (
                f": required {required}; within limits only on {'; '.join(dict.fromkeys(within))}"
            )
        elif reason == REASON_ALL_COLLIDE:
            keep = self.quality.within_limits & self.matches
            best = self._best(slots, keep)
            if best is not None:
                detail = (
                    f" (best branch {full_branch_words(self.quality, best, self.slot_revolutions[best])}"
                    f" has clearance {float(mm_from_m(self.quality.clearance[best])):.1f} mm)"
                )
        what = "target" if pose.kind == "target" else "approach pose"
        self.findings.append(
            Finding(
                severity="error",
                code="unreachable",
                target=name,
                pose=pose.kind,
                message=f"{what} not reachable: {reason}{detail}",
            )
        )

    def _branch_limited(self, pose: _Pose, name: str) -> None:
        """Info when every in-limit solution shares one shoulder and elbow (wrist may vary)."""
        if self.scheme == "none":
            return
        within = [k for k in pose.slots if self.quality.within_limits[k]]
        arms = {(int(self.quality.shoulder[k]), int(self.quality.elbow[k])) for k in within}
        if len(arms) != 1 or len(_robot_branches(self.scheme)) < 2:
            return
        shoulder, elbow = next(iter(arms))
        if self.scheme == "arm":
            wrists = sorted({int(self.quality.wrist[k]) for k in within}, reverse=True)
            signs = ", ".join(part_word("arm", "wrist", w) for w in wrists)
            words = (
                f"the shoulder {part_word('arm', 'shoulder', shoulder)} and the elbow "
                f"{part_word('arm', 'elbow', elbow)} (wrist: {signs})"
            )
        else:
            words = f"the elbow {part_word(self.scheme, 'elbow', elbow)}"
        self.findings.append(
            Finding(
                severity="info",
                code="branch-limited",
                target=name,
                pose="target",
                message=f"within the joint limits only with {words}",
            )
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
    ) -> tuple[int | None, int | None]:
        """Recommended target and approach solutions (module docstring)."""
        on_common = [t for t in triples if common is not None and _compatible(t, common)]
        triples = on_common or triples
        keep = self.usable & self._on_any(triples) if triples else self.usable
        best_target = self._best(target.slots, keep)
        if approach is None:
            return best_target, None
        if best_target is None:
            return None, self._best(approach.slots, self.usable)
        own = _triple(self.quality, best_target)
        best_approach = self._best(approach.slots, self.usable & self._on_branch(own))
        if best_approach is None:
            best_approach = self._best(approach.slots, self.usable)
            if best_approach is not None:
                self.findings.append(
                    Finding(
                        severity="warning",
                        code="approach-branch",
                        target=self.scene.targets.names[target.target],
                        pose="approach",
                        branch=full_branch_words(
                            self.quality, best_target, self.slot_revolutions[best_target]
                        ),
                        message="approach pose not reachable on the target's recommended "
                        "branch; a straight approach move would have to change branch",
                    )
                )
        return best_target, best_approach

    def _pose_findings(self, pose: _Pose, best: int | None, name: str) -> None:
        """Unreachable error, or the quality findings of the recommended solution."""
        if best is not None:
            words = full_branch_words(self.quality, best, self.slot_revolutions[best])
            self._add_quality(best, name, pose.kind, f"on recommended branch {words}: ")
            return
        self._unreachable(pose, name)
        fallback = self._best(pose.slots, self.quality.within_limits & self.matches)
        if fallback is not None:
            words = full_branch_words(self.quality, fallback, self.slot_revolutions[fallback])
            self._add_quality(fallback, name, pose.kind, f"on the best in-limit branch {words}: ")

    def _term_words(self, k: int, term: int) -> str:
        """Describe the score term ``term`` (0 margin, 1 clearance, 2 singularity) of solution ``k``."""
        quality = self.quality
        if term == 0:
            joint = int(quality.margins.min_joint[k])
            margin = float(quality.margins.min_margin[k])
            if self.robot.prismatic[joint]:
                value = f"{float(mm_from_m(margin)):.1f} mm"
            else:
                value = f"{float(deg_from_rad(margin)):.1f}°"
            return f"largest smallest limit margin, {value} on {self.robot.joint_names[joint]}"
        if term == 1:
            return f"largest clearance, {float(mm_from_m(quality.clearance[k])):.0f} mm"
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
        own = _triple(self.quality, best)
        others = [
            k
            for k in pose.slots
            if self.usable[k] and not _compatible(_triple(self.quality, k), own)
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

    def _fixture_finding(self, i: int, distance_m: float) -> None:
        """Warn when target ``i`` is farther than the threshold from its fixture."""
        limit_mm = self.thresholds.fixture_distance_mm
        distance_mm = float(mm_from_m(distance_m))
        if not distance_mm > limit_mm:
            return
        fixture = self.scene.targets.fixtures[i]
        self.findings.append(
            Finding(
                severity="warning",
                code="off-fixture",
                target=self.scene.targets.names[i],
                pose="target",
                message=f"{distance_mm:.0f} mm from its fixture {fixture} (more than "
                f"{limit_mm:.0f} mm): moved off the fixture it belongs to?",
                value=distance_mm,
                unit="mm",
                threshold=limit_mm,
            )
        )

    def run(self) -> TargetCheckReport:
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
        coverage = self._coverage(usable_triples)
        common = next(
            (
                (row.shoulder, row.elbow, row.wrist)
                for row in coverage.coverage[:1]
                if row.targets_clear
            ),
            None,
        )
        common_text = (
            ""
            if not coverage.coverage
            else f"same branch as {len(coverage.coverage[0].targets_clear)} of {len(names)} targets"
        )
        chosen = {
            i: self._choose(
                by_target[i]["target"], by_target[i].get("approach"), usable_triples[i], common
            )
            for i in range(len(names))
        }
        fixture_distances = target_fixture_distances(scene)
        checks: list[TargetCheck] = []
        for i, name in enumerate(names):
            target = by_target[i]["target"]
            approach = by_target[i].get("approach")
            best_target, best_approach = chosen[i]
            self._pose_findings(target, best_target, name)
            if approach is not None:
                self._pose_findings(approach, best_approach, name)
            self._branch_limited(target, name)
            self._fixture_finding(i, float(fixture_distances[i]))
            checks.append(
                TargetCheck(
                    name=name,
                    fixture=scene.targets.fixtures[i],
                    required_branch=required_branch_words(scene.targets.branches[i]),
                    approach_offset_mm=float(mm_from_m(scene.targets.approach_offset[i])),
                    fixture_distance_mm=None
                    if np.isnan(fixture_distances[i])
                    else float(mm_from_m(fixture_distances[i])),
                    reachable=bool(usable_triples[i]),
                    usable_branches=[branch_words(self.scheme, *t) for t in usable_triples[i]],
                    target=self._pose_check(
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
                    else self._pose_check(
                        approach,
                        best_approach,
                        self._why(
                            approach,
                            best_approach,
                            None if best_target is None else _triple(self.quality, best_target),
                            "the target's branch (a straight approach move keeps it)",
                            "not the target's branch",
                        ),
                    ),
                )
            )
        self.findings.extend(_coverage_findings(coverage, len(names)))
        self._open_mesh_findings()
        self.findings += geometry_findings(self.robot)
        findings = sorted(self.findings, key=lambda f: _SEVERITY_ORDER[f.severity])
        return TargetCheckReport(
            cell=scene.cell.title,
            robot=self.robot.name,
            tool=scene.tool_name,
            joint_names=list(self.robot.joint_names),
            joint_units=joint_unit_labels(self.robot.prismatic),
            thresholds=self.thresholds,
            score_rule=SCORE_RULE,
            targets=checks,
            consistent_branch=coverage,
            findings=findings,
            finding_groups=group_findings(findings),
            reachable_count=sum(check.reachable for check in checks),
            error_count=sum(f.severity == "error" for f in findings),
            warning_count=sum(f.severity == "warning" for f in findings),
            info_count=sum(f.severity == "info" for f in findings),
            robot_geometry_missing=self.robot.geometry_missing,
        )

    def _coverage(self, usable_triples: dict[int, list[Triple]]) -> ConsistentBranch:
        names = self.scene.targets.names
        rows = []
        for triple in _robot_branches(self.scheme):
            covered = [
                any(_compatible(triple, t) for t in usable_triples[i]) for i in range(len(names))
            ]
            rows.append(
                BranchCoverage(
                    branch=branch_words(self.scheme, *triple),
                    shoulder=triple[0],
                    elbow=triple[1],
                    wrist=triple[2],
                    targets_clear=[n for n, c in zip(names, covered, strict=True) if c],
                    targets_breaking=[n for n, c in zip(names, covered, strict=True) if not c],
                )
            )
        rows.sort(key=lambda row: -len(row.targets_clear))
        best = rows[0] if rows and names else None
        return ConsistentBranch(
            consistent=best is not None and not best.targets_breaking,
            branch=None if best is None else best.branch,
            breaking_targets=[] if best is None else best.targets_breaking,
            coverage=rows,
        )

    def _open_mesh_findings(self) -> None:
        """Add a note per mesh fixture that is not a closed surface: its clearance is unsigned."""
        meshes = self.scene.meshes
        for name, mesh in zip(meshes.names, meshes.meshes, strict=True):
            if not mesh.is_closed:
                self.findings.append(
                    Finding(
                        severity="info",
                        code="open-mesh",
                        target=None,
                        message=f"mesh fixture {name!r} is not a closed surface: clearance to it "
                        "is measured to its triangles, unsigned (an arm inside it is not seen as "
                        "inside)",
                    )
                )


def _coverage_findings(coverage: ConsistentBranch, count: int) -> list[Finding]:
    """Return the consistent-branch finding of a coverage (info, or a warning when none covers all)."""
    if count == 0:
        return [
            Finding(
                severity="info",
                code="consistent-branch",
                target=None,
                message="the cell has no targets",
            )
        ]
    if coverage.consistent:
        every = [row.branch for row in coverage.coverage if not row.targets_breaking]
        return [
            Finding(
                severity="info",
                code="consistent-branch",
                target=None,
                branch=coverage.branch,
                message="every target and approach pose is reachable and clear on one branch: "
                + "; ".join(every),
            )
        ]
    best = coverage.coverage[0]
    return [
        Finding(
            severity="warning",
            code="inconsistent-branch",
            target=None,
            branch=best.branch,
            message=f"no single branch reaches every target clear; {best.branch} reaches "
            f"{len(best.targets_clear)} of {count}, not: {', '.join(best.targets_breaking)}",
            value=float(len(best.targets_clear)),
            unit="targets",
            threshold=float(count),
        )
    ]


def check_targets(scene: Scene, thresholds: QualityThresholds | None = None) -> TargetCheckReport:
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
    TargetCheckReport
        Boundary units (mm, deg).
    """
    thresholds = scene.cell.thresholds if thresholds is None else thresholds
    if scene.external.count:
        return _check_with_external_axes(scene, thresholds)
    return _Checker(scene, thresholds).run()


def _target_subset(targets: TargetSet, members: list[int]) -> TargetSet:
    return TargetSet(
        names=tuple(targets.names[i] for i in members),
        fixtures=tuple(targets.fixtures[i] for i in members),
        T_world_target=targets.T_world_target[members],
        approach_offset=targets.approach_offset[members],
        T_world_approach=targets.T_world_approach[members],
        branches=tuple(targets.branches[i] for i in members),
    )


def _external_fields(scene: Scene, choice: ExternalChoice) -> dict[str, object]:
    """Return the external-axis fields of one target's check, in boundary units."""
    external = scene.external
    values = external.user_from_si(choice.values)
    listed = []
    for axis, found in choice.intervals.items():
        scale = mm_from_m(1.0) if external.prismatic[axis] else deg_from_rad(1.0)
        for triple, spans in zip(found.branches, found.intervals[0], strict=True):
            listed.append(
                ExternalAxisIntervals(
                    axis=external.names[axis],
                    unit=external.units[axis],
                    branch=branch_words(branch_geometry(scene.robot).scheme, *triple),
                    intervals=(np.asarray(spans) * float(scale)).tolist(),
                )
            )
    return {
        "external_axes": {name: float(v) for name, v in zip(external.names, values, strict=True)},
        "external_pinned": list(choice.pinned),
        "external_intervals": listed,
    }


def _check_with_external_axes(scene: Scene, thresholds: QualityThresholds) -> TargetCheckReport:
    """Target check of a cell with external axes.

    Each target gets its external values from
    :func:`~posebridge.cell.external_kinematics.choose_external_value` (targets in file
    order, each starting from the previous one's values); targets sharing values are
    checked together in the scene posed there (the check above, common-branch warnings
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
    groups: dict[tuple[float, ...], list[int]] = {}
    for i, choice in enumerate(choices):
        groups.setdefault(tuple(choice.values.tolist()), []).append(i)
    checks: dict[int, TargetCheck] = {}
    findings: list[Finding] = []
    clear: dict[str, set[str]] = {}
    template: TargetCheckReport | None = None
    for values, members in groups.items():
        posed = posed_scene(scene, np.array(values))
        posed = replace(posed, targets=_target_subset(posed.targets, members))
        report = _Checker(posed, thresholds).run()
        template = report if template is None else template
        for i, check in zip(members, report.targets, strict=True):
            checks[i] = check.model_copy(update=_external_fields(scene, choices[i]))
        findings += [
            f
            for f in report.findings
            if f.code not in ("consistent-branch", "inconsistent-branch") and f not in findings
        ]
        for row in report.consistent_branch.coverage:
            clear.setdefault(row.branch, set()).update(row.targets_clear)
    scheme = branch_geometry(scene.robot).scheme
    rows = []
    for triple in _robot_branches(scheme):
        words = branch_words(scheme, *triple)
        covered = clear.get(words, set())
        rows.append(
            BranchCoverage(
                branch=words,
                shoulder=triple[0],
                elbow=triple[1],
                wrist=triple[2],
                targets_clear=[n for n in names if n in covered],
                targets_breaking=[n for n in names if n not in covered],
            )
        )
    rows.sort(key=lambda row: -len(row.targets_clear))
    best = rows[0] if rows and names else None
    coverage = ConsistentBranch(
        consistent=best is not None and not best.targets_breaking,
        branch=None if best is None else best.branch,
        breaking_targets=[] if best is None else best.targets_breaking,
        coverage=rows,
    )
    findings = sorted(
        findings + _coverage_findings(coverage, len(names)),
        key=lambda f: _SEVERITY_ORDER[f.severity],
    )
    ordered = [checks[i] for i in range(len(names))]
    return TargetCheckReport(
        cell=scene.cell.title,
        robot=scene.robot.name,
        tool=scene.tool_name,
        joint_names=list(scene.robot.joint_names),
        joint_units=joint_unit_labels(scene.robot.prismatic),
        thresholds=thresholds,
        score_rule=SCORE_RULE,
        targets=ordered,
        external_axis_names=list(scene.external.names),
        external_axis_units=scene.external.units,
        consistent_branch=coverage,
        findings=findings,
        finding_groups=group_findings(findings),
        reachable_count=sum(check.reachable for check in ordered),
        error_count=sum(f.severity == "error" for f in findings),
        warning_count=sum(f.severity == "warning" for f in findings),
        info_count=sum(f.severity == "info" for f in findings),
    )

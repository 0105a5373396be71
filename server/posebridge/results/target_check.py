"""Builder of the target check report from :class:`~posebridge.cell.checks.TargetCheckData`.

:func:`target_check_result` turns the SI target check of a cell into
:class:`~posebridge.results.cell.TargetCheckReport` (mm, deg) and adds its findings:
errors (a target or approach pose not reachable, a joint outside its limits, a
collision), warnings (limit margin, clearance, singularity below the thresholds of
:class:`~posebridge.cell.thresholds.QualityThresholds` on the recommended solution;
an approach pose off the target's branch; a target off its fixture; no consistent
branch) and info (a target reachable on one shoulder/elbow pair only; the consistent
branch; a mesh fixture that is not a closed surface).
"""

from __future__ import annotations

from typing import Any

import numpy as np

from posebridge.cell.checks import (
    REASON_ALL_COLLIDE,
    REASON_REQUIRED_BRANCH,
    BranchCover,
    CheckedPose,
    GroupCheck,
    TargetCheckData,
    branch_triple,
    required_branch_words,
    robot_branches,
)
from posebridge.cell.external_kinematics import ExternalChoice
from posebridge.cell.quality import SCORE_RULE, branch_words, full_branch_words, part_word
from posebridge.cell.scene import Scene
from posebridge.cell.thresholds import QualityThresholds
from posebridge.kinematics.branches import branch_geometry
from posebridge.results.cell import (
    BranchCoverage,
    ConsistentBranch,
    ExternalAxisIntervals,
    Finding,
    PoseCheck,
    TargetCheck,
    TargetCheckReport,
    group_findings,
)
from posebridge.results.external_axes import external_user_from_si
from posebridge.results.quality import branch_report, geometry_findings, quality_findings
from posebridge.robot.model import Robot
from posebridge.transforms import rpy_from_rotation_matrix
from posebridge.units import deg_from_rad, joint_unit_labels, length_text, mm_from_m

__all__ = ["target_check_result"]

_SEVERITY_ORDER = {"error": 0, "warning": 1, "info": 2}


def _consistent_branch(scheme: str, rows: list[BranchCover], count: int) -> ConsistentBranch:
    """Return the consistent-branch model of coverage rows over ``count`` targets."""
    models = [
        BranchCoverage(
            branch=branch_words(scheme, *row.triple),
            shoulder=row.triple[0],
            elbow=row.triple[1],
            wrist=row.triple[2],
            targets_clear=row.targets_clear,
            targets_breaking=row.targets_breaking,
        )
        for row in rows
    ]
    best = models[0] if models and count else None
    return ConsistentBranch(
        consistent=best is not None and not best.targets_breaking,
        branch=None if best is None else best.branch,
        breaking_targets=[] if best is None else best.targets_breaking,
        coverage=models,
    )


class _GroupReport:
    """The report of one :class:`~posebridge.cell.checks.GroupCheck`; :meth:`run` builds it."""

    def __init__(self, group: GroupCheck, thresholds: QualityThresholds) -> None:
        self.group = group
        self.thresholds = thresholds
        self.scene = group.scene
        self.robot = group.scene.robot
        self.quality = group.quality
        self.findings: list[Finding] = []

    def _words(self, k: int) -> str:
        return full_branch_words(self.quality, k, self.group.slot_revolutions[k])

    def _pose_check(self, pose: CheckedPose) -> PoseCheck:
        group = self.group
        quality = self.quality
        rpy = rpy_from_rotation_matrix(group.T_world[pose.number, :3, :3], degrees=True)
        reports = [
            branch_report(
                quality,
                k,
                branch=self._words(k),
                revolutions=group.slot_revolutions[k],
                matches_required_branch=bool(group.matches[k]),
                score=float(group.score[k]) if group.usable[k] else None,
            )
            for k in pose.slots
        ]
        index = None if pose.recommended is None else pose.slots.index(pose.recommended)
        return PoseCheck(
            kind=pose.kind,
            position_mm=mm_from_m(group.T_world[pose.number, :3, 3]).tolist(),
            rpy_deg=rpy.tolist(),
            reachable=pose.recommended is not None,
            reason=pose.reason,
            branches=reports,
            recommended=index,
            recommended_branch=None if index is None else reports[index].branch,
            recommended_reason=pose.recommended_reason,
        )

    # --- findings ---------------------------------------------------------------------

    def _add_quality(self, k: int, name: str, pose: CheckedPose, context: str) -> None:
        self.findings.extend(
            quality_findings(
                self.quality,
                k,
                target=name,
                pose=pose.kind,
                branch=self._words(k),
                context=context,
            )
        )

    def _unreachable(self, pose: CheckedPose, name: str) -> None:
        reason = pose.reason
        detail = ""
        if reason == REASON_REQUIRED_BRANCH:
            required = required_branch_words(self.scene.targets.branches[pose.target])
            within = [
                branch_words(self.group.scheme, *branch_triple(self.quality, k))
                for k in pose.slots
                if self.quality.within_limits[k]
            ]
            detail = (
                f": required {required}; within limits only on {'; '.join(dict.fromkeys(within))}"
            )
        elif reason == REASON_ALL_COLLIDE and pose.fallback is not None:
            best = pose.fallback
            detail = (
                f" (best branch {self._words(best)}"
                f" has clearance {length_text(float(self.quality.clearance[best]))})"
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

    def _pose_findings(self, pose: CheckedPose, name: str) -> None:
        """Unreachable error, or the quality findings of the recommended solution."""
        if pose.recommended is not None:
            words = self._words(pose.recommended)
            self._add_quality(pose.recommended, name, pose, f"on recommended branch {words}: ")
            return
        self._unreachable(pose, name)
        if pose.fallback is not None:
            words = self._words(pose.fallback)
            self._add_quality(pose.fallback, name, pose, f"on the best in-limit branch {words}: ")

    def _branch_limited(self, pose: CheckedPose, name: str) -> None:
        """Info when every in-limit solution shares one shoulder and elbow (wrist may vary)."""
        scheme = self.group.scheme
        if scheme == "none":
            return
        within = [k for k in pose.slots if self.quality.within_limits[k]]
        arms = {(int(self.quality.shoulder[k]), int(self.quality.elbow[k])) for k in within}
        if len(arms) != 1 or len(robot_branches(scheme)) < 2:
            return
        shoulder, elbow = next(iter(arms))
        if scheme == "arm":
            wrists = sorted({int(self.quality.wrist[k]) for k in within}, reverse=True)
            signs = ", ".join(part_word("arm", "wrist", w) for w in wrists)
            words = (
                f"the shoulder {part_word('arm', 'shoulder', shoulder)} and the elbow "
                f"{part_word('arm', 'elbow', elbow)} (wrist: {signs})"
            )
        else:
            words = f"the elbow {part_word(scheme, 'elbow', elbow)}"
        self.findings.append(
            Finding(
                severity="info",
                code="branch-limited",
                target=name,
                pose="target",
                message=f"within the joint limits only with {words}",
            )
        )

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

    def run(self) -> TargetCheckReport:
        group = self.group
        scene = self.scene
        names = scene.targets.names
        for checked in group.targets:
            if checked.approach_off_branch:
                best_target = checked.target.recommended
                assert best_target is not None  # an approach off the target's branch has one
                self.findings.append(
                    Finding(
                        severity="warning",
                        code="approach-branch",
                        target=names[checked.target.target],
                        pose="approach",
                        branch=self._words(best_target),
                        message="approach pose not reachable on the target's recommended "
                        "branch; a straight approach move would have to change branch",
                    )
                )
        checks: list[TargetCheck] = []
        for i, (name, checked) in enumerate(zip(names, group.targets, strict=True)):
            self._pose_findings(checked.target, name)
            if checked.approach is not None:
                self._pose_findings(checked.approach, name)
            self._branch_limited(checked.target, name)
            self._fixture_finding(i, checked.fixture_distance_m)
            checks.append(
                TargetCheck(
                    name=name,
                    fixture=scene.targets.fixtures[i],
                    required_branch=required_branch_words(scene.targets.branches[i]),
                    approach_offset_mm=float(mm_from_m(scene.targets.approach_offset[i])),
                    fixture_distance_mm=None
                    if np.isnan(checked.fixture_distance_m)
                    else float(mm_from_m(checked.fixture_distance_m)),
                    reachable=bool(checked.usable_triples),
                    usable_branches=[
                        branch_words(group.scheme, *t) for t in checked.usable_triples
                    ],
                    target=self._pose_check(checked.target),
                    approach=None
                    if checked.approach is None
                    else self._pose_check(checked.approach),
                )
            )
        coverage = _consistent_branch(group.scheme, group.coverage, len(names))
        self.findings.extend(_coverage_findings(coverage, len(names)))
        self._open_mesh_findings()
        self.findings += geometry_findings(self.robot)
        findings = sorted(self.findings, key=lambda f: _SEVERITY_ORDER[f.severity])
        return _report(
            scene,
            self.robot,
            self.thresholds,
            checks,
            coverage,
            findings,
            robot_geometry_missing=self.robot.geometry_missing,
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


def _external_fields(scene: Scene, choice: ExternalChoice) -> dict[str, object]:
    """Return the external-axis fields of one target's check, in boundary units."""
    external = scene.external
    values = external_user_from_si(external, choice.values)
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


def _external_axes_report(data: TargetCheckData) -> TargetCheckReport:
    """Report of a cell with external axes: the groups' reports merged, one coverage."""
    scene = data.scene
    names = scene.targets.names
    checks: dict[int, TargetCheck] = {}
    findings: list[Finding] = []
    for group, members in zip(data.groups, data.members, strict=True):
        report = _GroupReport(group, data.thresholds).run()
        for i, check in zip(members, report.targets, strict=True):
            checks[i] = check.model_copy(update=_external_fields(scene, data.choices[i]))
        findings += [
            f
            for f in report.findings
            if f.code not in ("consistent-branch", "inconsistent-branch") and f not in findings
        ]
    coverage = _consistent_branch(branch_geometry(scene.robot).scheme, data.coverage, len(names))
    findings = sorted(
        findings + _coverage_findings(coverage, len(names)),
        key=lambda f: _SEVERITY_ORDER[f.severity],
    )
    return _report(
        scene,
        scene.robot,
        data.thresholds,
        [checks[i] for i in range(len(names))],
        coverage,
        findings,
        external_axis_names=list(scene.external.names),
        external_axis_units=scene.external.units,
    )


def _report(
    scene: Scene,
    robot: Robot,
    thresholds: QualityThresholds,
    checks: list[TargetCheck],
    coverage: ConsistentBranch,
    findings: list[Finding],
    **fields: Any,
) -> TargetCheckReport:
    """Assemble the report from its target checks and sorted findings, with their counts.

    ``fields`` are the report's fields that only some cells have (external axes, missing
    robot geometry).
    """
    return TargetCheckReport(
        cell=scene.cell.title,
        robot=robot.name,
        tool=scene.tool_name,
        joint_names=list(robot.joint_names),
        joint_units=joint_unit_labels(robot.prismatic),
        thresholds=thresholds,
        score_rule=SCORE_RULE,
        targets=checks,
        consistent_branch=coverage,
        findings=findings,
        finding_groups=group_findings(findings),
        reachable_count=sum(check.reachable for check in checks),
        error_count=sum(f.severity == "error" for f in findings),
        warning_count=sum(f.severity == "warning" for f in findings),
        info_count=sum(f.severity == "info" for f in findings),
        **fields,
    )


def target_check_result(data: TargetCheckData) -> TargetCheckReport:
    """Build the boundary report (mm, deg) of a cell's target check, with its findings.

    Parameters
    ----------
    data : TargetCheckData
        From :func:`posebridge.cell.checks.check_targets`.

    Returns
    -------
    TargetCheckReport
    """
    if data.scene.external.count:
        return _external_axes_report(data)
    return _GroupReport(data.groups[0], data.thresholds).run()

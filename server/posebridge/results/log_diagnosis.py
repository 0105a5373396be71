"""Builder of the log diagnosis result from :class:`~posebridge.cell.log_diagnosis.LogDiagnosisData`.

:func:`log_diagnosis_result` looks along the rows of the SI diagnosis of a joint
log: each joint's smallest margin (the external axes too), the minimum clearance
and manipulability, the closest approach to a singularity, stretches of rows in
a condition (collision, low clearance, outside limits, low limit margin, near a
singularity), branch changes between consecutive rows and the joint changes
faster than the velocity limits; it makes
:class:`~posebridge.results.cell.LogDiagnosis` (mm, deg) with its findings and
the worst row's full diagnosis
(:func:`~posebridge.results.diagnosis.pose_diagnosis_result`).
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
import numpy.typing as npt

from posebridge.cell.clearance import CellClearance
from posebridge.cell.joint_log import JointLog
from posebridge.cell.log_diagnosis import WORST_ROW_RULE, LogDiagnosisData
from posebridge.cell.pose_diagnosis import overall_pair, pair_label
from posebridge.cell.quality import branch_words, margin_thresholds, part_word, proximity_ratio
from posebridge.results.cell import (
    MAX_LISTED_EVENTS,
    BranchChange,
    Finding,
    JointExtreme,
    LogDiagnosis,
    LogRows,
    RowStretch,
    RowValue,
    VelocityCheck,
    VelocityJump,
    WorstRow,
)
from posebridge.results.diagnosis import SEVERITY_ORDER, finite_mm, pose_diagnosis_result
from posebridge.results.external_axes import external_user_from_si
from posebridge.results.quality import geometry_findings
from posebridge.units import (
    BoolArray,
    FloatArray,
    deg_from_rad,
    joint_unit_labels,
    joints_user_from_si,
    mm_from_m,
)

__all__ = ["log_diagnosis_result"]


class _Rows:
    """Row references of a log: 0-based row, file line and time."""

    def __init__(self, log: JointLog) -> None:
        self.line = log.line
        self.time_s = log.time_s

    def time(self, row: int) -> float | None:
        return None if self.time_s is None else float(self.time_s[row])

    def value(self, row: int, value: float, unit: str, detail: str) -> RowValue:
        return RowValue(
            row=row,
            line=int(self.line[row]),
            time_s=self.time(row),
            value=value,
            unit=unit,
            detail=detail,
        )


def _stretches(mask: BoolArray) -> tuple[npt.NDArray[np.intp], npt.NDArray[np.intp]]:
    """First and last row of every run of True in ``mask`` (N,), in order."""
    edges = np.diff(mask.astype(np.int8), prepend=np.int8(0), append=np.int8(0))
    return np.flatnonzero(edges == 1), np.flatnonzero(edges == -1) - 1


class _LogReport:
    """The boundary model of one log diagnosis (module docstring); :meth:`run` builds it."""

    def __init__(self, data: LogDiagnosisData) -> None:
        scene = data.scene
        self.data = data
        self.scene = scene
        self.log = data.log
        self.robot = scene.robot
        external = scene.external
        self.external = data.external
        self.quality = data.quality
        self.thresholds = data.quality.thresholds
        self.rows = _Rows(data.log)
        self.units = joint_unit_labels(self.robot.prismatic)
        # the cell's joint vector (robot joints, then external axes) for the velocity check
        self.prismatic = np.concatenate([self.robot.prismatic, external.prismatic])
        self.names = self.robot.joint_names + external.names
        self.all_units = [*self.units, *external.units]
        self.findings: list[Finding] = []
        self.stretches: list[RowStretch] = []
        self.stretch_counts: dict[str, int] = {}

    # --- single rows ------------------------------------------------------------------------

    def _smallest_margins(self) -> list[JointExtreme]:
        robot = self.robot
        margins = self.quality.margins
        margin_user = joints_user_from_si(margins.margin, robot.prismatic)
        value_user = joints_user_from_si(self.log.q, robot.prismatic)
        extremes = []
        for j in np.flatnonzero(~robot.continuous):
            row = int(np.argmin(margins.margin[:, j]))
            lower = margins.to_lower[row, j] <= margins.to_upper[row, j]
            extremes.append(
                JointExtreme(
                    joint=robot.joint_names[j],
                    unit=self.units[j],
                    row=row,
                    line=int(self.log.line[row]),
                    time_s=self.rows.time(row),
                    value=float(value_user[row, j]),
                    margin=float(margin_user[row, j]),
                    margin_fraction=float(margins.fraction[row, j]),
                    nearer_limit="lower" if lower else "upper",
                )
            )
        external = self.scene.external
        for i, name in enumerate(external.names):
            value = self.external[:, i]
            to_lower, to_upper = value - external.lower[i], external.upper[i] - value
            margin = np.minimum(to_lower, to_upper)
            row = int(np.argmin(margin))
            to_user = mm_from_m if external.prismatic[i] else deg_from_rad
            extremes.append(
                JointExtreme(
                    joint=name,
                    unit=external.units[i],
                    row=row,
                    line=int(self.log.line[row]),
                    time_s=self.rows.time(row),
                    value=float(to_user(value[row])),
                    margin=float(to_user(margin[row])),
                    margin_fraction=float(margin[row] / (external.upper[i] - external.lower[i])),
                    nearer_limit="lower" if to_lower[row] <= to_upper[row] else "upper",
                )
            )
        return extremes

    def _min_clearance(self) -> RowValue | None:
        clearance = self.quality.clearance
        row = int(np.argmin(clearance))
        if not np.isfinite(clearance[row]):
            return None
        pairs = overall_pair(self.quality, row)
        return self.rows.value(row, float(mm_from_m(clearance[row])), "mm", pair_label(pairs, row))

    def _singularity_terms(self) -> list[tuple[str, FloatArray, FloatArray, str, str]]:
        """``(kind, distance in its unit, ratio to threshold, unit, wording)`` of each kind."""
        report = self.quality.singularity
        if report is None:
            return []
        t = report.thresholds
        return [
            (
                "wrist",
                deg_from_rad(report.wrist_rad),
                report.wrist_rad / t.wrist_rad,
                "deg",
                "wrist bend from straight",
            ),
            (
                "elbow",
                deg_from_rad(report.elbow_rad),
                report.elbow_rad / t.elbow_rad,
                "deg",
                "elbow from stretched or folded",
            ),
            (
                "shoulder",
                mm_from_m(report.shoulder_m),
                report.shoulder_m / t.shoulder_m,
                "mm",
                "wrist centre from the plane of axis 1",
            ),
        ]

    def _closest_singularity(self) -> RowValue | None:
        terms = self._singularity_terms()
        if not terms:
            return None
        ratios = np.stack([term[2] for term in terms])
        row = int(np.argmin(ratios.min(axis=0)))
        kind, distance, _, unit, wording = terms[int(np.argmin(ratios[:, row]))]
        return self.rows.value(
            row, float(distance[row]), unit, f"{kind}: {wording} {distance[row]:.1f} {unit}"
        )

    # --- stretches ----------------------------------------------------------------------------

    def _add_stretches(
        self,
        condition: str,
        mask: BoolArray,
        strength: FloatArray,
        value_of: Callable[[int], tuple[float, str, str]],
        severity: str,
    ) -> None:
        """Record the runs of ``mask``; the extreme row of each minimises ``strength``."""
        first, last = _stretches(mask)
        self.stretch_counts[condition] = int(first.size)
        for a, b in zip(first[:MAX_LISTED_EVENTS], last[:MAX_LISTED_EVENTS], strict=True):
            extreme = int(a + np.argmin(strength[a : b + 1]))
            value, unit, detail = value_of(extreme)
            stretch = RowStretch(
                condition=condition,
                first_row=int(a),
                last_row=int(b),
                first_line=int(self.log.line[a]),
                last_line=int(self.log.line[b]),
                start_time_s=self.rows.time(int(a)),
                end_time_s=self.rows.time(int(b)),
                extreme_row=extreme,
                extreme_value=value,
                unit=unit,
                detail=detail,
            )
            self.stretches.append(stretch)
            where = f"rows {a}-{b} (lines {stretch.first_line}-{stretch.last_line}"
            if stretch.start_time_s is not None:
                where += f", t {stretch.start_time_s:g}-{stretch.end_time_s:g} s"
            self.findings.append(
                Finding(
                    severity=severity,  # type: ignore[arg-type]  # error or warning
                    code=condition.replace(" ", "-"),
                    target=None,
                    row=extreme,
                    message=f"{condition} in {where}): {detail}",
                    value=value,
                    unit=unit,
                )
            )

    def _condition_stretches(self) -> None:
        quality = self.quality
        robot = self.robot
        t = self.thresholds
        clearance = quality.clearance
        limit_m = t.clearance_m

        def clearance_value(row: int) -> tuple[float, str, str]:
            mm = float(mm_from_m(clearance[row]))
            return mm, "mm", f"{pair_label(overall_pair(quality, row), row)} at {mm:.1f} mm"

        self._add_stretches("collision", clearance < 0.0, clearance, clearance_value, "error")
        self._add_stretches(
            "low clearance",
            (clearance >= 0.0) & (clearance < limit_m),
            clearance,
            clearance_value,
            "warning",
        )
        margins = quality.margins
        limited = ~robot.continuous
        scaled = np.full(margins.margin.shape, np.inf)
        scaled[:, limited] = margins.margin[:, limited] / margin_thresholds(robot, t)[limited]
        worst_joint = np.argmin(scaled, axis=1)
        rows = np.arange(quality.count)
        margin_user = joints_user_from_si(margins.margin, robot.prismatic)

        def margin_value(row: int) -> tuple[float, str, str]:
            j = int(worst_joint[row])
            value = float(margin_user[row, j])
            side = "lower" if margins.to_lower[row, j] <= margins.to_upper[row, j] else "upper"
            return (
                value,
                self.units[j],
                (f"{robot.joint_names[j]} {value:.1f} {self.units[j]} from its {side} limit"),
            )

        outside = ~quality.within_limits
        self._add_stretches(
            "outside limits", outside, scaled[rows, worst_joint], margin_value, "error"
        )
        self._add_stretches(
            "low limit margin",
            ~outside & (scaled[rows, worst_joint] < 1.0),
            scaled[rows, worst_joint],
            margin_value,
            "warning",
        )
        report = quality.singularity
        if report is None:
            return
        near = {
            "wrist": report.near_wrist,
            "elbow": report.near_elbow,
            "shoulder": report.near_shoulder,
        }
        for kind, distance, ratio, unit, wording in self._singularity_terms():

            def singular_value(
                row: int, distance: FloatArray = distance, unit: str = unit, wording: str = wording
            ) -> tuple[float, str, str]:
                return float(distance[row]), unit, f"{wording} {distance[row]:.1f} {unit}"

            self._add_stretches(
                f"near {kind} singularity", near[kind], ratio, singular_value, "warning"
            )

    # --- between rows -------------------------------------------------------------------------

    def _branch_changes(self) -> tuple[int, list[BranchChange]]:
        quality = self.quality
        scheme = quality.scheme
        parts = {"arm": ("shoulder", "elbow", "wrist"), "planar": ("elbow",)}.get(scheme, ())
        changes: list[tuple[int, str, int, int]] = []
        for part in parts:
            labels = getattr(quality, part)
            defined = np.flatnonzero(labels != 0)
            changed = np.flatnonzero(labels[defined[1:]] != labels[defined[:-1]])
            changes.extend(
                (int(defined[c + 1]), part, int(labels[defined[c]]), int(labels[defined[c + 1]]))
                for c in changed
            )
        changes.sort()

        listed = [
            BranchChange(
                row=row,
                line=int(self.log.line[row]),
                time_s=self.rows.time(row),
                part=part,  # type: ignore[arg-type]  # shoulder, elbow or wrist
                before=part_word(scheme, part, before),
                after=part_word(scheme, part, after),
            )
            for row, part, before, after in changes[:MAX_LISTED_EVENTS]
        ]
        for change in listed:
            when = "" if change.time_s is None else f", t {change.time_s:g} s"
            self.findings.append(
                Finding(
                    severity="warning",
                    code="branch-change",
                    target=None,
                    row=change.row,
                    message=f"{change.part} branch changes from {change.before} to {change.after} "
                    f"at row {change.row} (line {change.line}{when}): the arm passed a singularity",
                )
            )
        return len(changes), listed

    def _velocity(self) -> VelocityCheck:
        time_s = self.log.time_s
        if time_s is None:
            reason = "skipped: the log has no time_s column"
            self.findings.append(
                Finding(severity="info", code="velocity-skipped", target=None, message=reason)
            )
            return VelocityCheck(checked=False, reason=reason, jump_count=0, jumps=[])
        velocity = self.data.velocity
        if velocity is None:
            return VelocityCheck(checked=True, reason="", jump_count=0, jumps=[])
        speed, limit = velocity.speed, velocity.limit
        pair, joint = np.nonzero(velocity.over)
        change_user = joints_user_from_si(velocity.change, self.prismatic)
        speed_user = joints_user_from_si(speed, self.prismatic)
        limit_user = joints_user_from_si(np.where(velocity.has_limit, limit, 0.0), self.prismatic)
        jumps = []
        for p, j in zip(pair[:MAX_LISTED_EVENTS], joint[:MAX_LISTED_EVENTS], strict=True):
            row = int(p) + 1
            jump = VelocityJump(
                row=row,
                line=int(self.log.line[row]),
                time_from_s=float(time_s[row - 1]),
                time_to_s=float(time_s[row]),
                joint=self.names[j],
                unit=self.all_units[j],
                change=float(change_user[p, j]),
                speed=float(speed_user[p, j]),
                limit=float(limit_user[j]),
                ratio=float(speed[p, j] / limit[j]),
            )
            jumps.append(jump)
            self.findings.append(
                Finding(
                    severity="error",
                    code="velocity",
                    target=None,
                    row=row,
                    message=f"{jump.joint} changes by {jump.change:+.1f} {jump.unit} between "
                    f"t {jump.time_from_s:g} s and {jump.time_to_s:g} s (line {jump.line}): "
                    f"{jump.speed:.0f} {jump.unit}/s, above its limit {jump.limit:g} {jump.unit}/s",
                    value=jump.speed,
                    unit=f"{jump.unit}/s",
                    threshold=jump.limit,
                )
            )
        return VelocityCheck(checked=True, reason="", jump_count=int(pair.size), jumps=jumps)

    # --- worst row ----------------------------------------------------------------------------

    def _worst_reason(self) -> str:
        """Word the worst row's reason by the clause of the rule that chose it."""
        quality = self.quality
        row = self.data.worst_row
        kind = self.data.worst_kind
        if kind == "collision":
            pair = pair_label(overall_pair(quality, row), row)
            return (
                f"deepest collision: {pair} overlap by {-mm_from_m(quality.clearance[row]):.1f} mm"
            )
        if kind == "outside limits":
            margins = quality.margins
            j = int(margins.min_joint[row])
            value = float(joints_user_from_si(margins.margin[row], self.robot.prismatic)[j])
            return (
                f"farthest outside a limit: {self.robot.joint_names[j]} {-value:.1f} "
                f"{self.units[j]} beyond it"
            )
        if kind == "velocity" and self.data.fastest is not None:
            _, j, ratio = self.data.fastest
            return (
                f"fastest change above a velocity limit: {self.names[j]} at "
                f"{ratio:.2f} times its limit"
            )
        proximity = proximity_ratio(quality)
        return f"closest to a warning threshold ({proximity[row]:.2f} times the threshold distance)"

    # --- per-row columns ---------------------------------------------------------------------

    def _columns(self) -> LogRows:
        quality = self.quality
        robot = self.robot
        continuous = robot.continuous
        margin_user = joints_user_from_si(quality.margins.margin, robot.prismatic)
        margins = [
            [None if continuous[j] else value for j, value in enumerate(row)]
            for row in margin_user.tolist()
        ]
        fraction = quality.margins.min_fraction
        codes = (quality.shoulder + 1) * 9 + (quality.elbow + 1) * 3 + (quality.wrist + 1)
        table = np.array(
            [
                branch_words(quality.scheme, s, e, w)
                for s in (-1, 0, 1)
                for e in (-1, 0, 1)
                for w in (-1, 0, 1)
            ],
            dtype=object,
        )
        use_self = quality.self_clearance.distance < quality.environment.distance
        closest = np.where(
            use_self,
            self._pair_names(quality.self_clearance),
            self._pair_names(quality.environment),
        )
        clearance = mm_from_m(quality.clearance)
        report = quality.singularity
        return LogRows(
            line=self.log.line.tolist(),
            time_s=None if self.log.time_s is None else self.log.time_s.tolist(),
            tcp_position_mm=mm_from_m(quality.T_world_tool[:, :3, 3]).tolist(),
            branch=table[codes.astype(np.int64)].tolist(),
            margins=margins,
            min_margin_fraction=[None if not np.isfinite(v) else v for v in fraction.tolist()],
            manipulability=quality.manipulability.tolist(),
            singularity=None if report is None else list(report.label),
            wrist_bend_deg=None if report is None else deg_from_rad(report.wrist_rad).tolist(),
            elbow_deg=None if report is None else deg_from_rad(report.elbow_rad).tolist(),
            shoulder_mm=None if report is None else mm_from_m(report.shoulder_m).tolist(),
            clearance_mm=[None if not np.isfinite(v) else v for v in clearance.tolist()],
            closest=closest.tolist(),
            environment_clearance_mm=[finite_mm(v) for v in quality.environment.distance.tolist()],
            self_clearance_mm=[finite_mm(v) for v in quality.self_clearance.distance.tolist()],
            external=external_user_from_si(self.scene.external, self.external).tolist(),
        )

    @staticmethod
    def _pair_names(clearance: CellClearance) -> npt.NDArray[np.object_]:
        """``"capsule – other"`` per row ("" where nothing was checked), vectorised by lookup."""
        capsules = np.array([*clearance.capsule_names, ""], dtype=object)
        others = np.array([*clearance.obstacle_names, ""], dtype=object)
        is_self = clearance.is_self
        other = np.where(
            is_self,
            capsules[np.where(is_self, clearance.other, -1)],
            others[np.where(is_self, -1, clearance.other)],
        )
        label = capsules[clearance.capsule] + " – " + other
        return np.where(clearance.capsule >= 0, label, "")

    def run(self, include_rows: bool) -> LogDiagnosis:
        robot = self.robot
        quality = self.quality
        self._condition_stretches()
        change_count, changes = self._branch_changes()
        velocity = self._velocity()
        worst = self.data.worst_row
        time_s = self.log.time_s
        given = set(self.log.external_given)
        manipulability_row = int(np.argmin(quality.manipulability))
        return LogDiagnosis(
            source=self.log.source,
            robot=robot.name,
            tool=self.scene.tool_name,
            joint_names=list(robot.joint_names),
            joint_units=self.units,
            row_count=quality.count,
            duration_s=None if time_s is None else float(time_s[-1] - time_s[0]),
            thresholds=self.thresholds,
            smallest_margins=self._smallest_margins(),
            min_clearance=self._min_clearance(),
            min_manipulability=self.rows.value(
                manipulability_row,
                float(quality.manipulability[manipulability_row]),
                "m^3",
                "Yoshikawa manipulability of the translational Jacobian",
            ),
            closest_singularity=self._closest_singularity(),
            stretches=self.stretches,
            stretch_counts=self.stretch_counts,
            branch_change_count=change_count,
            branch_changes=changes,
            velocity=velocity,
            worst_row=WorstRow(
                row=worst,
                line=int(self.log.line[worst]),
                time_s=self.rows.time(worst),
                rule=WORST_ROW_RULE,
                reason=self._worst_reason(),
                diagnosis=pose_diagnosis_result(self.data.worst),
            ),
            findings=sorted(
                self.findings + geometry_findings(robot), key=lambda f: SEVERITY_ORDER[f.severity]
            ),
            rows=self._columns() if include_rows else None,
            robot_geometry_missing=robot.geometry_missing,
            external_names=list(self.scene.external.names),
            external_units=self.scene.external.units,
            external_logged=[name for name in self.scene.external.names if name in given],
            external_defaults={
                name: float(value)
                for name, value in zip(
                    self.scene.external.names,
                    external_user_from_si(self.scene.external, self.scene.external.values).tolist(),
                    strict=True,
                )
                if name not in given
            },
        )


def log_diagnosis_result(data: LogDiagnosisData, *, include_rows: bool = True) -> LogDiagnosis:
    """Build the boundary model (mm, deg) of a log's diagnosis, with its findings.

    Parameters
    ----------
    data : LogDiagnosisData
        From :func:`posebridge.cell.log_diagnosis.diagnose_log`.
    include_rows : bool, keyword-only
        Add the per-row values (:class:`~posebridge.results.cell.LogRows`).

    Returns
    -------
    LogDiagnosis
    """
    return _LogReport(data).run(include_rows)

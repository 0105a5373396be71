"""Plain-text tables of the check results, for the command line's output without ``--json``.

Each ``render_*`` function takes a result model of :mod:`posebridge.results.cell`
and returns text (lines of at most about 120 characters, no colour, no
trailing spaces), so the terminal output shows the same fields as the JSON.
"""

from __future__ import annotations

from collections.abc import Sequence

from posebridge.results.cell import (
    BranchReport,
    ClosestPair,
    Finding,
    LogDiagnosis,
    PoseDiagnosis,
    SingularityProximity,
    TargetCheckReport,
    group_findings,
)

__all__ = ["render_log_diagnosis", "render_pose_diagnosis", "render_target_check", "table"]


def table(headers: Sequence[str], rows: Sequence[Sequence[str]]) -> str:
    """Left-aligned columns separated by two spaces, a dashed rule under the headers."""
    widths = [len(h) for h in headers]
    for row in rows:
        widths = [max(w, len(cell)) for w, cell in zip(widths, row, strict=True)]

    def line(cells: Sequence[str]) -> str:
        return "  ".join(cell.ljust(w) for cell, w in zip(cells, widths, strict=True)).rstrip()

    return "\n".join([line(headers), line(["-" * w for w in widths]), *(line(r) for r in rows)])


def _number(value: float | None, unit: str = "", digits: int = 1) -> str:
    if value is None:
        return "-"
    return f"{value:.{digits}f}" + (f" {unit}" if unit else "")


def _pair(pair: ClosestPair | None) -> str:
    if pair is None:
        return "-"
    return f"{pair.capsule} - {pair.other}"


def _singularity(proximity: SingularityProximity | None) -> str:
    if proximity is None:
        return "-"
    distances = (
        f"wrist {proximity.wrist_bend_deg:.1f} deg, elbow {proximity.elbow_deg:.1f} deg, "
        f"shoulder {proximity.shoulder_mm:.0f} mm"
    )
    return distances if proximity.kind == "none" else f"NEAR {proximity.kind.upper()}: {distances}"


def _clearance(pair: ClosestPair | None) -> str:
    """``12.3 mm (gripper – press-die)``, or ``-`` where nothing was checked."""
    return "-" if pair is None else f"{pair.distance_mm:.1f} mm ({_pair(pair)})"


def _findings(findings: Sequence[Finding]) -> str:
    """Render findings one per line.

    Findings of one severity, code and cause (an object pair, a joint) that occur more than once are
    one line with their count and the worst one.
    """
    if not findings:
        return "Findings: none"
    lines = [f"Findings ({len(findings)}):"]
    repeated = {
        (g.severity, g.code, g.cause): g for g in group_findings(list(findings)) if g.count > 1
    }
    shown: set[tuple[str, str, str]] = set()
    for f in findings:
        key = (f.severity, f.code, f.cause or "")
        if f.cause is not None and key in repeated:
            if key in shown:
                continue
            shown.add(key)
            group = repeated[key]
            worst = group.worst
            where = " ".join(part for part in (worst.target, worst.pose) if part)
            if worst.row is not None:
                where = f"row {worst.row}"
            lines.append(
                f"  {f.severity.upper():<8} {group.count} x {f.code} {group.cause}; worst"
                f"{' at ' + where if where else ''}: {worst.message}"
            )
            continue
        where = " ".join(part for part in (f.target, f.pose) if part)
        if f.row is not None:
            where = f"row {f.row}"
        lines.append(f"  {f.severity.upper():<8} {where + ': ' if where else ''}{f.message}")
    return "\n".join(lines)


def _branches_table(branches: Sequence[BranchReport], marked: int | None, mark: str) -> str:
    rows = [
        [
            mark if i == marked else "",
            b.branch,
            " ".join(f"{v:.1f}" for v in b.joints_deg),
            "yes" if b.within_limits else "no",
            _number(b.min_margin, b.min_margin_unit or "")
            + (f" ({b.min_margin_joint})" if b.min_margin_joint else ""),
            _clearance(b.closest_environment),
            _clearance(b.closest_self),
            _singularity(b.singularity),
        ]
        for i, b in enumerate(branches)
    ]
    return table(
        [
            "",
            "branch",
            "joints",
            "in limits",
            "min margin",
            "environment clearance",
            "self-clearance",
            "singularity",
        ],
        rows,
    )


def render_target_check(report: TargetCheckReport) -> str:
    """Render the target check as a summary table, the consistent branch and the findings."""
    rows = []
    for target in report.targets:
        pose = target.target
        best = None if pose.recommended is None else pose.branches[pose.recommended]
        rows.append(
            [
                target.name,
                "yes" if target.reachable else "NO",
                pose.recommended_branch or pose.reason,
                "-" if best is None else _number(best.min_margin, best.min_margin_unit or ""),
                "-" if best is None else _clearance(best.closest_environment),
                "-" if best is None else _clearance(best.closest_self),
                "-" if best is None else _singularity(best.singularity),
            ]
        )
    consistent = report.consistent_branch
    if consistent.consistent:
        summary = f"Consistent branch: {consistent.branch} (every target)"
    elif consistent.branch is None:
        summary = "Consistent branch: no targets"
    else:
        summary = (
            f"Consistent branch: none; {consistent.branch} misses "
            f"{', '.join(consistent.breaking_targets)}"
        )
    return "\n\n".join(
        [
            f"Target check of {report.cell!r}: robot {report.robot}, tool {report.tool}; "
            f"{report.reachable_count} of {len(report.targets)} targets reachable; "
            f"{report.error_count} errors, {report.warning_count} warnings, "
            f"{report.info_count} info",
            table(
                [
                    "target",
                    "reachable",
                    "recommended branch (or why not)",
                    "min margin",
                    "environment clearance",
                    "self-clearance",
                    "singularity",
                ],
                rows,
            ),
            *([_external_table(report)] if report.external_axis_names else []),
            *(
                [_reasons(report)]
                if any(t.target.recommended_reason for t in report.targets)
                else []
            ),
            summary,
            _findings(report.findings),
        ]
    )


def _reasons(report: TargetCheckReport) -> str:
    """Why each target's branch is recommended, one line per reachable target."""
    lines = [
        f"  {target.name}: {target.target.recommended_reason}"
        for target in report.targets
        if target.target.recommended_reason
    ]
    return "\n".join(["Why these branches:", *lines])


def _external_table(report: TargetCheckReport) -> str:
    """Each target's external axis values (``*`` pinned) and the widest feasible interval."""
    rows = []
    for target in report.targets:
        cells = [target.name]
        for name, unit in zip(report.external_axis_names, report.external_axis_units, strict=True):
            pin = "*" if name in target.external_pinned else ""
            spans = [
                span
                for found in target.external_intervals
                if found.axis == name
                for span in found.intervals
            ]
            widest = max(spans, key=lambda s: s[1] - s[0], default=None)
            where = "" if widest is None else f" in [{widest[0]:.1f}, {widest[1]:.1f}]"
            cells.append(f"{target.external_axes.get(name, float('nan')):.1f} {unit}{pin}{where}")
        rows.append(cells)
    return table(["target", *report.external_axis_names], rows)


def render_pose_diagnosis(diagnosis: PoseDiagnosis) -> str:
    """One configuration: pose, branch, margins, clearance, nearest targets, other branches."""
    d = diagnosis
    world = d.tcp_world
    base = d.tcp_base
    joints = ", ".join(
        f"{n} {v:.3f} {u}"
        for n, v, u in zip(d.joint_names, d.joints_deg, d.joint_units, strict=True)
    )
    joints += "".join(f", {m.joint} {m.value:.3f} {m.unit}" for m in d.external_margins)
    head = "\n".join(
        [
            f"Pose diagnosis: robot {d.robot}, tool {d.tool}",
            f"joints:            {joints}",
            "TCP in world:      position "
            + " ".join(f"{v:.2f}" for v in world.position_mm)
            + " mm, rpy "
            + " ".join(f"{v:.2f}" for v in world.rpy_deg)
            + " deg, quaternion wxyz "
            + " ".join(f"{v:.5f}" for v in world.quaternion_wxyz),
            "TCP in base:       position "
            + " ".join(f"{v:.2f}" for v in base.position_mm)
            + " mm, rpy "
            + " ".join(f"{v:.2f}" for v in base.rpy_deg)
            + " deg",
            f"branch:            {d.branch}",
            f"manipulability:    position {d.position_manipulability:.4g}"
            + (
                ""
                if d.full_manipulability is None
                else f", full (scaled, 0 at any singularity) {d.full_manipulability:.4g}"
            ),
            f"singularity:       {_singularity(d.singularity)}",
            f"environment:       {_clearance(d.closest_environment)}",
            f"self-clearance:    {_clearance(d.closest_self)}",
        ]
    )
    margins = table(
        ["joint", "value", "lower", "upper", "margin", "fraction"],
        [
            [
                m.joint,
                _number(m.value, m.unit, 3),
                _number(m.lower, m.unit, 0),
                _number(m.upper, m.unit, 0),
                _number(m.margin, m.unit),
                _number(m.margin_fraction, digits=3),
            ]
            for m in [*d.margins, *d.external_margins]
        ],
    )
    objects = table(
        ["closest object", "kind", "distance"],
        [[o.name, o.kind, _number(o.distance_mm, "mm")] for o in d.closest_objects],
    )
    targets = table(
        ["nearest target", "pose", "distance", "angle"],
        [
            [t.name, t.pose, _number(t.distance_mm, "mm"), _number(t.angle_deg, "deg")]
            for t in d.nearest_targets
        ],
    )
    branches = "Other branches reaching this TCP pose (* = the input):\n" + _branches_table(
        d.branches, d.input_branch, "*"
    )
    return "\n\n".join([head, margins, objects, targets, branches, _findings(d.findings)])


def render_log_diagnosis(diagnosis: LogDiagnosis) -> str:
    """Render a log: smallest margins, extremes, stretches, branch changes, speeds, worst row, findings."""
    d = diagnosis

    def when(row: int, time_s: float | None) -> str:
        return f"row {row}" + ("" if time_s is None else f" (t {time_s:g} s)")

    duration = "" if d.duration_s is None else f", {d.duration_s:g} s"
    lines = [
        f"Log diagnosis of {d.source or 'log'}: robot {d.robot}, tool {d.tool}, "
        f"{d.row_count} rows{duration}",
    ]
    extremes = []
    if d.min_clearance is not None:
        c = d.min_clearance
        extremes.append(
            f"minimum clearance:     {c.value:.1f} mm at {when(c.row, c.time_s)}: {c.detail}"
        )
    m = d.min_manipulability
    extremes.append(f"minimum manipulability: {m.value:.4g} at {when(m.row, m.time_s)}")
    if d.closest_singularity is not None:
        s = d.closest_singularity
        extremes.append(f"closest singularity:   {when(s.row, s.time_s)}: {s.detail}")
    velocity = d.velocity
    extremes.append(
        f"velocity check:        {velocity.jump_count} changes above the limits"
        if velocity.checked
        else f"velocity check:        {velocity.reason}"
    )
    extremes.append(f"branch changes:        {d.branch_change_count}")
    w = d.worst_row
    extremes.append(f"worst row:             {when(w.row, w.time_s)}, line {w.line}: {w.reason}")
    margins = table(
        ["joint", "smallest margin", "row", "time", "value"],
        [
            [
                e.joint,
                f"{e.margin:.1f} {e.unit} to {e.nearer_limit}",
                str(e.row),
                _number(e.time_s, "s", 2),
                _number(e.value, e.unit),
            ]
            for e in d.smallest_margins
        ],
    )
    stretches = table(
        ["condition", "rows", "time", "extreme"],
        [
            [
                s.condition,
                f"{s.first_row}-{s.last_row}",
                "-" if s.start_time_s is None else f"{s.start_time_s:g}-{s.end_time_s:g} s",
                s.detail,
            ]
            for s in d.stretches
        ],
    )
    return "\n\n".join(["\n".join(lines + extremes), margins, stretches, _findings(d.findings)])

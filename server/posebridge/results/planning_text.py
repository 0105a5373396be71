"""Plain-text tables of the path, sequence, joint-move and placement results for the CLI."""

from __future__ import annotations

from posebridge.results.planning import (
    JointPlanReport,
    PathCheckReport,
    PlacementReport,
    SequenceReport,
    group_path_findings,
)

__all__ = [
    "render_joint_plan",
    "render_path_check",
    "render_placement",
    "render_sequence",
]


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
        f"Cycle time: {_number(report.cycle_time_s, 2)} s rest to rest (upper bound), "
        f"{_number(report.blended_cycle_time_s, 2)} s blended",
        f"  rest to rest: {report.blend_note}",
        f"  {report.blended_note}",
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
            _number(s.blended_duration_s, 3),
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
            "blended s",
            "speed",
            "environment clearance mm",
            "self-clearance mm",
        ],
        rows,
    )
    if report.findings:
        lines += ["", "Findings:"]
        repeated = {
            (g.severity, g.kind, g.cause): g
            for g in group_path_findings(report.findings)
            if g.count > 1
        }
        shown: set[tuple[str, str, str]] = set()
        for f in report.findings:
            key = (f.severity, f.kind, f.cause or "")
            count = ""
            if key in repeated:
                if key in shown:
                    continue
                shown.add(key)
                group = repeated[key]
                count = f"{group.count} x, worst "
                f = group.worst
            where = (
                f"seg {f.segment_index} at {100.0 * f.fraction_worst:.0f} %"
                if f.segment_index is not None
                else "path"
            )
            lines.append(f"  [{f.severity}] {count}{f.kind} ({where}): {f.message}")
    if report.robot_geometry_missing:
        lines.insert(0, f"WARNING: {report.robot_geometry_missing}")
    return "\n".join(lines)


def render_sequence(report: SequenceReport) -> str:
    """Plain-text summary and per-waypoint table of a solution-sequence search."""
    lines = [f"Path {report.path!r} ({report.robot}, tool {report.tool}): {report.summary}"]
    lines.append(
        f"Cycle time rest to rest: current {_number(report.current.cycle_time_s, 2)} s, "
        f"fastest {_number(report.best.cycle_time_s if report.best else None, 2)} s"
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
    lines += _table(
        ["wp", "waypoint", "current branch", "fastest branch", "fastest joints", "rewrite"], rows
    )
    violations = report.current.violations
    if violations:
        lines += ["", "The current choice breaks:"]
        lines += [f"  {v.message}" for v in violations]
    lines += ["", report.note]
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
        lines += ["", *_table(["#", *report.joint_names], rows)]
    if report.robot_geometry_missing:
        lines.insert(0, f"WARNING: {report.robot_geometry_missing}")
    return "\n".join(lines)


def render_placement(report: PlacementReport, *, top: int = 10) -> str:
    """Plain-text table of the best base poses."""
    lines = [
        f"Base placement for {report.robot}: {report.candidates_evaluated} candidates, "
        f"{len(report.targets)} targets; current base score {_number(report.current_score, 3)}",
        report.score_words,
        report.score_note,
        *([report.speed_note] if report.speed_note else []),
        "",
    ]
    rows = [
        [
            str(c.rank) if c.tie_rank in (0, c.rank) else f"{c.rank} (ties {c.tie_rank})",
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
            _number(c.blended_cycle_time_s, 2),
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
            "blended s",
        ],
        rows,
    )
    if report.robot_geometry_missing:
        lines.insert(0, f"WARNING: {report.robot_geometry_missing}")
    return "\n".join(lines)

"""Plain-text tables of the placement results for the CLI."""

from __future__ import annotations

from posebridge.results.planning import PlacementReport
from posebridge.results.text_table import number_text, table_lines

__all__ = [
    "render_placement",
]


def render_placement(report: PlacementReport, *, top: int = 10) -> str:
    """Plain-text table of the best base poses."""
    lines = [
        f"Base placement for {report.robot}: {report.candidates_evaluated} candidates, "
        f"{len(report.targets)} targets; current base score {number_text(report.current_score, 3)}",
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
            number_text(c.min_margin_deg),
            number_text(c.min_clearance_mm),
            number_text(c.cycle_time_s, 2),
            number_text(c.blended_cycle_time_s, 2),
        ]
        for c in report.best[:top]
    ]
    lines += table_lines(
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

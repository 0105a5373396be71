"""Base placement results at the boundary: the JSON-ready models, their text and the builder.

:func:`placement_result` turns the SI
:class:`~posebridge.planning.placement.PlacementResult` of
:func:`~posebridge.planning.placement.search_base_placement` (or of the table
search, :func:`~posebridge.planning.placement_table.search_table_placement`) into
:class:`PlacementReport` (mm, deg, s): the best candidates with their
per-target details, the full score grid for a heatmap, and the notes that
explain the score and the cycle times. :func:`render_placement` is its
plain-text table for the CLI.
"""

from __future__ import annotations

import math
from typing import Literal

from pydantic import BaseModel, ConfigDict, Field

from posebridge.planning.placement import BLENDED_TOP, PlacementResult, RankedCandidate
from posebridge.results.text_table import number_text, table_lines
from posebridge.units import deg_from_rad, joints_user_from_si, mm_from_m

__all__ = [
    "PlacementCandidateReport",
    "PlacementGridReport",
    "PlacementReport",
    "RailCandidateReport",
    "TableCandidateReport",
    "TargetPlacementReport",
    "placement_result",
    "render_placement",
]

SCORE_NOTE = (
    "score = reach fraction + quality / (2 K); quality = mean of limit margin, "
    "position-Jacobian inverse condition and share of targets with comfortable clearance"
)
CYCLE_TIME_NOTE = (
    "estimate: joint moves as synchronised trapezoids between the chosen configurations, "
    "linear moves at the requested speed without joint-limit cap, blends ignored (rest "
    f"to rest); blended: for the {BLENDED_TOP} best candidates only, every path sampled "
    "and timed through its blends as the path check does"
)
RAIL_NOTE = (
    "; rail search: each target from its own track position, both times with the track's "
    "travel (a joint move synchronised with it, a linear move at least as long as its own move)"
)
TRACK_BASE_NOTE = (
    "; base search on a track cell: the robot's foot on the carriage, each target from its "
    "own track position, both times with the track's travel (a joint move synchronised with "
    "it, a linear move at least as long as its own move)"
)
TABLE_NOTE = (
    "; table search: each target on the table at its own table angle, the estimate with the "
    "table's turn (a joint move synchronised with it, a linear move at least as long as the "
    "turn, a waypoint off the table holding the angle before it), the blended time with the "
    "table moved and each waypoint at that angle"
)
SCORE_WORDS = (
    "The score is the share of the targets the robot reaches on one arm branch, plus at "
    "most half a target's worth for how comfortably it reaches them (joint limits far "
    "away, far from stretched or folded poses, clear of the cell); a score of 1 or more "
    "means every target is reached."
)


class _Report(BaseModel):
    model_config = ConfigDict(extra="forbid", allow_inf_nan=False)


class RailCandidateReport(_Report):
    """Where a candidate puts the track's rail, and the travel its targets need."""

    offset_mm: float = Field(
        description="The rail line's offset from the current one, across the travel in the floor "
        "plane (along the current rail frame's y turned to this yaw)."
    )
    yaw_deg: float = Field(description="Direction of travel about world z.")
    origin_mm: list[float] = Field(
        description="Rail frame origin (track position 0) of this line; the configured travel "
        "keeps its middle where the current one has it along the line."
    )
    direction: list[float] = Field(description="Unit direction of travel.")
    travel_needed_mm: list[float] | None = Field(
        description="[lower, upper] track positions that cover every reached target's chosen "
        "position, with the travel margin at both ends; null when none is reached."
    )
    travel_configured_mm: list[float] = Field(description="The track's configured range.")
    fits: bool = Field(description="The travel needed lies within the configured range.")
    rail_length_needed_mm: float | None = Field(
        description="Travel needed plus the carriage length: the rail the targets need."
    )


class TableCandidateReport(_Report):
    """Where a candidate puts the turntable, and the table angles its targets use."""

    name: str = Field(description="The turntable moved.")
    position_mm: list[float] = Field(
        description="Top centre of the plate (on the axis); its height and axis direction are "
        "kept, the robot stays where it is."
    )
    move_mm: list[float] = Field(description="The move from the table's current position.")
    angle_span_deg: list[float] | None = Field(
        description="[lowest, highest] table angle the reached targets on the table use; null "
        "when none is reached."
    )
    angle_range_deg: list[float] = Field(description="The table's configured angle range.")


class TargetPlacementReport(_Report):
    """One target at one candidate base pose."""

    name: str
    reached: bool = Field(description="Reached on the candidate's branch, within limits and free.")
    reason: str
    joints_deg: list[float] | None
    min_margin_deg: float | None
    manipulability: float | None
    clearance_mm: float | None
    track_position_mm: float | None = Field(
        default=None,
        description="Cell with a track (rail search, or base search on a track cell): the "
        "track position the target is reached from (null without a track or where not "
        "reached).",
    )
    table_angle_deg: float | None = Field(
        default=None,
        description="Table search: the table angle the target is reached at (null for a target "
        "the table does not carry, another search, or where not reached).",
    )


class PlacementCandidateReport(_Report):
    """One candidate base pose, its score and its per-target details."""

    rank: int
    x_mm: float
    y_mm: float
    yaw_deg: float
    pedestal_height_mm: float
    score: float
    reach_fraction: float
    targets_reached: int
    branch: str
    min_margin_deg: float | None
    manipulability: float | None
    min_clearance_mm: float | None
    cycle_time_s: float | None = Field(
        description="Rest-to-rest estimate over the cell's paths (upper bound; on a cell with "
        "a track, the track's travel included); null if a path waypoint is not reached."
    )
    blended_cycle_time_s: float | None = Field(
        default=None,
        description="Blended cycle time over the cell's paths with the base here (rail search: "
        "the rail on this line, each target at its track position; the paths sampled and timed "
        "as the path check does); only for the best-ranked few candidates "
        "(see cycle_time_note), null otherwise or if a path cannot be timed.",
    )
    targets: list[TargetPlacementReport]
    rail: RailCandidateReport | None = Field(
        default=None,
        description="Rail search: where this candidate puts the rail and the travel it needs "
        "(x_mm, y_mm are then the middle of the configured travel on its line, yaw_deg the "
        "direction of travel).",
    )
    table: TableCandidateReport | None = Field(
        default=None,
        description="Table search: where this candidate puts the turntable and the angles its "
        "targets use (x_mm, y_mm are then the table's position, yaw_deg and "
        "pedestal_height_mm the robot's, unchanged).",
    )
    tie_rank: int = Field(
        default=0,
        description="Rank of the best candidate this one ties with (within score_noise); its "
        "own rank when it ties with no better one.",
    )


class PlacementGridReport(_Report):
    """The full score grid for a heatmap, shape (ny, nx, nyaw, nheights).

    For a rail search ``x_mm`` holds the rail line's offsets, ``y_mm`` is ``[0]`` and
    ``yaw_deg`` the directions of travel; for a table search ``x_mm`` and ``y_mm`` are the
    table's positions (its axis point), ``yaw_deg`` and ``pedestal_height_mm`` the robot's.
    """

    x_mm: list[float]
    y_mm: list[float]
    yaw_deg: list[float]
    pedestal_height_mm: list[float]
    score: list[list[list[list[float]]]]
    reach_fraction: list[list[list[list[float]]]]


class PlacementReport(_Report):
    """Ranked base poses and the score grid."""

    search: Literal["base", "rail", "table"] = Field(
        default="base",
        description="What was searched: the robot's base pose, (a cell with a track) the "
        "rail's line, each target reached from its own track position, or (a turntable cell) "
        "the table's position, each target on it reached at its own table angle.",
    )
    robot: str
    table_name: str | None = Field(
        default=None, description="Table search: the turntable whose position was searched."
    )
    targets: list[str]
    candidates_evaluated: int
    best: list[PlacementCandidateReport]
    grid: PlacementGridReport
    score_note: str
    cycle_time_note: str
    current_score: float | None = Field(description="Score of the cell's current base pose.")
    current_cycle_time_s: float | None = Field(
        default=None, description="Cycle time estimate at the current base pose, if on the grid."
    )
    score_words: str = Field(default="", description="The score explained in plain words.")
    score_noise: float = Field(
        default=0.0,
        description="Median score change over one grid step at equal reach: scores this close tie.",
    )
    speed_note: str = Field(
        default="",
        description="Set when the best candidate's cycle is slower than the current base's.",
    )
    robot_geometry_missing: str | None = Field(
        default=None,
        description="Set (a warning text) when the robot has no collision geometry: every "
        "clearance in this result is then meaningless.",
    )


def _optional(value: float) -> float | None:
    """Return ``value``, None where it is not finite (nothing to report)."""
    return float(value) if math.isfinite(value) else None


def _speed_note(best_s: float | None, current_s: float | None, what: str = "base") -> str:
    """Say so when the best candidate's cycle is slower than the current one's (``what``: base, table)."""
    if best_s is None or current_s is None or best_s <= current_s:
        return ""
    return (
        f"The best-scored {what} is slower than the current one: cycle {best_s:.2f} s against "
        f"{current_s:.2f} s ({best_s - current_s:.2f} s more per cycle)."
    )


def _rail_report(result: PlacementResult, candidate: RankedCandidate) -> RailCandidateReport | None:
    """Return the rail of a rail-search candidate in boundary units (None for a base search)."""
    if candidate.rail_frame is None or result.rail_travel is None:
        return None
    grid = result.grid
    _, ix, iyaw, _ = candidate.index
    configured = [float(v) for v in mm_from_m(result.rail_travel)]
    needed = candidate.travel_needed
    needed_mm = None if needed is None else [float(v) for v in mm_from_m(needed)]
    return RailCandidateReport(
        offset_mm=float(mm_from_m(grid.x[ix])),
        yaw_deg=float(deg_from_rad(grid.yaw[iyaw])),
        origin_mm=mm_from_m(candidate.rail_frame[:3, 3]).tolist(),
        direction=candidate.rail_frame[:3, 0].tolist(),
        travel_needed_mm=needed_mm,
        travel_configured_mm=configured,
        fits=needed_mm is not None
        and configured[0] <= needed_mm[0]
        and needed_mm[1] <= configured[1],
        rail_length_needed_mm=None
        if needed is None
        else float(mm_from_m(needed[1] - needed[0] + result.carriage_length)),
    )


def _table_report(
    result: PlacementResult, candidate: RankedCandidate
) -> TableCandidateReport | None:
    """Return the table of a table-search candidate in boundary units (None for other searches)."""
    point, angle_range = result.table_point, result.table_range
    if point is None or angle_range is None:
        return None
    iy, ix, _, _ = candidate.index
    position = [float(result.grid.x[ix]), float(result.grid.y[iy]), float(point[2])]
    span = candidate.table_span
    return TableCandidateReport(
        name=result.table_name,
        position_mm=mm_from_m(position).tolist(),
        move_mm=mm_from_m([position[0] - point[0], position[1] - point[1], 0.0]).tolist(),
        angle_span_deg=None if span is None else deg_from_rad(span).tolist(),
        angle_range_deg=deg_from_rad(angle_range).tolist(),
    )


def _candidate(result: PlacementResult, candidate: RankedCandidate) -> PlacementCandidateReport:
    """Return one ranked candidate in boundary units."""
    grid = result.grid
    iy, ix, iyaw, ih = idx = candidate.index
    reached = result.reached[idx]
    q = result.q[idx]
    prismatic = result.robot.prismatic
    margins = candidate.limit_margin
    clearance = candidate.clearance
    targets = [
        TargetPlacementReport(
            name=name,
            reached=bool(reached[k]),
            reason="" if reached[k] else candidate.reasons[k],
            joints_deg=joints_user_from_si(q[k], prismatic).tolist() if reached[k] else None,
            min_margin_deg=_optional(float(deg_from_rad(margins[k]))) if reached[k] else None,
            manipulability=float(candidate.manipulability[k]) if reached[k] else None,
            clearance_mm=_optional(float(mm_from_m(clearance[k]))) if reached[k] else None,
            track_position_mm=(
                _optional(float(mm_from_m(candidate.track_position[k])))
                if candidate.track_position is not None and reached[k]
                else None
            ),
            table_angle_deg=(
                _optional(float(deg_from_rad(candidate.table_angle[k])))
                if candidate.table_angle is not None and reached[k]
                else None
            ),
        )
        for k, name in enumerate(result.target_names)
    ]
    reached_clearance = clearance[reached]
    rail = _rail_report(result, candidate)
    x, y = grid.x[ix], grid.y[iy]
    frame, travel = candidate.rail_frame, result.rail_travel
    if frame is not None and travel is not None:  # the middle of the travel on the line
        x, y, _ = frame[:3, 3] + 0.5 * (travel[0] + travel[1]) * frame[:3, 0]
    return PlacementCandidateReport(
        rank=candidate.rank,
        x_mm=float(mm_from_m(x)),
        y_mm=float(mm_from_m(y)),
        yaw_deg=float(deg_from_rad(grid.yaw[iyaw])),
        pedestal_height_mm=float(mm_from_m(grid.height[ih])),
        score=float(result.score[idx]),
        reach_fraction=float(result.reach_fraction[idx]),
        targets_reached=int(reached.sum()),
        branch=candidate.branch,
        min_margin_deg=(
            _optional(float(deg_from_rad(margins[reached].min()))) if reached.any() else None
        ),
        manipulability=_optional(float(result.manipulability[idx])),
        min_clearance_mm=(
            _optional(float(mm_from_m(reached_clearance.min()))) if reached_clearance.size else None
        ),
        cycle_time_s=_optional(float(result.cycle_time[idx])),
        blended_cycle_time_s=candidate.blended_cycle_time,
        targets=targets,
        rail=rail,
        table=_table_report(result, candidate),
        tie_rank=candidate.tie_rank,
    )


def placement_result(result: PlacementResult) -> PlacementReport:
    """Build the boundary model (mm, deg, s) of a base placement search.

    Parameters
    ----------
    result : PlacementResult
        From :func:`posebridge.planning.placement.search_base_placement`.

    Returns
    -------
    PlacementReport
    """
    robot = result.robot
    grid = result.grid
    best = [_candidate(result, candidate) for candidate in result.best]
    current = result.current
    current_cycle = None if current is None else _optional(float(result.cycle_time[current]))
    search: Literal["base", "rail", "table"] = (
        "table" if grid.table_axis is not None else "rail" if grid.rail else "base"
    )
    note = {"base": "", "rail": RAIL_NOTE, "table": TABLE_NOTE}[search]
    if search == "base" and result.track_position is not None:
        note = TRACK_BASE_NOTE
    return PlacementReport(
        search=search,
        robot=robot.name,
        table_name=result.table_name if search == "table" else None,
        robot_geometry_missing=robot.geometry_missing,
        targets=list(result.target_names),
        candidates_evaluated=grid.size,
        best=best,
        grid=PlacementGridReport(
            x_mm=mm_from_m(grid.x).tolist(),
            y_mm=mm_from_m(grid.y).tolist(),
            yaw_deg=deg_from_rad(grid.yaw).tolist(),
            pedestal_height_mm=mm_from_m(grid.height).tolist(),
            score=result.score.tolist(),
            reach_fraction=result.reach_fraction.tolist(),
        ),
        score_note=SCORE_NOTE,
        cycle_time_note=CYCLE_TIME_NOTE + note,
        current_score=None if current is None else float(result.score[current]),
        current_cycle_time_s=current_cycle,
        score_words=SCORE_WORDS,
        score_noise=result.score_noise,
        speed_note=_speed_note(
            best[0].cycle_time_s if best else None,
            current_cycle,
            "table position" if search == "table" else "base",
        ),
    )


def _render_rail(report: PlacementReport, top: int) -> list[str]:
    """Header and table of a rail search's best rail lines."""
    lines = [
        f"Rail placement for {report.robot}: {report.candidates_evaluated} rail lines, "
        f"{len(report.targets)} targets; current rail score {number_text(report.current_score, 3)}",
        report.score_words,
        report.score_note,
        report.cycle_time_note,
        "",
    ]
    rows = []
    for c in report.best[:top]:
        rail = c.rail
        needed = None if rail is None else rail.travel_needed_mm
        rows.append(
            [
                str(c.rank) if c.tie_rank in (0, c.rank) else f"{c.rank} (ties {c.tie_rank})",
                "-" if rail is None else f"{rail.offset_mm:.0f}",
                f"{c.yaw_deg:.0f}",
                f"{c.score:.3f}",
                f"{c.targets_reached}/{len(c.targets)}",
                c.branch,
                number_text(c.min_margin_deg),
                number_text(c.min_clearance_mm),
                "-" if needed is None else f"{needed[0]:.0f}..{needed[1]:.0f}",
                "-" if rail is None or needed is None else ("yes" if rail.fits else "no"),
                number_text(None if rail is None else rail.rail_length_needed_mm, 0),
            ]
        )
    header = ["rank", "offset mm", "yaw deg", "score", "reached", "branch", "margin deg"]
    header += ["clearance mm", "travel needed mm", "fits", "rail mm"]
    return lines + table_lines(header, rows)


def _render_table(report: PlacementReport, top: int) -> list[str]:
    """Header and table of a table search's best table positions, and the best one's angles."""
    lines = [
        f"Table placement for {report.robot} ({report.table_name}): {report.candidates_evaluated} table "
        f"positions, {len(report.targets)} targets; current table score "
        f"{number_text(report.current_score, 3)}",
        report.score_words,
        report.score_note,
        report.cycle_time_note,
        *([report.speed_note] if report.speed_note else []),
        "",
    ]
    rows = []
    for c in report.best[:top]:
        span = None if c.table is None else c.table.angle_span_deg
        rows.append(
            [
                str(c.rank) if c.tie_rank in (0, c.rank) else f"{c.rank} (ties {c.tie_rank})",
                f"{c.x_mm:.0f}",
                f"{c.y_mm:.0f}",
                f"{c.score:.3f}",
                f"{c.targets_reached}/{len(c.targets)}",
                c.branch,
                number_text(c.min_margin_deg),
                number_text(c.min_clearance_mm),
                number_text(c.cycle_time_s, 2),
                "-" if span is None else f"{span[0]:.0f}..{span[1]:.0f}",
            ]
        )
    header = ["rank", "table x mm", "table y mm", "score", "reached", "branch", "margin deg"]
    header += ["clearance mm", "cycle s", "angles used deg"]
    lines += table_lines(header, rows)
    if report.best and report.best[0].table is not None:
        best = report.best[0]
        low, high = best.table.angle_range_deg  # type: ignore[union-attr]
        angles = ", ".join(
            f"{t.name} {t.table_angle_deg:.1f}"
            for t in best.targets
            if t.table_angle_deg is not None
        )
        lines += ["", f"Rank 1 table angles (deg, range {low:.0f}..{high:.0f}): {angles or '-'}"]
    return lines


def render_placement(report: PlacementReport, *, top: int = 10) -> str:
    """Plain-text table of the best base poses (rail lines, table positions for those searches)."""
    if report.search in ("rail", "table"):
        lines = _render_rail(report, top) if report.search == "rail" else _render_table(report, top)
        if report.robot_geometry_missing:
            lines.insert(0, f"WARNING: {report.robot_geometry_missing}")
        return "\n".join(lines)
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

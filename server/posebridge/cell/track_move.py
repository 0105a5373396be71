"""Move the track's rail, widen its travel or set its home position in the cell file.

The cell file edits of the page's track, in the file's units (mm):

* applying a rail placement candidate (:mod:`posebridge.planning.placement`,
  the rail search) puts the rail frame at track position 0 on the candidate's
  ``origin_mm`` and ``direction`` and widens the travel so that it covers
  both the configured range and the travel the candidate's targets need;
* dragging the carriage sets ``home_mm``, the track position the cell is
  shown at.

**Travel widening.** With the configured range ``[a, b]`` and the needed travel
``[n0, n1]`` (mm), the saved range is ``[min(a, floor(n0)), max(b, ceil(n1))]``:
the smallest range of whole millimetres holding both, so an edit never shortens
the travel (a joint-values waypoint, a target's pinned track value or the home
position inside it stays inside) and the needed ends are rounded outwards.

Everything on the carriage (pedestal, robot: the cell's ``base`` is given on the
carriage top) rides on the rail frame, so it moves with the rail
(``T_world_base(s) = T_world_rail Trans(s, 0, 0) Trans(0, 0, h) T_carriage_base``,
:mod:`posebridge.cell.external_axes`); fixtures, keep-outs, targets and paths
do not change. The edited cell is validated whole: a zero or vertical direction
and a home position outside the travel are refused with the track's own rules
(:class:`posebridge.cell.model.Track`).
"""

from __future__ import annotations

import math
from collections.abc import Sequence

from posebridge.cell.model import Cell, CellFileError, validate_cell

__all__ = ["cell_with_track_moved", "widened_travel"]


def widened_travel(
    configured_mm: Sequence[float], needed_mm: Sequence[float]
) -> tuple[float, float]:
    """Return the smallest whole-millimetre travel holding the configured and the needed one.

    ``[min(a, floor(n0)), max(b, ceil(n1))]`` for configured ``[a, b]`` and needed
    ``[n0, n1]`` (module docstring).

    Parameters
    ----------
    configured_mm : sequence of float, length 2
        The track's ``range_mm`` ``[lower, upper]``, mm.
    needed_mm : sequence of float, length 2
        The travel the targets need ``[lower, upper]``, mm (a rail candidate's
        ``travel_needed_mm``).

    Returns
    -------
    tuple of float
        ``(lower, upper)``, mm.

    Raises
    ------
    CellFileError
        ``needed_mm`` is not two finite numbers, lower end first.
    """
    low, high = (float(v) for v in needed_mm)
    if not (math.isfinite(low) and math.isfinite(high)) or low > high:
        raise CellFileError(
            [
                "travel_needed_mm: expected two finite numbers, lower end first, "
                f"got [{low:g}, {high:g}]"
            ]
        )
    return (
        float(min(configured_mm[0], math.floor(low))),
        float(max(configured_mm[1], math.ceil(high))),
    )


def cell_with_track_moved(
    cell: Cell,
    *,
    origin_mm: Sequence[float] | None = None,
    direction: Sequence[float] | None = None,
    travel_needed_mm: Sequence[float] | None = None,
    home_mm: float | None = None,
) -> Cell:
    """Return ``cell`` with its track's rail, travel or home position changed (module docstring).

    A field left as None keeps its value.

    Parameters
    ----------
    cell : Cell
        The cell; it must have a track.
    origin_mm : sequence of float, length 3, optional
        The rail frame's origin (track position 0, rail top) in the world, mm.
    direction : sequence of float, length 3, optional
        The direction of travel in the world (normalised where used; not vertical).
    travel_needed_mm : sequence of float, length 2, optional
        Track positions the targets need, ``[lower, upper]`` mm; the travel is widened to
        hold them (:func:`widened_travel`).
    home_mm : float, optional
        The track position the cell is shown at, mm; it must lie in the (widened) travel.

    Returns
    -------
    Cell
        The edited cell, validated.

    Raises
    ------
    CellFileError
        The cell has no track, ``travel_needed_mm`` is not ordered, or the edited track breaks
        its rules (zero or vertical direction, home outside the travel), each named by its
        JSON path.
    """
    track = cell.track
    if track is None:
        raise CellFileError(["track: the cell has no track"])
    update: dict[str, object] = {}
    if origin_mm is not None:
        update["origin_mm"] = tuple(float(v) for v in origin_mm)
    if direction is not None:
        update["direction"] = tuple(float(v) for v in direction)
    if travel_needed_mm is not None:
        update["range_mm"] = widened_travel(track.range_mm, travel_needed_mm)
    if home_mm is not None:
        update["home_mm"] = float(home_mm)
    edited = cell.model_copy(update={"track": track.model_copy(update=update)})
    return validate_cell(edited.model_dump(mode="json", exclude_none=True))

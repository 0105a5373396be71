"""posebridge's colour palette: one table for the dashboard and the review report.

Data colours (arm branches, axis triads, warnings) are the Okabe–Ito set
(M. Okabe and K. Ito, "Color Universal Design (CUD): how to make figures and
presentations that are friendly to colorblind people", 2008), which stays
distinguishable for protan, deutan and tritan vision; ``branch-7`` is their
yellow darkened to read on white. Neutral greys are Paul Tol's pale and dark
greys, obstacle regions in joint space Tol's "light" qualitative scheme
(P. Tol, "Colour schemes", SRON technical note, 2021), paler than the branch
markers drawn on top of them. Fixtures are a warm grey, apart from the cool
grey of the robot.

The page reads the same colours from the CSS custom properties ``--pb-<name>``
of ``static/style.css`` (through ``static/palette.js``); a test keeps that
block equal to :data:`PALETTE`, so a reviewer sees one colour for one thing
on the page and in the report.
"""

from __future__ import annotations

__all__ = ["PALETTE", "REGION_COUNT", "region_colour", "rgba"]

_OKABE_ITO = {
    "orange": "#e69f00",
    "sky-blue": "#56b4e9",
    "bluish-green": "#009e73",
    "yellow": "#f0e442",
    "blue": "#0072b2",
    "vermillion": "#d55e00",
    "reddish-purple": "#cc79a7",
    "black": "#000000",
}

PALETTE: dict[str, str] = {
    **_OKABE_ITO,
    "branch-1": _OKABE_ITO["blue"],
    "branch-2": _OKABE_ITO["orange"],
    "branch-3": _OKABE_ITO["bluish-green"],
    "branch-4": _OKABE_ITO["vermillion"],
    "branch-5": _OKABE_ITO["reddish-purple"],
    "branch-6": _OKABE_ITO["sky-blue"],
    "branch-7": "#8c6d00",
    "branch-8": "#3b3b3b",
    "branch-singular": "#9a9a9a",
    "region-1": "#77aadd",
    "region-2": "#ee8866",
    "region-3": "#44bb99",
    "region-4": "#eedd88",
    "region-5": "#ffaabb",
    "region-6": "#99ddff",
    "region-7": "#bbcc33",
    "region-8": "#aaaa00",
    "region-9": "#cc6677",
    "region-10": "#aa4499",
    "region-11": "#117733",
    "region-12": "#882255",
    "axis-x": _OKABE_ITO["vermillion"],
    "axis-y": _OKABE_ITO["bluish-green"],
    "axis-z": _OKABE_ITO["blue"],
    "robot": "#8fa6b8",
    "robot-edge": "#4a5d6b",
    "fixture": "#c8bfae",
    "fixture-edge": "#8a7f6c",
    "target": _OKABE_ITO["reddish-purple"],
    "tool": _OKABE_ITO["black"],
    "limit-box": "#4a5d6b",
    "ok": _OKABE_ITO["bluish-green"],
    "warn": _OKABE_ITO["orange"],
    "bad": _OKABE_ITO["vermillion"],
    "ink": "#1d2730",
    "ink-muted": "#5a6772",
    "paper": "#ffffff",
    "canvas": "#eef1f4",
    "rule": "#d4dbe1",
    "accent": _OKABE_ITO["blue"],
    "focus": _OKABE_ITO["orange"],
}
"""Colour by name (the page's ``--pb-<name>``), ``#rrggbb``."""

REGION_COUNT = 12
"""Obstacle region colours ``region-1`` .. ``region-12``: Tol's "light" scheme, then four of
his "muted" scheme (same note), given to the objects a map shows in the cell's order, so up to
twelve objects in one map each get their own colour."""


def region_colour(index: int) -> str:
    """Return the joint-space region colour of the ``index``-th object a map shows.

    Objects are in the cell's obstacle order, cycling through the region colours (as
    ``regionColour`` in static/palette.js).
    """
    return PALETTE[f"region-{max(0, index) % REGION_COUNT + 1}"]


def rgba(colour: str, alpha: float) -> str:
    """CSS ``rgba(r, g, b, a)`` text of a ``#rrggbb`` colour with opacity ``alpha`` (0..1)."""
    red, green, blue = (int(colour[k : k + 2], 16) for k in (1, 3, 5))
    return f"rgba({red}, {green}, {blue}, {alpha:.2f})"

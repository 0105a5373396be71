"""Driving the dashboard in headless Chromium: start the browser, find figure pixels.

Used by the drag benchmark (:mod:`posebridge.bench.drag`) and the browser tests.
Needs the ``playwright`` Python package and a Chromium binary (Debian's
``chromium`` package by default); no browser is downloaded.
"""

from __future__ import annotations

import shutil
from pathlib import Path
from typing import Any

__all__ = [
    "CHROMIUM_ARGS",
    "CHROMIUM_PATH",
    "chromium_available",
    "figure_pixel",
    "launch_chromium",
    "plan_marker_position",
]

CHROMIUM_PATH = Path("/usr/bin/chromium")
CHROMIUM_ARGS = (
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--no-first-run",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
)

# Client pixel position of a data point in a 2D figure (plot area rectangle and axis ranges).
_PIXEL_SCRIPT = """([id, x, y]) => {
  const figure = document.getElementById(id);
  const area = figure.querySelector(".nsewdrag").getBoundingClientRect();
  const xr = figure._fullLayout.xaxis.range;
  const yr = figure._fullLayout.yaxis.range;
  return [
    area.left + ((x - xr[0]) / (xr[1] - xr[0])) * area.width,
    area.top + ((yr[1] - y) / (yr[1] - yr[0])) * area.height,
  ];
}"""


def chromium_available(executable: Path = CHROMIUM_PATH) -> bool:
    """Whether the Chromium binary and the playwright package are both present."""
    try:
        import playwright.sync_api  # noqa: F401
    except ImportError:
        return False
    return executable.is_file() or shutil.which(str(executable)) is not None


def launch_chromium(playwright: Any, *, executable: Path = CHROMIUM_PATH) -> Any:
    """Start headless Chromium from ``executable`` with the project's fixed flags."""
    return playwright.chromium.launch(executable_path=str(executable), args=list(CHROMIUM_ARGS))


def figure_pixel(page: Any, figure_id: str, x: float, y: float) -> tuple[float, float]:
    """Client pixel position of the data point (``x``, ``y``) in the 2D figure ``figure_id``."""
    point = page.evaluate(_PIXEL_SCRIPT, [figure_id, x, y])
    return float(point[0]), float(point[1])


def plan_marker_position(page: Any) -> tuple[float, float]:
    """Client pixel position of the target marker in the plan view of an open page."""
    position = page.evaluate("() => window.posebridge.getState().target.position_mm")
    return figure_pixel(page, "plan", position[0], position[1])

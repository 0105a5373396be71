"""How soon the dashboard is usable: page loads timed in a headless browser on a warm server.

Three moments of a page load, each the first animation frame at which it holds,
in milliseconds from the navigation start (``performance.now()`` of the page):

* ``page_shell_ms`` — the page shell and the cell list: a cell target is listed;
* ``page_arm_ms`` — the arm drawn in the 3D view and the inverse kinematics
  markers of the target drawn on the joint map;
* ``page_all_drawn_ms`` — everything: the arm in the plan and the elevation,
  both joint maps finished and drawn, the target check answered.

The server is started once and warmed by one page load (its kernels compiled or
loaded from the cache, the cell's clearance scene built); the figures are the
median of the following loads, each in a fresh browser page (no cached
responses between them). Targets on the project's 2-core machine: 1 s, 2 s, 4 s.

Needs the ``playwright`` Python package and a Chromium binary; no browser is downloaded.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from posebridge.bench.browser import chromium_available, launch_chromium

__all__ = ["bench_page_load", "measure_page_load"]

_VIEWPORT = {"width": 1600, "height": 1000}
_TIMEOUT_MS = 120_000

# Runs in the page before its own scripts: checks the three moments at every frame.
_RECORDER = """(() => {
  const times = {};
  window.__posebridgeLoadTimes = times;
  const arm = (id) => {
    const el = document.getElementById(id);
    const trace = el && el.data && el.data.find((t) => t.name === "arm");
    return Boolean(trace && trace.x && trace.x.length);
  };
  const markers = () => {
    const el = document.getElementById("joint-map");
    const trace = el && el.data && el.data.find((t) => t.meta && t.meta.role === "ik-solutions");
    return Boolean(trace && trace.x && trace.x.length);
  };
  // the two-joint map is drawn: its picture placed under the axes (pages before the pictures:
  // its region traces), the 3D joint map's traces drawn
  const mapDrawn = (map, base) => (map.picture
    ? Boolean(base.layout && base.layout.images && base.layout.images.length > 0)
    : Boolean(base.data && base.data.length > 1));
  const maps = () => {
    const s = window.posebridge && window.posebridge.getState();
    const base = document.getElementById("joint-map-base");
    const space = document.getElementById("joint-space-3d");
    return Boolean(s && s.jointMap && s.jointMap3 && s.targetCheck && base && mapDrawn(s.jointMap, base) &&
      space && space.data && space.data.length > 1);
  };
  const check = () => {
    const now = performance.now();
    if (times.shell === undefined && document.querySelector("[id^='cell-target-']")) times.shell = now;
    if (times.arm === undefined && arm("scene3d") && markers()) times.arm = now;
    if (times.all === undefined && times.arm !== undefined && arm("plan") && arm("elevation") && maps()) {
      times.all = now;
    }
    if (times.all === undefined) requestAnimationFrame(check);
  };
  requestAnimationFrame(check);
})();"""


def _one_load(browser: Any, base_url: str) -> dict[str, float]:
    page = browser.new_page(viewport=_VIEWPORT)
    try:
        page.add_init_script(_RECORDER)
        page.goto(base_url)
        page.wait_for_function(
            "() => window.__posebridgeLoadTimes && window.__posebridgeLoadTimes.all !== undefined",
            timeout=_TIMEOUT_MS,
        )
        times = page.evaluate("() => window.__posebridgeLoadTimes")
    finally:
        page.close()
    return {key: float(times[key]) for key in ("shell", "arm", "all")}


def measure_page_load(base_url: str, loads: int = 3) -> dict[str, float]:
    """Median load moments (ms) of ``loads`` page loads after one warm-up load.

    Returns
    -------
    dict
        ``shell_ms``, ``arm_ms``, ``all_drawn_ms``.
    """
    from playwright.sync_api import sync_playwright

    with sync_playwright() as playwright:
        browser = launch_chromium(playwright)
        try:
            _one_load(browser, base_url)
            runs = [_one_load(browser, base_url) for _ in range(loads)]
        finally:
            browser.close()
    return {
        f"{name}_ms": float(np.median([run[key] for run in runs]))
        for name, key in (("shell", "shell"), ("arm", "arm"), ("all_drawn", "all"))
    }


def bench_page_load(quick: bool) -> dict[str, float]:
    """Page load moments on the demo cell against a loopback server started here (module docstring).

    Returns ``page_shell_ms``, ``page_arm_ms`` and ``page_all_drawn_ms`` (NaN
    without Chromium or playwright).
    """
    from posebridge.api.server import background_server
    from posebridge.api.settings import Settings

    keys = ("page_shell_ms", "page_arm_ms", "page_all_drawn_ms")
    if not chromium_available():
        return dict.fromkeys(keys, math.nan)
    with background_server(Settings(robot="pb-arm6")) as url:
        result = measure_page_load(url, 2 if quick else 5)
    return {
        "page_shell_ms": result["shell_ms"],
        "page_arm_ms": result["arm_ms"],
        "page_all_drawn_ms": result["all_drawn_ms"],
    }

"""Drag-to-update and nudge-to-update round trips of the dashboard, in a headless browser.

One drag sample: the pointer moves the target in the plan view; the page
records the time from that input event (its ``timeStamp``) to the moment the
joint map has drawn the inverse kinematics markers for the new target (the
page's ``posebridge:ik-rendered`` event). One nudge sample: an arrow key
pressed in the plan view moves the target by one step, timed the same way. Samples are taken
one after another, so each includes the request, the solver, the answer and
the redraw. Sampling starts once the page has settled (on a cell: joint maps
and target check drawn).

Needs the ``playwright`` Python package and a Chromium binary (Debian's
``chromium`` package by default); no browser is downloaded.
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import Any

import numpy as np

from posebridge.bench.browser import (
    CHROMIUM_PATH,
    chromium_available,
    launch_chromium,
    plan_marker_position,
)

__all__ = ["bench_drag", "measure_drag_roundtrip", "measure_nudge_roundtrip"]

_VIEWPORT = {"width": 1600, "height": 1250}
_READY_TIMEOUT_MS = 60_000
_SAMPLE_TIMEOUT_MS = 5_000
_DRAG_RADIUS_PX = 8.0

# Ready: FK and IK answered, and on a cell the joint maps and the target check drawn,
# so the samples time the drag itself rather than the page still loading.
_READY_SCRIPT = """() => {
  const state = window.posebridge && window.posebridge.getState();
  if (!state || !state.fk || !state.ik || !state.target) return false;
  return !state.cellActive || Boolean(state.jointMap && state.jointMap3 && state.targetCheck);
}"""


# Resolves with the detail of the next ik-rendered event, or null after a timeout.
_ARM_SCRIPT = """(timeoutMs) => {
  window.__posebridgeNextRender = new Promise((resolve) => {
    const timer = setTimeout(() => resolve(null), timeoutMs);
    document.addEventListener("posebridge:ik-rendered", (event) => {
      clearTimeout(timer);
      resolve(event.detail);
    }, { once: true });
  });
}"""


def measure_drag_roundtrip(
    base_url: str,
    samples: int = 50,
    *,
    executable: Path = CHROMIUM_PATH,
    browser: Any | None = None,
) -> dict[str, float]:
    """Drag the plan-view target ``samples`` times and time each input-to-markers update.

    Parameters
    ----------
    base_url : str
        The dashboard's address, e.g. ``http://127.0.0.1:8000/``.
    samples : int
        Number of pointer moves, each waited for before the next.
    executable : Path
        Chromium binary, started here unless ``browser`` is given.
    browser : playwright Browser, optional
        An already running browser (sync API) to open the page in.

    Returns
    -------
    dict
        ``samples`` (completed), ``missed`` (moves with no update within
        5 s), and ``p50_ms``, ``p95_ms``, ``max_ms``, ``mean_ms`` of the
        round trip in milliseconds (NaN when no sample completed).
    """
    if browser is not None:
        return _summary(*_drag_samples(browser, base_url, samples))
    from playwright.sync_api import sync_playwright

    with sync_playwright() as playwright:
        started = launch_chromium(playwright, executable=executable)
        try:
            return _summary(*_drag_samples(started, base_url, samples))
        finally:
            started.close()


def _drag_samples(browser: Any, base_url: str, samples: int) -> tuple[list[float], int]:
    """Round-trip times (ms) of ``samples`` sequential drag moves, and the count of moves missed."""
    times: list[float] = []
    missed = 0
    page = browser.new_page(viewport=_VIEWPORT)
    try:
        page.goto(base_url)
        page.wait_for_function(_READY_SCRIPT, timeout=_READY_TIMEOUT_MS)
        x0, y0 = plan_marker_position(page)
        page.mouse.move(x0, y0)
        page.mouse.down()
        for k in range(samples):
            angle = 2.0 * math.pi * (k + 1) / max(samples, 1)
            page.evaluate(_ARM_SCRIPT, _SAMPLE_TIMEOUT_MS)
            page.mouse.move(
                x0 + _DRAG_RADIUS_PX * math.sin(angle),
                y0 - _DRAG_RADIUS_PX * (1.0 - math.cos(angle)),
            )
            detail = page.evaluate("() => window.__posebridgeNextRender")
            if detail is None:
                missed += 1
            else:
                times.append(float(detail["elapsedMs"]))
        page.mouse.up()
    finally:
        page.close()
    return times, missed


def measure_nudge_roundtrip(base_url: str, samples: int, *, browser: Any) -> dict[str, float]:
    """Nudge the target ``samples`` times with the arrow keys in the plan view.

    Each key press is waited for (its markers drawn) before the next; the keys
    alternate right and left so the target stays near its start. Returns the
    same figures as :func:`measure_drag_roundtrip`.
    """
    times: list[float] = []
    missed = 0
    page = browser.new_page(viewport=_VIEWPORT)
    try:
        page.goto(base_url)
        page.wait_for_function(_READY_SCRIPT, timeout=_READY_TIMEOUT_MS)
        page.focus("#plan")
        for k in range(samples):
            page.evaluate(_ARM_SCRIPT, _SAMPLE_TIMEOUT_MS)
            page.keyboard.press("ArrowRight" if k % 2 == 0 else "ArrowLeft")
            detail = page.evaluate("() => window.__posebridgeNextRender")
            if detail is None:
                missed += 1
            else:
                times.append(float(detail["elapsedMs"]))
    finally:
        page.close()
    return _summary(times, missed)


def _summary(times: list[float], missed: int) -> dict[str, float]:
    if not times:
        nan = float("nan")
        return {
            "samples": 0.0,
            "missed": float(missed),
            "p50_ms": nan,
            "p95_ms": nan,
            "max_ms": nan,
            "mean_ms": nan,
        }
    values = np.asarray(times)
    return {
        "samples": float(values.size),
        "missed": float(missed),
        "p50_ms": float(np.percentile(values, 50)),
        "p95_ms": float(np.percentile(values, 95)),
        "max_ms": float(values.max()),
        "mean_ms": float(values.mean()),
    }


BROWSER_MISSING = (
    f"playwright or Chromium ({CHROMIUM_PATH}) is not available "
    "(pip install 'posebridge[bench]'; apt-get install chromium)"
)


def bench_drag(quick: bool) -> dict[str, float | str]:
    """Drag round trip on the six-axis demo robot against a loopback server started here.

    Returns ``drag_roundtrip_p95_ms`` and ``drag_roundtrip_p50_ms``, and the arrow-key
    nudge round trip on the same page and server, ``nudge_roundtrip_p95_ms`` and
    ``nudge_roundtrip_p50_ms``; without Chromium or playwright their ``_missing`` keys
    with the reason. Target: drag p95 at most 50 ms; nudges as fast as drags.
    """
    keys = (
        "drag_roundtrip_p95_ms",
        "drag_roundtrip_p50_ms",
        "nudge_roundtrip_p95_ms",
        "nudge_roundtrip_p50_ms",
    )
    if not chromium_available():
        return {f"{key}_missing": BROWSER_MISSING for key in keys}
    from playwright.sync_api import sync_playwright

    from posebridge.api.server import background_server
    from posebridge.api.settings import Settings

    samples = 20 if quick else 50
    with background_server(Settings(robot="pb-arm6")) as url, sync_playwright() as playwright:
        browser = launch_chromium(playwright)
        try:
            drag = measure_drag_roundtrip(url, samples, browser=browser)
            nudge = measure_nudge_roundtrip(url, samples, browser=browser)
        finally:
            browser.close()
    return {
        "drag_roundtrip_p95_ms": drag["p95_ms"],
        "drag_roundtrip_p50_ms": drag["p50_ms"],
        "nudge_roundtrip_p95_ms": nudge["p95_ms"],
        "nudge_roundtrip_p50_ms": nudge["p50_ms"],
    }

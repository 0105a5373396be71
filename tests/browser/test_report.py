"""The review report opens offline in headless Chromium and draws its plots.

Every request the page makes other than the report file itself is refused
and recorded, so a hidden network dependency fails the test. Plotly draws
its 2D figures as SVG (``.main-svg``) and its 3D scene on a WebGL canvas
(plotly.js documentation, "WebGL vs SVG").
"""

from __future__ import annotations

import shutil
from pathlib import Path
from typing import Any

from posebridge.report import write_report
from posebridge.resources import data_folder
from posebridge.review.comments import CommentStore, Pin, comments_path_for

_TIMEOUT_MS = 180_000


def test_report_renders_offline(browser: Any, artifacts: Path, tmp_path: Path) -> None:
    cell = tmp_path / "demo-cell.json"
    shutil.copy(data_folder("robots") / "demo-cell.json", cell)
    CommentStore(comments_path_for(cell)).add(Pin("cell"), "Ana", "Check the fence line")
    report = write_report(cell, tmp_path / "review.html", map_resolution=64)
    url = report.resolve().as_uri()

    context = browser.new_context(viewport={"width": 1400, "height": 1000})
    blocked: list[str] = []

    def only_the_file(route: Any) -> None:
        if route.request.url == url:
            route.continue_()
        else:
            blocked.append(route.request.url)
            route.abort()

    context.route("**/*", only_the_file)
    page = context.new_page()
    console_errors: list[str] = []
    page_errors: list[str] = []
    page.on("console", lambda m: console_errors.append(m.text) if m.type == "error" else None)
    page.on("pageerror", lambda error: page_errors.append(str(error)))
    try:
        page.goto(url)
        page.wait_for_selector("body[data-plots]", timeout=_TIMEOUT_MS)
        assert page.get_attribute("body", "data-plots") == "ready"
        for key in ("plan", "elevation", "joint-map"):
            assert page.locator(f"#pb-{key} .main-svg").count() >= 1, key
        assert page.locator("#pb-scene3d canvas").count() >= 1  # the WebGL scene
        assert page.locator("#pb-scene3d .main-svg").count() >= 1  # its axes and legend
        # every trace of the plan view was drawn (one SVG group per trace)
        drawn = page.evaluate("(document.getElementById('pb-plan').data || []).length")
        assert page.locator("#pb-plan .scatterlayer .trace").count() == drawn
        assert page.get_by_text("Check the fence line").count() == 1
        page.screenshot(path=str(artifacts / "report-demo.png"), full_page=True)
    finally:
        context.close()
    assert blocked == []
    assert console_errors == []
    assert page_errors == []

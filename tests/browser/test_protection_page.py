"""The page under the server's content security policy, and a save that fails.

The policy (posebridge.api.guard) allows no inline script or style; the page
and plotly.js must still run and look as meant (plotly.js's own styles come
from /vendor/plotly.css). A save the server cannot make (here: the cell file
made read-only, answered 409 naming the file) is shown, and the move is kept
on the page until "Save again" succeeds. CSP violation events: CSP Level 3,
sec. 5.3 (common practice, no source for the rest).
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import httpx
import pytest

STATE = "() => window.posebridge.getState()"

RECORD_VIOLATIONS = """
window.__cspViolations = [];
document.addEventListener("securitypolicyviolation", (event) => {
  window.__cspViolations.push(`${event.violatedDirective} ${event.sourceFile}:${event.lineNumber}`);
});
"""


def test_page_runs_under_strict_policy(open_page: Any, artifacts: Path) -> None:
    page = open_page.page
    page.add_init_script(RECORD_VIOLATIONS)
    response = page.reload()
    assert response is not None
    assert "script-src 'self'" in response.headers["content-security-policy"]
    page.wait_for_function(
        "() => { const s = window.posebridge && window.posebridge.getState();"
        " return s && s.cell && s.ik && s.fk && s.jointMap && s.targetCheck; }",
        timeout=120_000,
    )
    # hover the joint map: plotly.js draws its hover label with its own styles
    box = page.locator("#joint-map").bounding_box()
    assert box is not None
    page.mouse.move(box["x"] + box["width"] / 2, box["y"] + box["height"] / 2)
    page.screenshot(path=str(artifacts / "page-strict-policy.png"), full_page=True)
    assert page.evaluate("() => window.__cspViolations") == []
    assert open_page.problems.console_errors == []
    assert open_page.problems.page_errors == []
    # plotly.js's global rule for its SVG layers applies from the served stylesheet
    position = page.evaluate(
        "() => getComputedStyle(document.querySelector('#joint-map .main-svg')).position"
    )
    assert position == "absolute"


def test_failed_save_is_shown_and_kept(open_page: Any, cell_path: Path, artifacts: Path) -> None:
    page = open_page.page
    before = page.evaluate(STATE)["target"]["position_mm"]
    name = page.evaluate(STATE)["selection"]["name"]
    mode = cell_path.stat().st_mode & 0o777
    cell_path.chmod(0o444)
    try:
        with page.expect_response(
            lambda r: r.request.method == "PATCH" and "/api/cell/targets/" in r.url
        ) as refused:
            page.focus("#plan")
            page.keyboard.press("ArrowUp")
        assert refused.value.status == 409
        page.wait_for_function(
            "() => document.getElementById('cell-save').dataset.state === 'error'",
            timeout=120_000,
        )
        shown = page.inner_text("#cell-save")
        assert shown.startswith("Not saved: ")
        assert "cell file is read-only" in shown
        assert cell_path.name in shown
        assert page.is_visible("#cell-save-retry")
        moved = page.evaluate(STATE)["target"]["position_mm"]
        step = page.evaluate(STATE)["stepMm"]
        # the page's documented key binding: ArrowUp is one step in +y; the move is kept
        assert moved == pytest.approx([before[0], before[1] + step, before[2]])
        page.screenshot(path=str(artifacts / "page-save-refused.png"))
    finally:
        cell_path.chmod(mode)
    with page.expect_response(
        lambda r: r.request.method == "PATCH" and "/api/cell/targets/" in r.url
    ) as saved:
        page.click("#cell-save-retry")
    assert saved.value.status == 200, saved.value.text()
    page.wait_for_function(
        "() => document.getElementById('cell-save').dataset.state === 'saved'", timeout=120_000
    )
    assert not page.is_visible("#cell-save-retry")
    cell = httpx.get(open_page.base_url + "api/cell", timeout=120).json()
    target = next(t for t in cell["scene"]["targets"] if t["name"] == name)
    assert target["position_mm"] == pytest.approx(moved, abs=1e-6)

"""Shared review in the browser: the reviewer's page is read-only, comments work.

A dashboard shared for review runs on loopback; the reviewer opens the
review link (the token in the query), the owner opens the plain address.
Expectations are our own contract (posebridge.api.auth module docstring:
reviewers change nothing, costly requests are rate-capped with 429 and
Retry-After, RFC 9110 sec. 10.2.3). IK answers shown on the page are compared
with the server's own answer for the same pose, checked against pinocchio in
tests/api/test_kinematics.py.
"""

from __future__ import annotations

import hashlib
import json
import math
import shutil
from collections.abc import Iterator
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import httpx
import numpy as np
import pytest

from posebridge.api.server import background_server
from posebridge.api.settings import Settings
from posebridge.bench.browser import plan_marker_position
from posebridge.resources import data_folder
from posebridge.review.access import new_review_token

_TIMEOUT_MS = 180_000
_READY = "() => document.body.dataset.review !== undefined"
_STATE = "() => window.posebridge.getState()"
_NOT_SAVED = "review mode: changes are not saved"
_WRITES = ("PUT", "PATCH", "DELETE")

# FK answered for the joints and IK for the target (as conftest's settled check)
_SETTLED = """() => {
  const s = window.posebridge && window.posebridge.getState();
  if (!s || !s.fk || !s.ik || !s.target) return false;
  const a = s.ik.target.position_mm, b = s.target.position_mm;
  return a.every((v, k) => v === b[k]) && s.fkJoints === s.joints;
}"""

# both joint maps describe the current cell, joints and held values (maps.js mapIsCurrent)
_MAPS_CURRENT = """() => {
  const s = window.posebridge.getState();
  const current = (m, chosen) => Boolean(m && s.cell && m.cell_etag === s.cell.etag &&
    chosen.every((j, k) => m.joints[k] === j) &&
    s.joints.every((v, i) => chosen.includes(i) || Math.abs(v - m.hold_deg[i]) <= 0.05));
  return current(s.jointMap, s.mapJoints) && current(s.jointMap3, s.map3Joints);
}"""

# every change of the status line from the page's start, as [level, text], repeats folded
_WATCH_STATUS = """document.addEventListener("DOMContentLoaded", () => {
  const status = document.getElementById("status");
  window.statusLog = [];
  const note = () => {
    const entry = [status.dataset.level, status.textContent];
    const last = window.statusLog[window.statusLog.length - 1];
    if (!last || last[0] !== entry[0] || last[1] !== entry[1]) window.statusLog.push(entry);
  };
  new MutationObserver(note).observe(status, {
    childList: true, characterData: true, subtree: true, attributes: true,
  });
});"""

# every text the joint map's progress row shows from the page's start
_WATCH_MAP_PROGRESS = """document.addEventListener("DOMContentLoaded", () => {
  const row = document.getElementById("map-progress-row");
  window.mapProgressLog = [];
  new MutationObserver(() => window.mapProgressLog.push(row.textContent)).observe(row, {
    childList: true, characterData: true, subtree: true,
  });
});"""

_MAP_MARKERS = """() => (document.getElementById("joint-map").data || [])
  .filter((trace) => trace.meta && trace.meta.role === "ik-solutions")
  .flatMap((trace) => trace.x.map((x, k) => [x, trace.y[k]]))"""

_TARGET_FIELDS = [f"#target-{name}" for name in ("x", "y", "z", "roll", "pitch", "yaw")]


def _shared_demo(folder: Path) -> Iterator[tuple[str, str, Path]]:
    """(base URL, review token, cell file) of a dashboard shared for review, serving a
    copy of the demo cell in ``folder``."""
    cell = folder / "demo-cell.json"
    shutil.copy(data_folder("robots") / "demo-cell.json", cell)
    token = new_review_token()
    with background_server(Settings(cell_path=cell), review_token=token) as url:
        yield url, token, cell


@pytest.fixture(scope="module")
def shared(tmp_path_factory: pytest.TempPathFactory) -> Iterator[tuple[str, str, Path]]:
    """(base URL, review token, cell file) of a dashboard shared for review."""
    yield from _shared_demo(tmp_path_factory.mktemp("review"))


@pytest.fixture
def fresh_shared(tmp_path: Path) -> Iterator[tuple[str, str, Path]]:
    """Like ``shared``, with rate caps of its own: a server per test, so the
    reviewer's job budget is not spent by earlier tests (all come from 127.0.0.1)."""
    yield from _shared_demo(tmp_path)


def _digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


@dataclass
class _Seen:
    """What a reviewer's page did: console errors, page errors, requests and refusals."""

    console_errors: list[str] = field(default_factory=list)
    page_errors: list[str] = field(default_factory=list)
    requests: list[tuple[str, str]] = field(default_factory=list)
    statuses: list[tuple[int, str]] = field(default_factory=list)

    def writes(self) -> list[tuple[str, str]]:
        return [(method, url) for method, url in self.requests if method in _WRITES]

    def refused(self, status: int) -> list[str]:
        return [url for code, url in self.statuses if code == status]


def _open_reviewer(
    browser: Any, url: str, token: str, prepare: Any = None
) -> tuple[Any, Any, _Seen]:
    """A reviewer's page on the review link, watched from its first request; `prepare(page)`
    runs before it loads (routes). Waits for FK and IK of the opening pose."""
    context = browser.new_context(viewport={"width": 1600, "height": 1250})
    context.add_init_script(_WATCH_STATUS)
    page = context.new_page()
    seen = _Seen()
    page.on("console", lambda m: seen.console_errors.append(m.text) if m.type == "error" else None)
    page.on("pageerror", lambda error: seen.page_errors.append(str(error)))
    page.on("request", lambda r: seen.requests.append((r.method, r.url)))
    page.on("response", lambda r: seen.statuses.append((r.status, r.url)))
    if prepare is not None:
        prepare(page)
    page.goto(f"{url}?token={token}")
    page.wait_for_function(_READY, timeout=_TIMEOUT_MS)
    page.wait_for_function(_SETTLED, timeout=_TIMEOUT_MS)
    return context, page, seen


def _drag_target(page: Any, dx: float, dy: float) -> list[float]:
    """Drag the plan view's target marker by (dx, dy) pixels; returns the target position
    once the page has the IK answer for it."""
    start = page.evaluate(_STATE)["target"]["position_mm"]
    x0, y0 = plan_marker_position(page)
    page.mouse.move(x0, y0)
    page.mouse.down()
    page.mouse.move(x0 + dx, y0 + dy, steps=6)
    page.mouse.up()
    page.wait_for_function(
        "(start) => { const s = window.posebridge.getState();"
        " return !s.dragging && s.target.position_mm.some((v, k) => v !== start[k]); }",
        arg=start,
        timeout=_TIMEOUT_MS,
    )
    page.wait_for_function(_SETTLED, timeout=_TIMEOUT_MS)
    position: list[float] = page.evaluate(_STATE)["target"]["position_mm"]
    return position


def _cell_frames(url: str) -> dict[str, Any]:
    """The cell's robot base and tool, as the page sends them with IK requests."""
    scene = httpx.get(url + "api/cell", timeout=120).json()["scene"]
    return {key: {k: scene[key][k] for k in ("position_mm", "rpy_deg")} for key in ("base", "tool")}


def _sorted_pairs(pairs: list[list[float]]) -> np.ndarray:
    return np.array(sorted((round(a, 6), round(b, 6)) for a, b in pairs))


def _open(browser: Any, url: str) -> tuple[Any, Any, list[str]]:
    context = browser.new_context(viewport={"width": 1600, "height": 1250})
    page = context.new_page()
    errors: list[str] = []
    page.on("pageerror", lambda error: errors.append(str(error)))
    page.goto(url)
    page.wait_for_function(_READY, timeout=_TIMEOUT_MS)
    return context, page, errors


def test_reviewer_page_is_read_only(
    browser: Any, artifacts: Path, shared: tuple[str, str, Path]
) -> None:
    url, token, cell = shared
    before = _digest(cell)
    context, page, errors = _open(browser, f"{url}?token={token}")
    writes: list[tuple[str, str, int]] = []
    page.on(
        "response",
        lambda r: (
            writes.append((r.request.method, r.url, r.status))
            if r.request.method in ("PUT", "PATCH", "DELETE")
            else None
        ),
    )
    try:
        assert page.url == url  # the token left the address bar
        banner = page.locator("#review-banner")
        banner.wait_for(state="visible", timeout=_TIMEOUT_MS)
        assert "Read-only review" in banner.inner_text()
        assert page.evaluate("window.posebridge.getState().readOnly") is True
        assert page.evaluate("document.body.dataset.review") == "reviewer"

        # drag across the plan view as if moving a target, then wait past any save delay
        box = page.locator("#plan").bounding_box()
        assert box is not None
        cx, cy = box["x"] + box["width"] / 2, box["y"] + box["height"] / 2
        page.mouse.move(cx, cy)
        page.mouse.down()
        page.mouse.move(cx + 60, cy + 40, steps=8)
        page.mouse.up()
        page.wait_for_timeout(1500)
        assert writes == []  # the page itself sends no change
        # a save attempted from the page itself is refused too
        status = page.evaluate(
            """async () => {
                const document = await (await fetch("/api/cell")).json();
                const answer = await fetch("/api/cell", {
                    method: "PUT",
                    headers: {"content-type": "application/json", "if-match": document.etag},
                    body: JSON.stringify(document.cell),
                });
                return answer.status;
            }"""
        )
        assert status == 403
        assert _digest(cell) == before

        # comments: pinned to a target chosen in the form
        page.select_option("#comment-pin", label="target rack-low-1")
        page.fill("#comment-author", "Ana <b>")
        page.fill("#comment-text", "Approach <i>too</i> steep")
        page.click("#comment-send")
        item = page.locator("#comments-list li").filter(has_text="Approach <i>too</i> steep")
        item.wait_for(timeout=_TIMEOUT_MS)
        assert "Ana <b>" in item.inner_text()  # shown as text, not markup
        assert page.locator("#comments-list li i").count() == 0
        assert page.locator("#comments-list button").count() == 0  # reviewers cannot resolve
        page.screenshot(path=str(artifacts / "review-reviewer.png"), full_page=True)
    finally:
        context.close()
    assert errors == []
    listed = httpx.get(url + "api/reviews/comments", timeout=120).json()  # the owner, on loopback
    assert [c["text"] for c in listed["comments"]] == ["Approach <i>too</i> steep"]
    assert listed["comments"][0]["pin"]["target"] == "rack-low-1"


def test_owner_page_is_not_read_only(
    browser: Any, artifacts: Path, shared: tuple[str, str, Path]
) -> None:
    url, _, _ = shared
    context, page, errors = _open(browser, url)
    try:
        assert page.locator("#review-banner").is_hidden()
        assert page.evaluate("window.posebridge.getState().readOnly") is False
        assert page.evaluate("document.body.dataset.review") == "owner"
        page.fill("#comment-author", "Owner")
        page.fill("#comment-text", "Noted")
        page.click("#comment-send")
        item = page.locator("#comments-list li").filter(has_text="Noted")
        item.wait_for(timeout=_TIMEOUT_MS)
        item.get_by_role("button", name="Mark resolved").click()
        page.locator("#comments-list li").filter(has_text="Noted").wait_for(
            state="detached", timeout=_TIMEOUT_MS
        )  # resolved comments are hidden until "Show resolved"
        page.check("#comments-resolved")
        assert page.locator("#comments-list li.pb-resolved").filter(has_text="Noted").count() == 1
        page.screenshot(path=str(artifacts / "review-owner.png"), full_page=True)
    finally:
        context.close()
    assert errors == []


def test_reviewer_drag_shows_ik_saves_nothing(
    browser: Any, artifacts: Path, fresh_shared: tuple[str, str, Path]
) -> None:
    url, token, cell = fresh_shared
    before = cell.read_bytes()
    context, page, seen = _open_reviewer(browser, url, token)
    try:
        page.wait_for_function(_MAPS_CURRENT, timeout=_TIMEOUT_MS)
        name = page.evaluate(_STATE)["selection"]["name"]
        start = page.evaluate(_STATE)["target"]["position_mm"]

        moved = _drag_target(page, -10, -6)
        # left and up on the plan view: x smaller, y larger (screen axes, common practice)
        assert moved[0] < start[0]
        assert moved[1] > start[1]
        state = page.evaluate(_STATE)
        assert state["readOnly"] is True
        # the IK markers on the joint map are the server's answer for the dragged pose
        # (the owner asks the same question here; IK itself is checked in tests/api)
        answer = httpx.post(
            url + "api/ik",
            json={"robot": state["robot"]["robot"], "pose": state["target"], **_cell_frames(url)},
            timeout=120,
        ).json()
        a, b = state["mapJoints"]
        expected = [[s["joints_deg"][a], s["joints_deg"][b]] for s in answer["solutions"]]
        assert expected, answer["reason"]
        np.testing.assert_allclose(
            _sorted_pairs(page.evaluate(_MAP_MARKERS)), _sorted_pairs(expected), atol=1e-6
        )
        page.wait_for_timeout(1000)  # past the page's save delay (400 ms after a drag)

        _drag_target(page, 12, 8)  # a second move: the note is not repeated
        page.wait_for_timeout(1000)
        page.wait_for_function(_MAPS_CURRENT, timeout=_TIMEOUT_MS)  # maps follow, paced
        statuses = page.evaluate("window.statusLog")
        notes = [entry for entry in statuses if entry[1] == _NOT_SAVED]
        assert notes == [["info", _NOT_SAVED]], statuses
        assert all(level != "error" for level, _ in statuses), statuses
        assert page.get_attribute("#cell-save", "data-state") == "review"
        page.screenshot(path=str(artifacts / "review-reviewer-drag.png"), full_page=True)
    finally:
        context.close()
    assert seen.writes() == []
    assert cell.read_bytes() == before
    # the server still has the target where the file has it
    saved = next(t for t in json.loads(before)["targets"] if t["name"] == name)
    served = httpx.get(url + "api/cell", timeout=120).json()["cell"]
    kept = next(t for t in served["targets"] if t["name"] == name)
    assert [kept["position_mm"], kept["rpy_deg"]] == [saved["position_mm"], saved["rpy_deg"]]
    assert seen.refused(429) == []  # normal use stays within the reviewer's caps
    assert seen.console_errors == []
    assert seen.page_errors == []


def test_reviewer_edit_controls_disabled(
    browser: Any, artifacts: Path, fresh_shared: tuple[str, str, Path]
) -> None:
    url, token, cell = fresh_shared
    before = cell.read_bytes()
    context, page, seen = _open_reviewer(browser, url, token)
    try:
        # a cell target is selected: typed values and "Target <- tool" would move it
        for control in [*_TARGET_FIELDS, "#target-from-tool"]:
            assert page.locator(control).is_disabled(), control
        # looking around, checks and comments stay open
        for control in [
            "#follow",
            "#snap",
            "#show-reach",
            "#place-run",
            "#path-check",
            "#pose-check",
            "#joint-slider-0",
            "#comment-send",
        ]:
            assert page.locator(control).is_enabled(), control
        # an approach waypoint is no cell target: its typed values stay on the page
        page.click("#cell-waypoint-pick-from-rack-1")
        page.wait_for_function(
            "() => !document.querySelector('#target-x').disabled", timeout=_TIMEOUT_MS
        )
        assert all(page.locator(c).is_enabled() for c in _TARGET_FIELDS)
        # a waypoint given as a pose is saved into the cell: its typed values are locked
        page.click("#cell-waypoint-unload-to-conveyor-3")
        page.wait_for_function(
            "() => document.querySelector('#target-x').disabled", timeout=_TIMEOUT_MS
        )
        page.click("#cell-target-rack-low-2")
        page.wait_for_function(
            "() => document.querySelector('#target-x').disabled", timeout=_TIMEOUT_MS
        )
        page.wait_for_function(_SETTLED, timeout=_TIMEOUT_MS)
        page.wait_for_function(_MAPS_CURRENT, timeout=_TIMEOUT_MS)

        # base placement: the search is open to reviewers, moving the base is not
        page.fill("#place-width", "300")
        page.fill("#place-count", "3")
        page.fill("#place-yaws", "2")
        page.click("#place-run")
        page.wait_for_function("() => window.posebridge.getState().placement", timeout=_TIMEOUT_MS)
        candidates = page.locator("#place-candidates li")
        assert candidates.count() > 0
        for k in range(candidates.count()):
            assert candidates.nth(k).get_attribute("aria-disabled") == "true"
        # a click that reaches the item anyway (keyboard, assistive tools) saves nothing
        candidates.first.dispatch_event("click")
        page.wait_for_function(
            f"() => document.getElementById('status').textContent === {json.dumps(_NOT_SAVED)}",
            timeout=_TIMEOUT_MS,
        )
        assert page.get_attribute("#status", "data-level") == "info"
        # a fixture: its fields are locked, and the keys do not move it
        page.click("#cell-fixture-rack")
        page.locator("#fixture-fields").wait_for(state="visible", timeout=_TIMEOUT_MS)
        for control in ("#fixture-x", "#fixture-y", "#fixture-z", "#fixture-yaw"):
            assert page.locator(control).is_disabled(), control
        placed = page.evaluate(_STATE)["fixture"]
        page.focus("#plan")
        page.keyboard.press("ArrowRight")
        assert page.evaluate(_STATE)["fixture"] == placed
        page.wait_for_timeout(500)
        page.screenshot(path=str(artifacts / "review-reviewer-controls.png"), full_page=True)
    finally:
        context.close()
    assert seen.writes() == []
    assert cell.read_bytes() == before
    assert seen.refused(429) == []
    assert seen.console_errors == []
    assert seen.page_errors == []


def test_reviewer_reach_sections(browser: Any, fresh_shared: tuple[str, str, Path]) -> None:
    url, token, _ = fresh_shared
    context, page, seen = _open_reviewer(browser, url, token)
    try:
        page.check("#show-reach")
        page.wait_for_function(
            "() => { const s = window.posebridge.getState(); return s.reachPlan && s.reachElevation; }",
            timeout=_TIMEOUT_MS,
        )
        state = page.evaluate(_STATE)
        # each section is the slice through the target: plan at its z, elevation at its y
        assert state["reachPlan"]["requested_mm"] == state["target"]["position_mm"][2]
        assert state["reachElevation"]["requested_mm"] == state["target"]["position_mm"][1]
        assert page.get_attribute("#status", "data-level") != "error"
    finally:
        context.close()
    assert seen.refused(403) == []
    assert seen.refused(429) == []
    assert seen.console_errors == []
    assert seen.page_errors == []


def test_reviewer_map_waits_after_429(browser: Any, fresh_shared: tuple[str, str, Path]) -> None:
    url, token, _ = fresh_shared
    starts: list[Any] = []

    def refuse_first_map(route: Any) -> None:
        body = route.request.post_data_json or {}
        if body.get("resolution") != 96:  # the 3D map goes through
            route.continue_()
            return
        starts.append(route.request)
        if len(starts) == 1:  # the two-joint map's first start: refused as over the cap
            route.fulfill(
                status=429,
                headers={"Retry-After": "2", "content-type": "application/json"},
                body=json.dumps({"detail": "too many heavy requests from this address"}),
            )
        else:
            route.continue_()

    def prepare(p: Any) -> None:
        # the waiting note is shown for the 2 s only, possibly before the page has settled:
        # every text of the progress row is recorded from the start
        p.add_init_script(_WATCH_MAP_PROGRESS)
        p.route("**/api/maps/joint", refuse_first_map)

    context, page, seen = _open_reviewer(browser, url, token, prepare=prepare)
    try:
        page.wait_for_function(_MAPS_CURRENT, timeout=_TIMEOUT_MS)
        statuses = page.evaluate("window.statusLog")
        progress = page.evaluate("window.mapProgressLog")
    finally:
        context.close()
    assert any("Waiting 2 s" in text for text in progress), progress
    # tried again, no start sooner than Retry-After (2 s) after the refusal; a start beyond the
    # second is allowed only for joints that changed meanwhile (the map follows the arm), never
    # a repeat of the same map
    assert len(starts) >= 2
    first = starts[0].timing["startTime"]
    assert all(request.timing["startTime"] - first >= 2000 - 50 for request in starts[1:])
    later_bodies = [json.dumps(request.post_data_json, sort_keys=True) for request in starts[1:]]
    assert len(set(later_bodies)) == len(later_bodies), later_bodies
    assert all(level != "error" for level, _ in statuses), statuses
    # the only console lines are the browser's own notes of the refused request
    assert all("429" in line for line in seen.console_errors), seen.console_errors
    assert seen.page_errors == []


def test_reviewer_page_paces_itself_from_the_served_caps(
    browser: Any, shared: tuple[str, str, Path]
) -> None:
    url, token, _ = shared
    # caps unlike the server's own, served in place of its access answer: the page must use these
    served = {
        "heavy": {"per_second": 0.5, "burst": 12},
        "compute": {"per_second": 8.0, "burst": 30},
    }

    def answer_with_other_caps(page: Any) -> None:
        def handle(route: Any) -> None:
            response = route.fetch()
            access = response.json()
            access["reviewer_caps"] = served
            route.fulfill(response=response, json=access)

        page.route("**/api/reviews/access", handle)

    context, page, seen = _open_reviewer(browser, url, token, prepare=answer_with_other_caps)
    try:
        assert page.evaluate(_STATE)["reviewerCaps"] == served
        pacing = page.evaluate(
            """async () => {
                const m = await import("/static/pacing.js");
                const caps = window.posebridge.getState().reviewerCaps;
                return { job: m.jobPacing(caps), kinematics: m.kinematicsPacing(caps) };
            }"""
        )
        # our own contract (static/pacing.js): jobs take 3/4 of the burst and 4/5 of the rate;
        # IK and lone FK 5/8 of the compute rate, FK while dragging 1/4 of it
        assert pacing["job"] == {"burst": 9, "perSecond": pytest.approx(0.4)}
        assert pacing["kinematics"] == {
            "ikMs": math.ceil(1000 / (8.0 * 5 / 8)),
            "fkMs": math.ceil(1000 / (8.0 * 5 / 8)),
            "fkDraggingMs": math.ceil(1000 / (8.0 / 4)),
        }
        # and the server's real answer carries what it enforces (tests/api/test_reviews.py)
        real = httpx.get(
            url + "api/reviews/access", headers={"Authorization": f"Bearer {token}"}, timeout=120
        ).json()["reviewer_caps"]
        assert set(real) >= {"heavy", "compute"}
        assert seen.page_errors == []
    finally:
        context.close()

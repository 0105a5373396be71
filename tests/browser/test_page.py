"""The dashboard in headless Chromium: loading, linking of the two halves, timing.

Computed values shown by the page are compared with answers of the HTTP API
for the same inputs (with the cell's robot base and tool), and those answers
are checked against pinocchio and closed forms in tests/api/test_kinematics.py.
"""

from __future__ import annotations

import json
import math
from pathlib import Path
from typing import Any

import httpx
import numpy as np
import pytest

from posebridge.bench.browser import figure_pixel, plan_marker_position
from posebridge.bench.drag import measure_drag_roundtrip
from posebridge.cell.files import load_cell
from posebridge.cell.scene import resolve_scene
from posebridge.units import mm_from_m

STATE = "() => window.posebridge.getState()"

MAP_MARKERS = """() => (document.getElementById("joint-map").data || [])
  .filter((trace) => trace.meta && trace.meta.role === "ik-solutions")
  .flatMap((trace) => trace.x.map((x, k) => [x, trace.y[k]]))"""

TCP_3D = """() => {
  const trace = (document.getElementById("scene3d").data || []).find((t) => t.name === "TCP");
  return [trace.x[0], trace.y[0], trace.z[0]];
}"""


def _cell_frames(base_url: str) -> dict[str, Any]:
    """The cell's robot base and tool, as the page sends them with FK and IK requests."""
    scene = httpx.get(base_url.rstrip("/") + "/api/cell", timeout=120).json()["scene"]
    return {
        "base": {k: scene["base"][k] for k in ("position_mm", "rpy_deg")},
        "tool": {k: scene["tool"][k] for k in ("position_mm", "rpy_deg")},
    }


def _api(base_url: str, path: str, body: dict[str, Any]) -> dict[str, Any]:
    response = httpx.post(base_url.rstrip("/") + path, json=body, timeout=120)
    assert response.status_code == 200, response.text
    return response.json()


def _sorted_pairs(pairs: list[list[float]]) -> np.ndarray:
    return np.array(sorted((round(a, 6), round(b, 6)) for a, b in pairs))


def _assert_map_shows_ik(page: Any, base_url: str) -> None:
    """The joint map's IK markers are the server's IK answer for the page's target."""
    state = page.evaluate(STATE)
    expected = _api(
        base_url, "/api/ik", {"robot": "pb-arm6", "pose": state["target"], **_cell_frames(base_url)}
    )
    a, b = state["mapJoints"]
    api_pairs = [[s["joints_deg"][a], s["joints_deg"][b]] for s in expected["solutions"]]
    assert api_pairs, expected["reason"]
    np.testing.assert_allclose(
        _sorted_pairs(page.evaluate(MAP_MARKERS)), _sorted_pairs(api_pairs), atol=1e-6
    )


def _drag(page: Any, start: tuple[float, float], dx: float, dy: float) -> None:
    page.mouse.move(*start)
    page.mouse.down()
    page.mouse.move(start[0] + dx, start[1] + dy, steps=5)
    page.mouse.up()


def test_load_page(open_page: Any, artifacts: Path) -> None:
    page, problems = open_page.page, open_page.problems
    page.wait_for_function(
        "() => { const s = window.posebridge.getState(); return s.jointMap && s.targetCheck; }",
        timeout=180_000,
    )
    page.screenshot(path=str(artifacts / "page-demo-cell.png"), full_page=True)
    assert problems.console_errors == []
    assert problems.page_errors == []
    assert problems.failed_requests == []
    # everything comes from this server: the page works with the network off
    assert all(
        url.startswith(open_page.base_url) or url.startswith("data:")
        for url in problems.requested_urls
    )
    assert "not a safety function" in page.inner_text("footer")
    assert page.get_attribute("#status", "data-level") != "error"
    # the demo cell is drawn: its solids in 3D, its targets in the plan, listed in the cell panel
    names = page.evaluate(
        "() => (document.getElementById('scene3d').data || []).map((t) => t.name)"
    )
    assert {"fixtures", "keep-out zones", "pedestal"} <= set(names)
    cell = httpx.get(open_page.base_url + "api/cell", timeout=120).json()
    plan_targets = page.evaluate(
        "() => (document.getElementById('plan-base').data || []).find((t) => t.name === 'cell targets').x"
    )
    assert plan_targets == [t["position_mm"][0] for t in cell["scene"]["targets"]]
    assert page.locator("#cell-items [role=option]").count() == len(cell["scene"]["targets"]) + sum(
        len(p["waypoints"]) for p in cell["scene"]["paths"]
    ) + len(cell["cell"]["fixtures"])
    # the joint map's regions name obstacles of the cell (GET /api/cell lists the shapes); they
    # are drawn as the server's picture of the map (a layout image of the base figure)
    regions = page.evaluate("() => window.posebridge.getState().jointMap.colliding_obstacles")
    page.wait_for_function(
        "() => ((document.getElementById('joint-map-base').layout || {}).images || []).length > 0",
        timeout=120_000,
    )
    images = page.evaluate(
        "() => ((document.getElementById('joint-map-base').layout || {}).images || [])"
        ".map((image) => [image.name, image.source.slice(0, 22)])"
    )
    assert images == [["regions", "data:image/png;base64,"]]
    shapes = {s["name"] for s in cell["scene"]["shapes"]} | {"floor"}
    assert regions
    assert set(regions) <= shapes
    # the opening selection is the first target, and the page's target is its world pose
    state = page.evaluate(STATE)
    first = cell["scene"]["targets"][0]
    assert state["selection"] == {"kind": "target", "name": first["name"]}
    assert state["target"]["position_mm"] == pytest.approx(first["position_mm"], abs=1e-9)


def test_drag_plan_target_updates_joint_map(open_page: Any, artifacts: Path) -> None:
    page = open_page.page
    before = page.evaluate(STATE)["target"]["position_mm"]
    name = page.evaluate(STATE)["selection"]["name"]
    x0, y0 = plan_marker_position(page)
    page.mouse.move(x0, y0)
    page.mouse.down()
    with page.expect_response(
        lambda r: r.request.method == "PATCH" and "/api/cell/targets/" in r.url, timeout=120_000
    ) as saved:
        page.mouse.move(x0 - 10, y0 - 6, steps=5)
        page.mouse.up()
    assert saved.value.status == 200
    open_page.wait_settled()
    state = page.evaluate(STATE)
    after = state["target"]["position_mm"]
    # moving left and up on the plan view decreases x and increases y (screen axes, common practice)
    assert after[0] < before[0]
    assert after[1] > before[1]
    assert after[2] == before[2]
    expected = _api(
        open_page.base_url,
        "/api/ik",
        {"robot": "pb-arm6", "pose": state["target"], **_cell_frames(open_page.base_url)},
    )
    a, b = state["mapJoints"]
    api_pairs = [[s["joints_deg"][a], s["joints_deg"][b]] for s in expected["solutions"]]
    assert api_pairs, expected["reason"]
    np.testing.assert_allclose(
        _sorted_pairs(page.evaluate(MAP_MARKERS)), _sorted_pairs(api_pairs), atol=1e-6
    )
    page.screenshot(path=str(artifacts / "page-after-drag.png"), full_page=True)
    assert open_page.problems.console_errors == []
    # the move was saved into the cell: the server's target is where the page put it
    cell = httpx.get(open_page.base_url + "api/cell", timeout=120).json()
    saved_target = next(t for t in cell["scene"]["targets"] if t["name"] == name)
    # (cell files hold 0.001 mm: half a thousandth of rounding)
    assert saved_target["position_mm"] == pytest.approx(after, abs=5e-4)


def test_click_joint_map_moves_tool(open_page: Any) -> None:
    page = open_page.page
    a, b = page.evaluate(STATE)["mapJoints"]
    goal = (40.0, -30.0)
    x, y = figure_pixel(page, "joint-map", *goal)
    page.mouse.click(x, y)
    page.wait_for_function(
        "([a, goal]) => { const s = window.posebridge.getState();"
        " return Math.abs(s.joints[a] - goal) < 2 && s.fkJoints === s.joints; }",
        arg=[a, goal[0]],
        timeout=120_000,
    )
    page.wait_for_function(
        "(p) => { const t = (document.getElementById('scene3d').data || []).find((d) => d.name === 'TCP');"
        " const s = window.posebridge.getState();"
        " return t && Math.abs(t.x[0] - s.fk.position_mm[0]) < 1e-9; }",
        timeout=120_000,
    )
    joints = page.evaluate(STATE)["joints"]
    # the clicked point, to within the pixel resolution of the map (about 1 deg per pixel here)
    assert joints[a] == pytest.approx(goal[0], abs=1.5)
    assert joints[b] == pytest.approx(goal[1], abs=1.5)
    expected = _api(
        open_page.base_url,
        "/api/fk",
        {"robot": "pb-arm6", "joints_deg": joints, **_cell_frames(open_page.base_url)},
    )
    np.testing.assert_allclose(
        page.evaluate(TCP_3D), expected["configurations"][0]["position_mm"], atol=1e-9
    )


def test_joint_map_stays_put_whatever_its_progress_text(open_page: Any) -> None:
    page = open_page.page
    place = "() => document.getElementById('joint-map').getBoundingClientRect().top"
    before = page.evaluate(place)
    # a waiting note longer than the card is wide (the page's own texts vary with the load): the
    # progress row stays one line, so a click aimed at the map lands where it was aimed
    page.evaluate(
        "() => { document.querySelector('#map-progress-row .pb-hint').textContent ="
        " 'Waiting 2 s: the server is busy with other jobs '.repeat(12); }"
    )
    assert page.evaluate(place) == before  # common practice, no source: no layout shift


def test_select_solution_row_moves_arm(open_page: Any) -> None:
    page = open_page.page
    rows = page.locator("#solutions tr.pb-solution")
    count = rows.count()
    assert count >= 2
    solutions = page.evaluate(STATE)["ik"]["result"]["solutions"]
    choice = next(
        k
        for k in range(count)
        if page.get_attribute(f"#solutions tbody tr:nth-child({k + 1})", "aria-selected") == "false"
    )
    rows.nth(choice).click()
    page.wait_for_function(
        "() => { const s = window.posebridge.getState(); return s.fkJoints === s.joints; }"
    )
    state = page.evaluate(STATE)
    assert state["joints"] == solutions[choice]["joints_deg"]
    assert state["selectedBranch"]["label"] == solutions[choice]["branch"]
    # the page reads the branch from its fields (branch_parts and the signs), not the label text
    assert {k: state["selectedBranch"][k] for k in ("shoulder", "elbow", "wrist")} == {
        k: solutions[choice][k] for k in ("shoulder", "elbow", "wrist")
    }
    legend = page.inner_text("#map-legend")
    for solution in solutions:
        assert ", ".join(solution["branch_parts"].values()) in legend
    assert rows.nth(choice).get_attribute("aria-selected") == "true"
    # every joint field shows the chosen value (one decimal)
    for index, value in enumerate(solutions[choice]["joints_deg"]):
        assert float(page.input_value(f"#joint-value-{index}")) == pytest.approx(value, abs=0.051)
    expected = _api(
        open_page.base_url,
        "/api/fk",
        {"robot": "pb-arm6", "joints_deg": state["joints"], **_cell_frames(open_page.base_url)},
    )
    np.testing.assert_allclose(
        page.evaluate(TCP_3D), expected["configurations"][0]["position_mm"], atol=1e-9
    )


def test_nudge_target_with_keyboard(open_page: Any) -> None:
    page = open_page.page
    before = page.evaluate(STATE)["target"]["position_mm"]
    page.focus("#plan")
    page.keyboard.press("ArrowRight")
    page.keyboard.press("PageUp")
    page.keyboard.press("PageUp")
    after = page.evaluate(STATE)["target"]["position_mm"]
    step = page.evaluate(STATE)["stepMm"]
    # one step right in x, two steps up in z (the page's documented key bindings)
    assert after == pytest.approx([before[0] + step, before[1], before[2] + 2 * step])
    assert float(page.input_value("#target-x")) == pytest.approx(after[0], abs=0.051)
    # a burst of nudges is held like a drag (static/actions.js), ends by itself, and the
    # inverse kinematics answers for the last position
    page.wait_for_function("() => window.posebridge.getState().dragging === false")
    page.wait_for_function(
        "(x) => { const s = window.posebridge.getState(); return Boolean(s.ik"
        " && s.ik.target.position_mm[0] === x); }",
        arg=after[0],
    )


# the page's kinematics answers belong to what it shows, and no move is waiting to be saved
_QUIET = """() => {
  const s = window.posebridge.getState();
  return !s.dragging && s.cellSave.state === "saved" && Boolean(s.ik) && s.fkJoints === s.joints &&
    s.ik.target.position_mm.every((v, k) => v === s.target.position_mm[k]);
}"""

# the markers for the page's current target are drawn
_IK_FOR_TARGET = """() => {
  const s = window.posebridge.getState();
  return Boolean(s.ik) && s.ik.target.position_mm.every((v, k) => v === s.target.position_mm[k]);
}"""

_KINEMATICS = ("/api/ik", "/api/fk", "/api/cell/fk")


def _requests_of(page: Any, act: Any) -> list[tuple[str, dict[str, Any]]]:
    """The kinematics requests (path, body) the page sends from ``act()`` until its markers are
    drawn for the moved target."""
    sent: list[tuple[str, dict[str, Any]]] = []

    def record(request: Any) -> None:
        path = request.url.split("?")[0].removeprefix(page.url.rstrip("/"))
        if request.method == "POST" and path in _KINEMATICS:
            sent.append((path, request.post_data_json))

    page.on("request", record)
    act()
    page.wait_for_function(_IK_FOR_TARGET)
    page.remove_listener("request", record)
    return sent


def test_nudge_sends_what_a_drag_sends(open_page: Any) -> None:
    page = open_page.page
    page.wait_for_function(_QUIET, timeout=120_000)
    x0, y0 = plan_marker_position(page)
    page.mouse.move(x0, y0)
    page.mouse.down()
    dragged = _requests_of(page, lambda: page.mouse.move(x0 + 6, y0))
    page.mouse.up()
    page.wait_for_function(_QUIET, timeout=120_000)
    before = page.evaluate(STATE)
    page.focus("#plan")
    nudged = _requests_of(page, lambda: page.keyboard.press("ArrowRight"))
    # our own contract (static/actions.js, views/projection.js): a key nudge is one more target
    # move of a drag: one inverse kinematics request for the moved target, with the same fields
    # (robot, pose, seed, the cell's base and tool)
    ik_dragged = [body for path, body in dragged if path == "/api/ik"]
    ik_nudged = [body for path, body in nudged if path == "/api/ik"]
    assert len(ik_dragged) == 1
    assert len(ik_nudged) == 1
    assert sorted(ik_nudged[0]) == sorted(ik_dragged[0])
    # one step right along x from where it stood, the rest of the pose kept (the page's key bindings)
    moved = np.array(ik_nudged[0]["pose"]["position_mm"]) - np.array(
        before["target"]["position_mm"]
    )
    np.testing.assert_allclose(moved, [before["stepMm"], 0.0, 0.0], atol=1e-9)
    assert ik_nudged[0]["pose"]["rpy_deg"] == before["target"]["rpy_deg"]
    assert ik_nudged[0]["seed_deg"] == before["joints"]
    assert open_page.problems.page_errors == []


def test_switch_robot(open_page: Any, artifacts: Path) -> None:
    page = open_page.page
    page.select_option("#robot-select", "pb-planar2r")
    page.wait_for_function(
        "() => { const s = window.posebridge.getState(); return s.robot && s.robot.name === 'pb-planar2r'"
        " && s.ik && s.fkJoints === s.joints; }",
        timeout=120_000,
    )
    state = page.evaluate(STATE)
    x, y, _ = state["fk"]["position_mm"]
    t1, t2 = state["joints"]
    # closed form of the 400 mm / 300 mm planar arm: x = l1 cos t1 + l2 cos(t1 + t2)
    assert x == pytest.approx(
        400 * math.cos(math.radians(t1)) + 300 * math.cos(math.radians(t1 + t2)), abs=1e-6
    )
    assert y == pytest.approx(
        400 * math.sin(math.radians(t1)) + 300 * math.sin(math.radians(t1 + t2)), abs=1e-6
    )
    page.screenshot(path=str(artifacts / "page-pb-planar2r.png"), full_page=True)
    assert open_page.problems.console_errors == []
    assert open_page.problems.failed_requests == []


def test_measure_drag_roundtrip(browser: Any, server_url: str, artifacts: Path) -> None:
    samples = 50
    result = measure_drag_roundtrip(server_url, samples, browser=browser)
    (artifacts / "drag_roundtrip.json").write_text(
        json.dumps(result, indent=2) + "\n", encoding="utf-8"
    )
    # every drag produced a marker update (timing itself is reported, never asserted)
    assert result["samples"] == samples
    assert result["missed"] == 0


def test_two_pages_conflict_detected(open_page: Any, browser: Any) -> None:
    first = open_page.page
    second = browser.new_page(viewport={"width": 1600, "height": 1250})
    try:
        second.goto(open_page.base_url)
        second.wait_for_function(
            "() => { const s = window.posebridge && window.posebridge.getState();"
            " return s && s.cell && s.ik && s.fkJoints === s.joints; }",
            timeout=180_000,
        )
        seen = second.evaluate(STATE)["cell"]["etag"]
        # the first page moves the target and saves it
        with first.expect_response(
            lambda r: r.request.method == "PATCH" and "/api/cell/targets/" in r.url
        ) as saved_first:
            first.focus("#plan")
            first.keyboard.press("ArrowUp")
        assert saved_first.value.status == 200
        # the second page, still at the old version, is refused and reloads the cell
        with second.expect_response(
            lambda r: r.request.method == "PATCH" and "/api/cell/targets/" in r.url
        ) as saved_second:
            second.focus("#plan")
            second.keyboard.press("ArrowDown")
        assert saved_second.value.status == 412
        second.wait_for_function(
            "(etag) => window.posebridge.getState().cell.etag === etag",
            arg=saved_first.value.json()["etag"],
            timeout=120_000,
        )
        assert second.get_attribute("#cell-save", "data-state") == "conflict"
        assert "not saved" in second.inner_text("#cell-save")
        # the server kept the first page's move (nothing was overwritten)
        cell = httpx.get(open_page.base_url + "api/cell", timeout=120).json()
        assert cell["etag"] == saved_first.value.json()["etag"] != seen
    finally:
        second.close()


def test_drag_pose_waypoint_saves_it(open_page: Any, cell_path: Path, artifacts: Path) -> None:
    page = open_page.page
    cell = httpx.get(open_page.base_url + "api/cell", timeout=120).json()
    # the demo's waypoint given as a pose (a world tool pose)
    path, index, pose = next(
        (p["name"], w, waypoint["pose"])
        for p in cell["cell"]["paths"]
        for w, waypoint in enumerate(p["waypoints"])
        if waypoint.get("pose")
    )
    page.click(f"#cell-waypoint-{path}-{index}")
    page.wait_for_function(
        "(goal) => { const s = window.posebridge.getState();"
        " return s.target.position_mm.every((v, k) => Math.abs(v - goal[k]) < 1e-9); }",
        arg=pose["position_mm"],
        timeout=120_000,
    )
    open_page.wait_settled()
    # a pose waypoint saves typed values: the target fields edit the cell
    assert page.get_attribute("#target-x", "data-edits-cell") is not None
    before = page.evaluate(STATE)["target"]
    with page.expect_response(
        lambda r: (
            r.request.method == "PATCH"
            and r.url.endswith(f"/api/cell/paths/{path}/waypoints/{index}")
        ),
        timeout=120_000,
    ) as saved:
        _drag(page, plan_marker_position(page), 14, 9)
    assert saved.value.status == 200, saved.value.text()
    open_page.wait_settled()
    shown = page.evaluate(STATE)["target"]
    # right and down on the plan view: x larger, y smaller (screen axes, common practice)
    assert shown["position_mm"][0] > before["position_mm"][0]
    assert shown["position_mm"][1] < before["position_mm"][1]
    assert shown["position_mm"][2] == before["position_mm"][2]
    assert shown["rpy_deg"] == before["rpy_deg"]
    # the request carried the pose the page shows, and the file on disk holds it
    assert saved.value.request.post_data_json == shown
    on_disk = json.loads(cell_path.read_text())
    waypoint = next(p for p in on_disk["paths"] if p["name"] == path)["waypoints"][index]
    # (cell files hold 0.001 mm and 0.001 deg: half a thousandth of rounding)
    assert waypoint["pose"]["position_mm"] == pytest.approx(shown["position_mm"], abs=5e-4)
    assert waypoint["pose"]["rpy_deg"] == pytest.approx(shown["rpy_deg"], abs=5e-4)
    # the page's cell is the saved version
    assert page.evaluate(STATE)["cell"]["etag"] == saved.value.json()["etag"]
    assert page.get_attribute("#cell-save", "data-state") == "saved"
    _assert_map_shows_ik(page, open_page.base_url)
    page.screenshot(path=str(artifacts / "page-pose-waypoint-drag.png"), full_page=True)
    assert open_page.problems.console_errors == []
    assert open_page.problems.page_errors == []


def test_drag_fixture_moves_its_targets(open_page: Any, cell_path: Path, artifacts: Path) -> None:
    page = open_page.page
    state = page.evaluate(STATE)
    shown = state["selection"]["name"]  # the opening target, on a shelf of the rack
    cell = state["cell"]
    fixture = next(t["fixture"] for t in cell["scene"]["targets"] if t["name"] == shown)
    start_fixture = next(f for f in cell["scene"]["fixtures"] if f["name"] == fixture)
    start_target = next(t for t in cell["scene"]["targets"] if t["name"] == shown)
    page.click(f"#cell-fixture-{fixture}")
    page.wait_for_function(
        "(name) => { const s = window.posebridge.getState(); return s.fixture && s.fixture.name === name; }",
        arg=fixture,
        timeout=120_000,
    )
    assert page.get_attribute(f"#cell-fixture-{fixture}", "aria-selected") == "true"
    assert page.is_visible("#fixture-fields")
    assert page.get_attribute("#fixture-x", "data-edits-cell") is not None
    # the shown target and its IK answers stay while the fixture is selected
    assert page.evaluate(STATE)["target"]["position_mm"] == start_target["position_mm"]

    grab = figure_pixel(page, "plan", *start_fixture["position_mm"][:2])
    with page.expect_response(
        lambda r: r.request.method == "PATCH" and r.url.endswith(f"/api/cell/fixtures/{fixture}"),
        timeout=120_000,
    ) as saved:
        _drag(page, grab, 16, 10)
    assert saved.value.status == 200, saved.value.text()
    moved = page.evaluate(STATE)["fixture"]
    # right and down on the plan view: x larger, y smaller (screen axes, common practice)
    assert moved["position_mm"][0] > start_fixture["position_mm"][0]
    assert moved["position_mm"][1] < start_fixture["position_mm"][1]
    assert moved["position_mm"][2] == start_fixture["position_mm"][2]
    assert saved.value.request.post_data_json == {
        "position_mm": moved["position_mm"],
        "frame": "world",
    }
    # the page's target follows its fixture, and the IK markers follow the target
    page.wait_for_function(
        "(old) => { const s = window.posebridge.getState();"
        " return s.target.position_mm.some((v, k) => v !== old[k]); }",
        arg=start_target["position_mm"],
        timeout=120_000,
    )
    open_page.wait_settled()
    _assert_map_shows_ik(page, open_page.base_url)

    # the saved file, resolved in Python: the fixture's frame is where the page put it, and
    # the target moved with it (rigid motion of its fixture frame, Lynch & Park sec. 3.3.1)
    scene = resolve_scene(load_cell(cell_path), cell_path)
    T_fixture = scene.T_world_fixture[scene.fixture_names.index(fixture)]
    # (the file holds 0.001 mm and 0.001 deg: half a thousandth of rounding per number, and
    # 0.0005 deg of the fixture's angles moves a target 1 m away by under 0.01 mm)
    assert mm_from_m(T_fixture[:3, 3]) == pytest.approx(moved["position_mm"], abs=5e-4)
    T_target = scene.targets.T_world_target[scene.targets.index(shown)]
    page_target = page.evaluate(STATE)["target"]
    assert mm_from_m(T_target[:3, 3]) == pytest.approx(page_target["position_mm"], abs=0.02)
    shift = np.subtract(moved["position_mm"], start_fixture["position_mm"])
    # the fixture turned not at all, so the target moved by the fixture's shift (closed form)
    assert page_target["position_mm"] == pytest.approx(
        np.add(start_target["position_mm"], shift), abs=0.02
    )
    # the plan view's cell targets are redrawn from the saved cell
    plan_x = page.evaluate(
        "() => (document.getElementById('plan-base').data || []).find((t) => t.name === 'cell targets').x"
    )
    assert plan_x[scene.targets.index(shown)] == pytest.approx(page_target["position_mm"][0])
    page.screenshot(path=str(artifacts / "page-fixture-drag.png"), full_page=True)

    # a typed yaw turns the fixture about the world z axis; saved with its orientation
    with page.expect_response(
        lambda r: r.request.method == "PATCH" and r.url.endswith(f"/api/cell/fixtures/{fixture}"),
        timeout=120_000,
    ) as turned:
        page.fill("#fixture-yaw", "15")
        page.press("#fixture-yaw", "Enter")
    assert turned.value.status == 200, turned.value.text()
    scene = resolve_scene(load_cell(cell_path), cell_path)
    R = scene.T_world_fixture[scene.fixture_names.index(fixture)][:3, :3]
    # yaw of R = Rz(15 deg) (closed form: atan2(R[1,0], R[0,0]) with R[2,2] = 1)
    assert math.degrees(math.atan2(R[1, 0], R[0, 0])) == pytest.approx(15.0, abs=5e-4)
    assert R[2, 2] == pytest.approx(1.0, abs=1e-12)
    assert mm_from_m(scene.T_world_fixture[scene.fixture_names.index(fixture)][:3, 3]) == (
        pytest.approx(moved["position_mm"], abs=5e-4)
    )
    assert open_page.problems.console_errors == []
    assert open_page.problems.page_errors == []
    assert open_page.problems.failed_requests == []

"""The tracked demo cell on the page: margin bars of the external axes, the rail and the
turntable plate drawn, a joint log with a track column in the log panel.

Expected values are closed forms from the demo file (robots/demo-track-cell.json): its track
range, carriage length and turntable plate radius.
"""

from __future__ import annotations

import json
import math
from pathlib import Path
from typing import Any
from urllib.parse import urlsplit

import httpx
import numpy as np
import pytest

from posebridge.bench.browser import figure_pixel
from posebridge.resources import data_folder

TRACK_DEMO = data_folder("robots") / "demo-track-cell.json"
STATE = "() => window.posebridge.getState()"


def _show_track_cell(open_page: Any, demo: dict[str, Any] | None = None) -> None:
    api = open_page.base_url.rstrip("/")
    etag = httpx.get(api + "/api/cell", timeout=120).json()["etag"]
    demo = json.loads(TRACK_DEMO.read_text()) if demo is None else demo
    response = httpx.put(api + "/api/cell", json=demo, headers={"If-Match": etag}, timeout=60)
    assert response.status_code == 200, response.text
    open_page.page.reload()
    open_page.wait_settled(timeout_ms=120_000)
    open_page.page.wait_for_function(
        "() => { const s = window.posebridge.getState();"
        " return Boolean(s.cell && s.cell.scene && s.cell.scene.external_axes.length === 2); }",
        timeout=180_000,
    )


def _record_cell_writes(page: Any) -> list[tuple[str, str]]:
    """Start recording the page's cell edits (method and path of every PUT/PATCH of /api/cell...)."""
    writes: list[tuple[str, str]] = []

    def seen(request: Any) -> None:
        path = urlsplit(request.url).path
        if request.method in ("PUT", "PATCH") and path.startswith("/api/cell"):
            writes.append((request.method, path))

    page.on("request", seen)
    return writes


def _plan_points(page: Any, name: str) -> np.ndarray:
    """x, y points of the plan's trace ``name`` (gaps dropped), shape (K, 2)."""
    points = page.evaluate(
        """(name) => {
          const trace = (document.getElementById('plan-base').data || []).find((t) => t.name === name);
          return trace ? trace.x.map((x, k) => [x, trace.y[k]]).filter((p) => p[0] !== null) : [];
        }""",
        name,
    )
    return np.array(points, dtype=float).reshape(-1, 2)


def test_track_cell_margins_drawing_and_log(open_page: Any, tmp_path: Path) -> None:
    page = open_page.page
    _show_track_cell(open_page)
    names = page.eval_on_selector_all(
        "#margin-bars [data-external]", "els => els.map(e => e.textContent)"
    )
    assert names == ["track", "table-1"]
    # closed form: the track at its home 0 mm in [0, 4000] mm is 0 mm from its lower limit
    texts = page.eval_on_selector_all(
        "#margin-bars .pb-margin-text", "els => els.map(e => e.textContent)"
    )
    assert texts[-2:] == ["0.0 mm", "185.0 deg"]  # the table at 0 deg in [-185, 185] deg

    page.wait_for_function(
        "() => (document.getElementById('plan-base').data || []).some((t) => t.name === 'pedestal')",
        timeout=180_000,
    )
    rail = _plan_points(page, "pedestal")
    # closed form: the rail runs over the travel [0, 4000] mm plus half a 700 mm carriage each side
    assert rail[:, 0].max() == 4350.0
    assert rail[:, 0].min() == -350.0
    plate = _plan_points(page, "fixture")
    # closed form: the plate is a 450 mm circle about the table's axis at (2000, -1300) mm
    reach = np.linalg.norm(plate - [2000.0, -1300.0], axis=1)
    assert np.any(np.abs(reach - 450.0) < 1.0)

    log = tmp_path / "track-log.csv"
    log.write_text(
        "time_s,j1,j2,j3,j4,j5,j6,track_mm\n"
        "0.0,10,-20,30,0,45,0,500\n1.0,10,-20,30,0,45,0,1500\n2.0,10,-20,30,0,45,0,2500\n"
    )
    page.set_input_files("#log-file", str(log))
    page.wait_for_function(
        "() => { const c = window.posebridge.getState().logCheck;"
        " return Boolean(c && c.rows && c.rows.external.length === 3); }",
        timeout=180_000,
    )
    facts = page.inner_text("#log-facts")
    assert "track (mm) from the log" in facts
    assert "table-1 at 0.0 deg (no column)" in facts
    page.fill("#log-scrub", "1")
    page.dispatch_event("#log-scrub", "input")
    assert page.inner_text("#log-row") == "row 1 · track 1500.0 mm, table-1 0.0 deg"
    assert not open_page.problems.page_errors


def test_dragging_the_carriage_moves_the_track_and_the_arm(open_page: Any, cell_path: Path) -> None:
    page = open_page.page
    _show_track_cell(open_page)
    base_before = page.evaluate("() => window.posebridge.getState().cell.scene.base.position_mm")
    tcp_before = page.evaluate("() => window.posebridge.getState().fk.position_mm")
    start = figure_pixel(page, "plan", 0.0, 0.0)  # the carriage at the track's home, 0 mm
    end = figure_pixel(page, "plan", 1000.0, 0.0)
    page.mouse.move(*start)
    page.mouse.down()
    page.mouse.move(end[0], end[1], steps=6)
    # the drag's last FK answer: the arm drawn where the carriage is (answers of earlier mouse
    # moves may arrive after the carriage has moved on)
    page.wait_for_function(
        "(x0) => { const s = window.posebridge.getState();"
        " return Boolean(s.carriage && s.fk && s.fk.frames_position_mm[0][0] > 500"
        " && s.fkJoints === s.joints"
        " && Math.abs(s.fk.position_mm[0] - x0 - s.carriage.value_mm) < 1e-6); }",
        arg=tcp_before[0],
        timeout=180_000,
    )
    riding = page.evaluate(
        "() => { const s = window.posebridge.getState();"
        " return {carriage: s.carriage.value_mm, tcp: s.fk.position_mm, fkJoints: s.fkJoints,"
        " joints: s.joints, frames: s.fk.frames_position_mm}; }"
    )
    # closed form: the joints are held, so the tool rides along x by the carriage's travel
    assert riding["fkJoints"] == riding["joints"]
    np.testing.assert_allclose(
        np.subtract(riding["tcp"], tcp_before), [riding["carriage"], 0.0, 0.0], atol=1e-6
    )
    writes = _record_cell_writes(page)
    with page.expect_response(
        lambda r: r.request.method == "PATCH" and r.url.endswith("/api/cell/track"),
        timeout=120_000,
    ) as moved:
        page.mouse.up()
    assert moved.value.status == 200
    # the drop is saved through the track edit with the carriage's position only
    sent = moved.value.request.post_data_json
    assert list(sent) == ["home_mm"]
    page.wait_for_function(
        "() => { const s = window.posebridge.getState();"
        " return s.carriage === null && s.cell.scene.external_axes[0].value > 500; }",
        timeout=180_000,
    )
    assert writes == [("PATCH", "/api/cell/track")]
    state = page.evaluate(
        "() => { const s = window.posebridge.getState();"
        " return {value: s.cell.scene.external_axes[0].value, base: s.cell.scene.base.position_mm,"
        " file: s.cell.cell.track.home_mm}; }"
    )
    value = state["value"]
    # a pixel of the plan is a few millimetres here: the drop lands near 1000 mm
    assert abs(value - 1000.0) < 30.0
    # closed form: the rail runs along world x, so the base moves by the track value along x
    np.testing.assert_allclose(
        np.subtract(state["base"], base_before), [value, 0.0, 0.0], atol=1e-6
    )
    saved = json.loads(cell_path.read_text())
    # the file keeps micrometres (rounded on save)
    assert saved["track"]["home_mm"] == pytest.approx(value, abs=1e-3) == state["file"]
    assert sent["home_mm"] == pytest.approx(value, abs=1e-3)
    page.wait_for_function(
        "(x) => { const s = window.posebridge.getState();"
        " return Boolean(s.fk && s.fkJoints === s.joints"
        " && Math.abs(s.fk.frames_position_mm[0][0] - x) < 1e-6); }",
        arg=state["base"][0],
        timeout=180_000,
    )
    assert not open_page.problems.page_errors


def test_joint_map_over_the_track(open_page: Any) -> None:
    page = open_page.page
    _show_track_cell(open_page)
    options = page.eval_on_selector_all(
        "#map-pair label:first-of-type select option", "els => els.map(e => e.textContent)"
    )
    assert options[-2:] == ["track (mm)", "table-1 (deg)"]
    page.select_option("#map-pair label:first-of-type select", label="track (mm)")
    page.select_option("#map-pair label:nth-of-type(2) select", label="j1 (deg)")
    page.wait_for_function(
        "() => { const s = window.posebridge.getState(); const m = s.jointMap;"
        " return Boolean(m && m.joints[0] === 6 && m.joints[1] === 0"
        " && m.cell_etag === s.cell.etag); }",
        timeout=180_000,
    )
    result = page.evaluate("() => window.posebridge.getState().jointMap")
    assert result["joint_names"] == ["track", "j1"]
    # the track's range 0..4000 mm (robots/demo-track-cell.json), 96 cells per axis (maps.js)
    assert result["lower_deg"][0] == 0.0
    assert result["upper_deg"][0] == 4000.0
    assert result["shape"] == [96, 96]
    assert len(result["obstacle"]) == 96 * 96
    # the current marker at the track's home, 0 mm (robots/demo-track-cell.json)
    page.wait_for_function(
        "() => (document.getElementById('joint-map').data || []).some("
        "(t) => t.meta && t.meta.role === 'current' && t.x[0] === 0)",
        timeout=180_000,
    )
    # the opening target's reach intervals along the track, as the target check reports them
    page.wait_for_function(
        "() => (document.getElementById('joint-map').data || []).some("
        "(t) => t.meta && t.meta.role === 'ik-intervals' && t.x.length > 0)",
        timeout=180_000,
    )
    drawn, reported = page.evaluate(
        """() => {
          const s = window.posebridge.getState();
          const trace = document.getElementById('joint-map').data.find(
            (t) => t.meta && t.meta.role === 'ik-intervals');
          const check = s.targetCheck.report.targets.find((t) => t.name === trace.meta.target);
          const ends = check.external_intervals.filter((f) => f.axis === 'track')
            .flatMap((f) => f.intervals.flat());
          return [trace.x.filter((x) => x !== null), ends];
        }"""
    )
    assert drawn == reported
    assert len(drawn) > 0
    # the IK markers along the track: the map's solutions of the opening target, j1 per track value
    page.wait_for_function(
        "() => (document.getElementById('joint-map').data || []).some("
        "(t) => t.meta && t.meta.role === 'ik-along-axis' && t.x.length > 0)",
        timeout=180_000,
    )
    markers, solutions = page.evaluate(
        """() => {
          const s = window.posebridge.getState();
          const trace = document.getElementById('joint-map').data.find(
            (t) => t.meta && t.meta.role === 'ik-along-axis');
          const curve = s.jointMap.ik_along_axis.find((c) => c.target === trace.meta.target);
          const points = curve.joints_deg.flatMap((values) => values.flatMap(
            (joints, r) => (joints ? [[s.jointMap.axes_deg[0][r], joints[0]]] : [])));
          return [trace.x.map((x, k) => [x, trace.y[k]]), points];
        }"""
    )
    assert markers == solutions
    assert not open_page.problems.page_errors


def test_rail_placement_heatmap_on_the_track_cell(open_page: Any) -> None:
    page = open_page.page
    _show_track_cell(open_page)
    page.fill("#place-width", "500")
    page.fill("#place-count", "3")
    page.fill("#place-yaws", "2")
    page.click("#place-run")
    page.wait_for_function(  # the answer, or the search's end said in the panel
        "() => { const p = window.posebridge.getState().placement;"
        " const said = (document.getElementById('place-summary') || {}).textContent || '';"
        " return Boolean(p) || said.startsWith('Search '); }",
        timeout=600_000,
    )
    placement = page.evaluate(STATE)["placement"]
    assert placement is not None, page.inner_text("#place-summary")
    assert placement["search"] == "rail"
    grid = placement["grid"]
    # the request's grid (closed form): 3 offsets within 500 mm x 2 directions from the demo's
    # rail along +x (0 deg)
    assert placement["candidates_evaluated"] == 6
    assert grid["x_mm"] == pytest.approx([-500.0, 0.0, 500.0])
    assert grid["yaw_deg"] == pytest.approx([0.0, -180.0])
    heat = page.evaluate(
        "() => { const t = (document.getElementById('place-heatmap').data || [])"
        ".find((d) => d.meta && d.meta.role === 'rail-scores');"
        " return t ? { x: t.x, y: t.y, c: t.marker.color } : null; }"
    )
    assert heat is not None
    # one marker per (direction, offset), directions outer: the answer's score grid
    # (1, offsets, directions, 1)
    cells = [(j, i) for j in range(2) for i in range(3)]
    assert heat["x"] == pytest.approx([grid["x_mm"][i] for j, i in cells])
    assert heat["y"] == pytest.approx([grid["yaw_deg"][j] for j, i in cells])
    np.testing.assert_allclose(heat["c"], [grid["score"][0][i][j][0] for j, i in cells])
    current = page.evaluate(
        "() => { const t = (document.getElementById('place-heatmap').data || [])"
        ".find((d) => d.meta && d.meta.role === 'current-base'); return [t.x[0], t.y[0]]; }"
    )
    assert current == pytest.approx([0.0, 0.0])  # the demo's rail: offset 0, along +x
    # applying the best candidate writes its rail into the cell, through the track edit
    best = placement["best"][0]
    writes = _record_cell_writes(page)
    with page.expect_response(
        lambda r: r.request.method == "PATCH" and r.url.endswith("/api/cell/track"),
        timeout=120_000,
    ) as moved:
        page.click("#place-candidates li:nth-child(1)")
    assert moved.value.status == 200
    sent = moved.value.request.post_data_json
    rail = best["rail"]
    assert sent["origin_mm"] == rail["origin_mm"]
    assert sent["direction"] == rail["direction"]
    assert sent.get("travel_needed_mm") == rail["travel_needed_mm"]  # left out when null
    track = moved.value.json()["cell"]["track"]
    assert track["origin_mm"] == pytest.approx(rail["origin_mm"])
    assert track["direction"] == pytest.approx(rail["direction"])
    needed = rail["travel_needed_mm"] or [0.0, 4000.0]
    # closed form (cell/track_move.py): [min(0, floor(n0)), max(4000, ceil(n1))] over the
    # configured 0..4000 mm and the travel needed
    assert track["range_mm"] == [
        min(0.0, math.floor(needed[0])),
        max(4000.0, math.ceil(needed[1])),
    ]
    page.wait_for_function(  # the page shows the saved cell
        "(etag) => window.posebridge.getState().cell.etag === etag",
        arg=moved.value.json()["etag"],
        timeout=120_000,
    )
    assert writes == [("PATCH", "/api/cell/track")]
    assert open_page.problems.console_errors == []


def _with_parented_table_frames(demo: dict[str, Any]) -> dict[str, Any]:
    """The demo with frames (no geometry, so the search is unchanged) that table-1 carries:
    one hanging from a rotated stand frame beside the table that stays, and a child of the
    weld jig listed on the table as well."""
    fixtures = [
        *demo["fixtures"],
        {
            "name": "stand",
            "shape": "frame",
            "position_mm": [2600.0, -1300.0, 300.0],
            "rpy_deg": [0.0, 10.0, 40.0],
        },
        {
            "name": "clip-holder",
            "shape": "frame",
            "parent": "stand",
            "position_mm": [-400.0, 150.0, 500.0],
        },
        {
            "name": "seam-clip",
            "shape": "frame",
            "parent": "weld-jig",
            "position_mm": [100.0, 0.0, 150.0],
        },
    ]
    tables = [{**demo["turntables"][0], "fixtures": ["weld-jig", "clip-holder", "seam-clip"]}]
    return {**demo, "fixtures": fixtures, "turntables": tables}


def test_table_placement_heatmap_on_the_track_cell(open_page: Any) -> None:
    page = open_page.page
    _show_track_cell(open_page, _with_parented_table_frames(json.loads(TRACK_DEMO.read_text())))
    page.select_option("#place-search", "table")
    page.fill("#place-width", "300")
    page.fill("#place-count", "3")
    page.click("#place-run")
    page.wait_for_function(  # the answer and its score picture, or the search's end said
        "() => { const p = window.posebridge.getState().placement;"
        " const said = (document.getElementById('place-summary') || {}).textContent || '';"
        " const map = document.getElementById('place-heatmap');"
        " return (Boolean(p) && Boolean(map.dataset.picture)) || said.startsWith('Search '); }",
        timeout=600_000,
    )
    placement = page.evaluate(STATE)["placement"]
    assert placement is not None, page.inner_text("#place-summary")
    assert placement["search"] == "table"
    grid = placement["grid"]
    # the request's grid (closed form): 3 x 3 positions within 300 mm of the demo's table-1
    # at (2000, -1300) mm
    assert placement["candidates_evaluated"] == 9
    assert grid["x_mm"] == pytest.approx([1700.0, 2000.0, 2300.0])
    assert grid["y_mm"] == pytest.approx([-1600.0, -1300.0, -1000.0])
    shown = page.evaluate(
        "() => { const map = document.getElementById('place-heatmap');"
        " const find = (role) => map.data.find((d) => d.meta && d.meta.role === role);"
        " const current = find('current-base'), ranked = find('candidates');"
        " return { current: [current.x[0], current.y[0]], name: current.name,"
        " images: (map.layout.images || []).length, x: ranked.x, y: ranked.y,"
        " title: map.layout.xaxis.title.text }; }"
    )
    assert shown["current"] == pytest.approx([2000.0, -1300.0])  # the demo's table-1
    assert shown["name"] == "current table"
    assert shown["title"] == "table x (mm)"
    assert shown["images"] == 1  # the score picture under the markers
    assert shown["x"] == pytest.approx([c["x_mm"] for c in placement["best"]])
    assert shown["y"] == pytest.approx([c["y_mm"] for c in placement["best"]])
    assert "table angles" in page.inner_text("#place-candidates li:nth-child(1)") or (
        placement["best"][0]["table"]["angle_span_deg"] is None
    )
    # applying the best candidate moves the table and everything it carries by the same step
    best = placement["best"][0]
    step = np.array(best["table"]["move_mm"])
    assert np.linalg.norm(step) > 0.0
    world = {f["name"]: f["position_mm"] for f in page.evaluate(STATE)["cell"]["scene"]["fixtures"]}
    etag = page.evaluate(STATE)["cell"]["etag"]
    with page.expect_response(
        lambda r: r.request.method == "PATCH" and r.url.endswith("/api/cell/turntables/table-1"),
        timeout=120_000,
    ) as moved:
        page.click("#place-candidates li:nth-child(1)")
    assert moved.value.status == 200
    page.wait_for_function(  # the page shows the saved cell
        "(etag) => { const s = window.posebridge.getState();"
        " return s.cell.etag !== etag && s.cellSave && s.cellSave.state === 'saved'; }",
        arg=etag,
        timeout=120_000,
    )
    shown = page.evaluate(STATE)["cell"]
    assert shown["etag"] == moved.value.json()["etag"]
    saved = shown["cell"]
    assert saved["turntables"][0]["position_mm"] == pytest.approx(best["table"]["position_mm"])
    jig = next(f for f in saved["fixtures"] if f["name"] == "weld-jig")
    # demo-track-cell.json: the weld jig at (2000, -1300, 850) mm
    assert jig["position_mm"] == pytest.approx([2000.0 + step[0], -1300.0 + step[1], 850.0])
    # closed form: a rigid translation of what the table carries by the step (the rotated
    # stand's child and the jig's child included, each once); the stand stays
    after = {f["name"]: f["position_mm"] for f in shown["scene"]["fixtures"]}
    for name in ("weld-jig", "clip-holder", "seam-clip"):
        assert after[name] == pytest.approx(np.array(world[name]) + step, abs=1e-3), name
    assert after["stand"] == pytest.approx(world["stand"])
    assert open_page.problems.console_errors == []

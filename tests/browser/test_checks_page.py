"""The checks on the page: log diagnosis, base placement, fixing a branch-inconsistent target.

Expected values come from the Python API run in the test on the same cell
file the server reads (posebridge.cell.log_diagnosis, posebridge.cell.checks,
tested in tests/cell), and from the files themselves (the demo log's rows).
"""

from __future__ import annotations

import csv
import json
from pathlib import Path
from typing import Any

import httpx
import numpy as np
import pytest

from posebridge.bench.browser import figure_pixel, plan_marker_position
from posebridge.cell import load_cell, resolve_scene
from posebridge.cell.checks import check_targets
from posebridge.cell.joint_log import read_joint_log
from posebridge.cell.log_diagnosis import diagnose_log
from posebridge.cell.model import validate_cell
from posebridge.resources import data_folder
from posebridge.results.log_diagnosis import log_diagnosis_result
from posebridge.results.target_check import target_check_result

STATE = "() => window.posebridge.getState()"
DEMO_LOG = data_folder("robots") / "demo-log.csv"


def test_pose_check_flags_worst_log_row(open_page: Any, cell_path: Path, artifacts: Path) -> None:
    page = open_page.page
    page.set_input_files("#log-file", str(DEMO_LOG))
    page.wait_for_function("() => window.posebridge.getState().logCheck", timeout=120_000)
    scene = resolve_scene(load_cell(cell_path))
    expected = log_diagnosis_result(diagnose_log(scene, read_joint_log(DEMO_LOG, scene.robot)))
    assert page.get_attribute("#log-facts", "data-worst-row") == str(expected.worst_row.row)
    assert expected.worst_row.reason in page.inner_text("#log-facts")
    # the timeline highlights the worst row, and the arm is moved onto it
    shapes = page.evaluate("() => document.getElementById('log-timeline').layout.shapes")
    assert shapes[0]["x0"] < expected.worst_row.row < shapes[0]["x1"]
    page.wait_for_function(
        "() => { const s = window.posebridge.getState(); return s.fkJoints === s.joints; }"
    )
    with DEMO_LOG.open(newline="") as handle:
        rows = list(csv.DictReader(handle))
    names = [joint.name for joint in scene.robot.joints]
    worst = [float(rows[expected.worst_row.row][name]) for name in names]
    assert page.evaluate(STATE)["joints"] == pytest.approx(worst)
    # the scrub bar moves the arm through the log
    page.fill("#log-scrub", "0")
    page.dispatch_event("#log-scrub", "input")
    assert page.evaluate(STATE)["joints"] == pytest.approx([float(rows[0][n]) for n in names])
    page.screenshot(path=str(artifacts / "page-log-check.png"), full_page=True)
    assert open_page.problems.console_errors == []


def test_placement_moves_base(open_page: Any, cell_path: Path, artifacts: Path) -> None:
    page = open_page.page
    page.fill("#place-width", "300")
    page.fill("#place-count", "3")
    page.fill("#place-yaws", "2")
    page.click("#place-run")
    page.wait_for_function("() => window.posebridge.getState().placement", timeout=180_000)
    ranked = page.evaluate(STATE)["placement"]["best"]
    # 3 x 3 positions x 2 yaws around the demo foot (closed form)
    assert page.evaluate(STATE)["placement"]["candidates_evaluated"] == 18
    # the current base is marked on the heatmap, which is up to date
    current_base = (
        "() => { const t = (document.getElementById('place-heatmap').data || [])"
        ".find((d) => d.meta && d.meta.role === 'current-base'); return [t.x[0], t.y[0]]; }"
    )
    foot = page.evaluate(STATE)["cell"]["scene"]["base"]["position_mm"]
    assert page.evaluate(current_base) == pytest.approx(foot[:2])
    assert page.get_attribute("#place-heatmap", "data-stale") == "false"
    # the scores are the server's picture (best over all yaws) under the candidates
    page.wait_for_function(
        "() => (document.getElementById('place-heatmap').dataset.picture || '').endsWith('|-1|0')",
        timeout=120_000,
    )
    assert page.locator("#place-heatmap .imagelayer image").count() == 1
    # the legend and the colour bar's title do not overlap (common practice, no source)
    overlap = page.evaluate(
        "() => { const box = (s) => document.querySelector(`#place-heatmap ${s}`)"
        ".getBoundingClientRect(); const a = box('.legend'), b = box('.cbtitle');"
        " return Math.max(0, Math.min(a.right, b.right) - Math.max(a.left, b.left))"
        " * Math.max(0, Math.min(a.bottom, b.bottom) - Math.max(a.top, b.top)); }"
    )
    assert overlap == 0
    page.locator("#place-heatmap").screenshot(path=str(artifacts / "page-placement-scores.png"))
    # the score in words, ties within the score's noise, a slower best base said so (the
    # report's fields, tested in tests/planning/test_placement.py)
    placement = page.evaluate(STATE)["placement"]
    assert placement["score_words"] in page.inner_text("#place-score-words")
    for candidate in placement["best"]:
        item = page.locator(f"#place-candidates li[data-rank='{candidate['rank']}']")
        assert item.get_attribute("data-tie-rank") == str(candidate["tie_rank"])
        tied = f"a tie with rank {candidate['tie_rank']}" in item.inner_text()
        assert tied == (candidate["tie_rank"] != candidate["rank"])
    assert page.is_visible("#place-speed") == bool(placement["speed_note"])
    # the best candidate that moves the base (the current base may rank first)
    k, best = next(
        (k, c) for k, c in enumerate(ranked) if [c["x_mm"], c["y_mm"]] != pytest.approx(foot[:2])
    )
    with page.expect_response(
        lambda r: r.request.method == "PATCH" and r.url.endswith("/api/cell/base"), timeout=120_000
    ) as moved:
        page.click(f"#place-candidates li:nth-child({k + 1})")
    assert moved.value.status == 200
    page.wait_for_function(
        "(etag) => { const s = window.posebridge.getState(); return s.cell.etag === etag"
        " && s.fkJoints === s.joints; }",
        arg=moved.value.json()["etag"],
        timeout=120_000,
    )
    saved = json.loads(cell_path.read_text())
    assert saved["base"]["position_mm"][:2] == pytest.approx([best["x_mm"], best["y_mm"]])
    # the base moved: the heatmap says it is out of date and marks the new base
    page.wait_for_function(
        "() => document.getElementById('place-heatmap').dataset.stale === 'true'", timeout=120_000
    )
    assert "Out of date" in page.inner_text("#placement-panel")
    assert page.evaluate(current_base) == pytest.approx(saved["base"]["position_mm"][:2])
    assert saved["base"]["rpy_deg"][2] == pytest.approx(best["yaw_deg"])
    # the arm is drawn on its new base: the chain starts at the base frame
    state = page.evaluate(STATE)
    assert state["fk"]["frames_position_mm"][0] == pytest.approx(
        state["cell"]["scene"]["base"]["position_mm"], abs=1e-6
    )
    page.screenshot(path=str(artifacts / "page-placement.png"), full_page=True)
    assert open_page.problems.console_errors == []


def _moved_cell(data: dict[str, Any], name: str, world_xy: tuple[float, float]) -> dict[str, Any]:
    """The cell with target ``name`` moved in world x, y (z and orientation kept), in its
    fixture's frame: p_fixture = inv(T_world_fixture) p_world (Lynch & Park, sec. 3.3.1)."""
    scene = resolve_scene(validate_cell(data))
    k = scene.targets.index(name)
    fixture = scene.targets.fixtures[k]
    world = scene.targets.T_world_target[k][:3, 3].copy()
    world[:2] = np.asarray(world_xy) / 1000.0
    moved = json.loads(json.dumps(data))
    target = next(t for t in moved["targets"] if t["name"] == name)
    T = (
        np.eye(4)
        if fixture == "world"
        else scene.T_world_fixture[scene.fixture_names.index(fixture)]
    )
    local = np.linalg.inv(T) @ np.append(world, 1.0)
    target["position_mm"] = [1000.0 * float(v) for v in local[:3]]
    return moved


def _consistent(data: dict[str, Any]) -> bool:
    return target_check_result(
        check_targets(resolve_scene(validate_cell(data)))
    ).consistent_branch.consistent


def test_fix_branch_inconsistent_target(open_page: Any, cell_path: Path, artifacts: Path) -> None:
    page = open_page.page
    data = load_cell(cell_path).model_dump(mode="json", exclude_none=True)
    report = target_check_result(check_targets(resolve_scene(validate_cell(data))))
    scene = resolve_scene(validate_cell(data))
    offsets = [(dx, dy) for dy in (-400, -300, 300, 400, -200, 200) for dx in (0, -200, 200)]
    if report.consistent_branch.consistent:
        # make one target inconsistent first (through the API, as another user would)
        name = scene.targets.names[-1]
        x0, y0 = 1000.0 * scene.targets.T_world_target[-1][:2, 3]
        broken = next(
            _moved_cell(data, name, (x0 + dx, y0 + dy))
            for dx, dy in offsets
            if not _consistent(_moved_cell(data, name, (x0 + dx, y0 + dy)))
        )
        etag = page.evaluate(STATE)["cell"]["etag"]
        put = httpx.put(
            open_page.base_url + "api/cell", json=broken, headers={"If-Match": etag}, timeout=120
        )
        assert put.status_code == 200, put.text
        data = broken
        page.reload()
        open_page.wait_settled()
    else:
        name = report.consistent_branch.breaking_targets[0]
    # the goal: a point on the plan's 10 mm snap grid where the common branch reaches every target
    scene = resolve_scene(validate_cell(data))
    k = scene.targets.index(name)
    x0, y0 = 1000.0 * scene.targets.T_world_target[k][:2, 3]
    goal = next(
        (round(x0 + dx, -1), round(y0 + dy, -1))
        for dx, dy in offsets
        if _consistent(_moved_cell(data, name, (round(x0 + dx, -1), round(y0 + dy, -1))))
    )
    page.click(f"#cell-target-{name}")
    page.wait_for_function(
        "(name) => { const s = window.posebridge.getState();"
        " return s.selection && s.selection.name === name && s.targetCheck"
        " && s.targetCheck.etag === s.cell.etag; }",
        arg=name,
        timeout=120_000,
    )
    assert page.get_attribute("#target-check-summary", "data-consistent") == "false"
    assert (
        page.get_attribute(f"#target-check-table tr[data-target='{name}']", "data-breaking")
        == "true"
    )
    page.check("#snap")
    x, y = plan_marker_position(page)
    gx, gy = figure_pixel(page, "plan", *goal)
    page.mouse.move(x, y)
    page.mouse.down()
    with page.expect_response(
        lambda r: r.request.method == "PATCH" and "/api/cell/targets/" in r.url, timeout=120_000
    ) as saved:
        page.mouse.move(gx, gy, steps=8)
        page.mouse.up()
    assert saved.value.status == 200
    etag = saved.value.json()["etag"]
    page.wait_for_function(
        "(etag) => { const s = window.posebridge.getState(); return s.targetCheck"
        " && s.targetCheck.etag === etag; }",
        arg=etag,
        timeout=120_000,
    )
    # the target sits on the goal (snapped), and the finding is gone
    moved = next(t for t in saved.value.json()["scene"]["targets"] if t["name"] == name)
    assert moved["position_mm"][:2] == pytest.approx(list(goal), abs=1e-6)
    assert page.get_attribute("#target-check-summary", "data-consistent") == "true"
    assert (
        page.get_attribute(f"#target-check-table tr[data-target='{name}']", "data-breaking")
        == "false"
    )
    # the saved cell, checked in Python, agrees
    assert target_check_result(
        check_targets(resolve_scene(load_cell(cell_path)))
    ).consistent_branch.consistent
    page.screenshot(path=str(artifacts / "page-target-fixed.png"), full_page=True)
    assert open_page.problems.console_errors == []


def test_fastest_sequence_is_drawn_and_used(
    open_page: Any, cell_path: Path, artifacts: Path
) -> None:
    from posebridge.planning.sequence_report import optimise_path
    from posebridge.results.sequence import sequence_result

    page = open_page.page
    scene = resolve_scene(load_cell(cell_path), cell_path)
    index = [p.name for p in scene.paths].index("unload-to-conveyor")
    expected = sequence_result(
        optimise_path(scene, index)
    )  # the Python API on the file the server reads
    page.select_option("#path-select", "unload-to-conveyor")
    href = page.get_attribute("#path-export-csv", "href")
    assert href == "/api/cell/paths/unload-to-conveyor/export.csv"
    page.click("#path-optimise")
    page.wait_for_function("() => window.posebridge.getState().sequence", timeout=180_000)
    assert expected.summary in page.inner_text("#path-sequence")
    # the chosen sequence is a curve on the joint map's base figure, over the map's two joints
    page.wait_for_function(
        "() => (document.getElementById('joint-map-base').data || [])"
        ".some((t) => t.meta && t.meta.role === 'sequence')",
        timeout=120_000,
    )
    curve = page.evaluate(
        "() => (document.getElementById('joint-map-base').data || [])"
        ".find((t) => t.meta && t.meta.role === 'sequence')"
    )
    joints = page.evaluate(STATE)["mapJoints"]
    assert expected.best is not None
    best = [w.joints_deg for w in expected.best.waypoints]
    # cell files keep numbers to 0.001 mm/deg: the server's copy and the file differ by that
    assert curve["x"] == pytest.approx([q[joints[0]] for q in best], abs=1e-3)
    assert curve["y"] == pytest.approx([q[joints[1]] for q in best], abs=1e-3)
    etag = page.evaluate(STATE)["cell"]["etag"]
    page.click("#path-use-sequence")
    page.wait_for_function(
        f"() => window.posebridge.getState().cell.etag !== {json.dumps(etag)}", timeout=120_000
    )
    saved = json.loads(cell_path.read_text())
    path = next(p for p in saved["paths"] if p["name"] == "unload-to-conveyor")
    for edit in expected.edits:
        assert path["waypoints"][edit.index]["joints_deg"] == pytest.approx(
            edit.joints_deg, abs=1e-3
        )
    page.screenshot(path=str(artifacts / "page-fastest-sequence.png"), full_page=True)
    assert open_page.problems.console_errors == []


_PATH_REPORT_ARRIVED = """(name) => {
  const s = window.posebridge && window.posebridge.getState();
  const r = s && s.pathReport && s.pathReport.report;
  return Boolean(r && r.path === name);
}"""


_PATH_REPORT_SHOWN = """(name) => {
  const s = window.posebridge && window.posebridge.getState();
  const r = s && s.pathReport && s.pathReport.report;
  if (!r || r.path !== name) return false;
  const groups = r.finding_groups || [];
  const hidden = groups.reduce((sum, g) => sum + g.count - 1, 0);
  return document.querySelectorAll("#path-findings li").length === r.findings.length - hidden;
}"""


def test_path_findings_of_one_cause_are_one_item(open_page: Any, artifacts: Path) -> None:
    page = open_page.page
    page.locator("#path-panel").scroll_into_view_if_needed()
    page.select_option("#path-select", "load-press")
    page.click("#path-check")
    page.wait_for_function(_PATH_REPORT_ARRIVED, arg="load-press", timeout=600_000)
    report = page.evaluate("() => window.posebridge.getState().pathReport.report")
    page.wait_for_function(_PATH_REPORT_SHOWN, arg="load-press")
    repeated = [g for g in report["finding_groups"] if g["count"] > 1]
    # the demo's load-press path passes the press die twice too close (demo cell notes: about
    # 20 mm above the die): one cause, more than one finding
    assert repeated
    items = page.locator("#path-findings li")
    texts = items.all_inner_texts()
    counts = items.evaluate_all("(elements) => elements.map((e) => Number(e.dataset.count))")
    for group in repeated:
        # our own contract: one item per repeated cause, with its count and the worst message
        (index,) = [k for k, text in enumerate(texts) if group["worst"]["message"] in text]
        assert counts[index] == group["count"]
        assert f"{group['count']} × {group['cause']}" in texts[index]
    page.screenshot(path=str(artifacts / "page-path-finding-groups.png"), full_page=True)
    assert open_page.problems.console_errors == []


def test_target_check_flags_a_target_off_its_fixture_and_says_why(
    open_page: Any, cell_path: Path, artifacts: Path
) -> None:
    page = open_page.page
    data = load_cell(cell_path).model_dump(mode="json", exclude_none=True)
    drop = next(t for t in data["targets"] if t["name"] == "reject-drop")
    drop["position_mm"][0] += 400.0  # dragged 400 mm off its bin (in the bin frame)
    etag = page.evaluate(STATE)["cell"]["etag"]
    put = httpx.put(
        open_page.base_url + "api/cell", json=data, headers={"If-Match": etag}, timeout=120
    )
    assert put.status_code == 200, put.text
    page.reload()
    open_page.wait_settled()
    page.wait_for_function(
        "(etag) => { const s = window.posebridge.getState(); return Boolean(s.targetCheck"
        " && s.cell && s.targetCheck.etag === s.cell.etag && s.cell.etag === etag); }",
        arg=put.json()["etag"],
        timeout=180_000,
    )
    # the check run here in Python on the same file is the reference (tests/cell/test_checks.py)
    expected = target_check_result(check_targets(resolve_scene(load_cell(cell_path))))
    (finding,) = [f for f in expected.findings if f.code == "off-fixture"]
    assert finding.target == "reject-drop"
    row = page.locator("#target-check-findings li[data-code='off-fixture']")
    assert row.count() == 1
    assert finding.message in row.inner_text()
    for check in expected.targets:
        why = page.locator(f"#target-check-table tr[data-target='{check.name}'] .pb-why")
        assert why.count() == (1 if check.target.recommended_reason else 0)
        if check.target.recommended_reason:
            assert why.inner_text() == check.target.recommended_reason
    page.locator("#target-check-findings li[data-code='off-fixture']").scroll_into_view_if_needed()
    page.screenshot(path=str(artifacts / "page-target-off-fixture.png"), full_page=True)
    assert open_page.problems.console_errors == []

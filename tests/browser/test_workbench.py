"""The page as a workbench: the arm's state in every view and in words, one screen.

Expected values: the joint limits of robots/pb-arm6.toml read with tomllib (closed-form
excess), the pose diagnosis of posebridge.cell.diagnosis run in the test on the same cell
file (tested against python-fcl in tests/cell), the issue's target screen (1600 x 1000).
"""

from __future__ import annotations

import tomllib
from pathlib import Path
from typing import Any

import numpy as np

from posebridge.cell import load_cell, resolve_scene
from posebridge.cell.diagnosis import diagnose_pose
from posebridge.resources import data_folder

STATE = "() => window.posebridge.getState()"
ROBOTS = data_folder("robots")
DEMO_LOG = ROBOTS / "demo-log.csv"

# the arm-state answer belongs to the joints shown now, and every view has drawn it
_ARM_DRAWN = """(level) => {
  const s = window.posebridge.getState();
  if (!s.armState || s.fkJoints !== s.joints) return false;
  if (!s.armState.joints.every((v, k) => Math.abs(v - s.joints[k]) < 1e-9)) return false;
  const arm = (id) => {
    const el = document.getElementById(id);
    const trace = el && el.data && el.data.find((t) => t.meta && t.meta.role === "arm");
    return trace ? trace.meta.level : null;
  };
  const current = (document.getElementById("joint-map").data || [])
    .find((t) => t.meta && t.meta.role === "current");
  return arm("scene3d") === level && arm("plan") === level && arm("elevation") === level &&
    current && current.meta.level === level &&
    document.getElementById("arm-state").dataset.level === level;
}"""


# both joint maps describe the current cell, joints and held values (maps.js mapIsCurrent):
# waited for before a test ends, so its map jobs do not hold the server's job slots for the next
_MAPS_CURRENT = """() => {
  const s = window.posebridge.getState();
  const current = (m, chosen) => Boolean(m && s.cell && m.cell_etag === s.cell.etag &&
    chosen.every((j, k) => m.joints[k] === j) &&
    s.joints.every((v, i) => chosen.includes(i) || Math.abs(v - m.hold_deg[i]) <= 0.05));
  return current(s.jointMap, s.mapJoints) && current(s.jointMap3, s.map3Joints);
}"""


def _set_joint(page: Any, index: int, value: float) -> None:
    page.fill(f"#joint-value-{index}", str(value))
    page.dispatch_event(f"#joint-value-{index}", "change")


def test_arm_beyond_a_limit_is_shown_everywhere(open_page: Any, artifacts: Path) -> None:
    page = open_page.page
    with (ROBOTS / "pb-arm6.toml").open("rb") as handle:
        upper = tomllib.load(handle)["joint"][0]["limits"]["max_deg"]
    _set_joint(page, 0, upper + 6.0)
    page.wait_for_function(_ARM_DRAWN, arg="bad", timeout=30_000)
    # closed form: 6 deg beyond the upper limit of j1 (robots/pb-arm6.toml)
    text = page.inner_text("#arm-state-text")
    assert "j1 6.0° beyond its upper limit" in text
    assert "j1 6.0° beyond its upper limit" in page.inner_text("#arm-summary")
    assert page.get_attribute("#arm-summary", "data-level") == "bad"
    # the thresholds that decide the levels are shown in one place next to the views
    assert "clearance 25 mm" in page.inner_text("#arm-state-thresholds")  # documented default
    page.wait_for_function(_MAPS_CURRENT, timeout=120_000)
    page.wait_for_function(_ARM_DRAWN, arg="bad", timeout=30_000)
    page.screenshot(path=str(artifacts / "page-warning-limit.png"))
    assert open_page.problems.console_errors == []


def test_collision_named_with_depth(open_page: Any, cell_path: Path, artifacts: Path) -> None:
    page = open_page.page
    page.set_input_files("#log-file", str(DEMO_LOG))
    page.wait_for_function("() => window.posebridge.getState().logCheck", timeout=30_000)
    page.wait_for_function(_ARM_DRAWN, arg="bad", timeout=30_000)
    joints = page.evaluate(STATE)["joints"]
    scene = resolve_scene(load_cell(cell_path))
    expected = diagnose_pose(scene, np.radians(joints))
    pair = expected.closest_environment
    assert pair is not None and pair.distance_mm < 0
    words = f"{pair.capsule} {abs(pair.distance_mm):.1f} mm into {pair.other}"
    assert words in page.inner_text("#arm-state-text")
    # the views stay on screen with the log check open (one screen at 1600 x 1000)
    _assert_views_on_screen(page)
    page.wait_for_function(_MAPS_CURRENT, timeout=120_000)
    page.screenshot(path=str(artifacts / "page-warning-collision.png"))
    assert open_page.problems.console_errors == []


def _assert_views_on_screen(page: Any) -> None:
    viewport = page.viewport_size
    for view in ("#scene3d", "#plan", "#elevation", "#joint-map", "#joint-space-3d"):
        box = page.locator(view).bounding_box()
        assert box is not None, view
        assert box["y"] >= 0 and box["y"] + box["height"] <= viewport["height"], view
        assert box["x"] >= 0 and box["x"] + box["width"] <= viewport["width"], view
        assert box["height"] >= 200, view  # usable plots, not squeezed away
    # the page itself does not scroll: the panels column scrolls on its own
    assert page.evaluate("() => document.scrollingElement.scrollHeight") <= viewport["height"]


def test_one_screen_with_a_check_open(open_page: Any, artifacts: Path) -> None:
    page = open_page.page
    _assert_views_on_screen(page)
    # open the path check far down the panel column: the views do not move
    before = page.locator("#plan").bounding_box()
    page.locator("#path-panel").scroll_into_view_if_needed()
    page.click("#path-check")
    page.wait_for_function("() => window.posebridge.getState().pathReport", timeout=60_000)
    page.locator("#path-panel").scroll_into_view_if_needed()
    assert page.locator("#plan").bounding_box() == before
    _assert_views_on_screen(page)
    page.wait_for_function(_MAPS_CURRENT, timeout=120_000)
    page.screenshot(path=str(artifacts / "page-one-screen-check-open.png"))
    assert open_page.problems.console_errors == []

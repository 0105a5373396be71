"""The page as a workbench: the arm's state in every view and in words, one screen.

Expected values: the joint limits of robots/pb-arm6.toml read with tomllib (closed-form
excess), the pose diagnosis of posebridge.cell.pose_diagnosis run in the test on the same cell
file (tested against python-fcl in tests/cell), the issue's target screen (1600 x 1000).
"""

from __future__ import annotations

import tomllib
from pathlib import Path
from typing import Any

import numpy as np

from posebridge.cell import load_cell, resolve_scene
from posebridge.cell.pose_diagnosis import diagnose_pose
from posebridge.palette import region_colour
from posebridge.resources import data_folder
from posebridge.results.diagnosis import pose_diagnosis_result

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
    page.wait_for_function(_ARM_DRAWN, arg="bad", timeout=120_000)
    # closed form: 6 deg beyond the upper limit of j1 (robots/pb-arm6.toml)
    text = page.inner_text("#arm-state-text")
    assert "j1 6.0° beyond its upper limit" in text
    assert "j1 6.0° beyond its upper limit" in page.inner_text("#arm-summary")
    assert page.get_attribute("#arm-summary", "data-level") == "bad"
    # the thresholds that decide the levels are shown in one place next to the views
    assert "clearance 25 mm" in page.inner_text("#arm-state-thresholds")  # documented default
    page.wait_for_function(_MAPS_CURRENT, timeout=120_000)
    page.wait_for_function(_ARM_DRAWN, arg="bad", timeout=120_000)
    page.screenshot(path=str(artifacts / "page-warning-limit.png"))
    assert open_page.problems.console_errors == []


def test_collision_named_with_depth(open_page: Any, cell_path: Path, artifacts: Path) -> None:
    page = open_page.page
    page.set_input_files("#log-file", str(DEMO_LOG))
    page.wait_for_function("() => window.posebridge.getState().logCheck", timeout=120_000)
    page.wait_for_function(_ARM_DRAWN, arg="bad", timeout=120_000)
    joints = page.evaluate(STATE)["joints"]
    scene = resolve_scene(load_cell(cell_path))
    expected = pose_diagnosis_result(diagnose_pose(scene, np.radians(joints)))
    pair = expected.closest_environment
    assert pair is not None
    assert pair.distance_mm < 0
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
        assert box["y"] >= 0, view
        assert box["y"] + box["height"] <= viewport["height"], view
        assert box["x"] >= 0, view
        assert box["x"] + box["width"] <= viewport["width"], view
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
    page.wait_for_function("() => window.posebridge.getState().pathReport", timeout=180_000)
    page.locator("#path-panel").scroll_into_view_if_needed()
    assert page.locator("#plan").bounding_box() == before
    _assert_views_on_screen(page)
    page.wait_for_function(_MAPS_CURRENT, timeout=120_000)
    page.screenshot(path=str(artifacts / "page-one-screen-check-open.png"))
    assert open_page.problems.console_errors == []


# a grid cell of the two-joint map where an obstacle collides: its name and joint values
_COLLIDING_CELL = """() => {
  const m = window.posebridge.getState().jointMap;
  const flat = m.obstacle.findIndex((k) => k >= 0);
  const nb = m.shape[1];
  return [m.obstacle_names[m.obstacle[flat]], m.axes_deg[0][Math.floor(flat / nb)],
          m.axes_deg[1][flat % nb]];
}"""


# pixels of the joint map's picture (the server's PNG, read back through a canvas) at the first
# cell of each colliding object that is not also in self collision: [name, [r, g, b, a]]
_REGION_PIXELS = """async () => {
  const m = window.posebridge.getState().jointMap;
  const img = new Image();
  img.src = m.picture;
  await img.decode();
  const canvas = document.createElement('canvas');
  canvas.width = img.naturalWidth;
  canvas.height = img.naturalHeight;
  const context = canvas.getContext('2d');
  context.drawImage(img, 0, 0);
  const nb = m.shape[1];
  const pixels = [];
  for (const name of m.colliding_obstacles) {
    const index = m.obstacle_names.indexOf(name);
    const flat = m.obstacle.findIndex((k, f) => k === index && !m.self_collision[f]);
    if (flat >= 0) {
      const [ia, ib] = [Math.floor(flat / nb), flat % nb];
      pixels.push([name, Array.from(context.getImageData(ia, nb - 1 - ib, 1, 1).data)]);
    }
  }
  return { size: [img.naturalWidth, img.naturalHeight], shape: m.shape, pixels };
}"""

_MAP_IMAGE_DRAWN = """() => {
  const image = document.querySelector('#joint-map-base .imagelayer image');
  const source = image && (image.getAttribute('href') || image.getAttribute('xlink:href'));
  return Boolean(source && source.startsWith('data:image/png'));
}"""


def _rgb(colour: str) -> np.ndarray:
    return np.array([int(colour[k : k + 2], 16) for k in (1, 3, 5)], dtype=float)


def test_joint_map_colours_hover_and_legend(open_page: Any, artifacts: Path) -> None:
    page = open_page.page
    page.wait_for_function(_MAPS_CURRENT, timeout=120_000)
    # the regions are the server's picture of the map, drawn under the plot's axes
    page.wait_for_function(_MAP_IMAGE_DRAWN, timeout=120_000)
    drawn = page.evaluate(_REGION_PIXELS)
    assert drawn["size"] == drawn["shape"][::-1]  # one pixel per grid cell
    regions = drawn["pixels"]
    assert regions
    # each object in its region colour at opacity 0.85 over the clearance shading's
    # #c4ccd3 (a colliding cell has no clearance): "over" compositing, closed form
    colliding = page.evaluate("() => window.posebridge.getState().jointMap.colliding_obstacles")
    for name, pixel in regions:
        expected = 0.85 * _rgb(region_colour(colliding.index(name))) + 0.15 * _rgb("#c4ccd3")
        np.testing.assert_allclose(pixel, [*expected, 255], atol=1.01)
    # our own contract (issue): every object the map shows has its own colour
    assert len({tuple(pixel) for _, pixel in regions}) == len(regions)
    # the 3D joint view has its own legend, one entry per object it shows
    groups = page.evaluate(
        "() => (document.getElementById('joint-space-3d').data || [])"
        ".filter((t) => t.meta && t.meta.role === 'obstacle').map((t) => t.name)"
    )
    legend = page.inner_text("#map3-legend")
    assert groups
    assert all(name in legend for name in groups)
    # hovering a region names its object
    name, x, y = page.evaluate(_COLLIDING_CELL)
    point = page.evaluate(
        """([x, y]) => {
          const el = document.getElementById('joint-map');
          const area = el.querySelector('.nsewdrag').getBoundingClientRect();
          const xr = el._fullLayout.xaxis.range, yr = el._fullLayout.yaxis.range;
          return [area.left + (x - xr[0]) / (xr[1] - xr[0]) * area.width,
                  area.top + (yr[1] - y) / (yr[1] - yr[0]) * area.height];
        }""",
        [x, y],
    )
    page.mouse.move(point[0], point[1])
    assert page.get_attribute("#joint-map", "data-hover-object") == name
    page.screenshot(path=str(artifacts / "page-joint-map-colours.png"))
    assert open_page.problems.console_errors == []


def test_log_timeline_playback_and_worst_row(open_page: Any, artifacts: Path) -> None:
    page = open_page.page
    page.set_input_files("#log-file", str(DEMO_LOG))
    page.wait_for_function("() => window.posebridge.getState().logCheck", timeout=120_000)
    worst = int(page.get_attribute("#log-facts", "data-worst-row"))
    page.fill("#log-scrub", "0")
    page.dispatch_event("#log-scrub", "input")
    page.select_option("#log-speed", "0.25")
    page.click("#log-play")
    assert page.inner_text("#log-play") == "Pause"
    # "go to the worst row" stops the playback and puts the arm on that row
    page.click("#log-worst")
    assert page.inner_text("#log-play") == "Play"
    assert page.input_value("#log-scrub") == str(worst)
    page.wait_for_function(
        "() => { const s = window.posebridge.getState(); return s.fkJoints === s.joints; }"
    )
    assert page.input_value("#log-scrub") == str(worst)  # nothing moved it on
    # the timeline's axis titles and tick labels lie inside its box (not clipped)
    page.locator("#log-timeline").scroll_into_view_if_needed()
    inside = page.evaluate(
        """() => {
          const box = document.getElementById('log-timeline').getBoundingClientRect();
          const labels = document.querySelectorAll(
            '#log-timeline .xtitle, #log-timeline .ytitle, #log-timeline .y2title, '
            + '#log-timeline .y3title, #log-timeline .xtick text, #log-timeline .legend');
          return [...labels].every((el) => {
            const r = el.getBoundingClientRect();
            return r.left >= box.left - 1 && r.right <= box.right + 1 &&
              r.top >= box.top - 1 && r.bottom <= box.bottom + 1;
          }) && labels.length > 0;
        }"""
    )
    assert inside
    page.wait_for_function(_MAPS_CURRENT, timeout=120_000)
    page.locator("#log-timeline").screenshot(path=str(artifacts / "page-log-timeline.png"))
    page.screenshot(path=str(artifacts / "page-log-check-open.png"))
    assert open_page.problems.console_errors == []


def test_pose_check_other_branches_table(open_page: Any, cell_path: Path) -> None:
    page = open_page.page
    joints = [10.0, 20.0, -30.0, 5.0, 60.0, -15.0]
    page.fill("#pose-input", ", ".join(str(v) for v in joints))
    page.click("#pose-check")
    page.wait_for_function("() => window.posebridge.getState().poseCheck", timeout=120_000)
    scene = resolve_scene(load_cell(cell_path))
    expected = pose_diagnosis_result(diagnose_pose(scene, np.radians(joints)))
    assert expected.input_branch is not None
    own = expected.branches[expected.input_branch].branch
    rows = page.locator("#pose-other-branches tr")
    # one header row, then every other branch of the same TCP pose (pose diagnosis, Python)
    assert rows.count() == len(expected.branches)
    listed = [rows.nth(k).locator("td").first.inner_text() for k in range(1, rows.count())]
    assert own not in listed
    assert sorted(listed) == sorted(
        b.branch for k, b in enumerate(expected.branches) if k != expected.input_branch
    )
    assert open_page.problems.console_errors == []

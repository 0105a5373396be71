"""The page's reach overlay for a planar arm draws the region in the arm's plane: in plan the
annulus of the two-link arm, in elevation one row of cells at the plane's height.

The cell is the demo cell with the bundled planar arm ``pb-planar2r`` (links 400 mm and 300 mm,
joint 1 over a full turn, joint 2 within +-150 deg; robots/pb-planar2r.toml) on a 400 mm
pedestal moved off the world origin, and one target in the arm's plane. Expected values are the
closed form of the two-link arm (law of cosines; Spong, Hutchinson, Vidyasagar, *Robot Modeling
and Control*, sec. 5.3): the TCP reaches the radii from r(150 deg) to l1 + l2 about axis 1.
"""

from __future__ import annotations

import json
import math
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest

from posebridge.api.server import background_server
from posebridge.api.settings import Settings
from posebridge.resources import data_folder

L1_MM, L2_MM = 400.0, 300.0  # robots/pb-planar2r.toml: joint 2 origin and flange, along x
ELBOW_LIMIT_DEG = 150.0  # robots/pb-planar2r.toml, joint 2 limits +-150 deg
BASE_MM = (250.0, -150.0)  # the cell's base (pedestal foot), chosen here
PEDESTAL_MM = 400.0
TCP_Z_MM = 180.0  # the demo cell's tool: TCP 180 mm along the flange z axis
# every joint turns about the base z axis and every joint origin and the flange lie at z = 0 of
# the base frame (robots/pb-planar2r.toml): the TCP plane is the pedestal top plus the tool
PLANE_Z_MM = PEDESTAL_MM + TCP_Z_MM
# law of cosines (module docstring): r^2 = l1^2 + l2^2 + 2 l1 l2 cos(theta2), smallest at the
# elbow limit, largest stretched out
INNER_MM = math.sqrt(
    L1_MM**2 + L2_MM**2 + 2.0 * L1_MM * L2_MM * math.cos(math.radians(ELBOW_LIMIT_DEG))
)
OUTER_MM = L1_MM + L2_MM
EDGE_MM = 1.0  # cells whose centre is this close to a boundary are not judged

# Both sections are the slices through the page's target, for the cell version shown, and both
# views draw them (reach.js sectionIsCurrent; projection.js: the server's picture of the section
# as a layout image "reach" of the figure under the arm's, "<view>-base"). _REACH_DRAWN is the
# one place that reads a drawn section: the browser decodes the picture on a canvas, and a
# cell is drawn where its pixel is not transparent (picture row 0 is the largest v).
_SECTIONS_DRAWN = """() => {
  const s = window.posebridge && window.posebridge.getState();
  if (!s || !s.cell || !s.target || !s.reachPlan || !s.reachElevation) return false;
  const t = s.target.position_mm;
  const current = (section, value) =>
    section.cell_etag === s.cell.etag && Math.abs(section.requested_mm - value) < 1;
  if (!current(s.reachPlan, t[2]) || !current(s.reachElevation, t[1])) return false;
  const drawn = (id, section) => {
    const element = document.getElementById(id);
    const images = (element && element.layout && element.layout.images) || [];
    return images.some((image) => image.name === "reach" && image.source === section.picture);
  };
  return drawn("plan-base", s.reachPlan) && drawn("elevation-base", s.reachElevation);
}"""

_REACH_DRAWN = """async ([id, key]) => {
  const section = window.posebridge.getState()[key];
  const image = document.getElementById(id).layout.images.find((i) => i.name === "reach");
  const picture = new Image();
  picture.src = image.source;
  await picture.decode();
  const canvas = document.createElement("canvas");
  canvas.width = picture.width;
  canvas.height = picture.height;
  const context = canvas.getContext("2d");
  context.drawImage(picture, 0, 0);
  const pixels = context.getImageData(0, 0, picture.width, picture.height).data;
  const z = [];
  for (let r = 0; r < picture.height; r++) {
    const row = [];
    for (let c = 0; c < picture.width; c++) row.push(pixels[4 * (r * picture.width + c) + 3] > 0 ? 1 : null);
    z.push(row);
  }
  z.reverse();
  return { x: section.u_mm, y: section.v_mm, z };
}"""


@pytest.fixture
def planar_server(tmp_path: Path) -> Iterator[str]:
    cell = json.loads((data_folder("robots") / "demo-cell.json").read_text(encoding="utf-8"))
    cell["robot"] = {"name": "pb-planar2r"}
    cell["base"] = {
        "position_mm": [BASE_MM[0], BASE_MM[1], 0.0],
        "rpy_deg": [0.0, 0.0, 0.0],
        "pedestal_height_mm": PEDESTAL_MM,
        "pedestal_radius_mm": 150.0,
    }
    cell["targets"] = [
        {"name": "in-plane", "position_mm": [BASE_MM[0] + 500.0, BASE_MM[1], PLANE_Z_MM]}
    ]
    cell["paths"] = []
    path = tmp_path / "planar-cell.json"
    path.write_text(json.dumps(cell), encoding="utf-8")
    with background_server(Settings(robot="pb-planar2r", cell_path=path)) as url:
        yield url


def _drawn_cells(trace: dict[str, Any]) -> list[tuple[float, float, bool]]:
    """(horizontal, vertical, drawn) of every cell centre of a drawn section (null = not drawn)."""
    assert len(trace["z"]) == len(trace["y"])  # one pixel per cell (our own contract)
    assert all(len(row) == len(trace["x"]) for row in trace["z"])
    return [
        (u, v, trace["z"][row][column] is not None)
        for row, v in enumerate(trace["y"])
        for column, u in enumerate(trace["x"])
    ]


def test_planar_reach_overlay_is_the_annulus_in_the_arms_plane(
    open_at: Any, planar_server: str, artifacts: Path
) -> None:
    opened = open_at(
        planar_server, "s.cellActive && s.robot && s.robot.name === 'pb-planar2r' && s.target"
    )
    page, errors = opened.page, opened.errors
    target_mm = page.evaluate("() => window.posebridge.getState().target.position_mm")
    # the page's target lies in the arm's plane (the cell's one target, or the TCP at home)
    assert target_mm[2] == pytest.approx(PLANE_Z_MM, abs=0.01)
    page.check("#show-reach")
    page.wait_for_function(_SECTIONS_DRAWN, timeout=180_000)
    page.screenshot(path=str(artifacts / "page-planar-reach.png"), full_page=True)

    plan = _drawn_cells(page.evaluate(_REACH_DRAWN, ["plan-base", "reachPlan"]))
    judged = 0
    for x, y, drawn in plan:
        r = math.hypot(x - BASE_MM[0], y - BASE_MM[1])
        if abs(r - INNER_MM) < EDGE_MM or abs(r - OUTER_MM) < EDGE_MM:
            continue
        judged += 1
        # closed form: drawn exactly where the centre lies in the annulus
        assert drawn == (INNER_MM < r < OUTER_MM), (x, y, r)
    assert judged > 100  # the section covers the whole reach at 100 mm cells

    # the elevation through the target: one row of cells, the row whose cells hold the plane
    # (centre within half a cell of it), on the annulus' two stretches along the slice (closed
    # form as above)
    trace = page.evaluate(_REACH_DRAWN, ["elevation-base", "reachElevation"])
    half_cell_mm = 0.5 * (trace["y"][1] - trace["y"][0])
    (row_mm,) = [z for z in trace["y"] if abs(z - PLANE_Z_MM) <= half_cell_mm]
    elevation = _drawn_cells(trace)
    assert sorted({z for _, z, drawn in elevation if drawn}) == [row_mm]
    for x, z, drawn in elevation:
        r = abs(x - BASE_MM[0])  # the slice runs through axis 1 (target y = base y)
        if z == row_mm and abs(r - INNER_MM) >= EDGE_MM and abs(r - OUTER_MM) >= EDGE_MM:
            assert drawn == (INNER_MM < r < OUTER_MM), (x, z, r)
    assert errors == []
    page.close()

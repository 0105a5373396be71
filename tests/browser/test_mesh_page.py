"""Mesh fixtures on the page: a generated STL dropped onto the plan is uploaded, drawn in the
3D view, the plan and the elevation, and named by the target check.

The STL is a tall block made with trimesh's box primitive, dropped where the plan shows
the selected target, so the tool at that target is inside it (a collision by construction).
"""

from __future__ import annotations

import base64
import io
import shutil
from pathlib import Path
from typing import Any

import numpy as np
import trimesh

from posebridge.api.server import background_server
from posebridge.api.settings import Settings
from posebridge.bench.browser import figure_pixel
from posebridge.resources import data_folder

STATE = "() => window.posebridge.getState()"

DROP_SCRIPT = """([name, data]) => {
  const bytes = Uint8Array.from(atob(data), (c) => c.charCodeAt(0));
  const file = new File([bytes], name, { type: "model/stl" });
  const mark = document.querySelector("#plan-overlay .pb-target-mark").getBoundingClientRect();
  const at = { clientX: mark.left + mark.width / 2, clientY: mark.top + mark.height / 2 };
  const wrap = document.getElementById("plan").parentElement;
  for (const type of ["dragenter", "dragover", "drop"]) {
    const transfer = new DataTransfer();
    transfer.items.add(file);
    wrap.dispatchEvent(new DragEvent(type, { bubbles: true, cancelable: true, dataTransfer: transfer, ...at }));
  }
}"""


def block_stl() -> str:
    stream = io.BytesIO()
    trimesh.creation.box(extents=(250.0, 250.0, 3000.0)).export(stream, file_type="stl")
    return base64.b64encode(stream.getvalue()).decode()


def test_dropped_stl_is_drawn_and_named_by_the_target_check(
    open_page: Any, cell_path: Path, artifacts: Path
) -> None:
    page = open_page.page
    page.evaluate(DROP_SCRIPT, ["pillar.stl", block_stl()])
    page.wait_for_function(
        "() => { const s = window.posebridge.getState();"
        " return s.meshes.pillar && s.cell.scene.shapes.some((x) => x.name === 'pillar');}",
        timeout=120_000,
    )
    stored = sorted((cell_path.parent / "meshes").glob("pillar-*.stl"))
    assert stored, "the upload is stored next to the cell file"
    # drawn: a Mesh3d trace in 3D, a silhouette in plan and elevation (each with its meta)
    for figure in ("scene3d", "plan-base", "elevation-base"):
        page.wait_for_function(
            "(id) => { const el = document.getElementById(id);"
            " return el.data && el.data.some((t) => t.meta && t.meta.fixture === 'pillar'); }",
            arg=figure,
            timeout=120_000,
        )
    # the target check runs on the new cell version and names the pillar
    page.wait_for_function(
        "() => { const s = window.posebridge.getState();"
        " return s.targetCheck && s.targetCheck.etag === s.cell.etag; }",
        timeout=180_000,
    )
    findings = page.inner_text("#target-check-findings")
    assert "pillar" in findings
    page.screenshot(path=str(artifacts / "mesh-dropped.png"))
    assert not open_page.problems.page_errors


def test_machine_demo_passes_its_target_check_on_the_page(
    open_at: Any, tmp_path: Path, artifacts: Path
) -> None:
    robots = data_folder("robots")
    shutil.copyfile(robots / "demo-machine-cell.json", tmp_path / "cell.json")
    shutil.copytree(robots / "meshes", tmp_path / "meshes")
    with background_server(Settings(robot="pb-arm6", cell_path=tmp_path / "cell.json")) as url:
        opened = open_at(
            url,
            "s.cell && s.targetCheck && s.targetCheck.etag === s.cell.etag"
            " && ['machine', 'conveyor', 'fence'].every((n) => s.meshes[n])",
        )
        page, errors = opened.page, opened.errors
        # the demo's promise (its notes): one branch reaches every target clear
        assert page.get_attribute("#target-check-summary", "data-consistent") == "true"
        # each drawing (3D and flat, fetched at once) is its own mesh: its vertices lie in
        # the bounds the cell drawing states for that fixture and span most of its longest side
        spans = page.evaluate(
            "() => { const s = window.posebridge.getState(); const out = {};"
            " for (const shape of s.cell.scene.shapes.filter((x) => x.shape === 'mesh')) {"
            "  const e = s.meshes[shape.name]; const span = (m, k, f) =>"
            "   f(...m.vertices_mm.map((p) => p[k]));"
            "  out[shape.name] = [shape.bounds_mm, ['full', 'flat'].map((w) => [[0, 1, 2].map("
            "   (k) => span(e[w], k, Math.min)), [0, 1, 2].map((k) => span(e[w], k, Math.max))])];"
            " } return out; }"
        )
        for name, (bounds, drawings) in spans.items():
            lo, hi = np.array(bounds)
            for drawing in drawings:
                low, high = np.array(drawing)
                assert np.all(low >= lo - 1.0), name
                assert np.all(high <= hi + 1.0), name
                longest = int(np.argmax(hi - lo))
                assert high[longest] - low[longest] >= 0.5 * (hi - lo)[longest], name
        page.wait_for_function(
            "() => (document.getElementById('scene3d').data || []).some("
            "(t) => t.meta && t.meta.fixture === 'machine')",
            timeout=120_000,
        )
        page.screenshot(path=str(artifacts / "machine-demo.png"))
        # a mesh fixture is dragged like a box: preview during the drag, saved on release
        page.click("#cell-fixture-conveyor")
        page.wait_for_function(
            "() => { const s = window.posebridge.getState();"
            " return s.fixture && s.fixture.name === 'conveyor'; }",
            timeout=120_000,
        )
        start = page.evaluate(STATE)["fixture"]["position_mm"]
        grab = figure_pixel(page, "plan", start[0], start[1])
        with page.expect_response(
            lambda r: r.request.method == "PATCH" and r.url.endswith("/api/cell/fixtures/conveyor"),
            timeout=120_000,
        ) as saved:
            page.mouse.move(*grab)
            page.mouse.down()
            page.mouse.move(grab[0] + 20, grab[1], steps=5)
            assert page.is_visible("#plan-overlay .pb-fixture-preview")
            page.mouse.up()
        assert saved.value.status == 200, saved.value.text()
        moved = saved.value.json()["scene"]["shapes"]
        conveyor = next(shape for shape in moved if shape["name"] == "conveyor")
        # right on the plan view: x larger (screen axes, common practice)
        assert conveyor["position_mm"][0] > start[0]
        page.close()
    assert not errors

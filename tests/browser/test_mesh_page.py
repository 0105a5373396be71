"""Mesh fixtures on the page: a generated STL dropped onto the plan is uploaded, drawn in the
3D view, the plan and the elevation, and named by the target check.

The STL is a tall block made with trimesh's box primitive, dropped where the plan shows
the selected target, so the tool at that target is inside it (a collision by construction).
"""

from __future__ import annotations

import base64
import io
from pathlib import Path
from typing import Any

import trimesh

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
        timeout=30_000,
    )
    stored = sorted((cell_path.parent / "meshes").glob("pillar-*.stl"))
    assert stored, "the upload is stored next to the cell file"
    # drawn: a Mesh3d trace in 3D, a silhouette in plan and elevation (each with its meta)
    for figure in ("scene3d", "plan-base", "elevation-base"):
        page.wait_for_function(
            "(id) => { const el = document.getElementById(id);"
            " return el.data && el.data.some((t) => t.meta && t.meta.fixture === 'pillar'); }",
            arg=figure,
            timeout=30_000,
        )
    # the target check runs on the new cell version and names the pillar
    page.wait_for_function(
        "() => { const s = window.posebridge.getState();"
        " return s.targetCheck && s.targetCheck.etag === s.cell.etag; }",
        timeout=60_000,
    )
    findings = page.inner_text("#target-check-findings")
    assert "pillar" in findings
    page.screenshot(path=str(artifacts / "mesh-dropped.png"))
    assert not open_page.problems.page_errors

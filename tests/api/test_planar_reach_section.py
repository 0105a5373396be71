"""POST /api/maps/reach-section on a cell with a planar arm: the page's reach overlay shows the
region in the arm's plane (as ``posebridge reach`` reports it), not a ball of every height."""

from __future__ import annotations

import asyncio
import json
from collections.abc import Callable
from pathlib import Path
from typing import Any

import httpx
import numpy as np
import pytest
from fastapi import FastAPI

from posebridge.cell import load_cell, resolve_scene
from posebridge.resources import data_folder
from posebridge.spaces.planar_boundary import PlanarChain

pytestmark = pytest.mark.anyio


@pytest.fixture
def planar_cell(tmp_path: Path) -> Path:
    cell = json.loads((data_folder("robots") / "demo-cell.json").read_text(encoding="utf-8"))
    cell["robot"] = {"name": "pb-planar2r"}
    cell["paths"] = []
    path = tmp_path / "planar-cell.json"
    path.write_text(json.dumps(cell), encoding="utf-8")
    return path


async def _section(client: httpx.AsyncClient, axis: str, value_mm: float) -> dict[str, Any]:
    response = await client.post(
        "/api/maps/reach-section", json={"axis": axis, "value_mm": value_mm, "voxel_mm": 100.0}
    )
    assert response.status_code == 202, response.text
    job = response.json()["id"]
    while True:  # the job's own state ends the wait
        status: dict[str, Any] = (await client.get(f"/api/jobs/{job}")).json()
        if status["state"] not in ("queued", "running"):
            assert status["state"] == "done", status["detail"]
            result: dict[str, Any] = status["result"]
            return result
        await asyncio.sleep(0.1)


async def test_planar_arm_reach_section_is_its_plane_region(
    make_app: Callable[..., FastAPI], planar_cell: Path
) -> None:
    scene = resolve_scene(load_cell(planar_cell), planar_cell)
    # the TCP plane: the base's height plus the plane's height in the base frame (the cell's
    # tool is 180 mm along the flange z axis, parallel to the joint axes)
    chain = PlanarChain.from_robot(scene.robot, scene.T_flange_tool)
    plane_z_mm = 1000.0 * (float(scene.T_world_base[2, 3]) + chain.height)
    base_xy_mm = 1000.0 * scene.T_world_base[:2, 3]
    transport = httpx.ASGITransport(app=make_app(cell_path=planar_cell))
    async with httpx.AsyncClient(transport=transport, base_url="http://127.0.0.1") as client:
        in_plane = await _section(client, "z", plane_z_mm)
        above = await _section(client, "z", plane_z_mm + 300.0)
    counts = np.array(in_plane["count"])
    x, y = np.meshgrid(
        np.array(in_plane["u_mm"]) - base_xy_mm[0],
        np.array(in_plane["v_mm"]) - base_xy_mm[1],
        indexing="xy",
    )
    r = np.hypot(x, y)
    # closed form: links 400 and 300 mm, j2 within +-150 deg (pb-planar2r.toml): the TCP
    # reaches 205.3..700 mm from axis 1 (law of cosines, Spong et al., sec. 5.3)
    assert np.all(counts[r > 700.0 + 1.0] == 0)
    assert np.all(counts[r < 205.3 - 1.0] == 0)
    assert np.any(counts > 0)
    # 300 mm above the arm's plane nothing is reached (the arm cannot leave its plane)
    assert not np.any(np.array(above["count"]))

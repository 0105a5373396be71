"""GET /api/robots/describe and /api/robots/meshes, and the cell's URDF robot through the API.

The robot package is invented and written by the test (:mod:`posebridge.bench.invented_urdf`);
the served cell is the demo cell with that robot file and a chosen chain.
"""

from __future__ import annotations

import json
from collections.abc import Callable
from pathlib import Path

import httpx
import pytest
from fastapi import FastAPI

from posebridge.bench.invented_urdf import ARM_JOINTS, write_invented_arm
from posebridge.resources import data_folder

pytestmark = pytest.mark.anyio


@pytest.fixture
def gripper_cell(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> Path:
    monkeypatch.setenv("XDG_DATA_HOME", str(tmp_path / "data"))  # the mesh cache goes there
    urdf = write_invented_arm(tmp_path, level=1)
    data = json.loads((data_folder("robots") / "demo-cell.json").read_text())
    data["robot"] = {"file": str(urdf.relative_to(tmp_path)), "to_link": "tool0"}
    data["paths"] = []
    for target in data["targets"]:
        target.pop("approach", None)
    path = tmp_path / "cell.json"
    path.write_text(json.dumps(data), encoding="utf-8")
    return path


async def test_cell_robot_describe_and_meshes(
    make_app: Callable[..., FastAPI], gripper_cell: Path
) -> None:
    transport = httpx.ASGITransport(app=make_app(cell_path=gripper_cell))
    async with httpx.AsyncClient(transport=transport, base_url="http://127.0.0.1") as session:
        cell = await session.get("/api/cell")
        assert cell.status_code == 200, cell.text
        spec = cell.json()["robot"]
        described = await session.get("/api/robots/describe", params={"robot": spec})
        assert described.status_code == 200
        body = described.json()
        assert [j["name"] for j in body["joints"]] == list(ARM_JOINTS)
        assert body["to_link"] == "tool0"
        assert len(body["link_fits"]) == 10
        meshes = await session.get("/api/robots/meshes", params={"robot": spec})
        assert meshes.status_code == 200
        drawing = meshes.json()
        assert len(drawing["meshes"]) == 10
        assert 0 < drawing["triangles"] <= 60_000
        # frames 0..6: base and the six arm joints' links (URDF links carried on them)
        assert {m["link"] for m in drawing["meshes"]} <= set(range(7))
        fk = await session.post("/api/fk", json={"robot": spec, "joints_deg": [[0] * 6]})
        assert fk.status_code == 200
        configuration = fk.json()["configurations"][0]
        assert len(configuration["frames_rpy_deg"]) == len(configuration["frames_position_mm"])


async def test_bundled_robot_has_no_meshes(client: httpx.AsyncClient) -> None:
    response = await client.get("/api/robots/meshes", params={"robot": "pb-arm6"})
    assert response.status_code == 200
    assert response.json() == {"robot": "pb-arm6", "triangles": 0, "meshes": []}

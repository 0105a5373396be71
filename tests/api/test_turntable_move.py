"""PATCH /api/cell/turntables/{name}: applying a table placement candidate gives the cell the
search scored.

The cell is made here: pb-arm6 beside a turntable that carries a frame hanging from a rotated
stand the table does not carry (with a child of its own), a jig and the jig's clamp (both
listed). After the best candidate of a table search is applied, every target the candidate
reaches is checked at its table angle against two references: the closed form of the table's
rigid translation by the candidate's step, ``Trans(d) D_p0(theta - theta_0) T`` (Lynch & Park,
Modern Robotics, eq. 3.51; turning about the moved line is ``Trans(d) D_p0 Trans(-d)``), and
the pose the search scored, forward kinematics of the candidate's reported joint values.
"""

from __future__ import annotations

import asyncio
import json
from collections.abc import Callable
from pathlib import Path
from typing import Any

import httpx
import numpy as np
import pytest

from posebridge.cell.external_axes import turntable_motion
from posebridge.cell.files import load_cell
from posebridge.cell.model import validate_cell
from posebridge.cell.scene import posed_scene, resolve_scene
from posebridge.kinematics.fk import fk_tool

pytestmark = pytest.mark.anyio

DOWN = [180.0, 0.0, 0.0]  # tool z pointing down


def carrying_cell() -> dict[str, Any]:
    """pb-arm6 at the origin and a table at (900, 0, 200) mm; targets about 0.3 m above it."""
    return {
        "schema_version": 1,
        "robot": {"name": "pb-arm6"},
        "turntables": [
            {
                "name": "table-1",
                "position_mm": [900.0, 0.0, 200.0],
                "range_deg": [-40.0, 160.0],
                "home_deg": 20.0,
                "speed_deg_s": 90.0,
                "accel_deg_s2": 180.0,
                "plate_radius_mm": 250.0,
                "fixtures": ["jig", "holder", "clamp"],
            }
        ],
        "fixtures": [
            {
                "name": "stand",
                "shape": "box",
                "size_mm": [100.0, 100.0, 200.0],
                "position_mm": [950.0, 500.0, 100.0],
                "rpy_deg": [8.0, -6.0, 30.0],
            },
            {
                "name": "holder",
                "shape": "frame",
                "parent": "stand",
                "position_mm": [-250.0, -300.0, 150.0],
                "rpy_deg": [0.0, 0.0, -30.0],
            },
            {"name": "pin", "shape": "frame", "parent": "holder", "position_mm": [60.0, 40.0, 0.0]},
            {
                "name": "jig",
                "shape": "box",
                "size_mm": [150.0, 150.0, 100.0],
                "position_mm": [850.0, -80.0, 260.0],
            },
            {
                "name": "clamp",
                "shape": "frame",
                "parent": "jig",
                "position_mm": [40.0, 0.0, 50.0],
                "rpy_deg": [0.0, 0.0, 90.0],
            },
        ],
        "targets": [
            {
                "name": "on-holder",
                "fixture": "holder",
                "position_mm": [0.0, 0.0, 150.0],
                "rpy_deg": DOWN,
            },
            {"name": "on-pin", "fixture": "pin", "position_mm": [0.0, 0.0, 120.0], "rpy_deg": DOWN},
            {
                "name": "on-clamp",
                "fixture": "clamp",
                "position_mm": [0.0, 20.0, 100.0],
                "rpy_deg": DOWN,
                "approach_offset_mm": 50.0,
            },
            {
                "name": "on-jig",
                "fixture": "jig",
                "position_mm": [-40.0, 0.0, 150.0],
                "rpy_deg": DOWN,
            },
        ],
    }


async def _finished(client: httpx.AsyncClient, job: str) -> dict[str, Any]:
    status: dict[str, Any] = (await client.get(f"/api/jobs/{job}")).json()
    for _ in range(6000):  # the cap only ends a hung test (kernels may compile first)
        if status["state"] not in ("queued", "running"):
            break
        await asyncio.sleep(0.1)
        status = (await client.get(f"/api/jobs/{job}")).json()
    return status


async def test_move_turntable_gives_the_cell_the_search_scored(
    make_app: Callable[..., Any], tmp_path: Path
) -> None:
    path = tmp_path / "table.json"
    path.write_text(json.dumps(carrying_cell()))
    before = resolve_scene(load_cell(path), path)
    transport = httpx.ASGITransport(app=make_app(cell_path=path))
    body = {"search": "table", "count": 2, "half_width_mm": 100.0, "top": 4}
    async with httpx.AsyncClient(transport=transport, base_url="http://127.0.0.1") as client:
        etag = (await client.get("/api/cell")).json()["etag"]
        started = await client.post("/api/placement", json=body)
        assert started.status_code == 202
        status = await _finished(client, started.json()["id"])
        assert status["state"] == "done", status["detail"]
        best = status["result"]["best"][0]
        table = best["table"]
        response = await client.patch(
            "/api/cell/turntables/table-1",
            json={"position_mm": table["position_mm"]},
            headers={"If-Match": etag},
        )
        assert response.status_code == 200, response.text
        saved = response.json()["cell"]
        assert response.headers["ETag"] == f'"{response.json()["etag"]}"'
    assert saved["turntables"][0]["position_mm"] == pytest.approx(table["position_mm"])
    step = np.array(table["move_mm"]) / 1000.0  # m
    assert np.linalg.norm(step) > 0.1  # the 2 x 2 grid holds no zero step
    turntable = before.external.turntables[0]
    angle0 = float(before.external.values[0])
    robot = before.robot
    # the answer's cell, and the file as written (numbers rounded to 0.001 mm and 0.001 deg,
    # cell/files.py FILE_DECIMALS: within 1 um)
    answered = resolve_scene(validate_cell(saved))
    written = resolve_scene(load_cell(path), path)
    checked = 0
    for k, target in enumerate(best["targets"]):
        assert target["name"] == before.targets.names[k]
        if not target["reached"]:
            continue
        theta = np.radians(target["table_angle_deg"])
        # closed form: the table's rigid translation by the step, then its turn (module docstring)
        motion = turntable_motion(turntable.point, turntable.axis, [theta - angle0])[0]
        motion[:3, 3] += step
        for after, tolerance in ((answered, 1e-9), (written, 1e-6)):
            posed = posed_scene(after, [theta])
            for table_name in ("T_world_target", "T_world_approach"):
                expected = motion @ getattr(before.targets, table_name)[k]
                np.testing.assert_allclose(
                    getattr(posed.targets, table_name)[k], expected, atol=tolerance
                )
            # the pose the search scored: forward kinematics of the candidate's joint values
            q = np.radians(target["joints_deg"])[None]
            scored = after.T_world_base @ fk_tool(robot, q, after.T_flange_tool)[0]
            np.testing.assert_allclose(posed.targets.T_world_target[k], scored, atol=1e-6)
        checked += 1
    # every target rides the table, the holder's (rotated stand) and the clamp's among them
    assert checked == 4


async def test_move_turntable_refusals(make_app: Callable[..., Any], tmp_path: Path) -> None:
    path = tmp_path / "table.json"
    path.write_text(json.dumps(carrying_cell()))
    transport = httpx.ASGITransport(app=make_app(cell_path=path))
    async with httpx.AsyncClient(transport=transport, base_url="http://127.0.0.1") as client:
        etag = (await client.get("/api/cell")).json()["etag"]
        moved = {"position_mm": [1000.0, 0.0, 200.0]}
        unknown = await client.patch(
            "/api/cell/turntables/table-9", json=moved, headers={"If-Match": etag}
        )
        assert unknown.status_code == 404
        assert unknown.json() == {"detail": "turntable: no turntable named 'table-9' in the cell"}
        short = await client.patch(
            "/api/cell/turntables/table-1",
            json={"position_mm": [1000.0, 0.0]},
            headers={"If-Match": etag},
        )
        assert short.status_code == 422
        missing = await client.patch("/api/cell/turntables/table-1", json=moved)
        assert missing.status_code == 428
        done = await client.patch(
            "/api/cell/turntables/table-1", json=moved, headers={"If-Match": etag}
        )
        assert done.status_code == 200
        stale = await client.patch(
            "/api/cell/turntables/table-1", json=moved, headers={"If-Match": etag}
        )
        assert stale.status_code == 412
    # the refused edits wrote nothing: the file holds the one accepted move
    assert load_cell(path).turntables[0].position_mm == (1000.0, 0.0, 200.0)

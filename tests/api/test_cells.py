"""GET/PUT /api/cell and the small edits (target, fixture, base), with content-version checks.

World poses are recomputed here with scipy's Rotation (fixed-axis X-Y-Z
roll-pitch-yaw, scipy ``from_euler("xyz")``) and plain 4x4 products, the
composition T_world_child = T_world_parent @ T_parent_child (Lynch & Park,
Modern Robotics, sec. 3.3.1).
"""

from __future__ import annotations

import json
import shutil
from collections.abc import AsyncIterator, Callable
from pathlib import Path
from typing import Any

import httpx
import numpy as np
import pytest
from fastapi import FastAPI
from scipy.spatial.transform import Rotation

from posebridge.cell.files import backup_path, cell_etag, load_cell
from posebridge.cell.model import CellFileError
from posebridge.resources import data_folder

pytestmark = pytest.mark.anyio

DEMO = data_folder("robots") / "demo-cell.json"


def _pose(position_mm: list[float], rpy_deg: list[float]) -> np.ndarray:
    T = np.eye(4)
    T[:3, :3] = Rotation.from_euler("xyz", rpy_deg, degrees=True).as_matrix()
    T[:3, 3] = position_mm
    return T


def _fixture_world(cell: dict, name: str) -> np.ndarray:
    fixture = next(f for f in cell["fixtures"] if f["name"] == name)
    local = _pose(fixture["position_mm"], fixture.get("rpy_deg", [0, 0, 0]))
    parent = fixture.get("parent")
    return local if parent is None else _fixture_world(cell, parent) @ local


@pytest.fixture
def cell_file(tmp_path: Path) -> Path:
    path = tmp_path / "cell.json"
    shutil.copyfile(DEMO, path)
    return path


@pytest.fixture
async def file_app(make_app: Callable[..., FastAPI], cell_file: Path) -> FastAPI:
    return make_app(cell_path=cell_file)


def _client(app: FastAPI) -> httpx.AsyncClient:
    return httpx.AsyncClient(transport=httpx.ASGITransport(app=app), base_url="http://127.0.0.1")


@pytest.fixture
async def file_client(file_app: FastAPI) -> AsyncIterator[httpx.AsyncClient]:
    async with _client(file_app) as session:
        yield session


async def test_read_cell_demo(client: httpx.AsyncClient) -> None:
    response = await client.get("/api/cell")
    assert response.status_code == 200
    body = response.json()
    # content version: cell_etag of the bundled file (posebridge.cell.files, tested in tests/cell)
    assert body["etag"] == cell_etag(load_cell(DEMO))
    assert response.headers["etag"] == f'"{body["etag"]}"'
    assert body["path"] is None
    assert body["saved_to_file"] is False
    assert body["robot"] == "pb-arm6"
    raw = json.loads(DEMO.read_text())
    assert body["cell"]["title"] == raw["title"]
    scene = body["scene"]
    # base frame on top of the pedestal: foot + height along the foot's z (closed form)
    assert scene["base"]["position_mm"] == pytest.approx(
        np.add(raw["base"]["position_mm"], [0, 0, raw["base"]["pedestal_height_mm"]])
    )
    roles = {shape["name"]: shape["role"] for shape in scene["shapes"]}
    assert roles["fence-rear"] == "keep_out"
    assert roles["pedestal"] == "pedestal"
    assert roles["press-bed"] == "fixture"
    frames = [f["name"] for f in raw["fixtures"] if f["shape"] == "frame"]
    assert not set(frames) & set(roles)  # frames have no geometry
    # a target on a rotated fixture chain (gauge yawed -131 deg): scipy composition
    probe = next(t for t in raw["targets"] if t["name"] == "gauge-probe")
    expected = _fixture_world(raw, probe["fixture"]) @ _pose(probe["position_mm"], probe["rpy_deg"])
    drawn = next(t for t in scene["targets"] if t["name"] == "gauge-probe")
    assert drawn["position_mm"] == pytest.approx(expected[:3, 3], abs=1e-9)
    drawn_R = Rotation.from_euler("xyz", drawn["rpy_deg"], degrees=True).as_matrix()
    np.testing.assert_allclose(drawn_R, expected[:3, :3], atol=1e-9)
    # approach: backed off along the tool z axis by approach_offset_mm
    back = expected @ _pose([0, 0, -probe["approach_offset_mm"]], [0, 0, 0])
    assert drawn["approach_position_mm"] == pytest.approx(back[:3, 3], abs=1e-9)
    # required branches also as signs (our own contract, DEVELOPERS.md "Arm branches":
    # front/up/positive +1, back/down/negative -1, an omitted part 0 = either)
    sign = {"front": 1, "back": -1, "up": 1, "down": -1, "positive": 1, "negative": -1}
    for target in raw["targets"]:
        drawn = next(t for t in scene["targets"] if t["name"] == target["name"])
        required = target.get("branch")
        if required is None:
            assert drawn["branch_signs"] is None
        else:
            assert drawn["branch_signs"] == {
                part: sign[required[part]] if part in required else 0
                for part in ("shoulder", "elbow", "wrist")
            }
    # a box keeps its size; paths keep their waypoint count
    bed = next(s for s in scene["shapes"] if s["name"] == "press-bed")
    assert bed["size_mm"] == [700.0, 900.0, 800.0]
    assert [len(p["waypoints"]) for p in scene["paths"]] == [
        len(p["waypoints"]) for p in raw["paths"]
    ]


async def test_move_target_world_frame(file_client: httpx.AsyncClient, cell_file: Path) -> None:
    etag = (await file_client.get("/api/cell")).json()["etag"]
    goal = [150.0, 820.0, 470.0]
    response = await file_client.patch(
        "/api/cell/targets/rack-low-1", json={"position_mm": goal}, headers={"If-Match": etag}
    )
    assert response.status_code == 200, response.text
    body = response.json()
    assert body["etag"] != etag
    drawn = next(t for t in body["scene"]["targets"] if t["name"] == "rack-low-1")
    assert drawn["position_mm"] == pytest.approx(goal, abs=1e-9)
    # the file stores the pose in the fixture's frame: inv(T_world_fixture) @ p_world
    saved = json.loads(cell_file.read_text())
    target = next(t for t in saved["targets"] if t["name"] == "rack-low-1")
    local = np.linalg.inv(_fixture_world(saved, target["fixture"])) @ np.append(goal, 1.0)
    assert target["position_mm"] == pytest.approx(local[:3], abs=1e-9)
    # the previous file is kept as .bak (save_cell's backup)
    assert json.loads(backup_path(cell_file).read_text()) == json.loads(DEMO.read_text())


async def test_replace_cell_conflict_two_clients(file_app: FastAPI, cell_file: Path) -> None:
    async with _client(file_app) as first, _client(file_app) as second:
        seen_first = (await first.get("/api/cell")).json()
        seen_second = (await second.get("/api/cell")).json()
        assert seen_first["etag"] == seen_second["etag"]
        moved = await first.patch(
            "/api/cell/base",
            json={"position_mm": [100.0, -50.0, 0.0]},
            headers={"If-Match": seen_first["etag"]},
        )
        assert moved.status_code == 200
        after_first = cell_file.read_bytes()
        edited = {**seen_second["cell"], "title": "edited in the second tab"}
        refused = await second.put(
            "/api/cell", json=edited, headers={"If-Match": f'"{seen_second["etag"]}"'}
        )
        assert refused.status_code == 412
        assert refused.json()["detail"] == (
            f"If-Match: the cell was changed elsewhere since version {seen_second['etag']} was "
            f"read (it is now at version {moved.json()['etag']}); reload the cell and apply the "
            "edit again"
        )
        assert cell_file.read_bytes() == after_first  # nothing written
        # after reloading, the second tab's edit goes through
        fresh = (await second.get("/api/cell")).json()
        accepted = await second.put(
            "/api/cell",
            json={**fresh["cell"], "title": "edited in the second tab"},
            headers={"If-Match": fresh["etag"]},
        )
        assert accepted.status_code == 200
        assert json.loads(cell_file.read_text())["title"] == "edited in the second tab"
        assert json.loads(cell_file.read_text())["base"]["position_mm"] == [100.0, -50.0, 0.0]


async def test_replace_cell_without_if_match(client: httpx.AsyncClient) -> None:
    cell = (await client.get("/api/cell")).json()["cell"]
    response = await client.put("/api/cell", json=cell)
    assert response.status_code == 428
    assert response.json()["detail"] == (
        "If-Match: required; send the etag of the cell version you edited (from GET /api/cell)"
    )


async def test_replace_cell_invalid(client: httpx.AsyncClient) -> None:
    seen = (await client.get("/api/cell")).json()
    cell = {**seen["cell"], "robot": {"name": "no-such-robot"}}
    response = await client.put("/api/cell", json=cell, headers={"If-Match": seen["etag"]})
    assert response.status_code == 422
    assert response.json()["detail"].startswith("robot.name: ")
    assert (await client.get("/api/cell")).json()["etag"] == seen["etag"]


@pytest.mark.parametrize(
    ("tables", "detail"),
    [
        # the demo's first fixture listed on two tables
        (
            [["FIRST"], ["FIRST"]],
            "turntables[1].fixtures[0]: fixture 'FIRST' is already on turntable 0",
        ),
        # a child of it listed on the second table while the first turns it
        (
            [["FIRST"], ["clip"]],
            "turntables[1].fixtures[0]: fixture 'clip' is already on turntable 0: its "
            "parent chain reaches 'FIRST', listed there (a fixture turns with one table only)",
        ),
    ],
)
async def test_replace_cell_fixture_on_two_turntables(
    tables: list[list[str]], detail: str, file_app: FastAPI, cell_file: Path
) -> None:
    before = cell_file.read_bytes()
    async with _client(file_app) as client:
        seen = (await client.get("/api/cell")).json()
        cell = seen["cell"]
        first = cell["fixtures"][0]["name"]
        clip = {
            "name": "clip",
            "shape": "frame",
            "parent": first,
            "position_mm": [0, 0, 50],
        }
        turntable = {
            "position_mm": [0.0, 0.0, 0.0],
            "range_deg": [-90.0, 90.0],
            "speed_deg_s": 60.0,
            "accel_deg_s2": 120.0,
            "plate_radius_mm": 200.0,
        }
        edited = {
            **cell,
            "fixtures": [*cell["fixtures"], clip],
            "turntables": [
                {
                    **turntable,
                    "name": f"table-{k}",
                    "fixtures": [first if n == "FIRST" else n for n in listed],
                }
                for k, listed in enumerate(tables)
            ],
        }
        response = await client.put("/api/cell", json=edited, headers={"If-Match": seen["etag"]})
    assert response.status_code == 422
    # a cell-level finding: the request body, then the field's JSON path
    assert response.json() == {"detail": "request body: " + detail.replace("FIRST", first)}
    assert cell_file.read_bytes() == before


async def test_move_target_unknown(client: httpx.AsyncClient) -> None:
    etag = (await client.get("/api/cell")).json()["etag"]
    response = await client.patch(
        "/api/cell/targets/nowhere", json={"position_mm": [0, 0, 0]}, headers={"If-Match": etag}
    )
    assert response.status_code == 404
    assert response.json()["detail"] == "target: no target named 'nowhere' in the cell"


async def test_move_fixture_moves_its_targets(client: httpx.AsyncClient) -> None:
    seen = (await client.get("/api/cell")).json()
    before = {t["name"]: t["position_mm"] for t in seen["scene"]["targets"]}
    response = await client.patch(
        "/api/cell/fixtures/rack",
        json={"position_mm": [300.0, 1000.0, 0.0]},
        headers={"If-Match": seen["etag"]},
    )
    assert response.status_code == 200
    after = {t["name"]: t["position_mm"] for t in response.json()["scene"]["targets"]}
    # the rack frame moved +50 mm in x without rotation: its shelves' targets move with it
    assert after["rack-low-1"] == pytest.approx(np.add(before["rack-low-1"], [50, 0, 0]))
    assert after["press-load"] == pytest.approx(before["press-load"])


async def test_move_base_in_memory_cell(client: httpx.AsyncClient) -> None:
    seen = (await client.get("/api/cell")).json()
    response = await client.patch(
        "/api/cell/base",
        json={"position_mm": [10.0, 20.0, 0.0], "rpy_deg": [0.0, 0.0, 90.0]},
        headers={"If-Match": seen["etag"]},
    )
    assert response.status_code == 200
    base = response.json()["scene"]["base"]
    # robot base = foot moved up by the 400 mm pedestal along the foot's z (closed form)
    assert base["position_mm"] == pytest.approx([10.0, 20.0, 400.0])
    assert base["rpy_deg"][2] == pytest.approx(90.0)
    # kept in memory for the life of the server
    assert (await client.get("/api/cell")).json()["etag"] == response.json()["etag"]
    stale = await client.patch(
        "/api/cell/base", json={"position_mm": [0.0, 0.0, 0.0]}, headers={"If-Match": seen["etag"]}
    )
    assert stale.status_code == 412


async def test_request_too_large(make_app: Callable[..., FastAPI]) -> None:
    async with _client(make_app(max_request_bytes=1000)) as session:
        cell = json.loads(DEMO.read_text())
        response = await session.put("/api/cell", json=cell, headers={"If-Match": "x"})
    assert response.status_code == 413
    length = int(response.request.headers["content-length"])
    assert response.json()["detail"] == (
        f"request body: {length} bytes is more than this server accepts (1000 bytes)"
    )


async def test_move_fixture_unknown(client: httpx.AsyncClient) -> None:
    etag = (await client.get("/api/cell")).json()["etag"]
    response = await client.patch(
        "/api/cell/fixtures/nowhere", json={"position_mm": [0, 0, 0]}, headers={"If-Match": etag}
    )
    assert response.status_code == 404
    assert response.json()["detail"] == "fixture: no fixture named 'nowhere' in the cell"


async def test_move_base_pedestal_height(client: httpx.AsyncClient) -> None:
    etag = (await client.get("/api/cell")).json()["etag"]
    response = await client.patch(
        "/api/cell/base", json={"pedestal_height_mm": 550.0}, headers={"If-Match": etag}
    )
    assert response.status_code == 200
    body = response.json()
    # robot base = foot + pedestal height along z (closed form); the pedestal solid follows
    assert body["scene"]["base"]["position_mm"] == pytest.approx([0.0, 0.0, 550.0])
    pedestal = next(s for s in body["scene"]["shapes"] if s["role"] == "pedestal")
    assert pedestal["height_mm"] == pytest.approx(550.0)
    assert pedestal["position_mm"][2] == pytest.approx(275.0)


def _pose_waypoint(cell: dict) -> tuple[str, int, dict]:
    """The demo's first waypoint given as a pose: path name, index, waypoint."""
    return next(
        (path["name"], w, waypoint)
        for path in cell["paths"]
        for w, waypoint in enumerate(path["waypoints"])
        if "pose" in waypoint
    )


async def test_move_pose_waypoint(file_client: httpx.AsyncClient, cell_file: Path) -> None:
    raw = json.loads(DEMO.read_text())
    path, index, _ = _pose_waypoint(raw)
    etag = (await file_client.get("/api/cell")).json()["etag"]
    goal = {"position_mm": [650.0, -520.0, 1040.0], "rpy_deg": [180.0, 0.0, 30.0]}
    response = await file_client.patch(
        f"/api/cell/paths/{path}/waypoints/{index}", json=goal, headers={"If-Match": etag}
    )
    assert response.status_code == 200, response.text
    assert response.json()["etag"] != etag
    assert response.headers["etag"] == f'"{response.json()["etag"]}"'
    # read back: the drawing shows the new world tool pose (rotation compared through scipy)
    served = (await file_client.get("/api/cell")).json()
    assert served["etag"] == response.json()["etag"]
    drawn = next(p for p in served["scene"]["paths"] if p["name"] == path)["waypoints"][index]
    assert drawn["source"] == "pose"
    assert drawn["position_mm"] == pytest.approx(goal["position_mm"], abs=1e-9)
    np.testing.assert_allclose(
        Rotation.from_euler("xyz", drawn["rpy_deg"], degrees=True).as_matrix(),
        Rotation.from_euler("xyz", goal["rpy_deg"], degrees=True).as_matrix(),
        atol=1e-12,
    )
    # the file stores the pose as given (pose waypoints are world poses); nothing else changed
    saved = json.loads(cell_file.read_text())
    saved_path = next(p for p in saved["paths"] if p["name"] == path)
    assert saved_path["waypoints"][index]["pose"] == goal
    # every number written to 0.001 (mm, deg): the demo's four-decimal angles too
    expected = _thousandths(json.loads(DEMO.read_text()))
    next(p for p in expected["paths"] if p["name"] == path)["waypoints"][index]["pose"] = goal
    assert saved == expected


def _thousandths(value: Any) -> Any:
    """JSON data with every float rounded to 3 decimals (the file rule of cell/files.py)."""
    if isinstance(value, float):
        return round(value, 3) + 0.0
    if isinstance(value, dict):
        return {key: _thousandths(item) for key, item in value.items()}
    if isinstance(value, list):
        return [_thousandths(item) for item in value]
    return value


async def test_move_pose_waypoint_stale_or_without_version(
    file_client: httpx.AsyncClient, cell_file: Path
) -> None:
    path, index, _ = _pose_waypoint(json.loads(DEMO.read_text()))
    route = f"/api/cell/paths/{path}/waypoints/{index}"
    body = {"position_mm": [600.0, -400.0, 1000.0], "rpy_deg": [180.0, 0.0, 0.0]}
    seen = (await file_client.get("/api/cell")).json()["etag"]
    missing = await file_client.patch(route, json=body)
    assert missing.status_code == 428
    assert missing.json()["detail"] == (
        "If-Match: required; send the etag of the cell version you edited (from GET /api/cell)"
    )
    moved = await file_client.patch(
        "/api/cell/targets/rack-low-1",
        json={"position_mm": [150.0, 820.0, 470.0]},
        headers={"If-Match": seen},
    )
    assert moved.status_code == 200
    before = cell_file.read_bytes()
    stale = await file_client.patch(route, json=body, headers={"If-Match": f'"{seen}"'})
    assert stale.status_code == 412
    assert stale.json()["detail"] == (
        f"If-Match: the cell was changed elsewhere since version {seen} was read (it is now at "
        f"version {moved.json()['etag']}); reload the cell and apply the edit again"
    )
    assert cell_file.read_bytes() == before  # nothing written


@pytest.mark.parametrize(
    ("route", "detail"),
    [
        ("/api/cell/paths/nowhere/waypoints/0", "path: no path named 'nowhere' in the cell"),
        (
            "/api/cell/paths/load-press/waypoints/3",
            "waypoint: path 'load-press' has no waypoint 3 (it has 3, numbered from 0)",
        ),
    ],
)
async def test_move_pose_waypoint_unknown(
    client: httpx.AsyncClient, route: str, detail: str
) -> None:
    # load-press has three waypoints in the demo file (robots/demo-cell.json)
    raw = json.loads(DEMO.read_text())
    assert len(next(p for p in raw["paths"] if p["name"] == "load-press")["waypoints"]) == 3
    etag = (await client.get("/api/cell")).json()["etag"]
    body = {"position_mm": [0.0, 0.0, 500.0], "rpy_deg": [0.0, 0.0, 0.0]}
    response = await client.patch(route, json=body, headers={"If-Match": etag})
    assert response.status_code == 404
    assert response.json()["detail"] == detail
    assert (await client.get("/api/cell")).json()["etag"] == etag


@pytest.mark.parametrize(
    ("index", "detail"),
    [
        (
            0,
            "waypoint: waypoint 0 of path 'pick-from-rack' is given as joint values, not a "
            "pose; edit its joints_deg instead (PUT /api/cell)",
        ),
        (
            1,
            "waypoint: waypoint 1 of path 'pick-from-rack' is the approach pose of target "
            "'rack-low-1', not a pose; move the target instead "
            "(PATCH /api/cell/targets/rack-low-1)",
        ),
        (
            2,
            "waypoint: waypoint 2 of path 'pick-from-rack' is target 'rack-low-1', not a pose; "
            "move the target instead (PATCH /api/cell/targets/rack-low-1)",
        ),
    ],
)
async def test_move_waypoint_not_a_pose(client: httpx.AsyncClient, index: int, detail: str) -> None:
    # pick-from-rack in the demo file: joint values, then rack-low-1 approach, then rack-low-1
    raw = json.loads(DEMO.read_text())
    waypoint = next(p for p in raw["paths"] if p["name"] == "pick-from-rack")["waypoints"][index]
    assert "pose" not in waypoint
    etag = (await client.get("/api/cell")).json()["etag"]
    response = await client.patch(
        f"/api/cell/paths/pick-from-rack/waypoints/{index}",
        json={"position_mm": [0.0, 0.0, 500.0], "rpy_deg": [0.0, 0.0, 0.0]},
        headers={"If-Match": etag},
    )
    assert response.status_code == 422
    assert response.json()["detail"] == detail
    assert (await client.get("/api/cell")).json()["etag"] == etag


async def test_read_cell_fixture_frames(client: httpx.AsyncClient) -> None:
    raw = json.loads(DEMO.read_text())
    drawn = {f["name"]: f for f in (await client.get("/api/cell")).json()["scene"]["fixtures"]}
    # every fixture, frames without geometry included, in file order
    assert list(drawn) == [f["name"] for f in raw["fixtures"]]
    for fixture in raw["fixtures"]:
        # world frame = parent chain composed with scipy (Lynch & Park sec. 3.3.1)
        expected = _fixture_world(raw, fixture["name"])
        got = drawn[fixture["name"]]
        assert got["parent"] == fixture.get("parent")
        assert got["shape"] == fixture["shape"]
        assert got["position_mm"] == pytest.approx(expected[:3, 3], abs=1e-9)
        np.testing.assert_allclose(
            Rotation.from_euler("xyz", got["rpy_deg"], degrees=True).as_matrix(),
            expected[:3, :3],
            atol=1e-12,
        )


async def test_move_fixture_world_frame(file_client: httpx.AsyncClient, cell_file: Path) -> None:
    raw = json.loads(DEMO.read_text())
    etag = (await file_client.get("/api/cell")).json()["etag"]
    # gauge-anvil sits on gauge-table in the gauge frame, yawed -131 deg in the world
    goal = {"position_mm": [-420.0, -300.0, 425.0], "rpy_deg": [0.0, 0.0, 20.0]}
    response = await file_client.patch(
        "/api/cell/fixtures/gauge-anvil",
        json={**goal, "frame": "world"},
        headers={"If-Match": etag},
    )
    assert response.status_code == 200, response.text
    # stored in the parent's frame: inv(T_world_parent) @ T_world (scipy, plain products)
    T_parent = _fixture_world(raw, "gauge-table")
    local = np.linalg.inv(T_parent) @ _pose(goal["position_mm"], goal["rpy_deg"])
    saved = json.loads(cell_file.read_text())
    anvil = next(f for f in saved["fixtures"] if f["name"] == "gauge-anvil")
    # the file holds 0.001 mm and 0.001 deg (half a thousandth of rounding, 9e-6 rad per angle)
    assert anvil["position_mm"] == pytest.approx(local[:3, 3], abs=5e-4)
    np.testing.assert_allclose(
        Rotation.from_euler("xyz", anvil["rpy_deg"], degrees=True).as_matrix(),
        local[:3, :3],
        atol=3e-5,
    )
    # the drawing shows the asked world pose, and the probe target moved with its fixture
    scene = response.json()["scene"]
    drawn = next(f for f in scene["fixtures"] if f["name"] == "gauge-anvil")
    assert drawn["position_mm"] == pytest.approx(goal["position_mm"], abs=1e-9)
    probe = next(t for t in raw["targets"] if t["name"] == "gauge-probe")
    T_probe = _pose(goal["position_mm"], goal["rpy_deg"]) @ _pose(
        probe["position_mm"], probe["rpy_deg"]
    )
    moved = next(t for t in scene["targets"] if t["name"] == "gauge-probe")
    assert moved["position_mm"] == pytest.approx(T_probe[:3, 3], abs=1e-9)
    # a position alone keeps the stored orientation (the parent did not move)
    etag = response.json()["etag"]
    again = await file_client.patch(
        "/api/cell/fixtures/gauge-anvil",
        json={"position_mm": [-400.0, -320.0, 425.0], "frame": "world"},
        headers={"If-Match": etag},
    )
    assert again.status_code == 200
    kept = next(
        f for f in json.loads(cell_file.read_text())["fixtures"] if f["name"] == "gauge-anvil"
    )
    assert kept["rpy_deg"] == anvil["rpy_deg"]


async def test_replace_cell_duplicate_key_refused_as_in_files(
    file_client: httpx.AsyncClient, cell_file: Path, tmp_path: Path
) -> None:
    # RFC 8259 sec. 4: names SHOULD be unique; a cell file with a repeated key is refused,
    # so the same text over HTTP is refused too (it was saved with the last value before)
    document = (await file_client.get("/api/cell")).json()
    text = json.dumps(document["cell"])
    doubled = text.replace('"title": ', '"title": "first", "title": ', 1)
    before = cell_file.read_bytes()
    response = await file_client.put(
        "/api/cell",
        content=doubled.encode(),
        headers={"If-Match": document["etag"], "Content-Type": "application/json"},
    )
    assert response.status_code == 422
    assert response.json() == {
        "detail": "request body: not valid JSON: duplicate key 'title' in one object"
    }
    assert cell_file.read_bytes() == before
    on_disk = tmp_path / "doubled.json"
    on_disk.write_text(doubled)
    with pytest.raises(CellFileError, match="not valid JSON: duplicate key 'title' in one object"):
        load_cell(on_disk)


async def test_move_target_duplicate_nested_key_refused(file_client: httpx.AsyncClient) -> None:
    etag = (await file_client.get("/api/cell")).json()["etag"]
    response = await file_client.patch(
        "/api/cell/targets/rack-low-1",
        content=b'{"position_mm": [1, 2, 3], "frame": "world", "frame": "fixture"}',
        headers={"If-Match": etag, "Content-Type": "application/json"},
    )
    assert response.status_code == 422
    assert response.json()["detail"].endswith("duplicate key 'frame' in one object")


async def test_read_cell_carries_the_thresholds(client: httpx.AsyncClient) -> None:
    body = (await client.get("/api/cell")).json()
    # the documented defaults of QualityThresholds (common practice, no source), which the
    # page's severity module reads from the cell
    thresholds = body["cell"]["thresholds"]
    assert thresholds["clearance_mm"] == 25.0
    assert thresholds["wrist_deg"] == 10.0
    assert thresholds["limit_margin_deg"] == 5.0

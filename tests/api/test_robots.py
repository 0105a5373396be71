"""GET /api/robots and GET /api/robots/model.

Expected values are read from the robot description files themselves with
``tomllib`` (the bundled TOML files are the source of the limits).
"""

from __future__ import annotations

import math
import tomllib
from collections.abc import Callable
from pathlib import Path
from xml.etree import ElementTree

import httpx
import pytest
from fastapi import FastAPI

from posebridge.resources import data_folder

pytestmark = pytest.mark.anyio


def _description(name: str) -> dict:
    with (data_folder("robots") / f"{name}.toml").open("rb") as handle:
        return tomllib.load(handle)


async def test_list_robots(client: httpx.AsyncClient) -> None:
    response = await client.get("/api/robots")
    assert response.status_code == 200
    body = response.json()
    files = sorted(data_folder("robots").glob("*.toml"))
    expected = sorted(tomllib.loads(path.read_text())["robot"]["name"] for path in files)
    assert [entry["name"] for entry in body["robots"]] == expected
    assert body["default_robot"] == "pb-arm6"


async def test_list_robots_default_from_settings(make_app: Callable[..., FastAPI]) -> None:
    transport = httpx.ASGITransport(app=make_app(robot="pb-planar2r"))
    async with httpx.AsyncClient(transport=transport, base_url="http://127.0.0.1") as session:
        response = await session.get("/api/robots")
    assert response.status_code == 200
    assert response.json()["default_robot"] == "pb-planar2r"


async def test_read_robot_model(client: httpx.AsyncClient) -> None:
    response = await client.get("/api/robots/model", params={"robot": "pb-planar2r"})
    assert response.status_code == 200
    body = response.json()
    joints = _description("pb-planar2r")["joint"]
    assert body["dof"] == len(joints) == 2
    for given, expected in zip(body["joints"], joints, strict=True):
        assert given["name"] == expected["name"]
        assert given["unit"] == "deg"
        assert given["lower"] == pytest.approx(expected["limits"]["min_deg"])
        assert given["upper"] == pytest.approx(expected["limits"]["max_deg"])
        assert given["velocity_max"] == pytest.approx(expected["limits"]["velocity_deg_s"])
    # the description's own home configuration (the TOML file is the source)
    assert body["home_joints"] == pytest.approx(_description("pb-planar2r")["robot"]["home_deg"])
    # links 400 mm and 300 mm in the x-y plane: every point lies within 700 mm of the base
    # (closed form: reach of a planar 2R arm is l1 + l2)
    low, high = body["bounds_mm"]
    assert max(abs(v) for v in low + high) <= 700.0 + 1e-6


async def test_read_robot_model_schema_is_a_result(client: httpx.AsyncClient) -> None:
    response = await client.get("/openapi.json")
    answer = response.json()["paths"]["/api/robots/model"]["get"]["responses"]["200"]
    # our own contract: answers are <Thing>Result models (DEVELOPERS.md, conventions)
    assert answer["content"]["application/json"]["schema"] == {
        "$ref": "#/components/schemas/RobotDescriptionResult"
    }
    assert "RobotModel" not in response.json()["components"]["schemas"]


async def test_read_robot_model_prismatic_units(client: httpx.AsyncClient) -> None:
    response = await client.get("/api/robots/model", params={"robot": "pb-gantry3"})
    assert response.status_code == 200
    body = response.json()
    for given, expected in zip(body["joints"], _description("pb-gantry3")["joint"], strict=True):
        key = "min_mm" if expected["type"] == "prismatic" else "min_deg"
        assert given["unit"] == ("mm" if expected["type"] == "prismatic" else "deg")
        assert given["lower"] == pytest.approx(expected["limits"][key])


async def test_read_robot_model_unknown(client: httpx.AsyncClient) -> None:
    response = await client.get("/api/robots/model", params={"robot": "pb-nothing"})
    assert response.status_code == 422
    names = ", ".join(sorted(p.stem for p in data_folder("robots").glob("*.toml")))
    assert response.json() == {
        "detail": f"unknown robot 'pb-nothing'; bundled robots: {names}, or give a .toml/.urdf path"
    }


async def test_read_robot_model_missing_file(client: httpx.AsyncClient, tmp_path: Path) -> None:
    path = tmp_path / "absent.toml"
    response = await client.get("/api/robots/model", params={"robot": str(path)})
    assert response.status_code == 422
    assert response.json() == {"detail": f"robot: {str(path)!r}: no such robot file"}


async def test_read_robot_model_from_path(client: httpx.AsyncClient) -> None:
    path = data_folder("robots") / "pb-arm6.urdf"
    response = await client.get("/api/robots/model", params={"robot": str(path)})
    assert response.status_code == 200
    body = response.json()
    assert body["robot"] == str(path)
    # j1's upper limit as written in the URDF file (rad), read with ElementTree
    limit = ElementTree.parse(path).getroot().find("joint[@name='j1']/limit")
    assert limit is not None
    assert body["joints"][0]["upper"] == pytest.approx(math.degrees(float(limit.get("upper"))))


async def test_read_robot_model_path_not_allowed(make_app: Callable[..., FastAPI]) -> None:
    transport = httpx.ASGITransport(app=make_app(robot_paths_allowed=False))
    path = str(data_folder("robots") / "pb-arm6.toml")
    async with httpx.AsyncClient(transport=transport, base_url="http://127.0.0.1") as session:
        response = await session.get("/api/robots/model", params={"robot": path})
    assert response.status_code == 403
    names = ", ".join(sorted(p.stem for p in data_folder("robots").glob("*.toml")))
    assert response.json() == {
        "detail": f"robot: this server serves only its robots by name ({names}); file paths "
        f"are not accepted (got {path!r})"
    }


async def test_read_robot_model_missing_query(client: httpx.AsyncClient) -> None:
    response = await client.get("/api/robots/model")
    assert response.status_code == 422
    assert response.json() == {"detail": "robot: Field required"}

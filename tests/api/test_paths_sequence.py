"""The fastest solution sequence, its one-click use (If-Match), and the motion export over HTTP."""

from __future__ import annotations

import json
import shutil
from collections.abc import AsyncIterator, Callable
from pathlib import Path

import httpx
import pytest
from fastapi import FastAPI

from posebridge.cell.joint_log import parse_joint_log
from posebridge.resources import data_folder
from posebridge.robot.library import load_robot

pytestmark = pytest.mark.anyio

DEMO = data_folder("robots") / "demo-cell.json"


@pytest.fixture
async def file_client(
    make_app: Callable[..., FastAPI], tmp_path: Path
) -> AsyncIterator[httpx.AsyncClient]:
    path = tmp_path / "cell.json"
    shutil.copyfile(DEMO, path)
    app = make_app(cell_path=path)
    transport = httpx.ASGITransport(app=app)
    async with httpx.AsyncClient(transport=transport, base_url="http://127.0.0.1") as session:
        yield session


async def test_use_the_fastest_sequence_with_if_match(file_client: httpx.AsyncClient) -> None:
    etag = (await file_client.get("/api/cell")).json()["etag"]
    response = await file_client.get("/api/cell/paths/unload-to-conveyor/sequence")
    assert response.status_code == 200, response.text
    report = response.json()
    assert report["feasible"]
    assert report["edits"]
    # the demo's return move hits the press column today (the path check finds it too)
    assert any(v["reason"] == "collision" for v in report["current"]["violations"])
    stale = await file_client.patch(
        "/api/cell/paths/unload-to-conveyor/waypoints",
        json={"edits": report["edits"]},
        headers={"If-Match": "not-this-version"},
    )
    assert stale.status_code == 412
    saved = await file_client.patch(
        "/api/cell/paths/unload-to-conveyor/waypoints",
        json={"edits": report["edits"]},
        headers={"If-Match": etag},
    )
    assert saved.status_code == 200, saved.text
    cell = saved.json()["cell"]
    path = next(p for p in cell["paths"] if p["name"] == "unload-to-conveyor")
    for edit in report["edits"]:
        assert path["waypoints"][edit["index"]]["joints_deg"] == edit["joints_deg"]
    # reference: the path check of the saved cell follows the sequence and is collision-free
    check = (await file_client.get("/api/cell/paths/unload-to-conveyor/check")).json()
    for chosen, best in zip(check["waypoints"], report["best"]["waypoints"], strict=True):
        assert chosen["joints_deg"] == pytest.approx(best["joints_deg"], abs=1e-6)
    assert not [f for f in check["findings"] if f["kind"] == "collision"]
    again = (await file_client.get("/api/cell/paths/unload-to-conveyor/sequence")).json()
    assert again["edits"] == []
    assert again["current"]["violations"] == []


async def test_waypoint_edits_are_checked(file_client: httpx.AsyncClient) -> None:
    etag = (await file_client.get("/api/cell")).json()["etag"]
    url = "/api/cell/paths/load-press/waypoints"
    wrong = await file_client.patch(
        url, json={"edits": [{"index": 0, "joints_deg": [0.0, 1.0]}]}, headers={"If-Match": etag}
    )
    assert wrong.status_code == 422
    assert wrong.json()["detail"] == "edits: waypoint 0: expected 6 joint values, got 2"
    missing = await file_client.patch(
        url, json={"edits": [{"index": 9, "joints_deg": [0.0] * 6}]}, headers={"If-Match": etag}
    )
    assert missing.status_code == 404


async def test_export_csv_reads_back_as_a_joint_log(client: httpx.AsyncClient) -> None:
    response = await client.get("/api/cell/paths/load-press/export.csv", params={"period_ms": 8})
    assert response.status_code == 200, response.text
    assert response.headers["content-type"].startswith("text/csv")
    assert 'filename="load-press.csv"' in response.headers["content-disposition"]
    log = parse_joint_log(response.text, load_robot("pb-arm6"), source="export.csv")
    body = (
        await client.get("/api/cell/paths/load-press/export.json", params={"period_ms": 8})
    ).json()
    assert body["header"]["period_ms"] == 8.0
    assert log.q.shape[0] == len(body["rows"]) == body["header"]["rows"]
    assert json.loads(json.dumps(body["columns"]))[0] == "time_s"
    refused = await client.get("/api/cell/paths/load-press/export.json", params={"period_ms": 0})
    assert refused.status_code == 422

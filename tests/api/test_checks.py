"""Cell checks over HTTP: targets, paths, one pose, a controller log, base placement.

The checks themselves are tested in tests/cell and tests/planning; here the
HTTP answers are compared with direct calls of the same functions on the same
cell, with facts read from the cell and log files, and with /api/fk (checked
against pinocchio in test_kinematics.py).
"""

from __future__ import annotations

import asyncio
import io
import json
from collections.abc import Awaitable, Callable
from typing import Any

import httpx
import numpy as np
import pytest
from PIL import Image

from posebridge.api.routes import checks as checks_routes
from posebridge.api.schemas.checks import MAX_LOG_ROWS, MAX_PLACEMENT_CANDIDATES
from posebridge.cell import load_cell, resolve_scene
from posebridge.cell.joint_log import read_joint_log
from posebridge.cell.log_diagnosis import diagnose_log
from posebridge.resources import data_folder
from posebridge.results.log_diagnosis import log_diagnosis_result

pytestmark = pytest.mark.anyio

JobFinished = Callable[[str], Awaitable[dict[str, Any]]]
"""The ``job_finished`` fixture: a job's last status, once it is no longer queued or running."""

ROBOTS = data_folder("robots")


async def test_read_target_check(client: httpx.AsyncClient) -> None:
    response = await client.get("/api/cell/check")
    assert response.status_code == 200
    body = response.json()
    raw = json.loads((ROBOTS / "demo-cell.json").read_text())
    assert [t["name"] for t in body["targets"]] == [t["name"] for t in raw["targets"]]
    # required branches as written in the cell file, shoulder, elbow, wrist words in order
    required = {t["name"]: t.get("branch") for t in raw["targets"]}
    for target in body["targets"]:
        words = required[target["name"]]
        expected = (
            None
            if words is None
            else ", ".join(words[part] for part in ("shoulder", "elbow", "wrist") if part in words)
        )
        assert target["required_branch"] == expected
    assert body["reachable_count"] == sum(t["reachable"] for t in body["targets"])


async def test_target_check_of_the_same_cell_version_is_kept(
    client: httpx.AsyncClient, monkeypatch: pytest.MonkeyPatch
) -> None:
    computed: list[object] = []
    real = checks_routes.check_targets

    def counted(scene: Any) -> Any:
        computed.append(scene)
        return real(scene)

    monkeypatch.setattr(checks_routes, "check_targets", counted)
    first = await client.get("/api/cell/check")
    again = await client.get("/api/cell/check")
    assert first.status_code == again.status_code == 200
    assert again.json() == first.json()
    assert len(computed) == 1
    cell = (await client.get("/api/cell")).json()
    moved = await client.patch(
        "/api/cell/targets/rack-low-1",
        json={"position_mm": [150.0, 820.0, 470.0]},
        headers={"If-Match": cell["etag"]},
    )
    assert moved.status_code == 200, moved.text
    after = await client.get("/api/cell/check")
    assert after.status_code == 200
    assert len(computed) == 2
    drawn = next(t for t in after.json()["targets"] if t["name"] == "rack-low-1")
    assert drawn["target"]["position_mm"] == pytest.approx([150.0, 820.0, 470.0], abs=1e-6)


async def test_read_path_check(client: httpx.AsyncClient) -> None:
    response = await client.get("/api/cell/paths/load-press/check")
    assert response.status_code == 200
    body = response.json()
    raw = json.loads((ROBOTS / "demo-cell.json").read_text())
    path = next(p for p in raw["paths"] if p["name"] == "load-press")
    # one segment between each pair of consecutive waypoints (closed form: W - 1)
    assert len(body["waypoints"]) == len(path["waypoints"])
    assert len(body["segments"]) == len(path["waypoints"]) - 1
    durations = [s["duration_s"] for s in body["segments"]]
    if body["cycle_time_s"] is not None and None not in durations:
        # no blends on this path: the cycle is the sum of the segment times
        assert body["cycle_time_s"] == pytest.approx(sum(durations), rel=1e-9)
    blended = [s["blended_duration_s"] for s in body["segments"]]
    assert None not in blended
    # the blended total is the sum of its segments and never above rest to rest (the arm can
    # always stop at a waypoint: the time-optimal motion is never slower; closed form)
    assert body["blended_cycle_time_s"] == pytest.approx(sum(blended), rel=1e-9)
    assert body["blended_cycle_time_s"] <= body["cycle_time_s"] + 1e-9
    assert body["blended_note"]


async def test_read_path_check_unknown(client: httpx.AsyncClient) -> None:
    response = await client.get("/api/cell/paths/nowhere/check")
    assert response.status_code == 404
    assert response.json()["detail"] == "path: no path named 'nowhere' in the cell"


async def test_diagnose_pose(client: httpx.AsyncClient) -> None:
    q = [10.0, 20.0, -30.0, 5.0, 60.0, -15.0]
    response = await client.post("/api/cell/diagnose/pose", json={"joints_deg": q})
    assert response.status_code == 200
    body = response.json()
    scene = (await client.get("/api/cell")).json()["scene"]
    fk = await client.post(
        "/api/fk",
        json={
            "robot": "pb-arm6",
            "joints_deg": q,
            "base": {k: scene["base"][k] for k in ("position_mm", "rpy_deg")},
            "tool": {k: scene["tool"][k] for k in ("position_mm", "rpy_deg")},
        },
    )
    expected = fk.json()["configurations"][0]["position_mm"]
    assert body["tcp_world"]["position_mm"] == pytest.approx(expected, abs=1e-6)
    assert body["joints_deg"] == pytest.approx(q)


async def test_read_arm_state(client: httpx.AsyncClient) -> None:
    q = [10.0, 20.0, -30.0, 5.0, 60.0, -15.0]
    response = await client.post("/api/cell/fk", json={"joints_deg": q})
    assert response.status_code == 200
    body = response.json()
    pose = (await client.post("/api/cell/diagnose/pose", json={"joints_deg": q})).json()
    # the same configuration as the pose check: the same margins and clearance
    assert [m["margin"] for m in body["limits"]] == pytest.approx(
        [m["margin"] for m in pose["margins"]]
    )
    assert body["clearance_mm"] == pytest.approx(pose["clearance_mm"])
    # the thresholds the page words the state with travel with it (field names of the contract)
    assert {"limit_margin_deg", "clearance_mm", "wrist_deg"} <= set(body["thresholds"])


async def test_diagnose_pose_wrong_count(client: httpx.AsyncClient) -> None:
    response = await client.post("/api/cell/diagnose/pose", json={"joints_deg": [0.0, 1.0]})
    assert response.status_code == 422
    assert response.json()["detail"].startswith("joints_deg[0]: expected 6 values")


async def test_diagnose_log_demo(client: httpx.AsyncClient) -> None:
    text = (ROBOTS / "demo-log.csv").read_text()
    response = await client.post("/api/cell/diagnose/log", json={"csv": text, "source": "demo"})
    assert response.status_code == 200
    body = response.json()
    assert body["row_count"] == len(text.strip().splitlines()) - 1  # header + one line per row
    scene = resolve_scene(load_cell(ROBOTS / "demo-cell.json"))
    expected = log_diagnosis_result(
        diagnose_log(scene, read_joint_log(ROBOTS / "demo-log.csv", scene.robot))
    )
    assert body["worst_row"]["row"] == expected.worst_row.row
    assert body["worst_row"]["reason"] == expected.worst_row.reason
    assert len(body["rows"]["manipulability"]) == body["row_count"]


async def test_diagnose_log_too_long(client: httpx.AsyncClient) -> None:
    text = "j1,j2,j3,j4,j5,j6\n" + "0,0,0,0,0,0\n" * (MAX_LOG_ROWS + 5)
    response = await client.post("/api/cell/diagnose/log", json={"csv": text})
    assert response.status_code == 413
    # rows are counted as parsed: the first row beyond the cap is on line cap + 2
    assert response.json()["detail"] == (
        f"csv: pasted log: line {MAX_LOG_ROWS + 2}: more than {MAX_LOG_ROWS} data rows (the "
        f"limit); split the log into parts of at most {MAX_LOG_ROWS} rows"
    )


@pytest.mark.parametrize("newline", ["\r", "\r\n", "\n"])
async def test_diagnose_log_any_newline(client: httpx.AsyncClient, newline: str) -> None:
    # bare CR gave a 500 before: the csv module was fed one line with CRs inside it
    rows = ["j1,j2,j3,j4,j5,j6", "0,-20,20,0,90,0", "", "5,-20,20,0,90,0", "10,-20,20,0,90,0"]
    response = await client.post(
        "/api/cell/diagnose/log", json={"csv": newline.join(rows) + newline}
    )
    assert response.status_code == 200
    body = response.json()
    assert body["row_count"] == 3  # common practice, no source: blank lines carry no row
    assert body["rows"]["line"] == [2, 4, 5]


async def test_diagnose_log_cap_counts_parsed_rows(
    client: httpx.AsyncClient, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setattr(checks_routes, "MAX_LOG_ROWS", 4)
    header, row = "j1,j2,j3,j4,j5,j6", "0,-20,20,0,90,0"
    mixed = header + "\r" + "\r".join([row] * 3) + "\r\n" + "\n" * 1000 + row + "\r"
    accepted = await client.post("/api/cell/diagnose/log", json={"csv": mixed})
    assert accepted.status_code == 200
    assert accepted.json()["row_count"] == 4
    too_many = await client.post("/api/cell/diagnose/log", json={"csv": mixed + row + "\r"})
    assert too_many.status_code == 413
    cr_only = header + "\r" + "\r".join([row] * 60)
    refused = await client.post("/api/cell/diagnose/log", json={"csv": cr_only})
    assert refused.status_code == 413
    assert refused.json()["detail"].startswith("csv: pasted log: line 6: more than 4 data rows")


async def test_diagnose_log_error_escapes_control_characters(client: httpx.AsyncClient) -> None:
    text = "j1,j2,j3,j4,j5,j6\n0,0,0,0,0,\x00\x1b[31m\n"
    response = await client.post(
        "/api/cell/diagnose/log", json={"csv": text, "source": "run\x00\u2028.csv"}
    )
    assert response.status_code == 422
    detail = response.json()["detail"]
    assert detail == (
        "run\\x00\\u2028.csv: line 2, column 6 (j6): expected a number, got '\\x00\\x1b[31m'"
    )
    assert not any(ord(c) < 32 or 0x7F <= ord(c) <= 0x9F for c in detail)


async def test_diagnose_log_bad_header(client: httpx.AsyncClient) -> None:
    response = await client.post("/api/cell/diagnose/log", json={"csv": "a,b\n1,2\n"})
    assert response.status_code == 422
    assert "a" in response.json()["detail"]


async def test_start_placement(client: httpx.AsyncClient, job_finished: JobFinished) -> None:
    response = await client.post(
        "/api/placement", json={"half_width_mm": 200.0, "count": 3, "yaw_count": 2, "top": 3}
    )
    assert response.status_code == 202
    status = await job_finished(response.json()["id"])
    assert status["state"] == "done", status["detail"]
    report = status["result"]
    # 3 x 3 positions x 2 yaws x 1 height (closed form)
    assert report["candidates_evaluated"] == 18
    assert report["grid"]["x_mm"] == pytest.approx([-200.0, 0.0, 200.0])  # demo foot at 0, 0
    scores = [c["score"] for c in report["best"]]
    assert scores == sorted(scores, reverse=True)
    assert np.max(report["grid"]["score"]) == pytest.approx(scores[0])
    # the page's picture of the best score over all yaws: the highest score in the scale's last
    # colour (plotly.js's Viridis end #fde725, from memory); Pillow reads the PNG
    picture = await client.get(f"/api/jobs/{status['id']}/image", params={"yaw_index": -1})
    assert picture.status_code == 200
    pixels = np.asarray(Image.open(io.BytesIO(picture.content)))
    best = np.max(report["grid"]["score"], axis=(2, 3))  # (ny, nx), one height
    row, column = np.unravel_index(np.argmax(best), best.shape)
    assert pixels.shape == (3, 3, 4)
    assert pixels[2 - row, column].tolist() == [0xFD, 0xE7, 0x25, 255]
    outside = await client.get(f"/api/jobs/{status['id']}/image", params={"yaw_index": 2})
    assert outside.status_code == 422
    assert outside.json()["detail"] == "yaw_index: expected -1 .. 1, got 2"


async def test_rail_placement_needs_a_track(client: httpx.AsyncClient) -> None:
    response = await client.post("/api/placement", json={"search": "rail", "count": 1})
    assert response.status_code == 422  # the demo cell has no track
    assert "no track" in response.json()["detail"]


async def test_track_cell_places_its_rail(make_app: Callable[..., Any], tmp_path: Any) -> None:
    cell = tmp_path / "track.json"
    cell.write_text((ROBOTS / "demo-track-cell.json").read_text())
    transport = httpx.ASGITransport(app=make_app(cell_path=cell))
    async with httpx.AsyncClient(transport=transport, base_url="http://127.0.0.1") as client:
        response = await client.post("/api/placement", json={"count": 1, "yaw_count": 1})
        assert response.status_code == 202
        job = response.json()["id"]
        status = (await client.get(f"/api/jobs/{job}")).json()
        for _ in range(6000):  # the cap only ends a hung test (see job_finished)
            if status["state"] not in ("queued", "running"):
                break
            await asyncio.sleep(0.1)
            status = (await client.get(f"/api/jobs/{job}")).json()
        assert status["state"] == "done", status["detail"]
        report = status["result"]
    # a cell with a track searches its rail (automatic): one offset 0 x one direction
    assert report["search"] == "rail"
    assert report["candidates_evaluated"] == 1
    assert report["grid"]["x_mm"] == [0.0]
    # source: demo-track-cell.json's travel 0..4000 mm
    assert report["best"][0]["rail"]["travel_configured_mm"] == [0.0, 4000.0]


async def test_table_placement_needs_a_turntable(client: httpx.AsyncClient) -> None:
    response = await client.post("/api/placement", json={"search": "table", "count": 1})
    assert response.status_code == 422  # the demo cell has no turntable
    assert response.json()["detail"] == "table placement: the cell has no turntable"
    response = await client.post("/api/placement", json={"table": "table-1", "count": 1})
    assert response.status_code == 422  # a base search (the demo cell's auto) moves no table
    assert response.json()["detail"] == "table: only for a table search"


async def test_track_cell_places_its_table(make_app: Callable[..., Any], tmp_path: Any) -> None:
    cell = tmp_path / "track.json"
    cell.write_text((ROBOTS / "demo-track-cell.json").read_text())
    transport = httpx.ASGITransport(app=make_app(cell_path=cell))
    body = {"search": "table", "table": "table-1", "count": 3, "half_width_mm": 300.0, "top": 2}
    async with httpx.AsyncClient(transport=transport, base_url="http://127.0.0.1") as client:
        response = await client.post("/api/placement", json=body)
        assert response.status_code == 202
        job = response.json()["id"]
        status = (await client.get(f"/api/jobs/{job}")).json()
        for _ in range(6000):  # the cap only ends a hung test (see job_finished)
            if status["state"] not in ("queued", "running"):
                break
            await asyncio.sleep(0.1)
            status = (await client.get(f"/api/jobs/{job}")).json()
        assert status["state"] == "done", status["detail"]
        report = status["result"]
        picture = await client.get(f"/api/jobs/{job}/image", params={"yaw_index": -1})
    assert report["search"] == "table"
    assert report["table_name"] == "table-1"
    # 3 x 3 table positions within 300 mm of table-1 at (2000, -1300) mm (demo-track-cell.json)
    assert report["candidates_evaluated"] == 9
    assert report["grid"]["x_mm"] == pytest.approx([1700.0, 2000.0, 2300.0])
    assert report["grid"]["y_mm"] == pytest.approx([-1600.0, -1300.0, -1000.0])
    assert report["best"][0]["table"]["angle_range_deg"] == pytest.approx([-185.0, 185.0])
    assert picture.status_code == 200
    assert np.asarray(Image.open(io.BytesIO(picture.content))).shape == (3, 3, 4)


async def test_start_placement_too_large(client: httpx.AsyncClient) -> None:
    response = await client.post("/api/placement", json={"count": 101, "yaw_count": 72})
    assert response.status_code == 413
    assert response.json()["detail"] == (
        "grid: 101 x 101 positions x 72 yaws x 1 heights = 734472 candidates; this server "
        f"searches at most {MAX_PLACEMENT_CANDIDATES}"
    )


async def test_diagnose_pose_with_external_axes(
    make_app: Callable[..., Any], tmp_path: Any
) -> None:
    cell = tmp_path / "track.json"
    cell.write_text((ROBOTS / "demo-track-cell.json").read_text())
    transport = httpx.ASGITransport(app=make_app(cell_path=cell))
    async with httpx.AsyncClient(transport=transport, base_url="http://127.0.0.1") as client:
        q = [10.0, 20.0, -30.0, 5.0, 60.0, -15.0]
        home = (await client.post("/api/cell/diagnose/pose", json={"joints_deg": q})).json()
        response = await client.post(
            "/api/cell/diagnose/pose", json={"joints_deg": [*q, 2000.0, 90.0]}
        )
        assert response.status_code == 200
        moved = response.json()
        assert moved["external_axes"] == {"track": 2000.0, "table-1": 90.0}
        assert home["external_axes"] == {"track": 0.0, "table-1": 0.0}  # the demo's home values
        shift = np.subtract(moved["tcp_world"]["position_mm"], home["tcp_world"]["position_mm"])
        np.testing.assert_allclose(shift, [2000.0, 0.0, 0.0], atol=1e-9)  # rail along x
        check = (await client.get("/api/cell/check")).json()
        assert check["external_axis_names"] == ["track", "table-1"]
        # the demo pins mill-vise at 3300 mm
        assert check["targets"][1]["external_axes"]["track"] == 3300.0
        drawing = (await client.get("/api/cell")).json()["scene"]
        roles = {shape["name"]: shape["role"] for shape in drawing["shapes"]}
        assert roles["track rail"] == roles["track carriage"] == "pedestal"
        assert roles["table-1 plate"] == "fixture"
        # closed form: the foot stands on the carriage top, rail origin z 40 + carriage 250 mm
        assert drawing["base"]["foot_position_mm"] == pytest.approx([0.0, 0.0, 290.0])
        assert [axis["name"] for axis in drawing["external_axes"]] == ["track", "table-1"]

"""POST /api/maps/joint and the job routes: progress, result, cancel, caps, per-client limits.

The map itself comes from posebridge.spaces.joint_map (checked against
python-fcl in tests/spaces/test_joint_map.py); here the answer is compared
cell by cell with a direct call of that function on the same cell.
"""

from __future__ import annotations

import asyncio
import io
from collections.abc import Awaitable, Callable
from typing import Any

import httpx
import numpy as np
import pytest
from PIL import Image

from posebridge.api.jobs import MAX_ACTIVE_OWNER
from posebridge.cell import load_cell, resolve_scene
from posebridge.cell.clearance import clearance_scene
from posebridge.resources import data_folder
from posebridge.results.map_images import joint_map_rgba
from posebridge.results.spaces import JointMapResult
from posebridge.spaces.joint_map import cell_joint_map, joint_map
from posebridge.units import joints_si_from_user

pytestmark = pytest.mark.anyio

JobFinished = Callable[[str], Awaitable[dict[str, Any]]]
"""The ``job_finished`` fixture: a job's last status, once it is no longer queued or running."""

HOLD = [0.0, 10.0, -20.0, 0.0, 55.0, 0.0]


async def test_start_joint_map_two_joints(
    client: httpx.AsyncClient, job_finished: JobFinished
) -> None:
    response = await client.post(
        "/api/maps/joint", json={"joints": [1, 2], "hold_deg": HOLD, "resolution": 24}
    )
    assert response.status_code == 202
    started = response.json()
    assert started["kind"] == "joint-map"
    assert started["result"] is None
    status = await job_finished(started["id"])
    assert status["state"] == "done", status["detail"]
    result = status["result"]
    assert result["shape"] == [24, 24]
    assert result["joint_names"] == ["j2", "j3"]
    scene = resolve_scene(load_cell(data_folder("robots") / "demo-cell.json"))
    q = joints_si_from_user(np.array(HOLD), scene.robot.prismatic)
    expected = joint_map(clearance_scene(scene), [1, 2], q, resolution=24)
    assert result["obstacle"] == expected.obstacle.ravel().tolist()
    assert result["self_collision"] == expected.self_collision.ravel().tolist()
    # clearance in mm, rounded to 0.1 mm
    np.testing.assert_allclose(
        result["clearance_mm"], 1000.0 * np.minimum(expected.clearance.ravel(), 1.0), atol=0.051
    )
    # cell centres of 24 equal cells over j2's range -87..151 deg (robots/pb-arm6.toml)
    assert result["axes_deg"][0][0] == pytest.approx(-87.0 + 238.0 / 48)
    assert status["done"] == status["total"] >= 1


async def test_start_joint_map_three_joints(
    client: httpx.AsyncClient, job_finished: JobFinished
) -> None:
    response = await client.post(
        "/api/maps/joint", json={"joints": [0, 1, 2], "hold_deg": HOLD, "resolution": 8}
    )
    assert response.status_code == 202
    status = await job_finished(response.json()["id"])
    assert status["state"] == "done", status["detail"]
    result = status["result"]
    assert result["shape"] == [8, 8, 8]
    assert len(result["obstacle"]) == 8**3
    assert result["clearance_mm"] is None


async def test_joint_map_picture(client: httpx.AsyncClient, job_finished: JobFinished) -> None:
    response = await client.post(
        "/api/maps/joint", json={"joints": [1, 2], "hold_deg": HOLD, "resolution": 12}
    )
    job_id = response.json()["id"]
    status = await job_finished(job_id)
    assert status["state"] == "done", status["detail"]
    picture = await client.get(f"/api/jobs/{job_id}/image")
    assert picture.status_code == 200
    assert picture.headers["content-type"] == "image/png"
    # Pillow reads the PNG (reference library): one pixel per cell, the map's own colours
    # (their values are checked against the palette in tests/results/test_map_images.py)
    pixels = np.asarray(Image.open(io.BytesIO(picture.content)))
    assert pixels.shape == (12, 12, 4)
    np.testing.assert_array_equal(pixels, joint_map_rgba(JointMapResult(**status["result"])))
    # a three-joint map has no picture; an unknown job is not found
    response = await client.post(
        "/api/maps/joint", json={"joints": [0, 1, 2], "hold_deg": HOLD, "resolution": 4}
    )
    three = response.json()["id"]
    assert (await job_finished(three))["state"] == "done"
    refused = await client.get(f"/api/jobs/{three}/image")
    assert refused.status_code == 422
    assert refused.json()["detail"] == "map: a picture needs a two-joint map, this one has 3"
    assert (await client.get("/api/jobs/abc123/image")).status_code == 404


async def test_start_joint_map_too_large(client: httpx.AsyncClient) -> None:
    response = await client.post(
        "/api/maps/joint", json={"joints": [0, 1, 2], "hold_deg": HOLD, "resolution": 64}
    )
    assert response.status_code == 413
    assert response.json()["detail"] == (
        "resolution: a 3-joint map of 64 cells per axis has 262144 cells; "
        "this server computes at most 110592"
    )


async def test_start_joint_map_bad_joints(client: httpx.AsyncClient) -> None:
    response = await client.post("/api/maps/joint", json={"joints": [1, 1], "hold_deg": HOLD})
    assert response.status_code == 422
    assert response.json()["detail"] == (
        "joints: expected distinct indices in 0..5 for robot 'pb-arm6', got [1, 1]"
    )
    response = await client.post("/api/maps/joint", json={"joints": [0, 1], "hold_deg": [0.0]})
    assert response.status_code == 422
    assert response.json()["detail"].startswith("hold_deg[0]: expected 6 values")


async def test_owner_is_never_refused_and_old_queued_jobs_are_superseded(
    client: httpx.AsyncClient, job_finished: JobFinished
) -> None:
    body = {"joints": [1, 2], "hold_deg": HOLD, "resolution": 256}
    ids = []
    for _ in range(MAX_ACTIVE_OWNER + 2):
        response = await client.post("/api/maps/joint", json=body)
        # our own contract: the owner (loopback, no token) is never answered 429
        assert response.status_code == 202
        ids.append(response.json()["id"])
    # one worker runs the owner's jobs in order: beyond MAX_ACTIVE_OWNER the oldest queued ones
    # are superseded (cancelled); the newest is kept
    states = [(await client.get(f"/api/jobs/{job_id}")).json()["state"] for job_id in ids]
    assert states.count("cancelled") >= 2
    assert states[-1] in ("queued", "running", "done")
    for job_id in ids:
        await client.post(f"/api/jobs/{job_id}/cancel")
        assert (await job_finished(job_id))["state"] in ("cancelled", "done")


async def test_read_job_unknown(client: httpx.AsyncClient) -> None:
    response = await client.get("/api/jobs/abc123")
    assert response.status_code == 404
    assert response.json()["detail"] == "job: no job 'abc123' (unknown, or finished long ago)"


async def test_start_reach_section(client: httpx.AsyncClient, job_finished: JobFinished) -> None:
    response = await client.post(
        "/api/maps/reach-section", json={"axis": "z", "value_mm": 700.0, "voxel_mm": 200.0}
    )
    assert response.status_code == 202
    status = await job_finished(response.json()["id"])
    assert status["state"] == "done", status["detail"]
    result = status["result"]
    # 26 tool directions: a cube's 6 faces, 12 edges and 8 corners (closed form)
    assert result["directions"] == 26
    counts = np.array(result["count"])
    assert counts.shape == (len(result["v_mm"]), len(result["u_mm"]))
    assert counts.min() >= 0
    assert counts.max() <= 26
    assert counts.max() > 0
    assert (result["u_axis"], result["v_axis"]) == ("x", "y")
    # the slice is the voxel-centre layer nearest the asked height, within half a voxel
    assert abs(result["value_mm"] - 700.0) <= 100.0


async def test_start_reach_section_too_fine(client: httpx.AsyncClient) -> None:
    response = await client.post(
        "/api/maps/reach-section", json={"axis": "y", "value_mm": 0.0, "voxel_mm": 20.0}
    )
    assert response.status_code == 413
    assert response.json()["detail"].startswith("voxel_mm: 20 mm cells over this robot's reach")


async def test_joint_map_of_the_same_cell_version_is_kept(
    client: httpx.AsyncClient, job_finished: JobFinished, monkeypatch: pytest.MonkeyPatch
) -> None:
    from posebridge.api.routes import maps

    computed: list[object] = []

    def counted(*args: Any, **kwargs: Any) -> Any:
        computed.append(args)
        return cell_joint_map(*args, **kwargs)

    monkeypatch.setattr(maps, "cell_joint_map", counted)
    asked = {"joints": [1, 2], "hold_deg": HOLD, "resolution": 12}
    first = await client.post("/api/maps/joint", json=asked)
    status = await job_finished(first.json()["id"])
    assert status["state"] == "done", status["detail"]
    # the same request of the same cell version: done in the answer itself, not computed again
    again = await client.post("/api/maps/joint", json=asked)
    assert again.status_code == 202
    assert again.json()["state"] == "done"
    assert again.json()["result"] == status["result"]
    assert len(computed) == 1
    # another request is computed
    other = await client.post("/api/maps/joint", json={**asked, "resolution": 10})
    assert (await job_finished(other.json()["id"]))["state"] == "done"
    assert len(computed) == 2
    # a new cell version starts with nothing kept
    cell = (await client.get("/api/cell")).json()
    moved = await client.patch(
        "/api/cell/targets/rack-low-1",
        json={"position_mm": [150.0, 820.0, 470.0]},
        headers={"If-Match": cell["etag"]},
    )
    assert moved.status_code == 200, moved.text
    after = await client.post("/api/maps/joint", json=asked)
    status = await job_finished(after.json()["id"])
    assert status["state"] == "done"
    assert status["result"]["cell_etag"] == moved.json()["etag"]
    assert len(computed) == 3


async def test_joint_map_over_the_track(make_app: Callable[..., Any], tmp_path: Any) -> None:
    source = data_folder("robots") / "demo-track-cell.json"
    cell = tmp_path / "track.json"
    cell.write_text(source.read_text())
    transport = httpx.ASGITransport(app=make_app(cell_path=cell))
    async with httpx.AsyncClient(transport=transport, base_url="http://127.0.0.1") as session:
        asked = {"joints": [6, 0], "hold_deg": [*HOLD, 1000.0, 90.0], "resolution": 12}
        started = (await session.post("/api/maps/joint", json=asked)).json()
        for _ in range(6000):
            status = (await session.get(f"/api/jobs/{started['id']}")).json()
            if status["state"] not in ("queued", "running"):
                break
            await asyncio.sleep(0.1)
        assert status["state"] == "done", status["detail"]
        result = status["result"]
        assert result["joint_names"] == ["track", "j1"]
        assert result["joint_units"] == ["mm", "deg"]
        # the track is swept, the table held at 90 deg as asked
        assert result["external_hold_deg"] == pytest.approx([1000.0, 90.0])
        scene = resolve_scene(load_cell(source), source)
        q = joints_si_from_user(np.array(HOLD), scene.robot.prismatic)
        expected = cell_joint_map(scene, [6, 0], q, [1.0, np.pi / 2], resolution=12)
        assert result["obstacle"] == expected.obstacle.ravel().tolist()
        # the IK markers along the track: every target, 8 branches x 12 track values, j1 in deg
        curves = result["ik_along_axis"]
        assert [c["target"] for c in curves] == list(scene.targets.names)
        assert expected.along is not None
        for k, curve in enumerate(curves):
            assert curve["branches"][0] == "front, up, positive"
            for b, per_value in enumerate(curve["joints_deg"]):
                assert len(per_value) == 12
                j1 = np.degrees(expected.along.q[k, :, b, 0])  # rad -> deg
                drawn = [np.nan if v is None else v[0] for v in per_value]
                np.testing.assert_allclose(drawn, j1, atol=1e-6)
        two_axes = {"joints": [6, 7], "hold_deg": HOLD}
        refused = await session.post("/api/maps/joint", json=two_axes)
        assert refused.status_code == 422
        assert "at most one external axis" in refused.json()["detail"]

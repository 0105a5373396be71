"""PATCH /api/cell/track: a rail placement candidate's rail and the carriage's home position.

The cell is made here (pb-arm6 on the carriage of a track along world x). Expected values are
closed forms: the saved track fields are the ones sent, the travel is widened by
``[min(a, floor(n0)), max(b, ceil(n1))]`` (cell/track_move.py), and with the rail along a
horizontal direction ``(cos psi, sin psi, 0)`` at ``o`` the robot base at track position
``s`` stands at ``o + s (cos psi, sin psi, 0) + (0, 0, h + pedestal)`` turned by ``Rz(psi)``
(README, cell file: the track).
"""

from __future__ import annotations

import json
from collections.abc import Callable
from pathlib import Path
from typing import Any

import httpx
import pytest

from posebridge.cell.files import load_cell

pytestmark = pytest.mark.anyio


def track_cell() -> dict[str, Any]:
    """pb-arm6 on a 300 mm pedestal on a 200 mm carriage; the rail along x, travel 0..3000 mm."""
    return {
        "schema_version": 1,
        "robot": {"name": "pb-arm6"},
        "base": {"pedestal_height_mm": 300.0, "pedestal_radius_mm": 150.0},
        "track": {
            "origin_mm": [0.0, 0.0, 50.0],
            "range_mm": [0.0, 3000.0],
            "speed_mm_s": 1000.0,
            "accel_mm_s2": 1200.0,
            "carriage_height_mm": 200.0,
        },
        "targets": [
            {"name": "front", "position_mm": [1200.0, 0.0, 700.0], "rpy_deg": [180.0, 0.0, 0.0]}
        ],
    }


@pytest.fixture
def cell_path(tmp_path: Path) -> Path:
    path = tmp_path / "track.json"
    path.write_text(json.dumps(track_cell()))
    return path


@pytest.fixture
def client_of(make_app: Callable[..., Any]) -> Callable[[Path], httpx.AsyncClient]:
    def make(path: Path) -> httpx.AsyncClient:
        transport = httpx.ASGITransport(app=make_app(cell_path=path))
        return httpx.AsyncClient(transport=transport, base_url="http://127.0.0.1")

    return make


async def test_move_track_rail_candidate(
    cell_path: Path, client_of: Callable[[Path], httpx.AsyncClient]
) -> None:
    # a rail candidate's fields: yaw 90 deg, the rail 800 mm to the side
    rail = {
        "origin_mm": [-800.0, -1500.0, 50.0],
        "direction": [0.0, 1.0, 0.0],
        "travel_needed_mm": [-120.4, 3250.2],
    }
    async with client_of(cell_path) as client:
        etag = (await client.get("/api/cell")).json()["etag"]
        response = await client.patch("/api/cell/track", json=rail, headers={"If-Match": etag})
    assert response.status_code == 200, response.text
    document = response.json()
    assert response.headers["ETag"] == f'"{document["etag"]}"'
    assert document["etag"] != etag
    track = document["cell"]["track"]
    assert track["origin_mm"] == rail["origin_mm"]
    assert track["direction"] == rail["direction"]
    # [min(0, floor(-120.4)), max(3000, ceil(3250.2))]
    assert track["range_mm"] == [-121.0, 3251.0]
    assert track["home_mm"] == 0.0  # kept
    # closed form (module docstring): at s = 0 the base is at o + (0, 0, 200 + 300), turned by
    # Rz(90 deg); the pedestal foot on the carriage top, 200 mm above o
    base = document["scene"]["base"]
    assert base["position_mm"] == pytest.approx([-800.0, -1500.0, 550.0], abs=1e-9)
    assert base["rpy_deg"] == pytest.approx([0.0, 0.0, 90.0], abs=1e-9)
    assert base["foot_position_mm"] == pytest.approx([-800.0, -1500.0, 250.0], abs=1e-9)
    # the file holds the same track; the target did not move
    saved = load_cell(cell_path)
    assert saved.track is not None
    assert saved.track.range_mm == (-121.0, 3251.0)
    assert saved.track.origin_mm == (-800.0, -1500.0, 50.0)
    assert saved.targets[0].position_mm == (1200.0, 0.0, 700.0)


async def test_move_track_carriage(
    cell_path: Path, client_of: Callable[[Path], httpx.AsyncClient]
) -> None:
    async with client_of(cell_path) as client:
        etag = (await client.get("/api/cell")).json()["etag"]
        response = await client.patch(
            "/api/cell/track", json={"home_mm": 1250.5}, headers={"If-Match": etag}
        )
    assert response.status_code == 200, response.text
    document = response.json()
    assert document["cell"]["track"]["home_mm"] == 1250.5
    assert document["cell"]["track"]["range_mm"] == [0.0, 3000.0]
    (axis,) = document["scene"]["external_axes"]
    assert axis["value"] == pytest.approx(1250.5)  # shown at the home position, mm
    # closed form: the base rides 1250.5 mm along x, 50 + 200 + 300 mm up
    assert document["scene"]["base"]["position_mm"] == pytest.approx([1250.5, 0.0, 550.0])
    assert load_cell(cell_path).track.home_mm == 1250.5  # type: ignore[union-attr]


@pytest.mark.parametrize(
    ("body", "detail"),
    [
        ({"direction": [0.0, 0.0, 0.0]}, "track.direction: must not be the zero vector"),
        ({"direction": [0.0, 0.0, 1.0]}, "track.direction: must not be vertical"),
        ({"home_mm": 3500.0}, "track.home_mm: must lie in range_mm [0, 3000]"),
        (
            {"travel_needed_mm": [500.0, -500.0]},
            "travel_needed_mm: expected two finite numbers, lower end first, got [500, -500]",
        ),
        (
            {"travel_needed_mm": [0.0]},
            "travel_needed_mm: List should have at least 2 items after validation, not 1",
        ),
        ({"range_mm": [0.0, 1.0]}, "range_mm: Extra inputs are not permitted"),
    ],
)
async def test_move_track_invalid(
    body: dict[str, Any],
    detail: str,
    cell_path: Path,
    client_of: Callable[[Path], httpx.AsyncClient],
) -> None:
    before = cell_path.read_bytes()
    async with client_of(cell_path) as client:
        etag = (await client.get("/api/cell")).json()["etag"]
        response = await client.patch("/api/cell/track", json=body, headers={"If-Match": etag})
        assert (await client.get("/api/cell")).json()["etag"] == etag
    assert response.status_code == 422
    assert response.json() == {"detail": detail}
    assert cell_path.read_bytes() == before  # nothing written


async def test_move_track_versions(
    cell_path: Path, client_of: Callable[[Path], httpx.AsyncClient]
) -> None:
    async with client_of(cell_path) as client:
        etag = (await client.get("/api/cell")).json()["etag"]
        missing = await client.patch("/api/cell/track", json={"home_mm": 100.0})
        assert missing.status_code == 428
        done = await client.patch(
            "/api/cell/track", json={"home_mm": 100.0}, headers={"If-Match": etag}
        )
        assert done.status_code == 200
        stale = await client.patch(
            "/api/cell/track", json={"home_mm": 200.0}, headers={"If-Match": etag}
        )
        assert stale.status_code == 412
        assert stale.json()["detail"].startswith(
            f"If-Match: the cell was changed elsewhere since version {etag} was read"
        )
    # the refused edits wrote nothing: the file holds the one accepted move
    assert load_cell(cell_path).track.home_mm == 100.0  # type: ignore[union-attr]


async def test_move_track_no_track(
    tmp_path: Path, client_of: Callable[[Path], httpx.AsyncClient]
) -> None:
    data = track_cell()
    del data["track"]
    path = tmp_path / "no-track.json"
    path.write_text(json.dumps(data))
    before = path.read_bytes()
    async with client_of(path) as client:
        etag = (await client.get("/api/cell")).json()["etag"]
        response = await client.patch(
            "/api/cell/track", json={"home_mm": 0.0}, headers={"If-Match": etag}
        )
        stale = await client.patch(
            "/api/cell/track", json={"home_mm": 0.0}, headers={"If-Match": "not-the-version"}
        )
    assert response.status_code == 404
    assert response.json() == {"detail": "track: the cell has no track"}
    assert stale.status_code == 412  # a stale version is refused first
    assert path.read_bytes() == before

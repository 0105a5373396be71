"""Mesh fixtures over HTTP: drawing a mesh, uploading a file as a new fixture.

The rules and messages are our own contract (posebridge.api.routes.cells).
Uploaded files are boxes made with trimesh's box primitive.
"""

from __future__ import annotations

import base64
import hashlib
import io
import json
import shutil
from collections.abc import AsyncIterator
from pathlib import Path

import httpx
import numpy as np
import pytest
import trimesh
from fastapi import FastAPI

from posebridge.api.app import create_app
from posebridge.api.auth import enable_review_sharing
from posebridge.api.schemas.meshes import MAX_UPLOAD_BYTES
from posebridge.api.settings import Settings
from posebridge.resources import data_folder
from posebridge.review.access import new_review_token

pytestmark = pytest.mark.anyio

OWNER_URL = "http://127.0.0.1:8000"


def box_stl(extents: tuple[float, float, float]) -> bytes:
    stream = io.BytesIO()
    trimesh.creation.box(extents=extents).export(stream, file_type="stl")
    return stream.getvalue()


def upload(data: bytes, **fields: object) -> dict[str, object]:
    return {
        "file_name": "Guard Panel (rev 2).stl",
        "data_base64": base64.b64encode(data).decode(),
        "position_mm": [800.0, -600.0, 0.0],
        **fields,
    }


@pytest.fixture
def cell_file(tmp_path: Path) -> Path:
    path = tmp_path / "demo-cell.json"
    shutil.copy(data_folder("robots") / "demo-cell.json", path)
    return path


@pytest.fixture
def app(cell_file: Path) -> FastAPI:
    return create_app(Settings(warm_up=False, cell_path=cell_file))


@pytest.fixture
async def owner(app: FastAPI) -> AsyncIterator[httpx.AsyncClient]:
    transport = httpx.ASGITransport(app=app, client=("127.0.0.1", 5000))
    async with httpx.AsyncClient(transport=transport, base_url=OWNER_URL) as session:
        yield session


async def test_upload_mesh_adds_a_fixture_stored_next_to_the_cell(
    owner: httpx.AsyncClient, cell_file: Path
) -> None:
    etag = (await owner.get("/api/cell")).json()["etag"]
    data = box_stl((400.0, 300.0, 200.0))
    response = await owner.post("/api/cell/meshes", json=upload(data), headers={"If-Match": etag})
    assert response.status_code == 201, response.text
    document = response.json()
    fixture = document["cell"]["fixtures"][-1]
    stored = f"meshes/Guard-Panel-rev-2-{hashlib.sha256(data).hexdigest()[:12]}.stl"
    # our own contract: a safe name from the file's stem and content hash, in meshes/
    assert fixture["name"] == "Guard-Panel-rev-2"
    assert fixture["file"] == stored
    assert (cell_file.parent / stored).read_bytes() == data
    # closed form: a centred 200 mm high box placed with its bottom centre at the drop point
    assert fixture["position_mm"] == [800.0, -600.0, 100.0]
    saved = json.loads(cell_file.read_text())
    assert saved["fixtures"][-1]["file"] == stored  # saved into the cell file
    shape = next(s for s in document["scene"]["shapes"] if s["name"] == "Guard-Panel-rev-2")
    assert shape["shape"] == "mesh"
    assert shape["closed"] is True
    # a box has 12 triangles (6 faces of 2)
    assert shape["triangles"] == 12
    drawing = (await owner.get("/api/cell/meshes/Guard-Panel-rev-2")).json()
    assert len(drawing["faces"]) == 12
    assert drawing["mesh_version"] == shape["mesh_version"]
    # closed form: the box's corners at +-200, +-150, +-100 mm in its own frame
    np.testing.assert_allclose(np.ptp(np.array(drawing["vertices_mm"]), axis=0), [400, 300, 200])


async def test_target_check_names_the_uploaded_mesh(owner: httpx.AsyncClient) -> None:
    document = (await owner.get("/api/cell")).json()
    target = document["scene"]["targets"][0]
    # a block around the first target: the tool is inside it
    body = upload(box_stl((300.0, 300.0, 300.0)), position_mm=target["position_mm"])
    response = await owner.post(
        "/api/cell/meshes", json=body, headers={"If-Match": document["etag"]}
    )
    assert response.status_code == 201, response.text
    check = (await owner.get("/api/cell/check")).json()
    first = check["targets"][0]
    assert not first["target"]["reachable"]
    assert "Guard-Panel-rev-2" in json.dumps(check["findings"])


async def test_upload_mesh_in_metres_without_unit_names_the_unit(
    owner: httpx.AsyncClient, cell_file: Path
) -> None:
    etag = (await owner.get("/api/cell")).json()["etag"]
    response = await owner.post(
        "/api/cell/meshes", json=upload(box_stl((0.4, 0.3, 0.2))), headers={"If-Match": etag}
    )
    assert response.status_code == 422
    assert 'Give "unit": "m"' in response.json()["detail"]
    # the refused file is not kept
    assert not list((cell_file.parent / "meshes").glob("*.stl"))
    again = await owner.post(
        "/api/cell/meshes",
        json=upload(box_stl((0.4, 0.3, 0.2)), unit="m"),
        headers={"If-Match": etag},
    )
    assert again.status_code == 201, again.text


async def test_upload_mesh_broken_file_and_stale_version(
    owner: httpx.AsyncClient, cell_file: Path
) -> None:
    etag = (await owner.get("/api/cell")).json()["etag"]
    broken = await owner.post(
        "/api/cell/meshes", json=upload(b"solid x\nfacet"), headers={"If-Match": etag}
    )
    assert broken.status_code == 422
    stale = await owner.post(
        "/api/cell/meshes", json=upload(box_stl((10.0, 10.0, 10.0))), headers={"If-Match": "x"}
    )
    assert stale.status_code == 412
    assert not list((cell_file.parent / "meshes").glob("*.stl"))
    missing = await owner.post("/api/cell/meshes", json=upload(box_stl((10.0, 10.0, 10.0))))
    assert missing.status_code == 428


async def test_upload_mesh_too_large_and_bad_names(owner: httpx.AsyncClient) -> None:
    etag = (await owner.get("/api/cell")).json()["etag"]
    large = await owner.post(
        "/api/cell/meshes",
        json=upload(b"\0" * (MAX_UPLOAD_BYTES + 1)),
        headers={"If-Match": etag},
    )
    # our own caps: the body cap (16 MB) or the file cap, whichever is hit first
    assert large.status_code in (413, 422)
    for name in ("../escape.stl", "part.exe", "a/b.stl"):
        bad = await owner.post(
            "/api/cell/meshes",
            json=upload(box_stl((10.0, 10.0, 10.0)), file_name=name),
            headers={"If-Match": etag},
        )
        assert bad.status_code == 422, name


async def test_upload_mesh_reviewer_forbidden(cell_file: Path) -> None:
    token = new_review_token()
    app = create_app(Settings(warm_up=False, cell_path=cell_file, host_names=("192.0.2.7",)))
    enable_review_sharing(app, token)
    transport = httpx.ASGITransport(app=app, client=("10.0.0.5", 1234))
    async with httpx.AsyncClient(
        transport=transport,
        base_url="http://192.0.2.7:8000",
        headers={"Authorization": f"Bearer {token}"},
    ) as reviewer:
        etag = (await reviewer.get("/api/cell")).json()["etag"]
        response = await reviewer.post(
            "/api/cell/meshes", json=upload(box_stl((10.0, 10.0, 10.0))), headers={"If-Match": etag}
        )
    assert response.status_code == 403
    assert not (cell_file.parent / "meshes").exists()


async def test_mesh_drawing_unknown_fixture(owner: httpx.AsyncClient) -> None:
    response = await owner.get("/api/cell/meshes/press-bed")
    assert response.status_code == 404
    assert response.json() == {
        "detail": "mesh fixture: no mesh fixture named 'press-bed' in the cell"
    }

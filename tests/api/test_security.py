"""Access rules that keep local files and the owner's rights away from others.

Reviewers of a shared server may name only the robots the server serves (the
bundled ones and the cell's); every spelling of a file path is refused
without reading the file, so nothing of it can show in an answer. Every
server answers only to its own host names, takes changes only from its own
page (``Origin``) and only as JSON, and sends protective headers. The rules
are our own contract (posebridge.api.guard and posebridge.api.robot_cache
module docstrings); the header semantics are RFC 9110 (Host sec. 7.2,
Content-Type sec. 8.3), RFC 6454 (Origin), CSP Level 3 and the OWASP HTTP
Headers Cheat Sheet (common practice, no source). 192.0.2.7 is a documentation
address (RFC 5737), 10.0.0.5 a private one (RFC 1918).
"""

from __future__ import annotations

import shutil
from collections.abc import AsyncIterator
from pathlib import Path

import httpx
import pytest
from fastapi import FastAPI

from posebridge.api.app import create_app
from posebridge.api.auth import enable_review_sharing
from posebridge.api.settings import Settings
from posebridge.resources import data_folder
from posebridge.review.access import new_review_token

pytestmark = pytest.mark.anyio

OWNER_URL = "http://127.0.0.1:8000"
REMOTE_URL = "http://192.0.2.7:8000"
SECRET = "secret-arm-do-not-show"


@pytest.fixture
def secret_folder(tmp_path: Path) -> Path:
    """A folder with robot files a reviewer must not reach: a valid one that would
    load as robot SECRET, one whose errors would quote its content, and links."""
    folder = tmp_path / "private"
    (folder / "sub").mkdir(parents=True)
    valid = (data_folder("robots") / "pb-planar2r.toml").read_text()
    (folder / "arm.toml").write_text(valid.replace('name = "pb-planar2r"', f'name = "{SECRET}"'))
    (folder / "broken.toml").write_text(f'schema_version = 1\n[robot]\nname = "{SECRET}"\nkey = ')
    (folder / "notes.txt").write_text(f"{SECRET}\n")
    (folder / "link-to-arm").symlink_to(folder / "arm.toml")
    (folder / "notes.toml").symlink_to(folder / "notes.txt")
    return folder


def _spellings(folder: Path) -> list[str]:
    arm = str(folder / "arm.toml")
    return [
        arm,
        arm + "/",
        arm + "/.",
        arm + "//",
        str(folder / "sub" / ".." / "arm.toml"),
        str(folder).replace("/", "//") + "//arm.toml",
        str(folder / "link-to-arm"),
        str(folder / "ARM.TOML") + "/",
        arm.replace(".toml", ".TOML") + "/",
        arm + "\x00.txt",
        arm + "%2F",
        arm.replace("/", "%2F"),
        str(folder / "broken.toml") + "/",
        str(folder / "notes.toml"),
        "../" * 12 + arm.lstrip("/"),
        "file://" + arm,
    ]


@pytest.fixture
def cell_file(tmp_path: Path) -> Path:
    path = tmp_path / "cells" / "press.json"
    path.parent.mkdir()
    shutil.copy(data_folder("robots") / "demo-cell.json", path)
    return path


@pytest.fixture
def token() -> str:
    return new_review_token()


@pytest.fixture
def shared_app(cell_file: Path, token: str) -> FastAPI:
    # as `serve --share --host 192.0.2.7`: paths are off for everyone, reviewers never have them
    app = create_app(
        Settings(
            warm_up=False, cell_path=cell_file, robot_paths_allowed=False, host_names=("192.0.2.7",)
        )
    )
    enable_review_sharing(app, token)
    return app


@pytest.fixture
async def reviewer(shared_app: FastAPI, token: str) -> AsyncIterator[httpx.AsyncClient]:
    transport = httpx.ASGITransport(app=shared_app, client=("10.0.0.5", 1234))
    headers = {"Authorization": f"Bearer {token}"}
    async with httpx.AsyncClient(
        transport=transport, base_url=REMOTE_URL, headers=headers
    ) as session:
        yield session


@pytest.fixture
async def owner(cell_file: Path) -> AsyncIterator[httpx.AsyncClient]:
    """The owner of a server that is not shared (robot paths allowed)."""
    app = create_app(Settings(warm_up=False, cell_path=cell_file))
    transport = httpx.ASGITransport(app=app, client=("127.0.0.1", 5000))
    async with httpx.AsyncClient(transport=transport, base_url=OWNER_URL) as session:
        yield session


# --- 1. robot files ---------------------------------------------------------------------


async def test_robot_paths_refused_to_reviewer_in_every_spelling(
    reviewer: httpx.AsyncClient, secret_folder: Path
) -> None:
    for spec in _spellings(secret_folder):
        for response in (
            await reviewer.get("/api/robots/model", params={"robot": spec}),
            await reviewer.post("/api/fk", json={"robot": spec, "joints_deg": [0, 0]}),
            await reviewer.post(
                "/api/ik",
                json={"robot": spec, "pose": {"position_mm": [1, 0, 0], "rpy_deg": [0, 0, 0]}},
            ),
        ):
            assert response.status_code == 403, (spec, response.text)
            assert SECRET not in response.text
            assert response.json()["detail"].startswith(
                "robot: this server serves only its robots by name ("
            )
            assert "\x00" not in response.text


async def test_robot_path_query_url_encoded_twice_refused(
    reviewer: httpx.AsyncClient, secret_folder: Path
) -> None:
    arm = str(secret_folder / "arm.toml")
    for raw in (arm.replace("/", "%2F") + "%2F", arm.replace("/", "%252F"), arm + "%00"):
        response = await reviewer.get(f"/api/robots/model?robot={raw}")
        assert response.status_code == 403, raw
        assert SECRET not in response.text


async def test_reviewer_uses_bundled_and_cell_robot(
    reviewer: httpx.AsyncClient, cell_file: Path
) -> None:
    document = (await reviewer.get("/api/cell")).json()
    for robot in ("pb-planar2r", document["robot"]):
        response = await reviewer.get("/api/robots/model", params={"robot": robot})
        assert response.status_code == 200, robot


async def test_reviewer_uses_cell_robot_from_file(
    reviewer: httpx.AsyncClient, cell_file: Path
) -> None:
    # the owner's cell names its robot by file: reviewers get it under its cell: name only
    arm6 = (data_folder("robots") / "pb-arm6.toml").read_text()
    (cell_file.parent / "arm.toml").write_text(arm6.replace('name = "pb-arm6"', 'name = "own-arm"'))
    cell_file.write_text(
        cell_file.read_text().replace('"name": "pb-arm6"', '"file": "arm.toml"', 1)
    )
    document = (await reviewer.get("/api/cell")).json()
    assert document["robot"] == "cell:own-arm"
    joints = [0, -20, 20, 0, 90, 0]
    response = await reviewer.post("/api/fk", json={"robot": "cell:own-arm", "joints_deg": joints})
    assert response.status_code == 200
    refused = await reviewer.post(
        "/api/fk", json={"robot": str(cell_file.parent / "arm.toml"), "joints_deg": joints}
    )
    assert refused.status_code == 403


async def test_owner_robot_path_decided_on_resolved_file(
    owner: httpx.AsyncClient, secret_folder: Path
) -> None:
    arm = str(secret_folder / "arm.toml")
    for spec in (arm, arm + "/", str(secret_folder / "sub" / ".." / "arm.toml")):
        response = await owner.get("/api/robots/model", params={"robot": spec})
        assert response.status_code == 200, spec
        assert response.json()["name"] == SECRET
    # a .toml link to a text file is judged by the file it resolves to, never read
    refused = await owner.get(
        "/api/robots/model", params={"robot": str(secret_folder / "notes.toml")}
    )
    assert refused.status_code == 422
    assert SECRET not in refused.text
    nul = await owner.get("/api/robots/model", params={"robot": arm + "\x00.txt"})
    assert nul.status_code == 422
    assert nul.json()["detail"].startswith("robot: a robot file path has no control characters")
    assert "\\x00" in nul.json()["detail"]


# --- 2. host names, origins, body types, headers ---------------------------------------


@pytest.mark.parametrize(
    "host",
    ["rebind.example:8000", "rebind.example", "127.0.0.1:9999", "localhost.rebind.example:8000"],
)
async def test_foreign_host_refused_without_sharing(
    owner: httpx.AsyncClient, cell_file: Path, host: str
) -> None:
    before = cell_file.read_bytes()
    read = await owner.get("/api/cell", headers={"Host": host})
    assert read.status_code == 400
    assert read.json()["detail"].startswith(f"Host: {host!r} is not a name this server")
    etag = (await owner.get("/api/cell")).json()["etag"]
    moved = await owner.patch(
        "/api/cell/base",
        json={"position_mm": [5, 0, 0]},
        headers={"Host": host, "If-Match": etag},
    )
    assert moved.status_code == 400
    assert cell_file.read_bytes() == before


@pytest.mark.parametrize("url", ["http://localhost:8000", "http://[::1]:8000", OWNER_URL])
async def test_loopback_names_accepted(cell_file: Path, url: str) -> None:
    app = create_app(Settings(warm_up=False, cell_path=cell_file))
    transport = httpx.ASGITransport(app=app, client=("127.0.0.1", 5000))
    async with httpx.AsyncClient(transport=transport, base_url=url) as session:
        response = await session.get("/api/reviews/access")
    assert response.status_code == 200
    assert response.json()["role"] == "owner"


async def test_shared_host_name_accepted_only_when_configured(cell_file: Path, token: str) -> None:
    for host_names, status in (((), 400), (("192.0.2.7",), 401)):
        app = create_app(Settings(warm_up=False, cell_path=cell_file, host_names=host_names))
        enable_review_sharing(app, token)
        transport = httpx.ASGITransport(app=app, client=("10.0.0.5", 1234))
        async with httpx.AsyncClient(transport=transport, base_url=REMOTE_URL) as session:
            assert (await session.get("/api/health")).status_code == status


@pytest.mark.parametrize(
    "origin",
    ["http://rebind.example:8000", "null", "http://127.0.0.1:9999", "https://127.0.0.1:8000"],
)
async def test_write_from_foreign_origin_refused(
    owner: httpx.AsyncClient, cell_file: Path, origin: str
) -> None:
    before = cell_file.read_bytes()
    etag = (await owner.get("/api/cell")).json()["etag"]
    response = await owner.patch(
        "/api/cell/base",
        json={"position_mm": [5, 0, 0]},
        headers={"If-Match": etag, "Origin": origin},
    )
    assert response.status_code == 403
    assert response.json()["detail"] == (
        f"Origin: {origin!r} is not this server's own page; changes are accepted only from "
        "the dashboard itself"
    )
    assert cell_file.read_bytes() == before


async def test_write_from_own_origin_accepted(owner: httpx.AsyncClient, cell_file: Path) -> None:
    etag = (await owner.get("/api/cell")).json()["etag"]
    response = await owner.patch(
        "/api/cell/base",
        json={"position_mm": [5, 0, 0]},
        headers={"If-Match": etag, "Origin": OWNER_URL},
    )
    assert response.status_code == 200


@pytest.mark.parametrize("content_type", ["text/plain", "application/x-www-form-urlencoded", None])
async def test_non_json_body_refused(
    owner: httpx.AsyncClient, cell_file: Path, content_type: str | None
) -> None:
    before = cell_file.read_bytes()
    etag = (await owner.get("/api/cell")).json()["etag"]
    headers = {"If-Match": etag}
    request = owner.build_request(
        "PATCH", "/api/cell/base", content=b'{"position_mm": [5, 0, 0]}', headers=headers
    )
    if content_type is None:
        request.headers.pop("content-type", None)
    else:
        request.headers["content-type"] = content_type
    response = await owner.send(request)
    assert response.status_code == 415
    found = repr(content_type) if content_type else "none"
    assert response.json() == {
        "detail": f"Content-Type: request bodies must be JSON (application/json), got {found}"
    }
    assert cell_file.read_bytes() == before


@pytest.mark.parametrize("path", ["/", "/api/health", "/static/main.js", "/api/nothing"])
async def test_protective_headers(owner: httpx.AsyncClient, path: str) -> None:
    response = await owner.get(path)
    csp = response.headers["content-security-policy"]
    assert "script-src 'self';" in csp
    assert "frame-ancestors 'none'" in csp
    assert "unsafe-inline" not in csp
    assert "unsafe-eval" not in csp
    assert response.headers["x-content-type-options"] == "nosniff"
    assert response.headers["referrer-policy"] == "no-referrer"
    assert response.headers["x-frame-options"] == "DENY"


async def test_page_has_no_inline_script_or_style(owner: httpx.AsyncClient) -> None:
    page = (await owner.get("/")).text
    assert "<script>" not in page
    assert "<style" not in page
    assert " style=" not in page
    assert " on" + "click=" not in page


# --- 2. the owner's paths ---------------------------------------------------------------


async def test_reviewer_sees_file_name_not_path(
    reviewer: httpx.AsyncClient, owner: httpx.AsyncClient, cell_file: Path
) -> None:
    seen = await reviewer.get("/api/cell")
    assert seen.json()["path"] is None
    assert seen.json()["file_name"] == "press.json"
    assert str(cell_file.parent) not in seen.text
    own = (await owner.get("/api/cell")).json()
    assert own["path"] == str(cell_file)
    assert own["file_name"] == "press.json"


async def test_reviewer_error_names_file_not_folder(
    reviewer: httpx.AsyncClient, cell_file: Path
) -> None:
    cell_file.write_text("{ not json")
    response = await reviewer.get("/api/cell")
    assert response.status_code == 422
    assert response.json()["detail"].startswith("press.json: line 1, column 3: not valid JSON")
    assert str(cell_file.parent) not in response.text

"""Shared review over HTTP: who may do what, rate and size caps, comments.

The rules and messages are our own contract (posebridge.api.auth module
docstring). Client addresses are set in the ASGI scope with
``httpx.ASGITransport(client=...)``; 10.0.0.5 is a private (RFC 1918) address,
192.0.2.7 a documentation address (RFC 5737) used as the server's name.
Cookie attributes follow RFC 6265 (sec. 4.1) and the SameSite draft
(RFC 6265bis); ``Retry-After`` is RFC 9110 sec. 10.2.3.
"""

from __future__ import annotations

import hashlib
import shutil
from collections.abc import AsyncIterator, Callable
from pathlib import Path
from typing import Any

import httpx
import pytest
from fastapi import FastAPI

from posebridge.api import server
from posebridge.api.app import create_app
from posebridge.api.auth import ACCESS_COOKIE, REVIEWER_CAPS, enable_review_sharing
from posebridge.api.settings import Settings
from posebridge.resources import data_folder
from posebridge.review.access import RateLimiter, new_review_token
from posebridge.review.comments import CommentStore, comments_path_for

pytestmark = pytest.mark.anyio

OWNER_URL = "http://127.0.0.1:8000"
REMOTE_URL = "http://192.0.2.7:8000"
REMOTE_CLIENT = ("10.0.0.5", 1234)
INJECTION = "Robert'); DROP TABLE comments; --"

NO_TOKEN = (
    "this dashboard is shared for review only: open the review link with its token "
    "(/?token=...), or send Authorization: Bearer <token>"
)
BAD_TOKEN = (
    "review token not accepted; ask the owner for the current review link (a new token is "
    "made every time the server starts)"
)


def _read_only(method: str, path: str) -> str:
    return (
        f"read-only review: {method} {path} is not open to reviewers; reviewers can view the "
        "cell, run checks and add comments, changes are made by the owner on the serving machine"
    )


@pytest.fixture
def cell_file(tmp_path: Path) -> Path:
    path = tmp_path / "demo-cell.json"
    shutil.copy(data_folder("robots") / "demo-cell.json", path)
    return path


@pytest.fixture
def token() -> str:
    return new_review_token()


@pytest.fixture
def shared_app(cell_file: Path, token: str) -> FastAPI:
    # shared as `serve --share --host 192.0.2.7`
    app = create_app(Settings(warm_up=False, cell_path=cell_file, host_names=("192.0.2.7",)))
    enable_review_sharing(app, token)
    # a clock that stands still: the buckets never refill during a test, so a burst is refused
    # at its cap however slowly the machine answers (no dependence on machine speed)
    app.state.review_limits = RateLimiter(REVIEWER_CAPS, clock=lambda: 0.0)
    return app


ClientFactory = Callable[..., httpx.AsyncClient]


@pytest.fixture
async def clients() -> AsyncIterator[ClientFactory]:
    """Make clients of an app from a given address; all are closed at the end."""
    made: list[httpx.AsyncClient] = []

    def make(
        app: FastAPI,
        *,
        client: tuple[str, int] = REMOTE_CLIENT,
        base_url: str = REMOTE_URL,
        headers: dict[str, str] | None = None,
    ) -> httpx.AsyncClient:
        transport = httpx.ASGITransport(app=app, client=client)
        session = httpx.AsyncClient(transport=transport, base_url=base_url, headers=headers)
        made.append(session)
        return session

    yield make
    for session in made:
        await session.aclose()


def _bearer(token: str) -> dict[str, str]:
    return {"Authorization": f"Bearer {token}"}


def _comment(pin: dict[str, Any] | None = None, **fields: Any) -> dict[str, Any]:
    return {"pin": pin or {"kind": "cell"}, "author": "Ana", "text": "Looks fine", **fields}


def _digest(path: Path) -> tuple[str, int]:
    return hashlib.sha256(path.read_bytes()).hexdigest(), path.stat().st_mtime_ns


async def test_read_access_owner_not_shared(cell_file: Path, clients: ClientFactory) -> None:
    app = create_app(Settings(warm_up=False, cell_path=cell_file))
    owner = clients(app, client=("127.0.0.1", 5000), base_url=OWNER_URL)
    response = await owner.get("/api/reviews/access")
    assert response.status_code == 200
    answer = response.json()
    caps = answer.pop("reviewer_caps")
    assert answer == {
        "role": "owner",
        "shared": False,
        "can_edit": True,
        "comments_enabled": True,
        "cell_file": "demo-cell.json",
    }
    # our own contract: the answer carries the caps the server enforces (api/auth.py)
    assert caps == {
        kind: {"per_second": cap.per_second, "burst": cap.burst}
        for kind, cap in REVIEWER_CAPS.items()
    }


async def test_read_access_reviewer(
    shared_app: FastAPI, token: str, clients: ClientFactory
) -> None:
    reviewer = clients(shared_app, headers=_bearer(token))
    response = await reviewer.get("/api/reviews/access")
    assert response.status_code == 200
    assert response.json()["role"] == "reviewer"
    assert response.json()["shared"] is True
    assert response.json()["can_edit"] is False
    # the reviewer's page paces itself from these (static/pacing.js): the enforced values
    assert response.json()["reviewer_caps"]["heavy"] == {
        "per_second": REVIEWER_CAPS["heavy"].per_second,
        "burst": REVIEWER_CAPS["heavy"].burst,
    }


async def test_read_cell_remote_without_token(shared_app: FastAPI, clients: ClientFactory) -> None:
    response = await clients(shared_app).get("/api/cell")
    assert response.status_code == 401
    assert response.json() == {"detail": NO_TOKEN}
    assert response.headers["www-authenticate"] == "Bearer"


@pytest.mark.parametrize("path", ["/", "/static/main.js", "/vendor/plotly.min.js", "/openapi.json"])
async def test_read_anything_remote_without_token(
    shared_app: FastAPI, clients: ClientFactory, path: str
) -> None:
    response = await clients(shared_app).get(path)
    assert response.status_code == 401


async def test_read_cell_wrong_token(
    shared_app: FastAPI, token: str, clients: ClientFactory
) -> None:
    wrong = "x" + token[1:] if token[0] != "x" else "y" + token[1:]
    for headers in (_bearer(wrong), {"Cookie": f"{ACCESS_COOKIE}={wrong}"}):
        response = await clients(shared_app, headers=headers).get("/api/cell")
        assert response.status_code == 401
        assert response.json() == {"detail": BAD_TOKEN}


async def test_read_cell_wrong_token_on_loopback(
    shared_app: FastAPI, clients: ClientFactory
) -> None:
    owner_address = clients(
        shared_app, client=("127.0.0.1", 5000), base_url=OWNER_URL, headers=_bearer("y" * 43)
    )
    response = await owner_address.get("/api/cell")
    assert response.status_code == 401
    assert response.json() == {"detail": BAD_TOKEN}


async def test_read_page_with_token_sets_cookie(
    shared_app: FastAPI, token: str, clients: ClientFactory
) -> None:
    reviewer = clients(shared_app)
    response = await reviewer.get("/", params={"token": token})
    assert response.status_code == 303
    assert response.headers["location"] == "/"
    assert response.headers["cache-control"] == "no-store"
    cookie = response.headers["set-cookie"]
    assert cookie.startswith(f"{ACCESS_COOKIE}={token};")
    attributes = {part.strip().lower() for part in cookie.split(";")[1:]}
    assert {"httponly", "samesite=strict", "path=/"} <= attributes
    # the client keeps the cookie (RFC 6265) and the page and the API now answer
    page = await reviewer.get("/")
    assert page.status_code == 200
    assert "text/html" in page.headers["content-type"]
    assert (await reviewer.get("/api/cell")).status_code == 200
    assert (await reviewer.get("/static/review.js")).status_code == 200


async def test_read_page_keeps_other_query(
    shared_app: FastAPI, token: str, clients: ClientFactory
) -> None:
    response = await clients(shared_app).get("/", params={"robot": "pb-arm7", "token": token})
    assert response.status_code == 303
    assert response.headers["location"] == "/?robot=pb-arm7"


async def test_query_token_only_opens_the_page(
    shared_app: FastAPI, token: str, clients: ClientFactory
) -> None:
    response = await clients(shared_app).get("/api/cell", params={"token": token})
    assert response.status_code == 401
    assert response.json() == {"detail": NO_TOKEN}


async def test_replace_cell_reviewer_forbidden(
    shared_app: FastAPI, token: str, cell_file: Path, clients: ClientFactory
) -> None:
    before = _digest(cell_file)
    reviewer = clients(shared_app, headers=_bearer(token))
    document = (await reviewer.get("/api/cell")).json()
    cell = document["cell"]
    cell["title"] = "changed by a reviewer"
    response = await reviewer.put("/api/cell", json=cell, headers={"If-Match": document["etag"]})
    assert response.status_code == 403
    assert response.json() == {"detail": _read_only("PUT", "/api/cell")}
    assert _digest(cell_file) == before


async def test_move_target_reviewer_forbidden(
    shared_app: FastAPI, token: str, cell_file: Path, clients: ClientFactory
) -> None:
    before = _digest(cell_file)
    reviewer = clients(shared_app, headers=_bearer(token))
    etag = (await reviewer.get("/api/cell")).json()["etag"]
    response = await reviewer.patch(
        "/api/cell/targets/rack-low-1",
        json={"position_mm": [0.0, 0.0, 0.0]},
        headers={"If-Match": etag},
    )
    assert response.status_code == 403
    assert response.json() == {"detail": _read_only("PATCH", "/api/cell/targets/rack-low-1")}
    assert _digest(cell_file) == before


async def test_move_turntable_reviewer_forbidden(
    shared_app: FastAPI, token: str, cell_file: Path, clients: ClientFactory
) -> None:
    before = _digest(cell_file)
    reviewer = clients(shared_app, headers=_bearer(token))
    etag = (await reviewer.get("/api/cell")).json()["etag"]
    # refused before the route runs, whether or not the cell has that table
    response = await reviewer.patch(
        "/api/cell/turntables/table-1",
        json={"position_mm": [0.0, 0.0, 0.0]},
        headers={"If-Match": etag},
    )
    assert response.status_code == 403
    assert response.json() == {"detail": _read_only("PATCH", "/api/cell/turntables/table-1")}
    assert _digest(cell_file) == before


async def test_move_track_reviewer_forbidden(
    shared_app: FastAPI, token: str, cell_file: Path, clients: ClientFactory
) -> None:
    before = _digest(cell_file)
    reviewer = clients(shared_app, headers=_bearer(token))
    etag = (await reviewer.get("/api/cell")).json()["etag"]
    for body in ({"home_mm": 100.0}, {"origin_mm": [0.0, 500.0, 0.0], "direction": [0, 1, 0]}):
        response = await reviewer.patch("/api/cell/track", json=body, headers={"If-Match": etag})
        assert response.status_code == 403
        assert response.json() == {"detail": _read_only("PATCH", "/api/cell/track")}
    assert _digest(cell_file) == before
    # the owner reaches the route (the demo cell has no track)
    owner = clients(shared_app, client=("127.0.0.1", 5000), base_url=OWNER_URL)
    refused = await owner.patch(
        "/api/cell/track", json={"home_mm": 100.0}, headers={"If-Match": etag}
    )
    assert refused.status_code == 404
    assert refused.json() == {"detail": "track: the cell has no track"}
    assert _digest(cell_file) == before


async def test_move_pose_waypoint_reviewer_forbidden(
    shared_app: FastAPI, token: str, cell_file: Path, clients: ClientFactory
) -> None:
    before = _digest(cell_file)
    reviewer = clients(shared_app, headers=_bearer(token))
    etag = (await reviewer.get("/api/cell")).json()["etag"]
    # waypoint 3 of unload-to-conveyor is a pose waypoint in the demo file
    path = "/api/cell/paths/unload-to-conveyor/waypoints/3"
    response = await reviewer.patch(
        path,
        json={"position_mm": [700.0, -450.0, 1000.0], "rpy_deg": [180.0, 0.0, 45.0]},
        headers={"If-Match": etag},
    )
    assert response.status_code == 403
    assert response.json() == {"detail": _read_only("PATCH", path)}
    assert _digest(cell_file) == before
    # the owner may (the route exists and the waypoint is a pose)
    owner = clients(shared_app, client=("127.0.0.1", 5000), base_url=OWNER_URL)
    moved = await owner.patch(
        path,
        json={"position_mm": [700.0, -450.0, 1000.0], "rpy_deg": [180.0, 0.0, 45.0]},
        headers={"If-Match": etag},
    )
    assert moved.status_code == 200, moved.text


async def test_replace_cell_owner_allowed_when_shared(
    shared_app: FastAPI, cell_file: Path, clients: ClientFactory
) -> None:
    owner = clients(shared_app, client=("127.0.0.1", 5000), base_url=OWNER_URL)
    document = (await owner.get("/api/cell")).json()
    cell = document["cell"]
    cell["title"] = "changed by the owner"
    response = await owner.put("/api/cell", json=cell, headers={"If-Match": document["etag"]})
    assert response.status_code == 200
    assert "changed by the owner" in cell_file.read_text()


@pytest.mark.parametrize("host", ["attacker.example:8000", ""])
async def test_loopback_with_foreign_host_is_refused(
    shared_app: FastAPI, clients: ClientFactory, host: str
) -> None:
    # a page of another site whose name resolves to 127.0.0.1 (DNS rebinding) is refused
    # whatever its role would be; before, it was only not the owner (401)
    local = clients(shared_app, client=("127.0.0.1", 5000), base_url=OWNER_URL)
    response = await local.get("/api/cell", headers={"Host": host})
    assert response.status_code == 400
    assert response.json()["detail"].startswith(f"Host: {host!r} is not a name this server")


@pytest.mark.parametrize(
    "headers",
    [
        {"X-Forwarded-For": "203.0.113.9"},
        {"Forwarded": "for=203.0.113.9"},
    ],
)
async def test_loopback_through_proxy_or_foreign_name_is_not_owner(
    shared_app: FastAPI, clients: ClientFactory, headers: dict[str, str]
) -> None:
    local = clients(shared_app, client=("127.0.0.1", 5000), base_url=OWNER_URL, headers=headers)
    response = await local.get("/api/cell")
    assert response.status_code == 401
    assert response.json() == {"detail": NO_TOKEN}


@pytest.mark.parametrize(
    ("address", "base_url"),
    [
        ("::1", "http://localhost:8000"),
        ("::1", "http://[::1]:8000"),
        ("::ffff:127.0.0.1", "http://127.0.0.1:8000"),  # IPv4-mapped (RFC 4291, sec. 2.5.5.2)
    ],
)
async def test_loopback_names_are_owner(
    shared_app: FastAPI, clients: ClientFactory, address: str, base_url: str
) -> None:
    local = clients(shared_app, client=(address, 5000), base_url=base_url)
    response = await local.get("/api/reviews/access")
    assert response.status_code == 200
    assert response.json()["role"] == "owner"


async def test_compute_fk_reviewer_allowed(
    shared_app: FastAPI, token: str, clients: ClientFactory
) -> None:
    reviewer = clients(shared_app, headers=_bearer(token))
    response = await reviewer.post(
        "/api/fk", json={"robot": "pb-arm6", "joints_deg": [0, 0, 0, 0, 30, 0]}
    )
    assert response.status_code == 200


async def test_diagnose_pose_reviewer_allowed(
    shared_app: FastAPI, token: str, clients: ClientFactory
) -> None:
    reviewer = clients(shared_app, headers=_bearer(token))
    response = await reviewer.post(
        "/api/cell/diagnose/pose", json={"joints_deg": [0, 0, 0, 0, 30, 0]}
    )
    assert response.status_code == 200


async def test_path_check_reviewer_rate_capped(
    shared_app: FastAPI, token: str, clients: ClientFactory
) -> None:
    reviewer = clients(shared_app, headers=_bearer(token))
    burst = REVIEWER_CAPS["check"].burst
    for _ in range(burst):  # an unknown path answers at once, but counts as a check
        assert (await reviewer.get("/api/cell/paths/no-such-path/check")).status_code == 404
    refused = await reviewer.get("/api/cell/paths/no-such-path/check")
    assert refused.status_code == 429
    assert refused.json()["detail"].startswith("too many check requests from this address")
    assert (await reviewer.get("/api/cell")).status_code == 200  # plain reads go on


async def test_placement_job_reviewer_rate_capped(
    shared_app: FastAPI, token: str, clients: ClientFactory
) -> None:
    reviewer = clients(shared_app, headers=_bearer(token))
    burst = REVIEWER_CAPS["heavy"].burst
    for _ in range(burst):  # an invalid request starts no job, but counts
        assert (await reviewer.post("/api/placement", json={"no": "such field"})).status_code == 422
    refused = await reviewer.post("/api/placement", json={"no": "such field"})
    assert refused.status_code == 429
    assert refused.json()["detail"].startswith("too many heavy requests from this address")


async def test_reach_section_reviewer_allowed_rate_capped(
    shared_app: FastAPI, token: str, clients: ClientFactory
) -> None:
    reviewer = clients(shared_app, headers=_bearer(token))
    # a reach section changes nothing: open to reviewers as a heavy job
    started = await reviewer.post(
        "/api/maps/reach-section", json={"axis": "z", "value_mm": 700.0, "voxel_mm": 200.0}
    )
    assert started.status_code == 202, started.text
    for _ in range(REVIEWER_CAPS["heavy"].burst - 1):  # invalid requests start no job, but count
        invalid = await reviewer.post("/api/maps/reach-section", json={"no": "such field"})
        assert invalid.status_code == 422
    refused = await reviewer.post("/api/maps/reach-section", json={"no": "such field"})
    assert refused.status_code == 429
    assert refused.json()["detail"].startswith("too many heavy requests from this address")
    assert int(refused.headers["retry-after"]) >= 1  # RFC 9110 sec. 10.2.3: delay in seconds


async def test_add_comment_reviewer(
    shared_app: FastAPI, token: str, cell_file: Path, clients: ClientFactory
) -> None:
    reviewer = clients(shared_app, headers=_bearer(token))
    response = await reviewer.post(
        "/api/reviews/comments",
        json=_comment({"kind": "waypoint", "path": "load-press", "waypoint": 1}, text="Slow\nhere"),
    )
    assert response.status_code == 201
    body = response.json()
    assert body["pin"] == {"kind": "waypoint", "target": None, "path": "load-press", "waypoint": 1}
    assert body["pin_label"] == "path 'load-press' waypoint 2"
    assert body["pin_found"] is True
    assert body["text"] == "Slow\nhere"
    assert body["resolved"] is False
    owner = clients(shared_app, client=("127.0.0.1", 5000), base_url=OWNER_URL)
    listed = (await owner.get("/api/reviews/comments")).json()
    assert listed["cell_file"] == "demo-cell.json"
    assert listed["open_count"] == 1
    assert listed["comments"] == [body]
    assert comments_path_for(cell_file).exists()


async def test_resolve_comment_reviewer_forbidden_owner_allowed(
    shared_app: FastAPI, token: str, clients: ClientFactory
) -> None:
    reviewer = clients(shared_app, headers=_bearer(token))
    added = (await reviewer.post("/api/reviews/comments", json=_comment())).json()
    path = f"/api/reviews/comments/{added['id']}"
    refused = await reviewer.patch(path, json={"resolved": True})
    assert refused.status_code == 403
    assert refused.json() == {"detail": _read_only("PATCH", path)}
    owner = clients(shared_app, client=("127.0.0.1", 5000), base_url=OWNER_URL)
    resolved = await owner.patch(path, json={"resolved": True})
    assert resolved.status_code == 200
    assert resolved.json()["resolved"] is True
    assert resolved.json()["resolved_utc"].endswith("Z")
    listed = (await reviewer.get("/api/reviews/comments")).json()
    assert listed["open_count"] == 0


async def test_resolve_unknown_comment(shared_app: FastAPI, clients: ClientFactory) -> None:
    owner = clients(shared_app, client=("127.0.0.1", 5000), base_url=OWNER_URL)
    response = await owner.patch("/api/reviews/comments/99", json={"resolved": True})
    assert response.status_code == 404
    assert response.json() == {"detail": "comment_id: no comment 99"}


async def test_comments_persist_across_app_restarts(
    cell_file: Path, token: str, clients: ClientFactory
) -> None:
    first = create_app(Settings(warm_up=False, cell_path=cell_file, host_names=("192.0.2.7",)))
    enable_review_sharing(first, token)
    added = await clients(first, headers=_bearer(token)).post(
        "/api/reviews/comments", json=_comment({"kind": "target", "target": "rack-low-1"})
    )
    assert added.status_code == 201
    second = create_app(Settings(warm_up=False, cell_path=cell_file))  # a new server process
    listed = await clients(second, client=("127.0.0.1", 5000), base_url=OWNER_URL).get(
        "/api/reviews/comments"
    )
    assert listed.json()["comments"] == [added.json()]


async def test_add_comment_sql_injection_stored_verbatim(
    shared_app: FastAPI, token: str, cell_file: Path, clients: ClientFactory
) -> None:
    reviewer = clients(shared_app, headers=_bearer(token))
    text = f"{INJECTION}\n' OR '1'='1"
    response = await reviewer.post(
        "/api/reviews/comments", json=_comment(author=INJECTION, text=text)
    )
    assert response.status_code == 201
    [stored] = CommentStore(comments_path_for(cell_file)).list_comments()  # the file itself
    assert stored.author == INJECTION
    assert stored.text == text


@pytest.mark.parametrize(
    ("pin", "detail"),
    [
        (
            {"kind": "target", "target": "no-such-target"},
            "pin: no target 'no-such-target' in the cell",
        ),
        (
            {"kind": "waypoint", "path": "load-press", "waypoint": 99},
            "pin: no path 'load-press' waypoint 100 in the cell",
        ),
        (
            {"kind": "target", "path": "load-press"},
            "pin: Value error, pin: a target pin takes a target name only",
        ),
    ],
)
async def test_add_comment_bad_pin(
    shared_app: FastAPI, token: str, clients: ClientFactory, pin: dict[str, Any], detail: str
) -> None:
    reviewer = clients(shared_app, headers=_bearer(token))
    response = await reviewer.post("/api/reviews/comments", json=_comment(pin))
    assert response.status_code == 422
    assert response.json() == {"detail": detail}


async def test_add_comment_bad_author(
    shared_app: FastAPI, token: str, clients: ClientFactory
) -> None:
    reviewer = clients(shared_app, headers=_bearer(token))
    response = await reviewer.post("/api/reviews/comments", json=_comment(author="Ana\x07"))
    assert response.status_code == 422
    assert response.json()["detail"].startswith("author: expected 1 to 80 characters")


@pytest.mark.parametrize("bundled_file", [False, True])
async def test_comments_need_a_cell_file(clients: ClientFactory, bundled_file: bool) -> None:
    cell_path = data_folder("robots") / "demo-cell.json" if bundled_file else None
    app = create_app(Settings(warm_up=False, cell_path=cell_path))
    owner = clients(app, client=("127.0.0.1", 5000), base_url=OWNER_URL)
    for response in (
        await owner.get("/api/reviews/comments"),
        await owner.post("/api/reviews/comments", json=_comment()),
    ):
        assert response.status_code == 409
        assert response.json()["detail"].startswith(
            "comments: this server works on the bundled demo cell;"
        )
    assert (await owner.get("/api/reviews/access")).json()["comments_enabled"] is False
    assert not comments_path_for(data_folder("robots") / "demo-cell.json").exists()


async def test_add_comment_rate_capped(
    shared_app: FastAPI, token: str, clients: ClientFactory
) -> None:
    reviewer = clients(shared_app, headers=_bearer(token))
    burst = REVIEWER_CAPS["comment"].burst
    for _ in range(burst):
        assert (await reviewer.post("/api/reviews/comments", json=_comment())).status_code == 201
    refused = await reviewer.post("/api/reviews/comments", json=_comment())
    assert refused.status_code == 429
    assert refused.json()["detail"].startswith(
        "too many comment requests from this address for a shared review: at most 5 at once"
    )
    assert int(refused.headers["retry-after"]) >= 1
    # other kinds and other addresses have their own buckets
    assert (await reviewer.get("/api/reviews/comments")).status_code == 200
    other = clients(shared_app, client=("10.0.0.6", 1234), headers=_bearer(token))
    assert (await other.post("/api/reviews/comments", json=_comment())).status_code == 201


async def test_refused_requests_rate_capped(shared_app: FastAPI, clients: ClientFactory) -> None:
    guesser = clients(shared_app, headers=_bearer("z" * 43))
    statuses = [(await guesser.get("/api/health")).status_code for _ in range(30)]
    burst = REVIEWER_CAPS["refused"].burst
    assert statuses[:burst] == [401] * burst
    assert statuses[burst:] == [429] * (30 - burst)


async def test_owner_not_rate_capped(shared_app: FastAPI, clients: ClientFactory) -> None:
    owner = clients(shared_app, client=("127.0.0.1", 5000), base_url=OWNER_URL)
    for _ in range(REVIEWER_CAPS["comment"].burst + 3):
        assert (await owner.post("/api/reviews/comments", json=_comment())).status_code == 201


async def test_add_comment_body_too_large(
    shared_app: FastAPI, token: str, clients: ClientFactory
) -> None:
    reviewer = clients(shared_app, headers=_bearer(token))
    big = b'{"pin": {"kind": "cell"}, "author": "Ana", "text": "' + b"x" * 1_100_000 + b'"}'
    response = await reviewer.post(
        "/api/reviews/comments", content=big, headers={"Content-Type": "application/json"}
    )
    assert response.status_code == 413
    assert response.json() == {
        "detail": "request body too large: at most 1000000 bytes for the reviewer"
    }

    async def chunks() -> AsyncIterator[bytes]:  # no Content-Length: chunked transfer
        for start in range(0, len(big), 65536):
            yield big[start : start + 65536]

    streamed = await reviewer.post(
        "/api/reviews/comments", content=chunks(), headers={"Content-Type": "application/json"}
    )
    assert streamed.status_code == 413


async def test_add_comment_chunked_body_within_cap(
    shared_app: FastAPI, token: str, clients: ClientFactory
) -> None:
    reviewer = clients(shared_app, headers=_bearer(token))
    body = b'{"pin": {"kind": "cell"}, "author": "Ana", "text": "streamed"}'

    async def chunks() -> AsyncIterator[bytes]:
        yield body[:10]
        yield body[10:]

    response = await reviewer.post(
        "/api/reviews/comments", content=chunks(), headers={"Content-Type": "application/json"}
    )
    assert response.status_code == 201
    assert response.json()["text"] == "streamed"


async def test_leave_review_clears_cookie(
    shared_app: FastAPI, token: str, clients: ClientFactory
) -> None:
    reviewer = clients(shared_app)
    await reviewer.get("/", params={"token": token})
    response = await reviewer.delete("/api/reviews/session")
    assert response.status_code == 204
    assert "Max-Age=0" in response.headers["set-cookie"]
    assert (await reviewer.get("/api/cell")).status_code == 401


async def test_sharing_keeps_only_the_digest(shared_app: FastAPI, token: str) -> None:
    access = shared_app.state.review_access
    assert access.token_digest == hashlib.sha256(token.encode()).digest()
    assert token not in repr(vars(access))


def test_run_server_share_prints_review_link_once(
    monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str], cell_file: Path
) -> None:
    started: list[str | None] = []

    class NotServing:
        def __init__(self, review_token: str | None) -> None:
            self.review_token = review_token
            self.started = False
            self.should_exit = False

        def run(self, sockets: list[Any]) -> None:
            started.append(self.review_token)
            self.started = True

    monkeypatch.setattr(
        server, "_uvicorn_server", lambda settings, log_level, token=None: NotServing(token)
    )
    server.run_server(host="127.0.0.1", port=0, cell_path=cell_file, share=True)
    [token] = started
    assert token is not None
    lines = capsys.readouterr().out.splitlines()
    links = [line for line in lines if "?token=" in line]
    assert len(links) == 1
    assert links[0].strip().endswith(f"/?token={token}")
    assert sum(token in line for line in lines) == 1  # printed once, nowhere else

    server.run_server(host="127.0.0.1", port=0, cell_path=cell_file)
    assert started[-1] is None  # not shared: no token
    assert "?token=" not in capsys.readouterr().out


def test_background_server_shared_for_review(cell_file: Path, token: str) -> None:
    settings = Settings(warm_up=False, cell_path=cell_file)
    with server.background_server(settings, review_token=token) as url:
        owner = httpx.get(url + "api/reviews/access", timeout=10)
        reviewer = httpx.get(url + "api/reviews/access", headers=_bearer(token), timeout=10)
    assert owner.json()["role"] == "owner"
    assert owner.json()["shared"] is True
    assert reviewer.json()["role"] == "reviewer"

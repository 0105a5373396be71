"""Who may do what: the owner, read-only reviewers of a shared dashboard, and everyone else.

Without sharing (the default) the server listens on loopback only
(:mod:`posebridge.api.server`) and every request is the owner's. Once
:func:`enable_review_sharing` has given the app a review token (``posebridge
serve --share``), every request is one of:

* **owner** — from a loopback address, with a ``Host`` header naming this
  machine (``localhost``, 127.0.0.0/8, ``::1``), no proxy forwarding header
  and no review token: full rights, no rate caps. A request that came
  through a local proxy, or from a page of another site that resolved its
  name to 127.0.0.1, is therefore not the owner's;
* **reviewer** — carries the review token: ``Authorization: Bearer <token>``,
  the ``posebridge_review`` cookie, or ``?token=`` on the page load (answered
  with a 303 to the page without the token, setting that cookie
  ``HttpOnly; SameSite=Strict``). Also from loopback, so the owner can
  preview what reviewers see;
* anyone else — 401; a wrong token is 401 wherever it comes from.

A reviewer is read-only. Allowed: ``GET``/``HEAD``/``OPTIONS`` of anything;
the requests of :data:`REVIEWER_ACTIONS` — read-only computations that
change nothing but cost CPU (kinematics, target and path checks, pose and
log diagnosis, joint maps, reach sections and base placement jobs), each under a rate cap
stricter the costlier it is — and adding a comment; and leaving review mode. Every other request — a
cell ``PUT``/``PATCH``, resolving a comment, anything not listed — is 403
whatever the route, so a new write route is refused to reviewers until it
is listed.

Reviewers are rate-capped per client address (:data:`REVIEWER_CAPS`, 429
with ``Retry-After``), refused requests from non-owners too, so a token
cannot be guessed at speed. Request bodies are capped (413): 1 MB for
reviewers, 16 MB for the owner.
"""

from __future__ import annotations

import ipaddress
import math
import re
from collections.abc import Awaitable, Callable, MutableMapping
from typing import Annotated, Any, Final, Literal
from urllib.parse import parse_qsl, urlencode

from fastapi import Depends, FastAPI, HTTPException, Request
from starlette.datastructures import Headers
from starlette.requests import cookie_parser
from starlette.responses import JSONResponse, RedirectResponse, Response

from posebridge.api.lanes import ReviewerLane
from posebridge.review.access import RateCap, RateLimiter, ReviewAccess

__all__ = [
    "ACCESS_COOKIE",
    "MAX_BODY_BYTES_OWNER",
    "MAX_BODY_BYTES_REVIEWER",
    "REVIEWER_ACTIONS",
    "REVIEWER_CAPS",
    "OwnerOnly",
    "ReviewAccessMiddleware",
    "ReviewRoleDep",
    "Role",
    "charge_reviewer",
    "enable_review_sharing",
    "install_review_access",
]

Role = Literal["owner", "reviewer"]
Scope = MutableMapping[str, Any]
Message = MutableMapping[str, Any]
Receive = Callable[[], Awaitable[Message]]
Send = Callable[[Message], Awaitable[None]]
ASGIApp = Callable[[Scope, Receive, Send], Awaitable[None]]

ACCESS_COOKIE: Final = "posebridge_review"
"""Cookie carrying the review token after the page load."""
MAX_BODY_BYTES_REVIEWER: Final = 1_000_000
MAX_BODY_BYTES_OWNER: Final = 16_000_000

REVIEWER_CAPS: Final[dict[str, RateCap]] = {
    "read": RateCap(per_second=20.0, burst=300),
    "compute": RateCap(per_second=20.0, burst=60),
    "check": RateCap(per_second=1.0, burst=10),
    "heavy": RateCap(per_second=0.25, burst=8),
    "comment": RateCap(per_second=0.2, burst=5),
    "refused": RateCap(per_second=1.0, burst=20),
    "log_rows": RateCap(per_second=1_000.0, burst=100_000),
    "check_targets": RateCap(per_second=20.0, burst=2_000),
    "job_cells": RateCap(per_second=2_000.0, burst=200_000),
}
"""Rate caps per client address and kind of request (token bucket, see
:class:`posebridge.review.access.RateLimiter`). ``read``: GET/HEAD/OPTIONS;
``compute``: fast read-only computations (FK, IK, one pose); ``check``:
checks that take up to a second (targets, a path, a log); ``heavy``: jobs
(maps, base placement; the job manager adds its own per-client limits);
``comment``: new comments; ``refused``: 401 and 403 answers to non-owners.

Cost budgets, charged by the routes once the size of the work is known
(:func:`charge_reviewer`): ``log_rows`` (rows of diagnosed logs: 100,000 at
once, 60,000 a minute), ``check_targets`` (targets and approach poses checked:
2,000 at once, 1,200 a minute) and ``job_cells`` (joint-map cells, reach-section
cells and placement candidates of started jobs: 200,000 at once, 120,000 a
minute)."""

REVIEWER_ACTIONS: Final[dict[tuple[str, str], str]] = {
    ("POST", "/api/fk"): "compute",
    ("POST", "/api/ik"): "compute",
    ("GET", "/api/cell/check"): "check",
    ("GET", "/api/cell/paths/{name}/check"): "check",
    ("POST", "/api/cell/fk"): "compute",
    ("GET", "/api/cell/paths/{name}/sequence"): "check",
    ("GET", "/api/cell/paths/{name}/export.json"): "check",
    ("GET", "/api/cell/paths/{name}/export.csv"): "check",
    ("POST", "/api/cell/diagnose/pose"): "compute",
    ("POST", "/api/cell/diagnose/log"): "check",
    ("POST", "/api/maps/joint"): "heavy",
    ("POST", "/api/maps/reach-section"): "heavy",
    ("POST", "/api/placement"): "heavy",
    ("POST", "/api/jobs/{job_id}/cancel"): "compute",
    ("POST", "/api/reviews/comments"): "comment",
    ("DELETE", "/api/reviews/session"): "read",
}
"""Requests a reviewer may make beyond plain reads, and costly reads, by method
and route path template (``{name}`` stands for one path segment), with their
rate-cap kind. Any other GET/HEAD/OPTIONS is a ``read``; any other request
is 403."""


def _path_pattern(template: str) -> re.Pattern[str]:
    """Return a route path template as a regular expression: ``{name}`` matches one path segment."""
    parts = re.split(r"(\{[^/{}]+\})", template)
    return re.compile(
        "".join("[^/]+" if part.startswith("{") else re.escape(part) for part in parts)
    )


_REVIEWER_PATTERNS = [
    ((method, _path_pattern(template)), kind)
    for (method, template), kind in REVIEWER_ACTIONS.items()
]
_SAFE_METHODS = frozenset({"GET", "HEAD", "OPTIONS"})
_FORWARDING_HEADERS = ("forwarded", "x-forwarded-for", "x-forwarded-host", "x-real-ip")
_PAGE_PATH = "/"
_STATE_ROLE = "review_role"


def install_review_access(app: FastAPI) -> None:
    """Put the access checks in front of every request of ``app``.

    The app is not shared until :func:`enable_review_sharing`.
    """
    app.state.review_access = None
    app.state.review_limits = RateLimiter(REVIEWER_CAPS)
    app.add_middleware(ReviewAccessMiddleware, dashboard=app)


def enable_review_sharing(app: FastAPI, token: str) -> None:
    """Share ``app`` for review with ``token``; only the token's SHA-256 digest is kept.

    Raises
    ------
    ValueError
        The token is too short or too long (:meth:`ReviewAccess.from_token`).
    """
    app.state.review_access = ReviewAccess.from_token(token)


def _is_loopback_address(host: str) -> bool:
    """Whether ``host`` is a loopback IP address, IPv4-mapped IPv6 forms included."""
    try:
        address = ipaddress.ip_address(host.strip("[]"))
    except ValueError:
        return False
    if isinstance(address, ipaddress.IPv6Address) and address.ipv4_mapped is not None:
        return address.ipv4_mapped.is_loopback
    return address.is_loopback


def _host_name(host_header: str) -> str:
    """Return the host part of a ``Host`` header: ``[::1]:8000`` -> ``::1``, ``localhost:8000`` -> ``localhost``."""
    if host_header.startswith("["):
        return host_header[1:].split("]", 1)[0]
    return host_header.rsplit(":", 1)[0] if host_header.count(":") == 1 else host_header


def _error(status: int, detail: str, headers: dict[str, str] | None = None) -> Response:
    return JSONResponse(status_code=status, content={"detail": detail}, headers=headers)


def _too_many(kind: str, wait_s: float) -> Response:
    cap = REVIEWER_CAPS[kind]
    return _error(
        429,
        f"too many {kind} requests from this address for a shared review: at most "
        f"{cap.burst} at once and {cap.per_second:g} per second; retry in {wait_s:.1f} s",
        {"Retry-After": str(max(1, math.ceil(wait_s)))},
    )


class _Presented:
    """The review token a request carries, and where."""

    def __init__(self, scope: Scope, headers: Headers) -> None:
        self.bearer: str | None = None
        authorization = headers.get("authorization", "")
        scheme, _, value = authorization.partition(" ")
        if scheme.lower() == "bearer" and value.strip():
            self.bearer = value.strip()
        self.cookie: str | None = cookie_parser(headers.get("cookie", "")).get(ACCESS_COOKIE)
        self.query: str | None = None
        self.other_query: list[tuple[str, str]] = []
        if scope["path"] == _PAGE_PATH and scope["method"] == "GET":
            for key, item in parse_qsl(scope.get("query_string", b"").decode("latin-1")):
                if key == "token" and self.query is None:
                    self.query = item
                elif key != "token":
                    self.other_query.append((key, item))

    @property
    def token(self) -> str | None:
        return self.bearer or self.cookie or self.query

    @property
    def any(self) -> bool:
        return self.token is not None


class ReviewAccessMiddleware:
    """ASGI middleware applying the rules of the module docstring.

    Sets ``request.state.review_role`` (``"owner"`` or ``"reviewer"``) for
    the routes (:data:`ReviewRoleDep`).

    Parameters
    ----------
    app : ASGI app
        The next application in the stack.
    dashboard : FastAPI, keyword-only
        The posebridge app: its ``state.review_access`` (None: not shared),
        ``state.review_limits`` and its routes, to name the route of a request.
    """

    def __init__(self, app: ASGIApp, *, dashboard: FastAPI) -> None:
        self.app = app
        self.dashboard = dashboard

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        """Check the request's access, then pass it on with its role or answer the refusal."""
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return
        access: ReviewAccess | None = self.dashboard.state.review_access
        headers = Headers(scope=scope)
        if access is None:
            await self._forward(scope, receive, send, "owner", headers, MAX_BODY_BYTES_OWNER)
            return
        limits: RateLimiter = self.dashboard.state.review_limits
        client = scope.get("client")
        address = client[0] if client else "unknown"
        presented = _Presented(scope, headers)
        if not presented.any and self._is_owner(address, headers):
            await self._forward(scope, receive, send, "owner", headers, MAX_BODY_BYTES_OWNER)
            return
        if not access.accepts(presented.token):
            await self._refuse_unauthenticated(scope, receive, send, limits, address, presented)
            return
        if presented.query is not None:
            await self._page_with_cookie(scope, receive, send, presented)
            return
        kind = self._reviewer_kind(scope)
        if kind is None:
            await self._refused(
                scope,
                receive,
                send,
                limits,
                address,
                _error(
                    403,
                    f"read-only review: {scope['method']} {scope['path']} is not open to "
                    "reviewers; reviewers can view the cell, run checks and add comments, "
                    "changes are made by the owner on the serving machine",
                ),
            )
            return
        wait = limits.take(address, kind)
        if wait > 0.0:
            await _too_many(kind, wait)(scope, receive, send)
            return
        await self._forward(scope, receive, send, "reviewer", headers, MAX_BODY_BYTES_REVIEWER)

    @staticmethod
    def _is_owner(address: str, headers: Headers) -> bool:
        if not _is_loopback_address(address):
            return False
        if any(name in headers for name in _FORWARDING_HEADERS):
            return False
        host = _host_name(headers.get("host", ""))
        return host.lower() == "localhost" or _is_loopback_address(host)

    @staticmethod
    def _reviewer_kind(scope: Scope) -> str | None:
        """Rate-cap kind of a reviewer's request, None when reviewers may not make it."""
        method = scope["method"]
        for (allowed_method, pattern), kind in _REVIEWER_PATTERNS:
            if method == allowed_method and pattern.fullmatch(scope["path"]):
                return kind
        return "read" if method in _SAFE_METHODS else None

    async def _refused(
        self,
        scope: Scope,
        receive: Receive,
        send: Send,
        limits: RateLimiter,
        address: str,
        response: Response,
    ) -> None:
        wait = limits.take(address, "refused")
        await (response if wait == 0.0 else _too_many("refused", wait))(scope, receive, send)

    async def _refuse_unauthenticated(
        self,
        scope: Scope,
        receive: Receive,
        send: Send,
        limits: RateLimiter,
        address: str,
        presented: _Presented,
    ) -> None:
        if presented.any:
            detail = (
                "review token not accepted; ask the owner for the current review link "
                "(a new token is made every time the server starts)"
            )
        else:
            detail = (
                "this dashboard is shared for review only: open the review link with its "
                "token (/?token=...), or send Authorization: Bearer <token>"
            )
        response = _error(401, detail, {"WWW-Authenticate": "Bearer"})
        if presented.cookie is not None:
            response.delete_cookie(ACCESS_COOKIE, path="/", httponly=True, samesite="strict")
        await self._refused(scope, receive, send, limits, address, response)

    @staticmethod
    async def _page_with_cookie(
        scope: Scope, receive: Receive, send: Send, presented: _Presented
    ) -> None:
        """Answer a page load with a valid ``?token=``: set the cookie, reload without the token."""
        assert presented.query is not None
        location = _PAGE_PATH + (
            "?" + urlencode(presented.other_query) if presented.other_query else ""
        )
        response = RedirectResponse(
            location, status_code=303, headers={"Cache-Control": "no-store"}
        )
        response.set_cookie(
            ACCESS_COOKIE, presented.query, path="/", httponly=True, samesite="strict"
        )
        await response(scope, receive, send)

    async def _forward(
        self,
        scope: Scope,
        receive: Receive,
        send: Send,
        role: Role,
        headers: Headers,
        max_body: int,
    ) -> None:
        """Pass the request on with its role, after the body size check.

        The owner's requests are counted as in progress for the reviewer lane
        (:mod:`posebridge.api.lanes`).
        """
        scope.setdefault("state", {})[_STATE_ROLE] = role
        if role == "owner":
            lane: ReviewerLane = self.dashboard.state.reviewer_lane
            lane.owner_started()
            try:
                await self._pass_on(scope, receive, send, role, headers, max_body)
            finally:
                lane.owner_finished()
            return
        await self._pass_on(scope, receive, send, role, headers, max_body)

    async def _pass_on(
        self,
        scope: Scope,
        receive: Receive,
        send: Send,
        role: Role,
        headers: Headers,
        max_body: int,
    ) -> None:
        too_large = _error(
            413,
            f"request body too large: at most {max_body} bytes for the {role}",
        )
        length = headers.get("content-length")
        if length is not None:
            if not length.isdigit() or int(length) > max_body:
                await too_large(scope, receive, send)
                return
            await self.app(scope, receive, send)
            return
        if "transfer-encoding" not in headers:
            await self.app(scope, receive, send)
            return
        chunks: list[bytes] = []
        size = 0
        while True:
            message = await receive()
            if message["type"] != "http.request":
                return
            chunk = message.get("body", b"")
            size += len(chunk)
            if size > max_body:
                await too_large(scope, receive, send)
                return
            chunks.append(chunk)
            if not message.get("more_body", False):
                break
        body = b"".join(chunks)
        replayed = False

        async def replay() -> Message:
            nonlocal replayed
            if not replayed:
                replayed = True
                return {"type": "http.request", "body": body, "more_body": False}
            return await receive()

        await self.app(scope, replay, send)


def charge_reviewer(request: Request, kind: str, cost: float) -> None:
    """Charge a reviewer's request ``cost`` units of the budget ``kind``.

    Budgets are rows, targets and cells (:data:`REVIEWER_CAPS`); the owner is never charged.

    Raises
    ------
    HTTPException
        429 with ``Retry-After`` when the budget of the asker's address is spent.
    """
    if getattr(request.state, _STATE_ROLE, "reviewer") == "owner":
        return
    limits: RateLimiter = request.app.state.review_limits
    address = request.client.host if request.client is not None else "unknown"
    wait = limits.take(address, kind, cost)
    if wait > 0.0:
        cap = REVIEWER_CAPS[kind]
        unit = kind.split("_")[-1]
        raise HTTPException(
            status_code=429,
            detail=f"too much work from this address for a shared review: {cost:g} {unit} "
            f"asked, at most {cap.burst} {unit} at once and {60 * cap.per_second:g} a minute; "
            f"retry in {wait:.1f} s",
            headers={"Retry-After": str(max(1, math.ceil(wait)))},
        )


def _review_role(request: Request) -> Role:
    role: Role = getattr(request.state, _STATE_ROLE, "reviewer")
    return role


ReviewRoleDep = Annotated[Role, Depends(_review_role)]
"""The role of the request: ``"owner"`` or ``"reviewer"`` (read-only)."""


def _owner_only(role: ReviewRoleDep) -> None:
    if role != "owner":
        raise HTTPException(
            status_code=403,
            detail="read-only review: only the owner, on the serving machine, can do this",
        )


OwnerOnly = Depends(_owner_only)
"""Route dependency refusing reviewers with 403 (the middleware already does; this
keeps a route safe if it is ever listed in :data:`REVIEWER_ACTIONS` by mistake)."""

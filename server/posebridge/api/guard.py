"""What every request must look like, and what every answer carries.

Requests are checked before anyone's rights are considered.

A web page of another site must not be able to use the dashboard with the
owner's rights, even though the owner's browser can reach the loopback
address. The classic ways in are DNS rebinding (the other site's name
resolves to 127.0.0.1, so its scripts are "same origin" with it and talk to
this server under their own ``Host`` name) and cross-site requests that need
no permission (a form or a simple ``fetch`` POST). Every request is therefore
checked, shared or not, in this order:

1. **Host** (400): the ``Host`` header must name this server as it was
   started — ``127.0.0.1``, ``localhost`` or ``[::1]``, or a name in
   :attr:`~posebridge.api.settings.Settings.host_names` (the ``--host`` value)
   — with the port the connection arrived on. A server shared on every
   interface (``0.0.0.0``) also answers to IP addresses, which a page of
   another site cannot rebind.
2. **Origin** (403): a request that may change something (any method but
   GET, HEAD, OPTIONS) with an ``Origin`` header must come from this server's
   own origin (``http://<Host>``); ``Origin: null`` is refused too. Requests
   without ``Origin`` (the command line, scripts) pass.
3. **JSON bodies only** (415): such a request with a body must say
   ``Content-Type: application/json`` (or ``application/<x>+json``), so no
   form or plain-text post of another page is ever read as JSON.

Every answer, the page's and the API's, carries protective headers
(:data:`PROTECTIVE_HEADERS`): a content security policy that allows only this
server's own scripts, styles, images and connections and no framing
(``frame-ancestors 'none'``; :func:`content_security_policy`), ``X-Content-Type-Options:
nosniff``,
``Referrer-Policy: no-referrer`` (review links carry a token), and
``Cache-Control: no-store`` on API answers. These follow the OWASP HTTP
Headers Cheat Sheet (common practice, no source).
"""

from __future__ import annotations

import ipaddress
import re
from collections.abc import Awaitable, Callable, MutableMapping
from typing import Any, Final

from fastapi import FastAPI
from starlette.datastructures import Headers
from starlette.responses import JSONResponse

from posebridge.messages import printable

__all__ = [
    "LOOPBACK_NAMES",
    "PROTECTIVE_HEADERS",
    "RequestGuardMiddleware",
    "content_security_policy",
    "parse_host",
]

Scope = MutableMapping[str, Any]
Message = MutableMapping[str, Any]
Receive = Callable[[], Awaitable[Message]]
Send = Callable[[Message], Awaitable[None]]
ASGIApp = Callable[[Scope, Receive, Send], Awaitable[None]]

LOOPBACK_NAMES: Final = frozenset({"127.0.0.1", "localhost", "::1"})
"""Host names every server answers to (it always listens on loopback)."""


def content_security_policy(style_attribute_hashes: tuple[str, ...] = ()) -> str:
    """Return the content security policy: only this server's own resources.

    No inline scripts, no eval, no inline styles but the style attributes of the given hashes
    (``'sha256-...'``, plotly.js's one: :mod:`posebridge.api.plotly_assets`), no framing, no form
    posts.
    """
    attributes = " ".join(("'unsafe-hashes'", *style_attribute_hashes))
    return (
        "default-src 'none'; script-src 'self'; style-src 'self'; style-src-elem 'self'; "
        f"style-src-attr {attributes if style_attribute_hashes else chr(39) + 'none' + chr(39)}; "
        "img-src 'self' data: blob:; font-src 'self'; connect-src 'self'; "
        "worker-src 'self' blob:; manifest-src 'self'; base-uri 'none'; form-action 'none'; "
        "frame-ancestors 'none'"
    )


PROTECTIVE_HEADERS: Final[tuple[tuple[str, str], ...]] = (
    ("x-content-type-options", "nosniff"),
    ("referrer-policy", "no-referrer"),
    ("x-frame-options", "DENY"),
    ("cross-origin-opener-policy", "same-origin"),
    ("cross-origin-resource-policy", "same-origin"),
)
"""Headers added to every answer besides the content security policy (module docstring)."""

_SAFE_METHODS = frozenset({"GET", "HEAD", "OPTIONS"})
_DEFAULT_PORTS = {"http": 80, "https": 443}
_HOST = re.compile(
    r"(?:\[(?P<v6>[0-9A-Fa-f:.]+)\]|(?P<name>[A-Za-z0-9._-]+))(?::(?P<port>[0-9]{1,5}))?"
)
_JSON_TYPE = re.compile(r"application/(?:[a-z0-9.+-]+\+)?json", re.IGNORECASE)


def parse_host(value: str, scheme: str = "http") -> tuple[str, int] | None:
    """Return the name and port of a ``Host`` value, None if malformed.

    The name is in lower case, without brackets or trailing dot (RFC 9110 sec. 7.2: ``host [":"
    port]``, default port by scheme).
    """
    match = _HOST.fullmatch(value.strip())
    if match is None:
        return None
    name = (match["v6"] or match["name"]).lower().removesuffix(".")
    port = int(match["port"]) if match["port"] else _DEFAULT_PORTS.get(scheme, 80)
    return (name, port) if name and port <= 65535 else None


def _is_ip_address(name: str) -> bool:
    try:
        ipaddress.ip_address(name)
    except ValueError:
        return False
    return True


def _json(status: int, detail: str) -> JSONResponse:
    return JSONResponse(status_code=status, content={"detail": detail})


class RequestGuardMiddleware:
    """ASGI middleware applying the checks and headers of the module docstring.

    Parameters
    ----------
    app : ASGI app
        The next application in the stack.
    dashboard : FastAPI, keyword-only
        The posebridge app: its ``state.settings`` name the accepted hosts.
    """

    def __init__(self, app: ASGIApp, *, dashboard: FastAPI) -> None:
        self.app = app
        self.dashboard = dashboard

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        """Refuse a request failing the checks, else pass it on; every answer gets the headers."""
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return
        send = _with_protective_headers(
            send,
            self.dashboard.state.content_security_policy,
            api=scope["path"].startswith("/api/"),
        )
        headers = Headers(scope=scope)
        refusal = self._refusal(scope, headers)
        if refusal is not None:
            await refusal(scope, receive, send)
            return
        await self.app(scope, receive, send)

    def _accepted(self, name: str) -> bool:
        settings = self.dashboard.state.settings
        if name in LOOPBACK_NAMES or name in {h.lower().strip("[]") for h in settings.host_names}:
            return True
        return bool(settings.ip_hosts) and _is_ip_address(name)

    def _refusal(self, scope: Scope, headers: Headers) -> JSONResponse | None:
        scheme = scope.get("scheme", "http")
        host_value = headers.get("host", "")
        host = parse_host(host_value, scheme)
        server = scope.get("server")
        port = None
        if server is not None:
            port = server[1] if server[1] is not None else _DEFAULT_PORTS.get(scheme, 80)
        if host is None or not self._accepted(host[0]) or (port is not None and host[1] != port):
            shown = f"port {port}" if port is not None else "its port"
            return _json(
                400,
                f"Host: {printable(host_value)!r} is not a name this server was started for; "
                f"open it as http://127.0.0.1 with {shown} (posebridge answers only to its own "
                "names, so that pages of other sites cannot reach it)",
            )
        if scope["method"] in _SAFE_METHODS:
            return None
        origin = headers.get("origin")
        if origin is not None:
            scheme_part, _, rest = origin.partition("://")
            own = parse_host(rest, scheme_part.lower()) if scheme_part.lower() == scheme else None
            if own != host:
                return _json(
                    403,
                    f"Origin: {printable(origin)!r} is not this server's own page; changes are "
                    "accepted only from the dashboard itself",
                )
        has_body = "transfer-encoding" in headers or headers.get("content-length", "0") not in (
            "0",
            "",
        )
        content_type = headers.get("content-type", "")
        if has_body and not _JSON_TYPE.fullmatch(content_type.split(";", 1)[0].strip()):
            found = repr(printable(content_type)) if content_type else "none"
            return _json(
                415,
                f"Content-Type: request bodies must be JSON (application/json), got {found}",
            )
        return None


def _with_protective_headers(send: Send, policy: str, *, api: bool) -> Send:
    """Wrap ``send`` to add the protective headers to the response start.

    Adds the content security ``policy`` and :data:`PROTECTIVE_HEADERS` (and ``no-store`` for API
    answers), keeping any the app set itself.
    """

    async def guarded(message: Message) -> None:
        if message["type"] == "http.response.start":
            headers = list(message.get("headers", []))
            present = {name.lower() for name, _ in headers}
            extra = [
                ("content-security-policy", policy),
                *PROTECTIVE_HEADERS,
                *((("cache-control", "no-store"),) if api else ()),
            ]
            for name, value in extra:
                if name.encode() not in present:
                    headers.append((name.encode(), value.encode()))
            message = {**message, "headers": headers}
        await send(message)

    return guarded

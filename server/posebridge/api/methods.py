"""Which methods an API path takes: ``OPTIONS`` and 405 answers name all of them.

The router matches one route per method and path, so on its own a 405 for
``DELETE /api/cell`` would name only the first route's method (``Allow: GET``)
although the path also takes ``PUT``. This middleware answers ``OPTIONS`` of an
API path with 204 and ``Allow`` listing every method its routes take, and any
other method the path does not take with 405 and the same ``Allow``
(RFC 9110 sec. 9.3.7 and 15.5.6).
"""

from __future__ import annotations

import re
from collections.abc import Awaitable, Callable, MutableMapping
from typing import Any

from fastapi import FastAPI
from starlette.responses import JSONResponse, Response
from starlette.routing import compile_path

__all__ = ["MethodsMiddleware"]

Scope = MutableMapping[str, Any]
Message = MutableMapping[str, Any]
Receive = Callable[[], Awaitable[Message]]
Send = Callable[[Message], Awaitable[None]]
ASGIApp = Callable[[Scope, Receive, Send], Awaitable[None]]


class MethodsMiddleware:
    """ASGI middleware applying the module docstring to paths under ``/api/``.

    Parameters
    ----------
    app : ASGI app
    dashboard : FastAPI, keyword-only
        The posebridge app, whose OpenAPI document gives the methods of each path.
    """

    def __init__(self, app: ASGIApp, *, dashboard: FastAPI) -> None:
        self.app = app
        self.dashboard = dashboard
        self._table: list[tuple[re.Pattern[str], list[str]]] | None = None

    def allowed(self, path: str) -> list[str]:
        """Methods the API operations of ``path`` take, as the OpenAPI document lists them."""
        if self._table is None:
            document = self.dashboard.openapi()
            self._table = [
                (compile_path(template)[0], sorted(method.upper() for method in operations))
                for template, operations in document["paths"].items()
            ]
        return next((methods for regex, methods in self._table if regex.fullmatch(path)), [])

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        """Answer an API request whose method the path does not allow, else pass it on."""
        if scope["type"] != "http" or not scope["path"].startswith("/api/"):
            await self.app(scope, receive, send)
            return
        methods = self.allowed(scope["path"])
        method = scope["method"]
        if not methods or method in methods or (method == "HEAD" and "GET" in methods):
            await self.app(scope, receive, send)
            return
        allow = {"Allow": ", ".join(methods)}
        response: Response
        if method == "OPTIONS":
            response = Response(status_code=204, headers=allow)
        else:
            response = JSONResponse(
                status_code=405,
                content={
                    "detail": f"method {method} not allowed on {scope['path']}; it takes "
                    f"{', '.join(methods)}"
                },
                headers=allow,
            )
        await response(scope, receive, send)

"""JSON request bodies read the way cell files are: a repeated key is refused.

Python's :func:`json.loads` keeps the last of two equal keys, so ``{"title":
"a", "title": "b"}`` would be saved as ``"b"`` over HTTP while the same text
in a cell file is refused. :class:`StrictJsonRoute` makes every route read
its body with :func:`posebridge.cell.files.refuse_duplicate_keys` and answer
422 naming the key.
"""

from __future__ import annotations

import json
from collections.abc import Callable, Coroutine
from typing import Any

from fastapi import HTTPException, Request, Response
from fastapi.routing import APIRoute

from posebridge.cell.files import DuplicateJsonKeyError, refuse_duplicate_keys

__all__ = ["StrictJsonRequest", "StrictJsonRoute"]


class StrictJsonRequest(Request):
    """A request whose :meth:`json` refuses repeated keys (422)."""

    async def json(self) -> Any:
        """Return the body parsed as JSON, refusing repeated keys (read once, then kept)."""
        if not hasattr(self, "_json"):
            body = await self.body()
            try:
                self._json = json.loads(body, object_pairs_hook=refuse_duplicate_keys)
            except DuplicateJsonKeyError as error:
                raise HTTPException(
                    status_code=422, detail=f"request body: not valid JSON: {error}"
                ) from error
            except UnicodeDecodeError as error:  # FastAPI would answer 400 for this alone
                raise HTTPException(
                    status_code=422,
                    detail=f"request body: not UTF-8 JSON ({error.reason} at byte {error.start})",
                ) from error
        return self._json


class StrictJsonRoute(APIRoute):
    """An API route that reads its body as :class:`StrictJsonRequest`."""

    def get_route_handler(self) -> Callable[[Request], Coroutine[Any, Any, Response]]:
        """Return the route's handler, given the request as a :class:`StrictJsonRequest`."""
        handler = super().get_route_handler()

        async def strict_handler(request: Request) -> Response:
            return await handler(StrictJsonRequest(request.scope, request.receive))

        return strict_handler

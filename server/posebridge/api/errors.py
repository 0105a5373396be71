"""Exception handlers: every error becomes JSON ``{"detail": "<message>"}``.

Request validation errors are flattened into one line per problem,
``<field path>: <message>``, joined by ``"; "``, so the page's status line and
the command line can show them as they are.
"""

from __future__ import annotations

import os
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

from fastapi import FastAPI, Request
from fastapi.exceptions import RequestValidationError
from fastapi.responses import JSONResponse
from starlette.exceptions import HTTPException as StarletteHTTPException

from posebridge.api.robot_cache import RobotPathNotAllowedError
from posebridge.errors import InputError
from posebridge.messages import printable

__all__ = ["install_error_handlers", "public_detail", "validation_message"]


def _field_path(location: Sequence[int | str]) -> str:
    parts = list(location)
    if parts and parts[0] in ("body", "query", "path"):
        parts = parts[1:]
    text = ""
    for part in parts:
        if isinstance(part, int):
            text += f"[{part}]"
        else:
            text += f".{part}" if text else str(part)
    return text or "request body"


def validation_message(errors: Sequence[dict[str, Any]]) -> str:
    """One line per pydantic error: ``<field path>: <message>``, joined by ``"; "``."""
    return "; ".join(f"{_field_path(error['loc'])}: {error['msg']}" for error in errors)


def _owner_folders(request: Request) -> list[str]:
    """Return the folders of the serving machine that a reviewer must not learn.

    The cell file's folder (as given and resolved) and the home folder, longest first.
    """
    folders = {str(Path.home())}
    cell_path = request.app.state.settings.cell_path
    if cell_path is not None:
        folders.add(str(Path(cell_path).absolute().parent))
        folders.add(str(Path(cell_path).resolve().parent))
    return sorted((f for f in folders if f not in ("", "/")), key=len, reverse=True)


def public_detail(request: Request, detail: str) -> str:
    """Return an error message as the asker may see it.

    Control characters escaped (:func:`posebridge.messages.printable`) and, for a reviewer, the
    owner's folders left out of file paths (``/home/ana/cells/press.json`` -> ``press.json``).
    """
    if getattr(request.state, "review_role", "reviewer") != "owner":
        for folder in _owner_folders(request):
            detail = detail.replace(folder + os.sep, "").replace(folder, "(folder)")
    return printable(detail)


def _json_error(
    request: Request, status: int, detail: str, headers: Mapping[str, str] | None = None
) -> JSONResponse:
    return JSONResponse(
        status_code=status,
        content={"detail": public_detail(request, detail)},
        headers=None if headers is None else dict(headers),
    )


_IF_MATCH_MISSING = (
    "If-Match: required; send the etag of the cell version you edited (from GET /api/cell)"
)


async def _on_validation(request: Request, error: Exception) -> JSONResponse:
    assert isinstance(error, RequestValidationError)
    errors = error.errors()
    if any(e["type"] == "missing" and tuple(e["loc"]) == ("header", "if-match") for e in errors):
        # a change without the version it was made from: 428 Precondition Required (RFC 6585)
        return _json_error(request, 428, _IF_MATCH_MISSING)
    return _json_error(request, 422, validation_message(errors))


async def _on_http(request: Request, error: Exception) -> JSONResponse:
    assert isinstance(error, StarletteHTTPException)
    return _json_error(request, error.status_code, str(error.detail), error.headers)


async def _on_input(request: Request, error: Exception) -> JSONResponse:
    assert isinstance(error, InputError)
    return _json_error(request, error.http_status, error.detail)


async def _on_not_allowed(request: Request, error: Exception) -> JSONResponse:
    return _json_error(request, 403, str(error))


async def _on_unexpected(request: Request, error: Exception) -> JSONResponse:
    return _json_error(request, 500, f"internal error ({type(error).__name__}); see the server log")


def install_error_handlers(app: FastAPI) -> None:
    """Register the JSON error handlers on ``app``."""
    app.add_exception_handler(RequestValidationError, _on_validation)
    app.add_exception_handler(StarletteHTTPException, _on_http)
    app.add_exception_handler(InputError, _on_input)
    app.add_exception_handler(RobotPathNotAllowedError, _on_not_allowed)
    app.add_exception_handler(Exception, _on_unexpected)

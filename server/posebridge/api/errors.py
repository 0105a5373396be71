"""Exception handlers: every error becomes JSON ``{"detail": "<message>"}``.

Request validation errors are flattened into one line per problem,
``<field path>: <message>``, joined by ``"; "``, so the page's status line and
the command line can show them as they are.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

from fastapi import FastAPI, Request
from fastapi.exceptions import RequestValidationError
from fastapi.responses import JSONResponse
from starlette.exceptions import HTTPException as StarletteHTTPException

from posebridge.api.robot_cache import RobotPathNotAllowedError
from posebridge.cell.joint_log import JointLogError
from posebridge.cell.model import CellFileError
from posebridge.kinematics.fk import KinematicsInputError
from posebridge.planning.errors import PlanningInputError
from posebridge.robot.errors import RobotDescriptionError
from posebridge.transforms import TransformError

__all__ = ["install_error_handlers", "validation_message"]


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


def _json_error(status: int, detail: str) -> JSONResponse:
    return JSONResponse(status_code=status, content={"detail": detail})


async def _on_validation(_: Request, error: Exception) -> JSONResponse:
    assert isinstance(error, RequestValidationError)
    return _json_error(422, validation_message(error.errors()))


async def _on_http(_: Request, error: Exception) -> JSONResponse:
    assert isinstance(error, StarletteHTTPException)
    return JSONResponse(
        status_code=error.status_code,
        content={"detail": str(error.detail)},
        headers=error.headers,
    )


async def _on_bad_input(_: Request, error: Exception) -> JSONResponse:
    return _json_error(422, str(error))


async def _on_cell_file(_: Request, error: Exception) -> JSONResponse:
    assert isinstance(error, CellFileError)
    prefix = f"{error.source}: " if error.source else ""
    return _json_error(422, prefix + "; ".join(error.problems))


async def _on_not_allowed(_: Request, error: Exception) -> JSONResponse:
    return _json_error(403, str(error))


async def _on_unexpected(_: Request, error: Exception) -> JSONResponse:
    return _json_error(500, f"internal error ({type(error).__name__}); see the server log")


def install_error_handlers(app: FastAPI) -> None:
    """Register the JSON error handlers on ``app``."""
    app.add_exception_handler(RequestValidationError, _on_validation)
    app.add_exception_handler(StarletteHTTPException, _on_http)
    for bad_input in (
        RobotDescriptionError,
        KinematicsInputError,
        TransformError,
        JointLogError,
        PlanningInputError,
    ):
        app.add_exception_handler(bad_input, _on_bad_input)
    app.add_exception_handler(CellFileError, _on_cell_file)
    app.add_exception_handler(RobotPathNotAllowedError, _on_not_allowed)
    app.add_exception_handler(Exception, _on_unexpected)

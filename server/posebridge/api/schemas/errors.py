"""The one error body every failing API call returns."""

from __future__ import annotations

from typing import Any

from pydantic import BaseModel, ConfigDict

__all__ = ["ErrorMessage", "error_responses"]


class ErrorMessage(BaseModel):
    """Body of every 4xx/5xx answer."""

    model_config = ConfigDict(extra="forbid")

    detail: str


_DESCRIPTIONS = {
    400: "Not a request for this server (its Host is not a name the server was started for)",
    403: "Not allowed on this server",
    404: "Not found",
    409: "Conflicts with the state of the server's files: the message names the file",
    412: "The cell was changed elsewhere since the If-Match version was read; nothing changed",
    413: "Request too large: the message names the limit",
    422: "Invalid request: the message names the field and what was expected",
    428: "If-Match header required",
    429: "Too many requests or running jobs from this client: try again shortly",
    415: "Request bodies must be JSON (Content-Type: application/json)",
    500: "Internal error",
    503: "The server cannot write its files now (read-only storage): the message names the file",
    507: "No space left to save: the message names the file; nothing was written",
}


def error_responses(*statuses: int) -> dict[int | str, dict[str, Any]]:
    """OpenAPI ``responses`` entries for the given error statuses."""
    return {
        status: {"model": ErrorMessage, "description": _DESCRIPTIONS[status]} for status in statuses
    }

"""Review with a client: who is asking, and comments pinned to the cell, a target or a waypoint."""

from __future__ import annotations

from typing import Any, Literal

from pydantic import BaseModel, ConfigDict, Field, model_validator

from posebridge.api.schemas.errors import ErrorMessage
from posebridge.api.schemas.kinematics import WholeNumber
from posebridge.cell.model import MAX_NAME_CHARS, MAX_WAYPOINTS, Cell
from posebridge.review.comments import (
    MAX_AUTHOR_CHARS,
    MAX_TEXT_CHARS,
    Comment,
    Pin,
    PinKind,
)

__all__ = [
    "CommentCreateRequest",
    "CommentList",
    "CommentPin",
    "CommentResolveRequest",
    "CommentResult",
    "ReviewAccessResult",
    "ReviewerRateCap",
    "comment_result",
    "pin_found",
    "review_error_responses",
]

_REVIEW_ERRORS = {
    401: "A shared dashboard needs the review token (link, cookie or Bearer header)",
    403: "Read-only review: reviewers cannot do this",
    404: "Not found",
    409: "Comments need a cell file, or the cell has the most comments kept",
    413: "Request body too large: the message names the limit",
    422: "Invalid request: the message names the field and what was expected",
    429: "Too many requests from this address: the message says when to retry",
    503: "The comment file cannot be read or written (read-only storage, not a comment file)",
    507: "No space left to store the comment",
}


def review_error_responses(*statuses: int) -> dict[int | str, dict[str, Any]]:
    """OpenAPI ``responses`` entries for the review routes' error statuses."""
    return {
        status: {"model": ErrorMessage, "description": _REVIEW_ERRORS[status]}
        for status in statuses
    }


class ReviewerRateCap(BaseModel):
    """A token-bucket cap on a reviewer's requests of one kind: ``burst`` at once, then ``per_second``."""

    model_config = ConfigDict(extra="forbid")

    per_second: float = Field(description="Sustained requests (or cost units) per second.")
    burst: int = Field(description="Requests (or cost units) allowed back to back.")


class ReviewAccessResult(BaseModel):
    """Who is asking: the owner (full rights) or a read-only reviewer of a shared dashboard."""

    model_config = ConfigDict(extra="forbid")

    role: Literal["owner", "reviewer"]
    shared: bool = Field(description="The server is shared for review (posebridge serve --share).")
    can_edit: bool = Field(description="The cell may be changed by this client.")
    comments_enabled: bool = Field(
        description="Comments can be stored: the server works on a cell file of the user's "
        "own (not the bundled demo cell)."
    )
    cell_file: str | None = Field(description="File name of the cell, null for the in-memory demo.")
    reviewer_caps: dict[str, ReviewerRateCap] = Field(
        description="The server's rate caps on a reviewer's requests per kind (read, compute, "
        "check, heavy, comment, refused) and its cost budgets (log_rows, check_targets, "
        "job_cells), per client address; a reviewer's page paces itself below them. The owner "
        "is never capped.",
    )


class CommentPin(BaseModel):
    """Where a comment is pinned: the whole cell, a target by name, or a waypoint of a path."""

    model_config = ConfigDict(extra="forbid")

    kind: PinKind = Field(description="cell, target or waypoint.")
    target: str | None = Field(
        default=None,
        min_length=1,
        max_length=MAX_NAME_CHARS,
        description="Target name (kind target only).",
    )
    path: str | None = Field(
        default=None,
        min_length=1,
        max_length=MAX_NAME_CHARS,
        description="Path name (kind waypoint only).",
    )
    waypoint: WholeNumber | None = Field(
        default=None,
        ge=0,
        lt=MAX_WAYPOINTS,
        description="0-based waypoint index in the path (kind waypoint only).",
    )

    @model_validator(mode="after")
    def _fields_match_kind(self) -> CommentPin:
        self.to_pin()
        return self

    def to_pin(self) -> Pin:
        """Return the store's pin (raises ``CommentInputError`` when fields do not match the kind)."""
        return Pin(kind=self.kind, target=self.target, path=self.path, waypoint=self.waypoint)


class CommentCreateRequest(BaseModel):
    """A new comment, from the owner or a reviewer."""

    model_config = ConfigDict(extra="forbid")

    pin: CommentPin
    author: str = Field(
        min_length=1, max_length=MAX_AUTHOR_CHARS, description="Name shown with the comment."
    )
    text: str = Field(min_length=1, max_length=MAX_TEXT_CHARS, description="Line breaks allowed.")


class CommentResolveRequest(BaseModel):
    """The owner marks a comment resolved, or open again."""

    model_config = ConfigDict(extra="forbid")

    resolved: bool = Field(strict=True)


class CommentResult(BaseModel):
    """One stored comment."""

    model_config = ConfigDict(extra="forbid")

    id: int
    pin: CommentPin
    pin_label: str = Field(description="The pin in words; waypoints counted from 1.")
    pin_found: bool = Field(
        description="The pinned target or waypoint is still in the cell (renamed or removed "
        "ones are kept with their comments)."
    )
    author: str
    text: str
    created_utc: str = Field(description="ISO 8601, UTC.")
    resolved: bool
    resolved_utc: str | None = Field(description="When the owner marked it resolved.")


class CommentList(BaseModel):
    """Every comment on the cell, oldest first."""

    model_config = ConfigDict(extra="forbid")

    cell_file: str
    open_count: int
    comments: list[CommentResult]


def pin_found(pin: Pin, cell: Cell) -> bool:
    """Whether ``pin`` names something in ``cell`` (always true for the cell itself)."""
    if pin.kind == "target":
        return any(target.name == pin.target for target in cell.targets)
    if pin.kind == "waypoint":
        assert pin.waypoint is not None
        return any(
            path.name == pin.path and pin.waypoint < len(path.waypoints) for path in cell.paths
        )
    return True


def comment_result(comment: Comment, cell: Cell) -> CommentResult:
    """Return the API form of a stored comment, checked against the current cell."""
    pin = comment.pin
    return CommentResult(
        id=comment.id,
        pin=CommentPin(kind=pin.kind, target=pin.target, path=pin.path, waypoint=pin.waypoint),
        pin_label=pin.describe(),
        pin_found=pin_found(pin, cell),
        author=comment.author,
        text=comment.text,
        created_utc=comment.created_utc,
        resolved=comment.resolved,
        resolved_utc=comment.resolved_utc,
    )

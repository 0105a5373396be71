"""Review with a client: the caller's role, leaving review mode, and reviewer comments.

Comments live in ``<cell file>.comments.sqlite3`` beside the server's cell
file (:mod:`posebridge.review.comments`). Reviewers may list and add them;
only the owner marks them resolved. Access rules: :mod:`posebridge.api.auth`.
"""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

from fastapi import APIRouter, Depends, HTTPException, Request, Response
from fastapi import Path as PathParam

from posebridge.api.auth import ACCESS_COOKIE, REVIEWER_CAPS, OwnerOnly, ReviewRoleDep
from posebridge.api.cell_store import CellStore
from posebridge.api.deps import CellsDep
from posebridge.api.json_body import StrictJsonRoute
from posebridge.api.schemas.reviews import (
    CommentCreateRequest,
    CommentList,
    CommentResolveRequest,
    CommentResult,
    ReviewAccessResult,
    ReviewerRateCap,
    comment_result,
    pin_found,
    review_error_responses,
)
from posebridge.resources import data_folder
from posebridge.review.comments import (
    CommentInputError,
    CommentNotFoundError,
    CommentStorageError,
    CommentStore,
    CommentStoreFullError,
    comments_path_for,
)

__all__ = ["router"]

router = APIRouter(prefix="/api/reviews", tags=["reviews"], route_class=StrictJsonRoute)

_NO_FILE = (
    "comments: this server works on the bundled demo cell; start it with a cell file of "
    "your own (posebridge serve --cell FILE) to collect comments"
)


def _comments_file(cells: CellStore) -> Path | None:
    """Return the comment file of the server's cell.

    None for the bundled demo cell, whose folder belongs to the installed package and is not written
    to.
    """
    if cells.path is None:
        return None
    cell = cells.path.resolve()
    if cell.parent == data_folder("robots").resolve():
        return None
    return comments_path_for(cell)


def _comment_store(cells: CellsDep) -> CommentStore:
    path = _comments_file(cells)
    if path is None:
        raise HTTPException(status_code=409, detail=_NO_FILE)
    return CommentStore(path)


CommentsDep = Annotated[CommentStore, Depends(_comment_store)]
CommentId = Annotated[int, PathParam(ge=1, lt=2**63, description="Comment id.")]


def _storage_error(error: CommentStorageError) -> HTTPException:
    """507 when the device is full (RFC 4918 sec. 11.5), else 503 naming the file."""
    return HTTPException(status_code=507 if error.failure == "no-space" else 503, detail=str(error))


@router.get("/access", summary="Who is asking", responses=review_error_responses(401, 422, 429))
def read_access(request: Request, role: ReviewRoleDep, cells: CellsDep) -> ReviewAccessResult:
    """Return the caller's role (owner or read-only reviewer) and what the page may offer."""
    return ReviewAccessResult(
        role=role,
        shared=request.app.state.review_access is not None,
        can_edit=role == "owner",
        comments_enabled=_comments_file(cells) is not None,
        cell_file=None if cells.path is None else cells.path.name,
        reviewer_caps={
            kind: ReviewerRateCap(per_second=cap.per_second, burst=cap.burst)
            for kind, cap in REVIEWER_CAPS.items()
        },
    )


@router.delete(
    "/session",
    summary="Leave review mode",
    status_code=204,
    responses=review_error_responses(401, 422, 429),
)
def leave_review(response: Response) -> None:
    """Forget the review token cookie of this browser (the owner, after previewing a link)."""
    response.delete_cookie(ACCESS_COOKIE, path="/", httponly=True, samesite="strict")


@router.get(
    "/comments", summary="List comments", responses=review_error_responses(401, 409, 422, 503)
)
def list_comments(comments: CommentsDep, cells: CellsDep) -> CommentList:
    """Every comment on the cell, oldest first, with whether its pin is still in the cell."""
    cell = cells.read().cell
    try:
        stored = comments.list_comments()
    except CommentStorageError as error:
        raise _storage_error(error) from error
    assert cells.path is not None
    return CommentList(
        cell_file=cells.path.name,
        open_count=sum(not comment.resolved for comment in stored),
        comments=[comment_result(comment, cell) for comment in stored],
    )


@router.post(
    "/comments",
    summary="Add a comment",
    status_code=201,
    responses=review_error_responses(401, 409, 413, 422, 429, 503, 507),
)
def add_comment(
    request: CommentCreateRequest, comments: CommentsDep, cells: CellsDep
) -> CommentResult:
    """Pin a comment to the cell, a target (by name) or a path waypoint (path name, 0-based index)."""
    cell = cells.read().cell
    pin = request.pin.to_pin()
    if not pin_found(pin, cell):
        raise HTTPException(status_code=422, detail=f"pin: no {pin.describe()} in the cell")
    try:
        comment = comments.add(pin, request.author, request.text)
    except CommentInputError as error:
        raise HTTPException(status_code=422, detail=str(error)) from error
    except CommentStoreFullError as error:
        raise HTTPException(status_code=409, detail=str(error)) from error
    except CommentStorageError as error:
        raise _storage_error(error) from error
    return comment_result(comment, cell)


@router.patch(
    "/comments/{comment_id}",
    summary="Resolve a comment",
    dependencies=[OwnerOnly],
    responses=review_error_responses(401, 403, 404, 409, 422, 503, 507),
)
def resolve_comment(
    comment_id: CommentId,
    request: CommentResolveRequest,
    comments: CommentsDep,
    cells: CellsDep,
) -> CommentResult:
    """Mark a comment resolved, or open again (owner only)."""
    try:
        comment = comments.set_resolved(comment_id, request.resolved)
    except CommentNotFoundError as error:
        raise HTTPException(status_code=404, detail=str(error)) from error
    except CommentStorageError as error:
        raise _storage_error(error) from error
    return comment_result(comment, cells.read().cell)

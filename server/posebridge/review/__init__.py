"""Review with a client: access tokens and rate caps, and the comment store.

* :mod:`posebridge.review.access` — review tokens (only a hash is kept),
  constant-time checks, per-client rate caps.
* :mod:`posebridge.review.comments` — reviewer comments pinned to a target, a
  path waypoint or the whole cell, kept in SQLite next to the cell file.

Nothing here knows about HTTP; :mod:`posebridge.api.auth` applies it to requests.
"""

from posebridge.review.access import (
    RateCap,
    RateLimiter,
    ReviewAccess,
    new_review_token,
    review_link,
)
from posebridge.review.comments import (
    Comment,
    CommentError,
    CommentInputError,
    CommentNotFoundError,
    CommentStorageError,
    CommentStore,
    CommentStoreFullError,
    Pin,
    comments_path_for,
)

__all__ = [
    "Comment",
    "CommentError",
    "CommentInputError",
    "CommentNotFoundError",
    "CommentStorageError",
    "CommentStore",
    "CommentStoreFullError",
    "Pin",
    "RateCap",
    "RateLimiter",
    "ReviewAccess",
    "comments_path_for",
    "new_review_token",
    "review_link",
]

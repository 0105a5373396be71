"""Reviewer comments, kept in SQLite next to the cell file (``<cell>.comments.sqlite3``).

A comment is pinned to the cell as a whole, to a target (by name) or to a
path waypoint (path name and 0-based waypoint index), and carries an author
name, a text, its creation time (UTC, ISO 8601) and, once the owner marks it
resolved, the time of that.

The database uses write-ahead logging (``PRAGMA journal_mode=WAL``), so the
page can read while a comment is written, and every statement is
parameterised: names and texts are stored exactly as given. Each call opens
its own connection, so one store may be used from several threads. The file
is created by the first comment; listing a cell without one reads nothing
and creates nothing.
"""

from __future__ import annotations

import os
import re
import sqlite3
from collections.abc import Callable, Iterator
from contextlib import closing, contextmanager
from dataclasses import dataclass
from datetime import UTC, datetime
from pathlib import Path
from typing import Literal

from posebridge.errors import InputError

__all__ = [
    "COMMENTS_SCHEMA_VERSION",
    "MAX_AUTHOR_CHARS",
    "MAX_COMMENTS",
    "MAX_PIN_NAME_CHARS",
    "MAX_TEXT_CHARS",
    "Comment",
    "CommentError",
    "CommentInputError",
    "CommentNotFoundError",
    "CommentStorageError",
    "CommentStore",
    "CommentStoreFullError",
    "Pin",
    "PinKind",
    "check_author",
    "check_text",
    "comments_path_for",
]

COMMENTS_SCHEMA_VERSION = 1
"""``PRAGMA user_version`` of the comment databases this posebridge writes."""
MAX_AUTHOR_CHARS = 80
MAX_TEXT_CHARS = 4000
MAX_PIN_NAME_CHARS = 100
MAX_COMMENTS = 10_000
"""Comments one cell may collect; more are refused so the file stays small."""

PinKind = Literal["cell", "target", "waypoint"]

_CONTROL = re.compile(r"[\x00-\x1f\x7f]")
_CONTROL_EXCEPT_LINES = re.compile(r"[\x00-\x08\x0b-\x1f\x7f]")
_BUSY_TIMEOUT_S = 5.0

_SCHEMA = """
CREATE TABLE IF NOT EXISTS comments (
    id INTEGER PRIMARY KEY AUTOINCREMENT,
    pin_kind TEXT NOT NULL CHECK (pin_kind IN ('cell', 'target', 'waypoint')),
    target TEXT,
    path TEXT,
    waypoint INTEGER,
    author TEXT NOT NULL,
    text TEXT NOT NULL,
    created_utc TEXT NOT NULL,
    resolved_utc TEXT
)
"""
_COLUMNS = "id, pin_kind, target, path, waypoint, author, text, created_utc, resolved_utc"


class CommentError(ValueError):
    """A comment cannot be stored or read; the message names the field or the file."""


class CommentInputError(CommentError, InputError):
    """A pin, author or text is not acceptable; the message names the field."""


class CommentNotFoundError(CommentError):
    """No comment has the requested id."""


class CommentStoreFullError(CommentError):
    """The cell already holds the most comments a store keeps."""


class CommentStorageError(CommentError):
    """The comment file cannot be opened, read or written.

    Attributes
    ----------
    failure : {"read-only", "no-space", "unreadable"}
        Why: the file or its folder cannot be written, the device is full, or the
        file is not a comment database this posebridge reads.
    """

    def __init__(self, message: str, failure: str = "unreadable") -> None:
        super().__init__(message)
        self.failure = failure


def comments_path_for(cell_path: str | Path) -> Path:
    """Return the comment database of a cell file: ``<cell file name>.comments.sqlite3`` beside it."""
    cell = Path(cell_path)
    return cell.with_name(cell.name + ".comments.sqlite3")


def _check_name(field: str, value: str, limit: int) -> str:
    if not 0 < len(value) <= limit or _CONTROL.search(value):
        raise CommentInputError(
            f"{field}: expected 1 to {limit} characters without control characters, "
            f"got {len(value)} characters"
        )
    return value


@dataclass(frozen=True)
class Pin:
    """What a comment is about: the cell, a target, or a path waypoint.

    Attributes
    ----------
    kind : {"cell", "target", "waypoint"}
    target : str or None
        Target name, for ``kind == "target"`` only.
    path : str or None
        Path name, for ``kind == "waypoint"`` only.
    waypoint : int or None
        0-based waypoint index in the path, for ``kind == "waypoint"`` only.
    """

    kind: PinKind
    target: str | None = None
    path: str | None = None
    waypoint: int | None = None

    def __post_init__(self) -> None:
        """Check that the fields given match the pin's kind."""
        given = (self.target is not None, self.path is not None, self.waypoint is not None)
        expected = {
            "cell": (False, False, False),
            "target": (True, False, False),
            "waypoint": (False, True, True),
        }.get(self.kind)
        if expected is None:
            raise CommentInputError(
                f"pin.kind: expected 'cell', 'target' or 'waypoint', got {self.kind!r}"
            )
        if given != expected:
            needs = {
                "cell": "no target, path or waypoint",
                "target": "a target name only",
                "waypoint": "a path name and a waypoint index only",
            }[self.kind]
            raise CommentInputError(f"pin: a {self.kind} pin takes {needs}")
        if self.target is not None:
            _check_name("pin.target", self.target, MAX_PIN_NAME_CHARS)
        if self.path is not None:
            _check_name("pin.path", self.path, MAX_PIN_NAME_CHARS)
        if self.waypoint is not None and not 0 <= self.waypoint < 2**31:
            raise CommentInputError(f"pin.waypoint: expected an index >= 0, got {self.waypoint}")

    def describe(self) -> str:
        """Plain words for the pin: ``cell``, ``target 'pick'``, ``path 'cycle' waypoint 3``.

        Waypoints are shown counted from 1, as in the page's lists.
        """
        if self.kind == "target":
            return f"target {self.target!r}"
        if self.kind == "waypoint":
            assert self.waypoint is not None
            return f"path {self.path!r} waypoint {self.waypoint + 1}"
        return "cell"


@dataclass(frozen=True)
class Comment:
    """One stored comment.

    Attributes
    ----------
    id : int
        Store-wide id, increasing with creation.
    pin : Pin
    author : str
    text : str
    created_utc : str
        ISO 8601 UTC time, e.g. ``2025-03-01T09:30:00Z``.
    resolved_utc : str or None
        When the owner marked it resolved; None while open.
    """

    id: int
    pin: Pin
    author: str
    text: str
    created_utc: str
    resolved_utc: str | None

    @property
    def resolved(self) -> bool:
        """Whether the owner has marked the comment resolved."""
        return self.resolved_utc is not None


def check_author(author: str) -> str:
    """Return the author name with surrounding spaces removed.

    Raises
    ------
    CommentInputError
        Empty, longer than :data:`MAX_AUTHOR_CHARS`, or with control characters.
    """
    return _check_name("author", author.strip(), MAX_AUTHOR_CHARS)


def check_text(text: str) -> str:
    """Return the comment text with surrounding blank space removed; line breaks and tabs allowed.

    Raises
    ------
    CommentInputError
        Empty, longer than :data:`MAX_TEXT_CHARS`, or with other control characters.
    """
    cleaned = text.strip()
    if not 0 < len(cleaned) <= MAX_TEXT_CHARS or _CONTROL_EXCEPT_LINES.search(cleaned):
        raise CommentInputError(
            f"text: expected 1 to {MAX_TEXT_CHARS} characters (line breaks allowed, no other "
            f"control characters), got {len(cleaned)} characters"
        )
    return cleaned


def _utc_now() -> datetime:
    return datetime.now(UTC)


def _iso_utc(moment: datetime) -> str:
    return moment.astimezone(UTC).strftime("%Y-%m-%dT%H:%M:%SZ")


def _comment_from_row(row: tuple[object, ...]) -> Comment:
    id_, kind, target, path, waypoint, author, text, created, resolved = row
    return Comment(
        id=int(id_),  # type: ignore[call-overload]
        pin=Pin(
            kind=kind,  # type: ignore[arg-type]
            target=target,  # type: ignore[arg-type]
            path=path,  # type: ignore[arg-type]
            waypoint=None if waypoint is None else int(waypoint),  # type: ignore[call-overload]
        ),
        author=str(author),
        text=str(text),
        created_utc=str(created),
        resolved_utc=None if resolved is None else str(resolved),
    )


class CommentStore:
    """The comments of one cell, in the SQLite file ``path`` (module docstring).

    Parameters
    ----------
    path : str or Path
        Database file, usually :func:`comments_path_for` of the cell file.
    clock : callable, keyword-only
        Current time as an aware datetime; UTC now by default.
    max_comments : int, keyword-only
        Comments the store accepts at most.
    """

    def __init__(
        self,
        path: str | Path,
        *,
        clock: Callable[[], datetime] = _utc_now,
        max_comments: int = MAX_COMMENTS,
    ) -> None:
        self.path = Path(path)
        self._clock = clock
        self._max_comments = max_comments

    @contextmanager
    def _connection(self, *, create: bool) -> Iterator[sqlite3.Connection | None]:
        """Open a connection in one transaction, or None when the file is absent and not created."""
        if not create and not self.path.exists():
            yield None
            return
        try:
            with closing(
                sqlite3.connect(self.path, timeout=_BUSY_TIMEOUT_S, isolation_level=None)
            ) as connection:
                self._prepare(connection)
                connection.execute("BEGIN IMMEDIATE" if create else "BEGIN")
                try:
                    yield connection
                except BaseException:
                    connection.execute("ROLLBACK")
                    raise
                connection.execute("COMMIT")
        except sqlite3.Error as error:
            raise self._storage_error(error) from error

    def _storage_error(self, error: sqlite3.Error) -> CommentStorageError:
        """Return plain words for an SQLite error.

        From its result code (SQLite's "Result and Error Codes" page): read-only storage, a full
        device, or not a comment database.
        """
        name = getattr(error, "sqlite_errorname", "") or ""
        folder = self.path.parent
        if name.startswith("SQLITE_CANTOPEN") and not folder.is_dir():
            return CommentStorageError(
                f"{self.path}: the comment file cannot be opened, its folder {folder} does "
                "not exist",
                "unreadable",
            )
        if name.startswith("SQLITE_READONLY") or (
            name.startswith("SQLITE_CANTOPEN") and not os.access(folder, os.W_OK)
        ):
            return CommentStorageError(
                f"{self.path}: comments cannot be saved, the comment file or its folder "
                f"{folder} is read-only (existing comments can still be read)",
                "read-only",
            )
        if name.startswith("SQLITE_FULL"):
            return CommentStorageError(
                f"{self.path}: comments cannot be saved, no space left on the device of {folder}",
                "no-space",
            )
        if name.startswith("SQLITE_CANTOPEN"):
            return CommentStorageError(
                f"{self.path}: the comment file cannot be opened ({error})", "unreadable"
            )
        return CommentStorageError(
            f"{self.path}: not a readable comment database ({error})", "unreadable"
        )

    def _prepare(self, connection: sqlite3.Connection) -> None:
        version = connection.execute("PRAGMA user_version").fetchone()[0]
        if version > COMMENTS_SCHEMA_VERSION:
            raise CommentStorageError(
                f"{self.path}: comment database version {version} is newer than this "
                f"posebridge reads ({COMMENTS_SCHEMA_VERSION}); update posebridge"
            )
        if version == 0:
            connection.execute("PRAGMA journal_mode=WAL")
            connection.execute(_SCHEMA)
            connection.execute(f"PRAGMA user_version = {COMMENTS_SCHEMA_VERSION}")

    def add(self, pin: Pin, author: str, text: str) -> Comment:
        """Store a new open comment, created now; returns it with its id.

        Raises
        ------
        CommentInputError
            Invalid author or text (see :func:`check_author`, :func:`check_text`).
        CommentStoreFullError
            The store already holds ``max_comments`` comments.
        CommentStorageError
            The file cannot be created, read or written, or is not a comment database.
        """
        author = check_author(author)
        text = check_text(text)
        created = _iso_utc(self._clock())
        with self._connection(create=True) as connection:
            assert connection is not None
            count = connection.execute("SELECT COUNT(*) FROM comments").fetchone()[0]
            if count >= self._max_comments:
                raise CommentStoreFullError(
                    f"comments: this cell already has {count} comments, the most kept is "
                    f"{self._max_comments}"
                )
            cursor = connection.execute(
                "INSERT INTO comments (pin_kind, target, path, waypoint, author, text, "
                "created_utc, resolved_utc) VALUES (?, ?, ?, ?, ?, ?, ?, NULL)",
                (pin.kind, pin.target, pin.path, pin.waypoint, author, text, created),
            )
            comment_id = cursor.lastrowid
        assert comment_id is not None
        return Comment(comment_id, pin, author, text, created, None)

    def list_comments(self) -> list[Comment]:
        """Every comment, oldest first; empty when the cell has no comment file.

        Raises
        ------
        CommentStorageError
            The file cannot be read or is not a comment database.
        """
        with self._connection(create=False) as connection:
            if connection is None:
                return []
            rows = connection.execute(f"SELECT {_COLUMNS} FROM comments ORDER BY id").fetchall()
        return [_comment_from_row(row) for row in rows]

    def set_resolved(self, comment_id: int, resolved: bool = True) -> Comment:
        """Mark a comment resolved (now) or open again; returns the updated comment.

        Raises
        ------
        CommentNotFoundError
            No comment has ``comment_id``.
        CommentStorageError
            The file cannot be read or written.
        """
        moment = _iso_utc(self._clock()) if resolved else None
        with self._connection(create=False) as connection:
            row = None
            if connection is not None:
                connection.execute(
                    "UPDATE comments SET resolved_utc = CASE WHEN ? IS NULL THEN NULL "
                    "ELSE COALESCE(resolved_utc, ?) END WHERE id = ?",
                    (moment, moment, comment_id),
                )
                row = connection.execute(
                    f"SELECT {_COLUMNS} FROM comments WHERE id = ?", (comment_id,)
                ).fetchone()
        if row is None:
            raise CommentNotFoundError(f"comment_id: no comment {comment_id}")
        return _comment_from_row(row)

"""The SQLite comment store: round trips, persistence, verbatim storage, limits, errors.

SQLite behaviour (WAL journal mode, ``user_version``) is checked with the
standard library's ``sqlite3`` on the same file, the reference
implementation. Messages are our own contract.
"""

from __future__ import annotations

import re
import sqlite3
import threading
from datetime import UTC, datetime, timedelta
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from posebridge.review.comments import (
    COMMENTS_SCHEMA_VERSION,
    MAX_AUTHOR_CHARS,
    MAX_TEXT_CHARS,
    CommentInputError,
    CommentNotFoundError,
    CommentStorageError,
    CommentStore,
    CommentStoreFullError,
    Pin,
    comments_path_for,
)

INJECTION = "x'); DROP TABLE comments; --"


class StepClock:
    """UTC times one minute apart, starting 2025-03-01 09:30."""

    def __init__(self) -> None:
        self.moment = datetime(2025, 3, 1, 9, 30, tzinfo=UTC)

    def __call__(self) -> datetime:
        now = self.moment
        self.moment += timedelta(minutes=1)
        return now


@pytest.fixture
def store(tmp_path: Path) -> CommentStore:
    return CommentStore(comments_path_for(tmp_path / "cell.json"), clock=StepClock())


def test_comments_path_for_sits_beside_cell(tmp_path: Path) -> None:
    assert comments_path_for(tmp_path / "press cell.json") == (
        tmp_path / "press cell.json.comments.sqlite3"
    )


def test_add_and_list_comments(store: CommentStore) -> None:
    first = store.add(Pin("target", target="rack-low-1"), "  Ana  ", "Gripper too close.\n")
    second = store.add(Pin("waypoint", path="load-press", waypoint=1), "Ben", "Slow down here")
    third = store.add(Pin("cell"), "Ana", "Looks good overall")
    assert [c.id for c in (first, second, third)] == [1, 2, 3]
    assert first.author == "Ana"  # surrounding spaces removed
    assert first.text == "Gripper too close."
    assert first.created_utc == "2025-03-01T09:30:00Z"
    assert not first.resolved
    assert store.list_comments() == [first, second, third]


def test_list_comments_without_file_creates_nothing(tmp_path: Path) -> None:
    path = tmp_path / "cell.json.comments.sqlite3"
    assert CommentStore(path).list_comments() == []
    assert not path.exists()


def test_comments_persist_across_stores(tmp_path: Path) -> None:
    path = tmp_path / "cell.json.comments.sqlite3"
    added = CommentStore(path).add(Pin("cell"), "Ana", "first")
    assert CommentStore(path).list_comments() == [added]


def test_comment_file_uses_wal_and_schema_version(store: CommentStore) -> None:
    store.add(Pin("cell"), "Ana", "hello")
    with sqlite3.connect(store.path) as connection:
        assert connection.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
        assert connection.execute("PRAGMA user_version").fetchone()[0] == COMMENTS_SCHEMA_VERSION


def test_sql_injection_strings_stored_verbatim(store: CommentStore) -> None:
    text = f"{INJECTION}\n\"double\" 'single' ; -- %s ?"
    added = store.add(Pin("target", target=INJECTION), INJECTION, text)
    [listed] = store.list_comments()
    assert listed.author == INJECTION
    assert listed.text == text
    assert listed.pin.target == INJECTION
    assert listed == added
    with sqlite3.connect(store.path) as connection:  # the table is still there
        assert connection.execute("SELECT COUNT(*) FROM comments").fetchone()[0] == 1


@settings(derandomize=True, max_examples=40, deadline=2000)
@given(
    author=st.text(st.characters(codec="utf-8", exclude_categories=["Cc", "Cs"]), min_size=1),
    text=st.text(st.characters(codec="utf-8", exclude_categories=["Cs"]), min_size=1),
)
def test_comment_text_round_trips(
    tmp_path_factory: pytest.TempPathFactory, author: str, text: str
) -> None:
    store = CommentStore(tmp_path_factory.mktemp("c") / "c.sqlite3")
    try:
        added = store.add(Pin("cell"), author, text)
    except CommentInputError:
        return  # refused input is covered by the validation tests
    assert store.list_comments()[0].author == author.strip() == added.author
    assert store.list_comments()[0].text == text.strip() == added.text


def test_resolve_and_reopen(store: CommentStore) -> None:
    added = store.add(Pin("cell"), "Ana", "check the fence")  # 09:30
    resolved = store.set_resolved(added.id)  # 09:31
    assert resolved.resolved_utc == "2025-03-01T09:31:00Z"
    again = store.set_resolved(added.id)  # already resolved: keeps the first time
    assert again.resolved_utc == "2025-03-01T09:31:00Z"
    reopened = store.set_resolved(added.id, False)
    assert not reopened.resolved
    assert store.list_comments() == [reopened]


def test_resolve_unknown_comment(store: CommentStore) -> None:
    with pytest.raises(CommentNotFoundError, match=r"^comment_id: no comment 7$"):
        store.set_resolved(7)
    store.add(Pin("cell"), "Ana", "x")
    with pytest.raises(CommentNotFoundError, match=r"^comment_id: no comment 7$"):
        store.set_resolved(7)


@pytest.mark.parametrize(
    ("author", "text", "message"),
    [
        ("   ", "x", "author: expected 1 to 80 characters without control characters, got 0"),
        ("A" * (MAX_AUTHOR_CHARS + 1), "x", "author: expected 1 to 80 characters"),
        ("A\x07", "x", "author: expected 1 to 80 characters without control characters"),
        ("Ana", " \n ", "text: expected 1 to 4000 characters"),
        ("Ana", "x" * (MAX_TEXT_CHARS + 1), "text: expected 1 to 4000 characters"),
        ("Ana", "bell\x07", "text: expected 1 to 4000 characters (line breaks allowed"),
    ],
)
def test_add_refuses_bad_author_or_text(
    store: CommentStore, author: str, text: str, message: str
) -> None:
    with pytest.raises(CommentInputError, match="^" + re.escape(message)):
        store.add(Pin("cell"), author, text)
    assert not store.path.exists()


def test_text_keeps_line_breaks_and_tabs(store: CommentStore) -> None:
    added = store.add(Pin("cell"), "Ana", "line 1\n\tline 2")
    assert added.text == "line 1\n\tline 2"


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"kind": "cell", "target": "a"}, "pin: a cell pin takes no target, path or waypoint"),
        ({"kind": "target"}, "pin: a target pin takes a target name only"),
        ({"kind": "waypoint", "path": "p"}, "pin: a waypoint pin takes a path name and a waypoint"),
        ({"kind": "waypoint", "path": "p", "waypoint": -1}, "pin.waypoint: expected an index >= 0"),
        ({"kind": "target", "target": ""}, "pin.target: expected 1 to 100 characters"),
        ({"kind": "everything"}, "pin.kind: expected 'cell', 'target' or 'waypoint'"),
    ],
)
def test_pin_refuses_mismatched_fields(kwargs: dict[str, object], message: str) -> None:
    with pytest.raises(CommentInputError, match="^" + re.escape(message)):
        Pin(**kwargs)  # type: ignore[arg-type]


def test_pin_describe_counts_waypoints_from_one() -> None:
    assert Pin("cell").describe() == "cell"
    assert Pin("target", target="pick").describe() == "target 'pick'"
    assert Pin("waypoint", path="cycle", waypoint=0).describe() == "path 'cycle' waypoint 1"


def test_store_full(tmp_path: Path) -> None:
    store = CommentStore(tmp_path / "c.sqlite3", max_comments=2)
    store.add(Pin("cell"), "Ana", "1")
    store.add(Pin("cell"), "Ana", "2")
    with pytest.raises(
        CommentStoreFullError,
        match=r"^comments: this cell already has 2 comments, the most kept is 2$",
    ):
        store.add(Pin("cell"), "Ana", "3")
    assert len(store.list_comments()) == 2


def test_not_a_database(tmp_path: Path) -> None:
    path = tmp_path / "c.sqlite3"
    path.write_text("this is not sqlite, just text " * 100)
    with pytest.raises(CommentStorageError, match="not a readable comment database"):
        CommentStore(path).list_comments()
    with pytest.raises(CommentStorageError, match="not a readable comment database"):
        CommentStore(path).add(Pin("cell"), "Ana", "x")


def test_newer_schema_version_refused(tmp_path: Path) -> None:
    path = tmp_path / "c.sqlite3"
    with sqlite3.connect(path) as connection:
        connection.execute(f"PRAGMA user_version = {COMMENTS_SCHEMA_VERSION + 1}")
    with pytest.raises(CommentStorageError, match="is newer than this posebridge reads"):
        CommentStore(path).list_comments()


def test_missing_folder(tmp_path: Path) -> None:
    # it said "not a readable comment database" before, which sent the user to the wrong fix
    missing = tmp_path / "no-such-folder" / "c.sqlite3"
    with pytest.raises(
        CommentStorageError, match=r"cannot be opened, its folder .* does not exist"
    ):
        CommentStore(missing).add(Pin("cell"), "Ana", "x")


def test_concurrent_adds_get_distinct_ids(tmp_path: Path) -> None:
    path = tmp_path / "c.sqlite3"
    CommentStore(path).add(Pin("cell"), "setup", "creates the file")
    errors: list[BaseException] = []

    def add(k: int) -> None:
        try:
            for j in range(5):
                CommentStore(path).add(Pin("cell"), f"writer {k}", f"comment {j}")
        except BaseException as error:  # collected and asserted below
            errors.append(error)

    threads = [threading.Thread(target=add, args=(k,)) for k in range(4)]
    for thread in threads:
        thread.start()
    for thread in threads:
        thread.join()
    assert errors == []
    ids = [comment.id for comment in CommentStore(path).list_comments()]
    assert ids == list(range(1, 22))

"""Saves that cannot be made: the answer says why and names the file; nothing changes.

Statuses: 507 Insufficient Storage (RFC 4918 sec. 11.5), 409 Conflict and 503
Service Unavailable (RFC 9110 sec. 15.5.10, 15.6.4); which one for which
failure, and the messages, are our own contract (posebridge.cell.files,
posebridge.api.routes.cells). Errors are injected where the system call
fails (``os.fsync``, ``sqlite3.connect``), and once for real on a small tmpfs
(full, then read-only) in a private mount namespace.
"""

from __future__ import annotations

import errno
import json
import os
import shutil
import sqlite3
import subprocess
import sys
import textwrap
from collections.abc import AsyncIterator
from pathlib import Path
from typing import Any

import httpx
import pytest

from posebridge.api.app import create_app
from posebridge.api.settings import Settings
from posebridge.resources import data_folder
from posebridge.review import comments as comments_module
from posebridge.review.comments import CommentStore, Pin, comments_path_for

OWNER_URL = "http://127.0.0.1:8000"


@pytest.fixture
def cell_file(tmp_path: Path) -> Path:
    path = tmp_path / "cells" / "press.json"
    path.parent.mkdir()
    shutil.copy(data_folder("robots") / "demo-cell.json", path)
    return path


@pytest.fixture
async def owner(cell_file: Path) -> AsyncIterator[httpx.AsyncClient]:
    app = create_app(Settings(warm_up=False, cell_path=cell_file))
    transport = httpx.ASGITransport(app=app, client=("127.0.0.1", 5000))
    async with httpx.AsyncClient(transport=transport, base_url=OWNER_URL) as session:
        yield session


async def _move_base(owner: httpx.AsyncClient, etag: str) -> httpx.Response:
    return await owner.patch(
        "/api/cell/base", json={"position_mm": [25, 0, 0]}, headers={"If-Match": etag}
    )


@pytest.mark.anyio
@pytest.mark.parametrize(
    ("code", "status", "words"),
    [
        (errno.ENOSPC, 507, "no space left on the device of"),
        (errno.EROFS, 503, "is on a read-only file system"),
        (errno.EACCES, 409, "is read-only for this user"),
    ],
)
async def test_save_failure_answer_names_file_and_retry_works(
    owner: httpx.AsyncClient,
    cell_file: Path,
    monkeypatch: pytest.MonkeyPatch,
    code: int,
    status: int,
    words: str,
) -> None:
    etag = (await owner.get("/api/cell")).json()["etag"]
    before = cell_file.read_bytes()
    real_fsync = os.fsync

    def failing_fsync(descriptor: int) -> None:
        raise OSError(code, os.strerror(code))

    monkeypatch.setattr(os, "fsync", failing_fsync)
    refused = await _move_base(owner, etag)
    assert refused.status_code == status
    detail = refused.json()["detail"]
    assert detail.startswith(f"{cell_file}: cannot save")
    assert words in detail
    assert "nothing was written" in detail
    assert cell_file.read_bytes() == before
    assert sorted(p.name for p in cell_file.parent.iterdir()) == ["press.json"]
    monkeypatch.setattr(os, "fsync", real_fsync)
    # the edit was made from a version that is still current: the same request now saves
    retried = await _move_base(owner, etag)
    assert retried.status_code == 200
    assert json.loads(cell_file.read_text())["base"]["position_mm"] == [25.0, 0.0, 0.0]


@pytest.mark.anyio
async def test_save_over_read_only_file_refused(owner: httpx.AsyncClient, cell_file: Path) -> None:
    etag = (await owner.get("/api/cell")).json()["etag"]
    before = cell_file.read_bytes()
    cell_file.chmod(0o444)
    refused = await _move_base(owner, etag)
    assert refused.status_code == 409
    assert refused.json() == {
        "detail": f"{cell_file}: cannot save, the cell file is read-only (its permissions do "
        "not allow writing; nothing was written); make it writable (chmod u+w) to save"
    }
    assert cell_file.read_bytes() == before
    assert cell_file.stat().st_mode & 0o777 == 0o444


def test_leftover_temporaries_removed_at_start(cell_file: Path) -> None:
    leftover = cell_file.parent / ".press.json.k2j4x9q1.tmp"
    leftover.write_text('{"half": ')
    create_app(Settings(warm_up=False, cell_path=cell_file))
    assert not leftover.exists()
    assert cell_file.exists()


_CONNECT = sqlite3.connect


def _read_only_connect(*args: Any, **kwargs: Any) -> sqlite3.Connection:
    """sqlite3.connect opening the database read-only, as SQLite does on a read-only mount."""
    path = Path(args[0])
    return _CONNECT(f"file:{path}?mode=ro", uri=True, **kwargs)


@pytest.mark.anyio
async def test_comment_on_read_only_storage_says_so(
    owner: httpx.AsyncClient, cell_file: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    CommentStore(comments_path_for(cell_file)).add(Pin("cell"), "Ana", "first")
    monkeypatch.setattr(comments_module.sqlite3, "connect", _read_only_connect)
    response = await owner.post(
        "/api/reviews/comments", json={"pin": {"kind": "cell"}, "author": "Ana", "text": "x"}
    )
    assert response.status_code == 503
    path = comments_path_for(cell_file)
    assert response.json() == {
        "detail": f"{path}: comments cannot be saved, the comment file or its folder "
        f"{cell_file.parent} is read-only (existing comments can still be read)"
    }
    listed = await owner.get("/api/reviews/comments")
    assert listed.status_code == 200
    assert [c["text"] for c in listed.json()["comments"]] == ["first"]


_REAL_FILE_SYSTEM = textwrap.dedent(
    """
    import json, sys
    from pathlib import Path
    from posebridge.cell.files import CellSaveError, load_cell, save_cell
    from posebridge.review.comments import CommentStore, CommentStorageError, Pin
    folder, step = Path(sys.argv[1]), sys.argv[2]
    cell_path = folder / "cell.json"
    cell = load_cell(cell_path)
    edited = cell.model_copy(update={"title": "edited"})
    answer = {}
    if step == "full":
        with open(folder / "filler", "wb", buffering=0) as filler:
            try:
                while True:
                    filler.write(b"x" * 1024)
            except OSError:
                pass
    try:
        save_cell(edited, cell_path)
        answer["save"] = "saved"
    except CellSaveError as error:
        answer["save"] = [error.failure, str(error)]
    try:
        CommentStore(folder / "cell.json.comments.sqlite3").add(Pin("cell"), "Ana", "text")
        answer["comment"] = "added"
    except CommentStorageError as error:
        answer["comment"] = [error.failure, str(error)]
    answer["files"] = sorted(p.name for p in folder.iterdir())
    answer["title"] = load_cell(cell_path).title
    print(json.dumps(answer))
    """
)


def test_save_on_real_full_then_read_only_file_system(tmp_path: Path) -> None:
    if shutil.which("unshare") is None or shutil.which("mount") is None:
        pytest.skip("unshare/mount not available: cannot make a private tmpfs")
    mount_point = tmp_path / "small"
    mount_point.mkdir()
    script = tmp_path / "step.py"
    script.write_text(_REAL_FILE_SYSTEM)
    demo = data_folder("robots") / "demo-cell.json"
    shell = (
        f"mount -t tmpfs -o size=192k tmpfs {mount_point} && cp {demo} {mount_point}/cell.json"
        f" && {sys.executable} {script} {mount_point} full && rm {mount_point}/filler"
        f" && mount -o remount,ro {mount_point} && {sys.executable} {script} {mount_point} ro"
    )
    run = subprocess.run(
        ["unshare", "--mount", "--map-root-user", "sh", "-c", shell],
        capture_output=True,
        text=True,
        timeout=120,
        check=False,
    )
    if run.returncode != 0 and "Operation not permitted" in run.stderr:
        pytest.skip(f"no private mount namespace here: {run.stderr.strip()}")
    assert run.returncode == 0, run.stderr
    full, read_only = (json.loads(line) for line in run.stdout.splitlines())
    assert full["save"][0] == "no-space"
    assert full["save"][1].startswith(f"{mount_point}/cell.json: cannot save, no space left")
    assert full["title"] != "edited"
    assert "filler" in full["files"]
    assert [f for f in full["files"] if f.endswith(".tmp")] == []
    assert read_only["save"][0] == "read-only-file-system"
    assert read_only["comment"][0] == "read-only"
    assert read_only["title"] != "edited"

"""A server killed (SIGKILL) in the middle of a save: the cell file is never corrupt and no
acknowledged save is lost.

Each round starts a real server process on a copy of the demo cell and moves
the base again and again through ``PATCH /api/cell/base`` (each move one
millimetre further in x, from the version the last answer gave). The server
process stops itself inside one save at a seeded point — while writing the
``.bak`` temporary file, after renaming it, while writing the cell's
temporary file, or after renaming that but before the folder is synced
(``os.fsync`` is wrapped to wait there) — and is killed there. The file must
then load as a valid cell whose base is where the last acknowledged move put
it (or, killed after the rename, one move further: written but never
answered); ``.bak`` must load too; the next start removes the temporary files
the killed save left. Atomic replacement by rename is POSIX ``rename(2)``
(common practice, no source for the rest).
"""

from __future__ import annotations

import os
import random
import shutil
import signal
import subprocess
import sys
import textwrap
import threading
import time
from pathlib import Path

import httpx

from posebridge.cell.files import backup_path, load_cell
from posebridge.resources import data_folder

ROUNDS = 12
SEED = 15
FSYNCS_PER_SAVE = 4
"""``.bak`` temporary file, folder, cell temporary file, folder (posebridge.cell.files)."""

_SERVER = textwrap.dedent(
    """
    import os, sys, threading, time
    from pathlib import Path
    from posebridge.api.server import background_server
    from posebridge.api.settings import Settings

    cell, marker, stop_at = Path(sys.argv[1]), Path(sys.argv[2]), int(sys.argv[3])
    calls = 0
    real_fsync = os.fsync

    def fsync(descriptor):
        global calls
        calls += 1
        if calls == stop_at:
            marker.write_text(str(calls))
            time.sleep(3600)  # killed here
        real_fsync(descriptor)

    os.fsync = fsync
    with background_server(Settings(warm_up=False, cell_path=cell)) as url:
        print(url, flush=True)
        threading.Event().wait()
    """
)


def _start(
    script: Path, cell: Path, marker: Path, stop_at: int
) -> tuple[subprocess.Popen[str], str]:
    process = subprocess.Popen(
        [sys.executable, str(script), str(cell), str(marker), str(stop_at)],
        stdout=subprocess.PIPE,
        stderr=subprocess.DEVNULL,
        text=True,
    )
    assert process.stdout is not None
    url = process.stdout.readline().strip()
    assert url.startswith("http://127.0.0.1:"), "the server did not start"
    return process, url


def _moves(url: str, acknowledged: list[float]) -> None:
    """Move the base 1 mm further in x per request until the server is gone."""
    with httpx.Client(base_url=url, timeout=None) as client:
        document = client.get("api/cell").json()
        etag, x = document["etag"], float(document["cell"]["base"]["position_mm"][0])
        while True:
            x += 1.0
            try:
                response = client.patch(
                    "api/cell/base", json={"position_mm": [x, 0, 0]}, headers={"If-Match": etag}
                )
            except httpx.TransportError:
                return
            assert response.status_code == 200, response.text
            etag = response.json()["etag"]
            acknowledged.append(x)


def test_kill_during_saves_loses_nothing(tmp_path: Path) -> None:
    folder = tmp_path / "cells"
    folder.mkdir()
    cell = folder / "cell.json"
    shutil.copy(data_folder("robots") / "demo-cell.json", cell)
    script = tmp_path / "server.py"
    script.write_text(_SERVER)
    marker = tmp_path / "stopped"
    chance = random.Random(SEED)
    for round_ in range(ROUNDS):
        stage = round_ % FSYNCS_PER_SAVE + 1
        save = chance.randint(1, 4)
        x_before = load_cell(cell).base.position_mm[0]
        marker.unlink(missing_ok=True)
        process, url = _start(script, cell, marker, FSYNCS_PER_SAVE * (save - 1) + stage)
        # the save killed in the round before left no temporary file once the server is up
        assert [p.name for p in folder.iterdir() if p.suffix == ".tmp"] == []
        acknowledged: list[float] = []
        mover = threading.Thread(target=_moves, args=(url, acknowledged))
        mover.start()
        deadline = time.monotonic() + 120.0
        while not marker.exists():
            assert time.monotonic() < deadline, "the server never reached the save to kill"
            time.sleep(0.01)
        os.kill(process.pid, signal.SIGKILL)
        process.wait(timeout=30)
        mover.join(timeout=60)
        assert not mover.is_alive()
        assert len(acknowledged) == save - 1  # the saves before the killed one
        saved = load_cell(cell)  # raises on a corrupt or half-written file
        load_cell(backup_path(cell))
        last = acknowledged[-1] if acknowledged else x_before
        written = stage == FSYNCS_PER_SAVE  # killed after the rename of the cell file
        assert saved.base.position_mm[0] == (last + 1.0 if written else last)
        leftovers = [p for p in folder.iterdir() if p.suffix == ".tmp"]
        # killed while writing a temporary file (stages 1 and 3): it is still there
        assert len(leftovers) == (1 if stage in (1, 3) else 0)

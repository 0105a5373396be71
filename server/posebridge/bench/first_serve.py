"""The first start after installing: how long until ``posebridge serve`` answers.

A ``posebridge serve`` child process is started on a free loopback port with
a copy of the demo cell and an empty numba cache (``NUMBA_CACHE_DIR`` set to
a new temporary folder, so every kernel is compiled as on a fresh install);
the clock runs from the start of the process until ``GET /api/health``
answers, and on until it reports every kernel loaded.

Figures
-------
``first_serve_address_s``
    Seconds until the address answers. Target 15 s.
``first_serve_all_kernels_s``
    Seconds until ``kernels_ready`` (the rest compiled in the background).
"""

from __future__ import annotations

import os
import shutil
import socket
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import httpx

from posebridge.resources import data_folder

__all__ = ["bench_first_serve"]

_DEADLINE_S = 1800.0
"""Longest wait for the child (a very busy machine); the figure is then missing."""


def _free_port() -> int:
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as probe:
        probe.bind(("127.0.0.1", 0))
        return int(probe.getsockname()[1])


def _health(url: str) -> dict[str, object] | None:
    try:
        response = httpx.get(url, timeout=5.0)
    except httpx.HTTPError:
        return None
    return response.json() if response.status_code == 200 else None


def bench_first_serve(quick: bool) -> dict[str, float | str]:
    """Time a cold ``serve`` (module docstring); ``quick`` changes nothing (one start)."""
    with tempfile.TemporaryDirectory(prefix="posebridge-first-serve-") as folder:
        cell = Path(folder) / "demo-cell.json"
        shutil.copyfile(data_folder("robots") / "demo-cell.json", cell)
        cache = Path(folder) / "numba-cache"
        cache.mkdir()
        port = _free_port()
        url = f"http://127.0.0.1:{port}/api/health"
        env = os.environ | {"NUMBA_CACHE_DIR": str(cache)}
        command = [sys.executable, "-m", "posebridge.cli", "serve", "--port", str(port)]
        start = time.perf_counter()
        child = subprocess.Popen(
            [*command, "--cell", str(cell)],
            env=env,
            stdout=subprocess.DEVNULL,
            stderr=subprocess.DEVNULL,
        )
        try:
            address = None
            while time.perf_counter() - start < _DEADLINE_S and child.poll() is None:
                state = _health(url)
                if state is not None:
                    if address is None:
                        address = time.perf_counter() - start
                    if state.get("kernels_ready"):
                        return {
                            "first_serve_address_s": address,
                            "first_serve_all_kernels_s": time.perf_counter() - start,
                        }
                time.sleep(0.2)  # polling the child's answer, not a timed assertion
            reason = (
                f"the server exited with code {child.returncode}"
                if child.poll() is not None
                else f"no answer within {_DEADLINE_S:g} s"
            )
            figures: dict[str, float | str] = {"first_serve_all_kernels_s_missing": reason}
            if address is None:
                figures["first_serve_address_s_missing"] = reason
            else:
                figures["first_serve_address_s"] = address
            return figures
        finally:
            child.terminate()
            try:
                child.wait(timeout=30)
            except subprocess.TimeoutExpired:
                child.kill()
                child.wait()

"""A shared dashboard under reviewers' load: their drag round trips and the owner's.

A server shared for review runs in its own process on loopback. Each client
is a thread with its own loopback source address (127.0.0.2, 127.0.0.3, ...,
as separate machines would be; the reviewer caps are per address) and drags
the way the page does at the HTTP level: inverse kinematics of a target
moving on a small circle, one request at a time (the page's latest-only
channel), no sooner than the page's spacing after the previous one — 80 ms
for a reviewer, 16 ms for the owner — and forward kinematics every third
move. One drag sample is the round trip of one IK request.

Measured in one run: the owner dragging alone (baseline), then the owner
dragging while 10 reviewers drag, then 50 reviewers each making a short
series of reads and IK requests (errors counted: any answer but 200, or no
answer). Figures: ``review_drag_p95_ms_10_clients`` (the largest of the ten
reviewers' p95), ``owner_drag_p95_ratio_under_review_load`` (owner p95 under
load over the baseline p95), ``review_errors_50_clients``.
"""

from __future__ import annotations

import math
import shutil
import subprocess
import sys
import tempfile
import textwrap
import threading
import time
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

import httpx
import numpy as np

from posebridge.resources import data_folder
from posebridge.review.access import new_review_token

__all__ = ["bench_review_load"]

_SERVER = textwrap.dedent(
    """
    import sys, threading
    from pathlib import Path
    from posebridge.api.server import background_server
    from posebridge.api.settings import Settings
    if __name__ == "__main__":  # the reviewer worker process imports this file again
        settings = Settings(robot="pb-arm6", cell_path=Path(sys.argv[1]))
        with background_server(settings, review_token=sys.argv[2]) as url:
            print(url, flush=True)
            threading.Event().wait()
    """
)
_REVIEWER_SPACING_S = 0.080
_OWNER_SPACING_S = 0.016
_FK_EVERY = 3
_CIRCLE_MM = 40.0


@contextmanager
def _shared_server(token: str) -> Iterator[str]:
    """Run a shared server in its own process on a copy of the demo cell; yields its URL."""
    folder = Path(tempfile.mkdtemp(prefix="posebridge-bench-"))
    cell = folder / "cell.json"
    shutil.copy(data_folder("robots") / "demo-cell.json", cell)
    script = folder / "server.py"
    script.write_text(_SERVER)
    process = subprocess.Popen(
        [sys.executable, str(script), str(cell), token],
        stdout=subprocess.PIPE,
        stderr=subprocess.DEVNULL,
        text=True,
    )
    try:
        assert process.stdout is not None
        url = process.stdout.readline().strip()
        if not url.startswith("http://"):
            raise RuntimeError("the benchmark server did not start")
        yield url
    finally:
        process.kill()
        process.wait(timeout=30)
        shutil.rmtree(folder, ignore_errors=True)


def _client(url: str, address: str, token: str | None) -> httpx.Client:
    headers = {} if token is None else {"Authorization": f"Bearer {token}"}
    transport = httpx.HTTPTransport(local_address=address)
    return httpx.Client(base_url=url, transport=transport, headers=headers, timeout=30.0)


def _home_request(url: str) -> dict[str, object]:
    """Return the demo cell's robot, base and tool, and the TCP pose at home, for the drags."""
    with httpx.Client(base_url=url, timeout=60.0) as client:
        document = client.get("api/cell").json()
        scene = document["scene"]
        frames = {
            "base": {k: scene["base"][k] for k in ("position_mm", "rpy_deg")},
            "tool": {k: scene["tool"][k] for k in ("position_mm", "rpy_deg")},
        }
        model = client.get("api/robots/model", params={"robot": document["robot"]}).json()
        fk = client.post(
            "api/fk",
            json={"robot": document["robot"], "joints_deg": model["home_joints"], **frames},
        ).json()
    tcp = fk["configurations"][0]
    pose = {"position_mm": tcp["position_mm"], "rpy_deg": tcp["rpy_deg"]}
    return {"robot": document["robot"], "pose": pose, "home": model["home_joints"], **frames}


def _drag(
    client: httpx.Client,
    setup: dict[str, object],
    spacing_s: float,
    until: float,
    times_ms: list[float],
    errors: list[int],
) -> None:
    """Drag until ``until`` (monotonic s): IK per move, FK every third move."""
    pose = setup["pose"]
    assert isinstance(pose, dict)
    frames = {"base": setup["base"], "tool": setup["tool"]}
    k = 0
    sent = -math.inf
    while time.monotonic() < until:
        wait = sent + spacing_s - time.monotonic()
        if wait > 0:
            time.sleep(wait)
        angle = 2.0 * math.pi * k / 40.0
        position = list(pose["position_mm"])
        position[0] += _CIRCLE_MM * math.cos(angle)
        position[1] += _CIRCLE_MM * math.sin(angle)
        body = {
            "robot": setup["robot"],
            "pose": {"position_mm": position, "rpy_deg": pose["rpy_deg"]},
            **frames,
        }
        sent = time.monotonic()
        try:
            answer = client.post("api/ik", json=body)
            if answer.status_code != 200:
                errors.append(answer.status_code)
            else:
                times_ms.append(1000.0 * (time.monotonic() - sent))
            if k % _FK_EVERY == 0:
                fk = client.post(
                    "api/fk",
                    json={"robot": setup["robot"], "joints_deg": setup["home"], **frames},
                )
                if fk.status_code != 200:
                    errors.append(fk.status_code)
        except httpx.HTTPError:
            errors.append(0)
        k += 1


def _p95(values: list[float]) -> float:
    return float(np.percentile(values, 95)) if values else math.nan


def _run_drags(
    url: str, token: str, setup: dict[str, object], reviewers: int, seconds: float
) -> tuple[list[float], list[list[float]], int]:
    """Return the owner's drag times, each reviewer's, and the error count, dragging together."""
    until = time.monotonic() + seconds
    owner_times: list[float] = []
    reviewer_times: list[list[float]] = [[] for _ in range(reviewers)]
    errors: list[int] = []
    clients = [_client(url, "127.0.0.1", None)] + [
        _client(url, f"127.0.0.{2 + r}", token) for r in range(reviewers)
    ]
    threads = [
        threading.Thread(
            target=_drag, args=(clients[0], setup, _OWNER_SPACING_S, until, owner_times, errors)
        )
    ] + [
        threading.Thread(
            target=_drag,
            args=(clients[1 + r], setup, _REVIEWER_SPACING_S, until, reviewer_times[r], errors),
        )
        for r in range(reviewers)
    ]
    for thread in threads:
        thread.start()
    for thread in threads:
        thread.join()
    for client in clients:
        client.close()
    return owner_times, reviewer_times, len(errors)


def _many_clients(url: str, token: str, setup: dict[str, object], count: int, rounds: int) -> int:
    """Errors of ``count`` reviewers from separate addresses, each ``rounds`` reads and IKs."""
    errors: list[int] = []
    body = {"robot": setup["robot"], "pose": setup["pose"], "base": setup["base"]}

    def one(index: int) -> None:
        with _client(url, f"127.0.1.{1 + index}", token) as client:
            for _ in range(rounds):
                for method, path in (
                    ("GET", "api/health"),
                    ("GET", "api/cell"),
                    ("POST", "api/ik"),
                ):
                    try:
                        answer = client.request(
                            method, path, json=body if method == "POST" else None
                        )
                        if answer.status_code != 200:
                            errors.append(answer.status_code)
                    except httpx.HTTPError:
                        errors.append(0)
                time.sleep(0.1)

    threads = [threading.Thread(target=one, args=(i,)) for i in range(count)]
    for thread in threads:
        thread.start()
    for thread in threads:
        thread.join()
    return len(errors)


def bench_review_load(quick: bool) -> dict[str, float]:
    """Reviewers' and the owner's drag round trips on a shared server (module docstring).

    Targets: each of 10 reviewers' p95 at most 150 ms, the owner's p95 under that
    load at most 1.2 times its p95 alone, 50 clients without an error.
    """
    seconds = 4.0 if quick else 10.0
    token = new_review_token()
    with _shared_server(token) as url:
        setup = _home_request(url)
        _run_drags(url, token, setup, 1, 3.0)  # warm the server and the reviewer worker
        alone, _, _ = _run_drags(url, token, setup, 0, seconds)
        loaded, reviewers, drag_errors = _run_drags(url, token, setup, 10, seconds)
        errors_50 = _many_clients(url, token, setup, 50, 3 if quick else 10)
    return {
        "owner_drag_p95_ms_alone": _p95(alone),
        "owner_drag_p95_ms_under_review_load": _p95(loaded),
        "owner_drag_p95_ratio_under_review_load": _p95(loaded) / _p95(alone),
        "review_drag_p95_ms_10_clients": max(_p95(times) for times in reviewers),
        "review_drag_errors_10_clients": float(drag_errors),
        "review_errors_50_clients": float(errors_50),
    }

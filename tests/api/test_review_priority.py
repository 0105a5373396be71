"""Reviewers' work waits for the owner and is budgeted by cost; finished jobs are bounded.

The rules are our own contract (posebridge.api.lanes, posebridge.api.jobs,
REVIEWER_CAPS in posebridge.api.auth). Orders of events are asserted, never
durations. Token buckets: common practice, no source.
"""

from __future__ import annotations

import asyncio
import os
import shutil
import threading
from collections.abc import AsyncIterator, Iterator
from operator import attrgetter
from pathlib import Path
from typing import Any

import httpx
import pytest
from fastapi import FastAPI
from pydantic import BaseModel

from posebridge.api import auth
from posebridge.api.app import create_app
from posebridge.api.auth import REVIEWER_CAPS, enable_review_sharing
from posebridge.api.jobs import (
    KEPT_FINISHED,
    KEPT_FINISHED_S,
    MAX_ACTIVE_OWNER,
    MAX_ACTIVE_PER_CLIENT,
    MAX_STARTS_PER_MINUTE,
    JobLimitError,
    JobManager,
)
from posebridge.api.lanes import REVIEWER_NICE, LaneFullError, ReviewerLane
from posebridge.api.settings import Settings
from posebridge.resources import data_folder
from posebridge.review.access import RateCap, RateLimiter, new_review_token

OWNER_URL = "http://127.0.0.1:8000"
REMOTE_URL = "http://192.0.2.7:8000"
LOG = "j1,j2,j3,j4,j5,j6\n" + "0,-20,20,0,90,0\n" * 6


@pytest.fixture
def token() -> str:
    return new_review_token()


@pytest.fixture
def shared_app(tmp_path: Path, token: str) -> Iterator[FastAPI]:
    cell = tmp_path / "press.json"
    shutil.copy(data_folder("robots") / "demo-cell.json", cell)
    app = create_app(Settings(warm_up=False, cell_path=cell, host_names=("192.0.2.7",)))
    enable_review_sharing(app, token)
    yield app
    app.state.jobs.close()
    app.state.reviewer_lane.close()  # ends the reviewer worker process


@pytest.fixture
async def reviewer(shared_app: FastAPI, token: str) -> AsyncIterator[httpx.AsyncClient]:
    transport = httpx.ASGITransport(app=shared_app, client=("10.0.0.5", 1234))
    headers = {"Authorization": f"Bearer {token}"}
    async with httpx.AsyncClient(transport=transport, base_url=REMOTE_URL, headers=headers) as c:
        yield c


@pytest.fixture
async def owner(shared_app: FastAPI) -> AsyncIterator[httpx.AsyncClient]:
    transport = httpx.ASGITransport(app=shared_app, client=("127.0.0.1", 5000))
    async with httpx.AsyncClient(transport=transport, base_url=OWNER_URL) as c:
        yield c


@pytest.mark.anyio
async def test_reviewer_computation_runs_in_reviewer_worker(
    shared_app: FastAPI,
    reviewer: httpx.AsyncClient,
    owner: httpx.AsyncClient,
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    lane: ReviewerLane = shared_app.state.reviewer_lane
    sent: list[str] = []
    real_run = lane.run

    async def recorded(function: Any, *args: Any, **kwargs: Any) -> Any:
        sent.append(function.__name__)
        return await real_run(function, *args, **kwargs)

    monkeypatch.setattr(lane, "run", recorded)
    body = {"joints_deg": [0, -20, 20, 0, 90, 0]}
    from_reviewer = await reviewer.post("/api/cell/diagnose/pose", json=body)
    from_owner = await owner.post("/api/cell/diagnose/pose", json=body)
    assert from_reviewer.status_code == from_owner.status_code == 200
    # the same answer, computed in the worker process for the reviewer only
    assert from_reviewer.json() == from_owner.json()
    assert sent == ["_diagnose_pose"]
    refused = await reviewer.post("/api/fk", json={"robot": "/etc/x.toml", "joints_deg": [0] * 6})
    assert refused.status_code == 403  # a refusal in the worker keeps its status
    # our own contract: another process, niced by REVIEWER_NICE
    worker = lane.worker_pid()
    assert worker != os.getpid()
    assert os.getpriority(os.PRIO_PROCESS, worker) == min(
        19, os.getpriority(os.PRIO_PROCESS, 0) + REVIEWER_NICE
    )


@pytest.mark.anyio
async def test_owner_is_served_while_a_reviewer_job_runs(
    shared_app: FastAPI,
    reviewer: httpx.AsyncClient,
    owner: httpx.AsyncClient,
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    lane: ReviewerLane = shared_app.state.reviewer_lane
    jobs_sent: list[str] = []
    real_run_job = lane.run_job

    def recorded(function: Any, *args: Any, **kwargs: Any) -> Any:
        jobs_sent.append(function.__name__)
        return real_run_job(function, *args, **kwargs)

    monkeypatch.setattr(lane, "run_job", recorded)
    # the largest three-joint map a reviewer may start: it runs until cancelled below
    big = {"joints": [0, 1, 2], "hold_deg": [0, 10, -20, 0, 55, 0], "resolution": 48}
    started = await reviewer.post("/api/maps/joint", json=big)
    assert started.status_code == 202
    job = started.json()["id"]
    while (await reviewer.get(f"/api/jobs/{job}")).json()["state"] != "running":
        await asyncio.sleep(0.01)  # wait on the job's state
    for _ in range(3):
        assert (await owner.get("/api/health")).status_code == 200
        answer = await owner.post("/api/cell/diagnose/pose", json={"joints_deg": [0] * 6})
        assert answer.status_code == 200
    assert (await reviewer.get(f"/api/jobs/{job}")).json()["state"] == "running"
    assert jobs_sent == ["_joint_map"]
    assert (await reviewer.post(f"/api/jobs/{job}/cancel")).status_code == 200
    while (await reviewer.get(f"/api/jobs/{job}")).json()["state"] == "running":
        await asyncio.sleep(0.01)  # the worker stops at its next chunk
    assert (await reviewer.get(f"/api/jobs/{job}")).json()["state"] == "cancelled"


@pytest.mark.anyio
async def test_lane_waits_for_owner_requests() -> None:
    lane = ReviewerLane(owner_wait_s=60.0)
    lane.owner_started()
    task = asyncio.ensure_future(lane.run(attrgetter("paths_allowed")))
    await asyncio.sleep(0.2)
    assert not task.done()
    lane.owner_finished()
    assert await task is False  # computed in the worker, where paths are never allowed
    lane.close()


@pytest.mark.anyio
async def test_lane_refuses_beyond_waiting_cap() -> None:
    lane = ReviewerLane(max_waiting=1)
    first = asyncio.ensure_future(lane.run(attrgetter("paths_allowed")))
    await asyncio.sleep(0)  # the first call is counted before it is sent
    with pytest.raises(LaneFullError, match="1 reviewer computations are waiting"):
        await lane.run(attrgetter("paths_allowed"))
    assert await first is False
    lane.close()


@pytest.mark.anyio
async def test_reviewer_log_rows_budget(
    shared_app: FastAPI,
    reviewer: httpx.AsyncClient,
    owner: httpx.AsyncClient,
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    small = RateCap(per_second=0.01, burst=10)
    monkeypatch.setitem(auth.REVIEWER_CAPS, "log_rows", small)
    shared_app.state.review_limits = RateLimiter(
        {**REVIEWER_CAPS, "log_rows": small}, clock=lambda: 0.0
    )
    first = await reviewer.post("/api/cell/diagnose/log", json={"csv": LOG})
    assert first.status_code == 200
    second = await reviewer.post("/api/cell/diagnose/log", json={"csv": LOG})
    assert second.status_code == 429
    # token bucket (clock held still): 4 rows left, 6 asked, refilled at 0.01 rows/s -> 200 s
    assert second.json()["detail"] == (
        "too much work from this address for a shared review: 6 rows asked, at most 10 rows "
        "at once and 0.6 a minute; retry in 200.0 s"
    )
    assert second.headers["retry-after"] == "200"
    for _ in range(3):  # the owner is never charged
        assert (await owner.post("/api/cell/diagnose/log", json={"csv": LOG})).status_code == 200


class _Tiny(BaseModel):
    value: int


def test_finished_jobs_are_bounded_and_expire() -> None:
    now = [0.0]
    jobs = JobManager(clock=lambda: now[0])
    started = []
    for k in range(KEPT_FINISHED + 8):
        job = jobs.start("tiny", f"client-{k}", lambda progress, cancel, k=k: _Tiny(value=k))
        started.append(job.id)
    for job_id in started[-1:]:
        while True:  # wait on the job's state (the worker runs them in order)
            try:
                if not jobs.get(job_id).active:
                    break
            except KeyError:
                break
    kept = []
    for job_id in started:
        try:
            kept.append(jobs.get(job_id).id)
        except KeyError:
            continue
    # the newest KEPT_FINISHED finished jobs remain, the older ones (and results) are gone
    assert kept == started[-KEPT_FINISHED:]
    now[0] = KEPT_FINISHED_S + 1.0
    for job_id in kept:
        with pytest.raises(KeyError):
            jobs.get(job_id)
    jobs.close()


def test_reviewer_job_steps_yield_to_owner() -> None:
    pauses: list[str] = []
    jobs = JobManager(reviewer_pause=lambda: pauses.append(threading.current_thread().name))

    def work(progress: object, cancel: object) -> _Tiny:
        for step in range(3):
            progress(step + 1, 3)  # type: ignore[operator]
        return _Tiny(value=1)

    owner_job = jobs.start("tiny", "owner", work)
    reviewer_job = jobs.start("tiny", "reviewer", work, reviewer=True)
    for job in (owner_job, reviewer_job):
        while jobs.get(job.id).active:
            threading.Event().wait(0.01)
    assert pauses == ["posebridge-review-jobs"] * 3
    jobs.close()


def test_owner_starts_are_never_refused_reviewer_starts_are() -> None:
    gate = threading.Event()

    def blocked(progress: object, cancel: threading.Event) -> _Tiny:
        gate.wait()
        return _Tiny(value=0)

    jobs = JobManager()
    owner_jobs = [jobs.start("map", "127.0.0.1", blocked) for _ in range(MAX_STARTS_PER_MINUTE + 5)]
    # our own contract: every owner start is accepted, at most MAX_ACTIVE_OWNER stay active
    # (older queued ones superseded), the newest is among them
    active = [job for job in owner_jobs if job.active]  # superseded ones may be forgotten
    assert len(active) <= MAX_ACTIVE_OWNER
    assert owner_jobs[-1] in active
    for _ in range(MAX_ACTIVE_PER_CLIENT):
        jobs.start("map", "10.0.0.2", blocked, reviewer=True)
    # our own contract: a reviewer is capped at MAX_ACTIVE_PER_CLIENT active jobs
    with pytest.raises(JobLimitError, match="at most 3"):
        jobs.start("map", "10.0.0.2", blocked, reviewer=True)
    gate.set()
    while jobs.get(owner_jobs[-1].id).active:  # wait on the job's state
        threading.Event().wait(0.01)
    assert jobs.get(owner_jobs[-1].id).state == "done"
    jobs.close()

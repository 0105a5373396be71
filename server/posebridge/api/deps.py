"""Dependency aliases, so handlers read as typed parameters.

The settings, the robot cache and the cell store live in ``app.state`` (set by
:func:`posebridge.api.app.create_app`), never in module globals, so two apps
in one process do not share them.
"""

from __future__ import annotations

import threading
from collections.abc import Callable
from typing import Annotated, Any, TypeVar

from fastapi import Depends, HTTPException, Request
from pydantic import BaseModel
from starlette.concurrency import run_in_threadpool

from posebridge.api.cell_store import CellStore
from posebridge.api.compute_context import ComputeContext
from posebridge.api.jobs import JobManager, JobWork
from posebridge.api.lanes import LaneFullError, ReviewerLane, WorkerRefusedError
from posebridge.api.robot_cache import RobotCache
from posebridge.api.settings import Settings

__all__ = [
    "CellsDep",
    "JobsDep",
    "RobotsDep",
    "SettingsDep",
    "compute_for",
    "job_work",
    "owner_context",
]

T = TypeVar("T")


def _settings(request: Request) -> Settings:
    settings: Settings = request.app.state.settings
    return settings


def _robots(request: Request) -> RobotCache:
    robots: RobotCache = request.app.state.robots
    return robots


def _cells(request: Request) -> CellStore:
    cells: CellStore = request.app.state.cells
    return cells


def _jobs(request: Request) -> JobManager:
    jobs: JobManager = request.app.state.jobs
    return jobs


def _is_owner(request: Request) -> bool:
    return bool(getattr(request.state, "review_role", "reviewer") == "owner")


def owner_context(request: Request) -> ComputeContext:
    """Return the owner's computation context: the server's robots and cell, paths allowed."""
    cells: CellStore = request.app.state.cells
    return ComputeContext(request.app.state.robots, cells.read, paths_allowed=True)


async def compute_for(request: Request, function: Callable[..., T], *args: Any) -> T:
    """Run the computation ``function(context, *args)`` for the asker.

    The owner's runs on the server's thread pool; a reviewer's in the reviewer
    worker process (:mod:`posebridge.api.lanes`; 503 with ``Retry-After`` when
    too many are waiting), on the cell version the server reads now.
    ``function`` is a module-level function and ``args`` are picklable.
    """
    if _is_owner(request):
        return await run_in_threadpool(function, owner_context(request), *args)
    lane: ReviewerLane = request.app.state.reviewer_lane
    cells: CellStore = request.app.state.cells
    try:
        return await lane.run(function, *args, read_cell=cells.read)
    except LaneFullError as error:
        raise HTTPException(
            status_code=503, detail=f"reviewers: {error}", headers={"Retry-After": "2"}
        ) from error
    except WorkerRefusedError as error:
        raise error.http_error() from error


def job_work(request: Request, function: Callable[..., BaseModel], *args: Any) -> JobWork:
    """Return the job body running ``function(context, *args, progress=..., cancel=...)``.

    For the asker: the owner's on the owner's job worker, a reviewer's in the reviewer
    worker process (:meth:`posebridge.api.lanes.ReviewerLane.run_job`).
    """
    if _is_owner(request):
        context = owner_context(request)

        def owner_work(progress: Callable[[int, int], None], cancel: threading.Event) -> BaseModel:
            return function(context, *args, progress=progress, cancel=cancel)

        return owner_work
    lane: ReviewerLane = request.app.state.reviewer_lane
    cells: CellStore = request.app.state.cells

    def reviewer_work(progress: Callable[[int, int], None], cancel: threading.Event) -> BaseModel:
        return lane.run_job(function, *args, read_cell=cells.read, progress=progress, cancel=cancel)

    return reviewer_work


SettingsDep = Annotated[Settings, Depends(_settings)]
RobotsDep = Annotated[RobotCache, Depends(_robots)]
CellsDep = Annotated[CellStore, Depends(_cells)]
JobsDep = Annotated[JobManager, Depends(_jobs)]

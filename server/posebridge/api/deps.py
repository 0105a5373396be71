"""Dependency aliases, so handlers read as typed parameters.

The settings, the robot cache and the cell store live in ``app.state`` (set by
:func:`posebridge.api.app.create_app`), never in module globals, so two apps
in one process do not share them.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Annotated, TypeVar

from fastapi import Depends, HTTPException, Request
from starlette.concurrency import run_in_threadpool

from posebridge.api.cell_store import CellStore
from posebridge.api.jobs import JobManager
from posebridge.api.lanes import LaneFullError, ReviewerLane
from posebridge.api.robot_cache import RobotCache
from posebridge.api.settings import Settings

__all__ = ["CellsDep", "JobsDep", "RobotsDep", "SettingsDep", "compute_for"]

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


async def compute_for(request: Request, work: Callable[[], T]) -> T:
    """Run the computation ``work()`` for the asker.

    The owner's on the server's thread pool, a reviewer's in the reviewer lane
    (:mod:`posebridge.api.lanes`; 503 with ``Retry-After`` when too many are waiting).
    """
    if getattr(request.state, "review_role", "reviewer") == "owner":
        return await run_in_threadpool(work)
    lane: ReviewerLane = request.app.state.reviewer_lane
    try:
        return await lane.run(work)
    except LaneFullError as error:
        raise HTTPException(
            status_code=503, detail=f"reviewers: {error}", headers={"Retry-After": "2"}
        ) from error


SettingsDep = Annotated[Settings, Depends(_settings)]
RobotsDep = Annotated[RobotCache, Depends(_robots)]
CellsDep = Annotated[CellStore, Depends(_cells)]
JobsDep = Annotated[JobManager, Depends(_jobs)]

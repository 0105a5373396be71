"""Dependency aliases, so handlers read as typed parameters.

The settings, the robot cache and the cell store live in ``app.state`` (set by
:func:`posebridge.api.app.create_app`), never in module globals, so two apps
in one process do not share them.
"""

from __future__ import annotations

from typing import Annotated

from fastapi import Depends, Request

from posebridge.api.cell_store import CellStore
from posebridge.api.jobs import JobManager
from posebridge.api.robot_cache import RobotCache
from posebridge.api.settings import Settings

__all__ = ["CellsDep", "JobsDep", "RobotsDep", "SettingsDep"]


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


SettingsDep = Annotated[Settings, Depends(_settings)]
RobotsDep = Annotated[RobotCache, Depends(_robots)]
CellsDep = Annotated[CellStore, Depends(_cells)]
JobsDep = Annotated[JobManager, Depends(_jobs)]

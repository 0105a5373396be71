"""Dependency aliases, so handlers read as typed parameters.

The settings and the robot cache live in ``app.state`` (set by
:func:`posebridge.api.app.create_app`), never in module globals, so two apps
in one process do not share them.
"""

from __future__ import annotations

from typing import Annotated

from fastapi import Depends, Request

from posebridge.api.robot_cache import RobotCache
from posebridge.api.settings import Settings

__all__ = ["RobotsDep", "SettingsDep"]


def _settings(request: Request) -> Settings:
    settings: Settings = request.app.state.settings
    return settings


def _robots(request: Request) -> RobotCache:
    robots: RobotCache = request.app.state.robots
    return robots


SettingsDep = Annotated[Settings, Depends(_settings)]
RobotsDep = Annotated[RobotCache, Depends(_robots)]

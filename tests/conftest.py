"""Shared fixtures: keep this file small; helpers for one area live in its tests."""

from __future__ import annotations

from collections.abc import Callable
from functools import cache

import pytest

from posebridge.robot.library import load_robot
from posebridge.robot.model import Robot


@pytest.fixture(scope="session")
def robot() -> Callable[[str], Robot]:
    """Loader for bundled robots by name or file, cached per session: ``robot("pb-arm6")``."""
    return cache(load_robot)

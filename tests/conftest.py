"""Shared fixtures: keep this file small; helpers for one area live in its tests."""

from __future__ import annotations

from collections.abc import Callable, Iterator
from functools import cache

import pytest

from posebridge.robot.library import load_robot
from posebridge.robot.model import Robot
from posebridge.robot.toml_format import parse_robot_toml

UNIT_PLANAR_2R = """
schema_version = 1
[robot]
name = "test-unit-2r"
kind = "planar_2r"
convention = "origin_axis"

[[joint]]
name = "j1"
type = "revolute"
origin = { xyz_mm = [0, 0, 0], rpy_deg = [0, 0, 0] }
axis = [0, 0, 1]
limits = { min_deg = -180, max_deg = 180, velocity_deg_s = 90, acceleration_deg_s2 = 360 }

[[joint]]
name = "j2"
type = "revolute"
origin = { xyz_mm = [1000, 0, 0], rpy_deg = [0, 0, 0] }
axis = [0, 0, 1]
limits = { min_deg = -180, max_deg = 180, velocity_deg_s = 90, acceleration_deg_s2 = 360 }

[flange]
xyz_mm = [1000, 0, 0]
rpy_deg = [0, 0, 0]
"""


@pytest.fixture(scope="session")
def robot() -> Callable[[str], Robot]:
    """Loader for bundled robots by name or file, cached per session: ``robot("pb-arm6")``."""
    return cache(load_robot)


@pytest.fixture(scope="session")
def unit_planar_2r() -> Robot:
    """Planar 2R arm in the base x-y plane with 1 m links (the textbook planar 2R case), no capsules."""
    return parse_robot_toml(UNIT_PLANAR_2R, "test-unit-2r.toml")


@pytest.fixture(scope="module")
def dask_scheduler() -> Iterator[str]:
    """Address of a two-worker Dask ``LocalCluster`` (processes, loopback) for one test module."""
    from distributed import LocalCluster  # imported here: only executor tests need it

    cluster = LocalCluster(
        n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1", dashboard_address=None
    )
    try:
        yield cluster.scheduler_address
    finally:
        cluster.close()

"""Shared fixtures: keep this file small; helpers for one area live in its tests."""

from __future__ import annotations

from collections.abc import Callable, Iterator
from functools import cache

import pytest

from posebridge.robot.library import load_robot
from posebridge.robot.model import Robot


@pytest.fixture(scope="session")
def robot() -> Callable[[str], Robot]:
    """Loader for bundled robots by name or file, cached per session: ``robot("pb-arm6")``."""
    return cache(load_robot)


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

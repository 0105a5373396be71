"""Base placement timing.

Figures
-------
``placement_50x50x8_s``
    Base placement for the demo cell (robots/demo-cell.json: pb-arm6 with its
    gripper, 10 targets with their approach poses and the paths' pose
    waypoints, 22 obstacles) over 50 x 50 positions within ±1 m of the
    current base x 8 yaws at the current pedestal height (20 000 candidates,
    :func:`posebridge.planning.placement.search_base_placement` and its report,
    :func:`posebridge.results.placement.placement_result`) on a local
    pool of two worker processes (initializer
    :func:`~posebridge.geometry.warm.warm_geometry`), one run after
    a warm-up search of three chunks (worker start and kernel loading are not timed). Target: 5 s on two cores.
``placement_speedup_vs_one_worker``
    The same search on :class:`posebridge.compute.SerialExecutor` (one
    worker, one numba thread) divided by the pool time: the baseline runs in
    the same process, so the ratio survives a noisy machine.

Quick mode keeps the key names and measures 20 x 20 positions x 8 yaws
(3 200 candidates, reported as is, not scaled).
"""

from __future__ import annotations

import time

from posebridge.cell.files import load_cell
from posebridge.cell.scene import resolve_scene
from posebridge.compute import Executor, LocalPoolExecutor, SerialExecutor, worker_initializer
from posebridge.geometry.warm import warm_geometry
from posebridge.planning.placement import (
    PlacementGrid,
    search_base_placement,
)
from posebridge.resources import data_folder
from posebridge.results.placement import placement_result

__all__ = ["bench_placement"]

POOL_WORKERS = 2
YAWS = 8


def _seconds(executor: Executor, count: int) -> float:
    path = data_folder("robots") / "demo-cell.json"
    scene = resolve_scene(load_cell(path), path)
    search_base_placement(
        scene, PlacementGrid.around(scene, count=32, yaw_count=1), executor=executor
    )
    grid = PlacementGrid.around(scene, count=count, yaw_count=YAWS)
    start = time.perf_counter()
    placement_result(search_base_placement(scene, grid, executor=executor))
    return time.perf_counter() - start


def bench_placement(quick: bool) -> dict[str, float]:
    """Measure base placement wall time on two workers and its speed-up over one (module docstring)."""
    count = 20 if quick else 50
    with LocalPoolExecutor(POOL_WORKERS, initializer=worker_initializer(warm_geometry)) as pool:
        pooled = _seconds(pool, count)
    with SerialExecutor() as serial:
        one_worker = _seconds(serial, count)
    return {
        "placement_50x50x8_s": pooled,
        "placement_speedup_vs_one_worker": one_worker / pooled,
    }

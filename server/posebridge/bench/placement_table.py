"""Table placement timing.

Figures
-------
``placement_table_21x21_s``
    Table placement for the demo track cell (robots/demo-track-cell.json: pb-arm6 on its
    track, table-1 carrying the weld jig and two of the four targets) over 21 x 21 positions
    of the table within ±1 m of its current one
    (:func:`posebridge.planning.placement_table.search_table_placement` and its report) on a
    local pool of two worker processes, one run after a warm-up search of a 7 x 7 grid (three chunks, so every worker has run one)
    (worker start and kernel loading are not timed).
``placement_table_speedup_vs_one_worker``
    The same search on :class:`posebridge.compute.SerialExecutor` divided by the pool time
    (both in the same process, so the ratio survives a noisy machine).

Quick mode keeps the key names and measures 9 x 9 positions (81 candidates, not scaled).
"""

from __future__ import annotations

import time

from posebridge.cell.files import load_cell
from posebridge.cell.scene import resolve_scene
from posebridge.compute import Executor, LocalPoolExecutor, SerialExecutor, worker_initializer
from posebridge.geometry.warm import warm_geometry
from posebridge.planning.placement_table import search_table_placement, table_grid
from posebridge.resources import data_folder
from posebridge.results.placement import placement_result

__all__ = ["bench_placement_table"]

POOL_WORKERS = 2


def _seconds(executor: Executor, count: int) -> float:
    path = data_folder("robots") / "demo-track-cell.json"
    scene = resolve_scene(load_cell(path), path)
    search_table_placement(scene, table_grid(scene, count=7), executor=executor)
    grid = table_grid(scene, count=count)
    start = time.perf_counter()
    placement_result(search_table_placement(scene, grid, executor=executor))
    return time.perf_counter() - start


def bench_placement_table(quick: bool) -> dict[str, float]:
    """Measure table placement wall time on two workers and its speed-up over one (module docstring)."""
    count = 9 if quick else 21
    with LocalPoolExecutor(POOL_WORKERS, initializer=worker_initializer(warm_geometry)) as pool:
        pooled = _seconds(pool, count)
    with SerialExecutor() as serial:
        one_worker = _seconds(serial, count)
    return {
        "placement_table_21x21_s": pooled,
        "placement_table_speedup_vs_one_worker": one_worker / pooled,
    }

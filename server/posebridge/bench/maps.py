"""Workspace and joint-space map timings.

Figures
-------
``joint_map_256_s``
    A 256 x 256 obstacle map over joints j2 and j3 of the demo cell
    (robots/demo-cell.json: pb-arm6 with its gripper among 22 obstacles),
    the other joints at the robot's home, computed in this process with numba
    threads (:func:`posebridge.spaces.joint_map.joint_map`); best of three
    after a warm-up. Target: 0.3 s.
``joint_map_speedup_vs_one_worker``
    The same map with numba limited to one thread divided by the time on all
    threads, measured in the same run.
``reach_map_50mm_s``
    A reach map of pb-arm6 (default tool) at 50 mm voxels with the 26 tool
    directions (:func:`posebridge.spaces.workspace.reach_map`) on a local
    pool of two worker processes, one run after a small warm-up map (worker
    start and kernel loading are not timed). Target: 10 s on two cores.
``reach_map_speedup_vs_one_worker``
    The same map on :class:`posebridge.compute.SerialExecutor` (one worker,
    one numba thread) divided by the pool time: the baseline is run in the
    same process, so the ratio survives a noisy machine.

Quick mode keeps the key names and measures smaller problems: the joint map
at 128 x 128 (reported as is, not scaled) and the reach maps at 100 mm
voxels (one eighth of the voxels).
"""

from __future__ import annotations

import time

import numba

from posebridge.bench.timing import best_seconds
from posebridge.cell.clearance import clearance_scene
from posebridge.cell.files import load_cell
from posebridge.cell.scene import resolve_scene
from posebridge.compute import LocalPoolExecutor, SerialExecutor, worker_initializer
from posebridge.geometry.warm import warm_geometry
from posebridge.resources import data_folder
from posebridge.robot.library import load_robot
from posebridge.spaces.joint_map import joint_map
from posebridge.spaces.workspace import reach_map

__all__ = ["bench_maps"]

ROBOT = "pb-arm6"
POOL_WORKERS = 2


def _joint_map_seconds(resolution: int) -> tuple[float, float]:
    """Best times of the demo map on all numba threads and on one thread, s."""
    path = data_folder("robots") / "demo-cell.json"
    scene = clearance_scene(resolve_scene(load_cell(path), path))
    hold = scene.arm.robot.home_configuration()

    def run() -> object:
        return joint_map(scene, (1, 2), hold, resolution=resolution)

    threaded = best_seconds(run)
    threads = numba.get_num_threads()
    numba.set_num_threads(1)
    try:
        single = best_seconds(run, repeats=2)
    finally:
        numba.set_num_threads(threads)
    return threaded, single


def bench_maps(quick: bool) -> dict[str, float]:
    """Joint-map and reach-map wall times and the reach map's speed-up over one worker (module docstring)."""
    robot = load_robot(ROBOT)
    voxel = 0.1 if quick else 0.05
    threaded, single = _joint_map_seconds(128 if quick else 256)
    figures = {"joint_map_256_s": threaded, "joint_map_speedup_vs_one_worker": single / threaded}
    with LocalPoolExecutor(POOL_WORKERS, initializer=worker_initializer(warm_geometry)) as pool:
        reach_map(robot, voxel_size_m=0.3, executor=pool)
        start = time.perf_counter()
        reach_map(robot, voxel_size_m=voxel, executor=pool)
        pooled = time.perf_counter() - start
    with SerialExecutor() as serial:
        reach_map(robot, voxel_size_m=0.3, executor=serial)
        start = time.perf_counter()
        reach_map(robot, voxel_size_m=voxel, executor=serial)
        one_worker = time.perf_counter() - start
    figures["reach_map_50mm_s"] = pooled
    figures["reach_map_speedup_vs_one_worker"] = one_worker / pooled
    return figures

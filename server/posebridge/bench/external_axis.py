"""Benchmark: feasible track intervals of the demo cell's targets against a dense sweep.

Sweep + bisection against a plain dense sweep of 1000 track positions solved with the same analytic
IK.

Poses: the target and approach poses of ``robots/demo-track-cell.json`` that are not on the
turntable, each jittered (seeded) by up to 100 mm and 10 deg into 50 poses (20 quick). The
baseline is :func:`~posebridge.cell.external_kinematics.feasible_intervals` with 1000 samples
and no bisection (tolerance = spacing), the same IK batch path.

``ik_external_axis_ratio_vs_sweep`` is the ratio as the functions run on every numba
thread: the dense sweep's 200,000 poses in one IK batch, ours in its sweep and search-step
batches (the IK's parallel driver from two blocks, 256 poses, and the step kernels from 256
open brackets; :mod:`posebridge.kernel_threads` for how the threads wait between them).
``ik_external_axis_ratio_vs_sweep_one_thread`` is the same
ratio with both runs on one numba thread (``numba.set_num_threads(1)`` around both, the
thread count restored after): the work ratio per core. The two runs are timed in turn,
best of 7 each (:func:`~posebridge.bench.timing.best_seconds_alternating`), so that other load
on the machine falls on both alike.
"""

from __future__ import annotations

import numba
import numpy as np

from posebridge.bench.timing import best_seconds_alternating
from posebridge.cell.external_kinematics import feasible_intervals, moving_axes
from posebridge.cell.files import load_cell
from posebridge.cell.scene import resolve_scene
from posebridge.resources import data_folder
from posebridge.transforms import rotation_matrix_from_rpy

__all__ = ["bench_external_axis"]

DENSE_SAMPLES = 1000


def bench_external_axis(quick: bool) -> dict[str, float]:
    """Intervals per second and the ratios to the dense sweep (module docstring)."""
    path = data_folder("robots") / "demo-track-cell.json"
    scene = resolve_scene(load_cell(path), path)
    rows = [k for k in range(len(scene.targets.names)) if moving_axes(scene, k) == [0]]
    base = np.concatenate(
        [scene.targets.T_world_target[rows], scene.targets.T_world_approach[rows]]
    )
    copies = 20 if quick else 50
    rng = np.random.default_rng(3)
    poses = np.repeat(base, copies, axis=0)
    poses[:, :3, 3] += rng.uniform(-0.1, 0.1, (len(poses), 3))
    jitter = rotation_matrix_from_rpy(rng.uniform(-10.0, 10.0, (len(poses), 3)), degrees=True)
    poses[:, :3, :3] = poses[:, :3, :3] @ jitter
    spacing = (scene.external.upper[0] - scene.external.lower[0]) / (DENSE_SAMPLES - 1)
    repeats = 2 if quick else 7

    def ours() -> object:
        return feasible_intervals(scene, poses, 0)

    def sweep() -> object:
        return feasible_intervals(scene, poses, 0, samples=DENSE_SAMPLES, tolerance=spacing)

    ours_s, sweep_s = best_seconds_alternating([ours, sweep], repeats=repeats)
    threads = numba.get_num_threads()
    numba.set_num_threads(1)
    try:
        ours_one_s, sweep_one_s = best_seconds_alternating([ours, sweep], repeats=repeats)
    finally:
        numba.set_num_threads(threads)
    return {
        "ik_external_axis_intervals_per_s": len(poses) / ours_s,
        "ik_external_axis_ratio_vs_sweep": sweep_s / ours_s,
        "ik_external_axis_ratio_vs_sweep_one_thread": sweep_one_s / ours_one_s,
    }

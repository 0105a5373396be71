"""The interval search's parallel step kernels and IK driver give the serial answer.

posebridge.cell.interval_search runs a search step's per-bracket work on numba's threads
from PARALLEL_BRACKETS open brackets, and posebridge.kinematics.ik.finishing.run_blocks
solves batches from PARALLEL_POSES poses on the parallel driver. Each bracket and each pose
is computed alone, so the answers must be bit-identical to the serial kernels' (the
reference run here: the same search with both thresholds raised out of reach). The
search's answers themselves are checked against a dense brute-force sweep in
tests/cell/test_external_axes.py.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import numpy as np
import pytest

from posebridge.cell import interval_search
from posebridge.cell.external_kinematics import feasible_intervals
from posebridge.cell.files import load_cell
from posebridge.cell.scene import Scene, resolve_scene
from posebridge.kinematics.ik import finishing
from posebridge.resources import data_folder
from posebridge.transforms import rotation_matrix_from_rpy

DEMO = data_folder("robots") / "demo-track-cell.json"


@pytest.fixture(scope="module")
def demo() -> Scene:
    return resolve_scene(load_cell(DEMO), DEMO)


def _jittered_targets(scene: Scene, copies: int) -> np.ndarray:
    """The demo's track targets, each jittered (seeded) by up to 100 mm and 10 deg, (K, 4, 4)."""
    rows = [k for k, fixture in enumerate(scene.targets.fixtures) if fixture != "weld-jig"]
    rng = np.random.default_rng(11)
    T = np.repeat(scene.targets.T_world_target[rows], copies, axis=0)
    T[:, :3, 3] += rng.uniform(-0.1, 0.1, (len(T), 3))
    T[:, :3, :3] = T[:, :3, :3] @ rotation_matrix_from_rpy(
        rng.uniform(-10.0, 10.0, (len(T), 3)), degrees=True
    )
    return T


def _counting(kernel: Callable[..., Any], calls: list[int]) -> Callable[..., Any]:
    def counted(*args: Any) -> Any:
        calls.append(len(args[0]))
        return kernel(*args)

    return counted


def test_parallel_search_equals_the_serial_one(
    demo: Scene, monkeypatch: pytest.MonkeyPatch
) -> None:
    T = _jittered_targets(demo, 40)
    settled: list[int] = []
    monkeypatch.setattr(
        interval_search, "_settle_parallel", _counting(interval_search._settle_parallel, settled)
    )
    parallel = feasible_intervals(demo, T, 0)
    # the case is large enough that some steps took the parallel kernels
    assert settled
    assert max(settled) >= interval_search.PARALLEL_BRACKETS
    monkeypatch.setattr(interval_search, "PARALLEL_BRACKETS", 10**9)
    monkeypatch.setattr(finishing, "PARALLEL_POSES", 10**9)
    serial = feasible_intervals(demo, T, 0)
    # reference: the same search on the serial kernels, bit for bit
    assert np.array_equal(parallel.ends, serial.ends)
    assert np.array_equal(parallel.offsets, serial.offsets)
    assert parallel.ik_poses == serial.ik_poses

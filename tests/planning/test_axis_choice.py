"""The rail and table searches' choice of an external axis value per pose and branch
(`placement._chosen_axis_values`) against a brute force over a dense grid of axis values."""

from __future__ import annotations

from types import SimpleNamespace
from typing import Any

import numpy as np

from posebridge.cell.external_kinematics import AxisIntervals
from posebridge.planning.placement import BRANCHES, _chosen_axis_values

STEP = 2.0**-10  # grid spacing of the brute force; every interval end is a multiple of it
GRID = np.arange(-4096, 4097) * STEP  # axis values, exact binary fractions
TOLERANCE = 1.5 * STEP  # lengths within 2 * TOLERANCE = 3 steps are equal
B = BRANCHES.shape[0]


def covered(spans: list[tuple[int, int]]) -> np.ndarray:
    """Whether each grid value lies in one of ``spans`` (grid steps), shape like GRID."""
    index = np.arange(GRID.shape[0]) - 4096  # GRID in steps
    inside = np.zeros(GRID.shape[0], dtype=bool)
    for lo, hi in spans:
        inside |= (index >= lo) & (index <= hi)
    return inside


def brute_force_middle(
    target: list[tuple[int, int]], approach: list[tuple[int, int]] | None
) -> float:
    """Middle of the longest run of feasible grid values, the first of runs within 2 * TOLERANCE.

    A value is feasible where it lies in one of the target's intervals (and in one of the
    approach pose's, when there is one); intervals are given in grid steps.
    """
    feasible = covered(target)
    if approach is not None:
        feasible &= covered(approach)
    runs = []
    k = 0
    while k < feasible.shape[0]:
        if feasible[k]:
            end = k
            while end + 1 < feasible.shape[0] and feasible[end + 1]:
                end += 1
            runs.append((GRID[k], GRID[end]))
            k = end + 1
        else:
            k += 1
    if not runs:
        return float("nan")
    longest = max(hi - lo for lo, hi in runs)
    lo, hi = next((lo, hi) for lo, hi in runs if hi - lo >= longest - 2.0 * TOLERANCE)
    return 0.5 * (lo + hi)


def random_intervals(rng: np.random.Generator) -> list[tuple[int, int]]:
    """Zero to three disjoint intervals in grid steps, ascending, at least two steps apart."""
    count = int(rng.integers(0, 4))
    ends = np.sort(rng.choice(np.arange(-2000, 2001), size=2 * count, replace=False)) * 2
    return [(int(ends[2 * i]), int(ends[2 * i + 1])) for i in range(count)]


def found_from(lists: list[list[list[tuple[int, int]]]]) -> AxisIntervals:
    """AxisIntervals holding ``lists[k][b]`` (grid steps) for target k and branch b."""
    flat = [span for per in lists for spans in per for span in spans]
    counts = [len(spans) for per in lists for spans in per]
    return AxisIntervals(
        axis=0,
        branches=[tuple(int(v) for v in row) for row in BRANCHES],  # type: ignore[misc]
        ends=np.array(flat, dtype=np.float64).reshape(-1, 2) * STEP,
        offsets=np.r_[0, np.cumsum(counts)].astype(np.intp),
        spacing=0.1,
        tolerance=TOLERANCE,
        ik_poses=0,
    )


def test_chosen_axis_values_match_a_brute_force_over_a_dense_grid() -> None:
    # poses 0..5; targets 0, 2, 4 with approach poses 1, 3 and none; pose 5 (a path's
    # Cartesian waypoint, no target) is chosen alone like target 4
    problem: Any = SimpleNamespace(
        T_world_pose=np.zeros((6, 4, 4)),
        target_pose=np.array([0, 2, 4], dtype=np.int64),
        approach_pose=np.array([1, 3, -1], dtype=np.int64),
    )
    poses = np.arange(6, dtype=np.int64)
    rng = np.random.default_rng(16)
    blocks = 3
    lists = [[random_intervals(rng) for _ in range(B)] for _ in range(blocks * 6)]
    # hand-built edge cases in the first block (grid steps; 1024 steps = 1)
    lists[0][0], lists[1][0] = [(0, 1024)], [(1024, 2048)]  # touching: one point, 1.0
    lists[0][1], lists[1][1] = [(0, 1024)], [(2048, 3072)]  # disjoint: none
    lists[0][2], lists[1][2] = [], [(0, 1024)]  # no interval for the target
    lists[2][0], lists[3][0] = (
        [(-2048, -1024), (1024, 2050)],
        [(-4000, 4000)],
    )  # 2 steps longer: first
    lists[2][1], lists[3][1] = (
        [(-2048, -1024), (1024, 2052)],
        [(-4000, 4000)],
    )  # 4 steps longer: second
    lists[4][0] = [(-2048, -1024), (1024, 2049)]  # unpaired, 1 step longer: first
    lists[4][1] = [(-3000, -3000), (500, 500)]  # two single points: the first
    found = found_from(lists)
    chosen = _chosen_axis_values(problem, poses, found, np.arange(B, dtype=np.int64))
    expected = np.full((blocks * 6, B), np.nan)
    for r in range(blocks):
        for target, approach in ((0, 1), (2, 3), (4, -1), (5, -1)):
            for b in range(B):
                middle = brute_force_middle(
                    lists[6 * r + target][b], None if approach < 0 else lists[6 * r + approach][b]
                )
                expected[6 * r + target, b] = middle
                if approach >= 0:
                    expected[6 * r + approach, b] = middle
    # brute force over the grid (closed form for the hand-built cases, written beside them)
    np.testing.assert_array_equal(chosen, expected)
    assert chosen[0, 0] == 1.0  # closed form: [0, 1] ∩ [1, 2] = [1, 1]
    assert np.isnan(chosen[0, 1])  # closed form: [0, 1] ∩ [2, 3] is empty
    assert np.isnan(chosen[0, 2])  # closed form: no target interval
    assert chosen[2, 0] == -1.5  # closed form: middle of [-2, -1], 2 steps shorter is equal
    assert chosen[3, 0] == -1.5  # closed form: the approach pose shares its target's value
    assert chosen[2, 1] == 0.5 * (1.0 + 2052 * STEP)  # closed form: middle of [1, 2052 steps]
    assert chosen[4, 0] == -1.5  # closed form: 1 step longer is equal, the first kept
    assert chosen[4, 1] == -3000 * STEP  # closed form: equal zero lengths, the first point


def test_chosen_axis_values_of_a_subset_of_poses() -> None:
    # the table search passes only the carried poses: an approach pose whose target is left
    # out keeps no value, a target whose approach pose is left out uses its own intervals
    problem: Any = SimpleNamespace(
        T_world_pose=np.zeros((4, 4, 4)),
        target_pose=np.array([0, 2], dtype=np.int64),
        approach_pose=np.array([1, 3], dtype=np.int64),
    )
    poses = np.array([1, 2], dtype=np.int64)
    lists = [[[(0, 1024)] for _ in range(B)], [[(-1024, 0)] for _ in range(B)]]
    chosen = _chosen_axis_values(problem, poses, found_from(lists), np.arange(B, dtype=np.int64))
    assert np.all(np.isnan(chosen[0]))  # common practice, no source: an approach follows its target
    np.testing.assert_array_equal(chosen[1], -0.5)  # closed form: middle of [-1, 0]

"""Analytic IK throughput on the six-axis ortho-parallel arm (pb-arm6).

Targets are forward kinematics of random in-limit configurations (seeded).
One run of :func:`posebridge.kinematics.ik.solve_ik_all` computes all eight
branches of every pose with labels, validity and limit flags, revolution
representatives and the sorted slots. Baseline: forward kinematics of the
same batch in the same run, so ``ik_analytic_ratio_vs_fk`` (IK poses per FK
configuration) survives a noisy machine.
"""

from __future__ import annotations

import numpy as np

from posebridge.bench.timing import best_seconds, median_seconds_per_call
from posebridge.kinematics.fk import fk_tool
from posebridge.kinematics.ik import solve_ik_all
from posebridge.robot.library import load_robot

__all__ = ["bench_ik_analytic"]

ROBOT = "pb-arm6"


def bench_ik_analytic(quick: bool) -> dict[str, float]:
    """Poses/s of all-branch analytic IK (N = 100,000; 20,000 quick), its ratio to FK, one-pose latency."""
    robot = load_robot(ROBOT)
    n_poses = 20_000 if quick else 100_000
    q = np.random.default_rng(0).uniform(robot.lower, robot.upper, size=(n_poses, robot.dof))
    targets = fk_tool(robot, q)
    ik_rate = n_poses / best_seconds(lambda: solve_ik_all(robot, targets))
    fk_rate = n_poses / best_seconds(lambda: fk_tool(robot, q))
    single = targets[:1].copy()
    single_us = 1e6 * median_seconds_per_call(
        lambda: solve_ik_all(robot, single), calls=200 if quick else 1_000
    )
    return {
        "ik_analytic_poses_per_s": ik_rate,
        "ik_analytic_ratio_vs_fk": ik_rate / fk_rate,
        "ik_analytic_single_call_us": single_us,
    }

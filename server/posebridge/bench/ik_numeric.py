"""Numerical IK success rate and time per pose on the six-axis offset-wrist and seven-axis arms.

Targets are forward kinematics of random in-limit configurations (seeded), so
every pose is reachable. The solver runs in first-solution mode
(``max_solutions=1``) from its default start, the mid-range configuration,
never from the generating configuration, with 1e-6 m and 1e-6 rad
tolerances. Time per pose is the wall time of the whole batch divided by the
number of poses, best of a few runs after a warm-up (which also compiles the
kernels).
"""

from __future__ import annotations

import numpy as np

from posebridge.bench.timing import best_seconds
from posebridge.kinematics.fk import fk_tool
from posebridge.kinematics.ik.numeric import solve_ik_numeric
from posebridge.kinematics.ik.solutions import IkSolutions
from posebridge.robot.library import load_robot

__all__ = ["bench_ik_numeric"]

ROBOTS = {"6axis_offset": "pb-arm6-offset", "7axis": "pb-arm7"}
POSES = 1000
TOLERANCE_M = 1e-6
TOLERANCE_RAD = 1e-6


def _success_rate_and_ms(name: str, quick: bool) -> tuple[float, float]:
    """Success rate and mean milliseconds per pose on one robot."""
    robot = load_robot(name)
    rng = np.random.default_rng(2024)
    q = rng.uniform(robot.lower, robot.upper, size=(POSES, robot.dof))
    targets = fk_tool(robot, q)
    results: list[IkSolutions] = []

    def run() -> None:
        results.append(
            solve_ik_numeric(
                robot,
                targets,
                position_tolerance_m=TOLERANCE_M,
                orientation_tolerance_rad=TOLERANCE_RAD,
                max_solutions=1,
            )
        )

    seconds = best_seconds(run, repeats=1 if quick else 3)
    solved = results[-1].valid[:, 0] & results[-1].within_limits[:, 0]
    return float(np.mean(solved)), 1e3 * seconds / POSES


def bench_ik_numeric(quick: bool) -> dict[str, float]:
    """Success rate (0-1) and mean milliseconds per pose of first-solution numerical IK."""
    figures: dict[str, float] = {}
    for key, name in ROBOTS.items():
        rate, ms = _success_rate_and_ms(name, quick)
        figures[f"ik_numeric_success_rate_{key}"] = rate
        figures[f"ik_numeric_ms_per_pose_{key}"] = ms
    return figures

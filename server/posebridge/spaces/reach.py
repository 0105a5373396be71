"""Reach of a robot: the largest radial distance of the flange centre from the base z axis.

Method: sample the joint-range box (seeded), then refine the best samples by
bounded quasi-Newton maximisation (L-BFGS-B, Byrd, Lu, Nocedal, Zhu 1995) of
the radial distance ``hypot(x, y)`` of the flange centre. The result is a lower bound of the true maximum that the
refinement makes tight for the smooth serial chains handled here.
"""

from __future__ import annotations

import numpy as np
from scipy.optimize import minimize

from posebridge.kinematics.fk import fk_flange
from posebridge.robot.model import Robot

__all__ = ["reach_m"]


def reach_m(robot: Robot, *, samples: int = 4096, refine: int = 8, rng_seed: int = 0) -> float:
    """Largest radial flange-centre distance from the base z axis over the joint-range box, metres.

    For arms whose first axis is the base z axis this is the usual horizontal
    reach; for a gantry it is the farthest corner of its travel.

    Parameters
    ----------
    robot : Robot
    samples : int
        Random configurations drawn uniformly in the joint-range box.
    refine : int
        How many of the farthest samples are refined by L-BFGS-B.
    rng_seed : int
        Seed of the sampler (the result is deterministic).
    """
    rng = np.random.default_rng(rng_seed)
    q = rng.uniform(robot.lower, robot.upper, size=(samples, robot.dof))
    distance = np.linalg.norm(fk_flange(robot, q)[:, :2, 3], axis=1)
    best = float(distance.max())
    bounds = list(zip(robot.lower, robot.upper, strict=True))
    for start in q[np.argsort(distance)[-refine:]]:
        result = minimize(
            lambda x: -float(np.linalg.norm(fk_flange(robot, x[None, :])[0, :2, 3])),
            start,
            method="L-BFGS-B",
            bounds=bounds,
        )
        best = max(best, -float(result.fun))
    return best

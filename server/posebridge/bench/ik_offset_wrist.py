"""Closed-form IK throughput on an invented offset-wrist arm, against the numerical solver.

The arm (defined below in DH rows, invented numbers) has joints 2, 3 and 4
parallel, a 40 mm shoulder offset, 135 mm of lateral offset and a 110 mm
wrist offset: the family of
:mod:`posebridge.kinematics.ik.analytic.offset_wrist`. Targets are forward
kinematics of random in-limit configurations (seeded). One run of
:func:`posebridge.kinematics.ik.solve_ik_all` computes all eight branches of
every pose with labels, validity and limit flags, revolution representatives and
sorted slots. Baseline: the numerical solver on the first poses of the same
batch in the same run, in the mode that gives every solution (its defaults:
200 random starts, up to 16 solutions), which is what this arm got before the
closed form; ``ik_offset_wrist_ratio_vs_numeric`` is the ratio of poses per
second.
"""

from __future__ import annotations

import numpy as np

from posebridge.bench.timing import best_seconds
from posebridge.kinematics.fk import fk_tool
from posebridge.kinematics.ik import ik_solver, solve_ik_all
from posebridge.kinematics.ik.numeric import solve_ik_numeric
from posebridge.robot.model import Robot
from posebridge.robot.toml_format import parse_robot_toml

__all__ = ["OFFSET_WRIST_ARM_TOML", "bench_ik_offset_wrist", "offset_wrist_arm"]

OFFSET_WRIST_ARM_TOML = """
schema_version = 1

[robot]
name = "bench-offset-wrist"
kind = "six_axis"
description = "Invented six-axis arm, joints 2-4 parallel, offset wrist"
convention = "dh_standard"

[[joint]]
name = "j1"
type = "revolute"
dh = { a_mm = 40, alpha_deg = 90, d_mm = 180, theta_deg = 0 }
limits = { min_deg = -360, max_deg = 360, velocity_deg_s = 150, acceleration_deg_s2 = 600 }

[[joint]]
name = "j2"
type = "revolute"
dh = { a_mm = 470, alpha_deg = 0, d_mm = 0, theta_deg = 0 }
limits = { min_deg = -360, max_deg = 360, velocity_deg_s = 150, acceleration_deg_s2 = 600 }

[[joint]]
name = "j3"
type = "revolute"
dh = { a_mm = 410, alpha_deg = 0, d_mm = 0, theta_deg = 0 }
limits = { min_deg = -170, max_deg = 170, velocity_deg_s = 180, acceleration_deg_s2 = 700 }

[[joint]]
name = "j4"
type = "revolute"
dh = { a_mm = 0, alpha_deg = 90, d_mm = 135, theta_deg = 0 }
limits = { min_deg = -360, max_deg = 360, velocity_deg_s = 220, acceleration_deg_s2 = 900 }

[[joint]]
name = "j5"
type = "revolute"
dh = { a_mm = 0, alpha_deg = -90, d_mm = 110, theta_deg = 0 }
limits = { min_deg = -360, max_deg = 360, velocity_deg_s = 220, acceleration_deg_s2 = 900 }

[[joint]]
name = "j6"
type = "revolute"
dh = { a_mm = 0, alpha_deg = 0, d_mm = 85, theta_deg = 0 }
limits = { min_deg = -360, max_deg = 360, velocity_deg_s = 220, acceleration_deg_s2 = 900 }
"""


def offset_wrist_arm() -> Robot:
    """Return the invented benchmark arm (module docstring)."""
    return parse_robot_toml(OFFSET_WRIST_ARM_TOML, "<bench offset-wrist arm>")


def bench_ik_offset_wrist(quick: bool) -> dict[str, float]:
    """Measure poses/s of all-branch closed-form IK and its ratio to the numerical solver.

    N = 100,000 poses (20,000 quick); the numerical solver runs on the first 200 (50 quick) of the
    same poses.
    """
    robot = offset_wrist_arm()
    family = ik_solver(robot).family
    if family != "offset_wrist":
        raise RuntimeError(f"benchmark arm: expected the offset_wrist family, got {family!r}")
    n_poses = 20_000 if quick else 100_000
    n_numeric = 50 if quick else 200
    q = np.random.default_rng(0).uniform(robot.lower, robot.upper, size=(n_poses, robot.dof))
    targets = fk_tool(robot, q)
    closed_rate = n_poses / best_seconds(lambda: solve_ik_all(robot, targets))
    subset = targets[:n_numeric]
    numeric_rate = n_numeric / best_seconds(
        lambda: solve_ik_numeric(robot, subset), repeats=1 if quick else 3
    )
    return {
        "ik_offset_wrist_poses_per_s": closed_rate,
        "ik_offset_wrist_ratio_vs_numeric": closed_rate / numeric_rate,
    }

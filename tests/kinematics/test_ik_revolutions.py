"""Reported revolution counts of IK solutions (see posebridge.kinematics.ik.finishing)."""

from __future__ import annotations

import numpy as np

from posebridge.kinematics.fk import fk_tool
from posebridge.kinematics.ik import ik_solver, solve_ik_all
from posebridge.robot.library import load_robot


def test_revolutions_count_from_the_revolution_centred_on_the_range() -> None:
    robot = load_robot("pb-arm6")
    rng = np.random.default_rng(7)
    q = rng.uniform(robot.lower, robot.upper, size=(400, robot.dof))
    result = solve_ik_all(robot, fk_tool(robot, q), all_revolutions=True)
    valid = result.valid & result.within_limits
    mid = 0.5 * (robot.lower + robot.upper)
    # closed form of the documented rule: revolutions = floor((q - mid) / 2 pi + 1/2)
    expected = np.floor((result.q - mid) / (2 * np.pi) + 0.5)
    assert np.array_equal(result.revolutions[valid], expected[valid].astype(np.int16))
    # j3 spans -197..76 deg, less than one revolution: never an extra one (closed form of the
    # rule)
    assert not np.any(result.revolutions[valid][:, 2])
    # j6 spans -355..355 deg: some solutions lie a revolution away (range read from
    # pb-arm6.toml)
    assert np.any(result.revolutions[valid][:, 5] != 0)


def test_values_a_revolution_apart_never_share_a_label() -> None:
    robot = load_robot("pb-arm6")
    q = np.radians([[0.0, -20.0, 20.0, 0.0, 60.0, 180.0]])
    result = solve_ik_all(robot, fk_tool(robot, q), all_revolutions=True)
    slots = result.valid_solutions(0)
    labels = [result.branch_label(0, m) for m in slots]
    # j6 = +180 and -180 deg are the same angle a revolution apart (range -355..355 in
    # pb-arm6.toml): both are listed, with different revolution counts, so every label names
    # one solution
    assert len(set(labels)) == len(labels)


def test_solver_choice_is_made_once_per_robot() -> None:
    robot = load_robot("pb-arm6")
    assert ik_solver(robot) is ik_solver(robot)  # common practice, no source: memoised choice
    assert ik_solver(robot).family == "ortho_parallel"  # Brandstötter et al. 2014 applies

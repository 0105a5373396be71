"""Reported turn counts of IK solutions (see posebridge.kinematics.ik_types)."""

from __future__ import annotations

import numpy as np

from posebridge.kinematics.fk import fk_tool
from posebridge.kinematics.ik import ik_solver, solve_ik_all
from posebridge.robot.library import load_robot


def test_turns_count_from_the_revolution_centred_on_the_range() -> None:
    robot = load_robot("pb-arm6")
    rng = np.random.default_rng(7)
    q = rng.uniform(robot.lower, robot.upper, size=(400, robot.dof))
    result = solve_ik_all(robot, fk_tool(robot, q), all_turns=True)
    valid = result.valid & result.within_limits
    mid = 0.5 * (robot.lower + robot.upper)
    # closed form of the documented rule: turns = floor((q - mid) / 2 pi + 1/2)
    expected = np.floor((result.q - mid) / (2 * np.pi) + 0.5)
    assert np.array_equal(result.turns[valid], expected[valid].astype(np.int16))
    # j3 spans -200..80 deg, less than one revolution: never a turn (closed form of the rule)
    assert not np.any(result.turns[valid][:, 2])
    # j6 spans -360..360 deg: some solutions lie a turn away (range read from pb-arm6.toml)
    assert np.any(result.turns[valid][:, 5] != 0)


def test_values_a_turn_apart_never_share_a_label() -> None:
    robot = load_robot("pb-arm6")
    q = np.radians([[0.0, -20.0, 20.0, 0.0, 60.0, 180.0]])
    result = solve_ik_all(robot, fk_tool(robot, q), all_turns=True)
    slots = result.valid_solutions(0)
    labels = [result.branch_label(0, m) for m in slots]
    # j6 = +180 and -180 deg are the same angle a turn apart (range -360..360 in pb-arm6.toml):
    # both are listed, with different turn counts, so every label names one solution
    assert len(set(labels)) == len(labels)


def test_solver_choice_is_made_once_per_robot() -> None:
    robot = load_robot("pb-arm6")
    assert ik_solver(robot) is ik_solver(robot)  # common practice, no source: memoised choice
    assert ik_solver(robot).family == "ortho_parallel"  # Brandstötter et al. 2014 applies

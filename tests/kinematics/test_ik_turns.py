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
    # closed form of the documented rule: turns = sign(d) floor((|d| + pi) / 2 pi), d = q - mid
    d = result.q - mid
    expected = np.sign(d) * np.floor((np.abs(d) + np.pi - 1e-9) / (2 * np.pi))
    assert np.array_equal(result.turns[valid], expected[valid].astype(np.int16))
    # j3 spans -200..80 deg, less than one revolution: never a turn (closed form of the rule)
    assert not np.any(result.turns[valid][:, 2])
    # j6 spans -360..360 deg: some solutions lie a turn away (range read from pb-arm6.toml)
    assert np.any(result.turns[valid][:, 5] != 0)


def test_half_a_turn_is_no_turn() -> None:
    robot = load_robot("pb-arm6")
    q = np.radians([[0.0, -20.0, 20.0, 0.0, 60.0, 180.0]])
    result = solve_ik_all(robot, fk_tool(robot, q), seed=q[0])
    # the generating configuration comes first (seed distance 0); j6 = 180 deg sits exactly
    # half a turn from the centre of its -360..360 deg range: no turn by the documented rule
    assert np.allclose(result.q[0, 0], q[0], atol=1e-9)
    assert not np.any(result.turns[0, 0])


def test_solver_choice_is_made_once_per_robot() -> None:
    robot = load_robot("pb-arm6")
    assert ik_solver(robot) is ik_solver(robot)  # common practice, no source: memoised choice
    assert ik_solver(robot).family == "ortho_parallel"  # Brandstötter et al. 2014 applies

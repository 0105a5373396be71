"""Reported revolution counts of IK solutions (see posebridge.kinematics.ik.finishing)."""

from __future__ import annotations

import numpy as np
import pytest

from posebridge.cell.quality import revolution_counts
from posebridge.kinematics.branches import centred_revolution, centred_revolutions
from posebridge.kinematics.fk import fk_tool
from posebridge.kinematics.ik import ik_solver, solve_ik_all
from posebridge.robot.library import load_robot

EPSILON_DEG = 1e-4


def test_revolutions_count_from_the_revolution_centred_on_the_range() -> None:
    robot = load_robot("pb-arm6")
    rng = np.random.default_rng(7)
    q = rng.uniform(robot.lower, robot.upper, size=(400, robot.dof))
    result = solve_ik_all(robot, fk_tool(robot, q), all_revolutions=True)
    valid = result.valid & result.within_limits
    mid = 0.5 * (robot.lower + robot.upper)
    # closed form of the documented rule: revolutions = round((q - mid) / 2 pi), halves
    # toward zero (no random value lands on a half exactly)
    expected = np.rint((result.q - mid) / (2 * np.pi))
    assert np.array_equal(result.revolutions[valid], expected[valid].astype(np.int16))
    # j3 spans -197..76 deg, less than one revolution: never an extra one (closed form of the
    # rule)
    assert not np.any(result.revolutions[valid][:, 2])
    # j6 spans -355..355 deg: some solutions lie a revolution away (range read from
    # pb-arm6.toml)
    assert np.any(result.revolutions[valid][:, 5] != 0)


@pytest.mark.parametrize(
    ("offset_deg", "expected"),
    [
        (180.0, 0),
        (-180.0, 0),
        (180.0 + EPSILON_DEG, 1),
        (180.0 - EPSILON_DEG, 0),
        (-180.0 - EPSILON_DEG, -1),
        (-180.0 + EPSILON_DEG, 0),
        (540.0, 1),
        (-540.0, -1),
        (540.0 + EPSILON_DEG, 2),
        (0.0, 0),
    ],
)
def test_half_a_revolution_is_no_extra_revolution(offset_deg: float, expected: int) -> None:
    # closed form: whole revolutions in the offset, an exact half rounded toward zero (the
    # window [-180, 180] deg is revolution 0)
    offset_rad = np.radians(offset_deg)
    assert centred_revolution(offset_rad) == expected
    assert centred_revolutions([offset_rad])[0] == expected


@pytest.mark.parametrize("j6_deg", [180.0, -180.0])
def test_ik_labels_j6_at_half_a_revolution_without_a_revolution(j6_deg: float) -> None:
    robot = load_robot("pb-arm6")
    q = np.radians([[0.0, -20.0, 20.0, 0.0, 60.0, j6_deg]])
    result = solve_ik_all(robot, fk_tool(robot, q), all_revolutions=True)
    slots = result.valid_solutions(0)
    j6 = np.degrees(result.q[0, slots, 5])
    # j6 = +180 and -180 deg are the same angle, both inside -355..355 (pb-arm6.toml): both
    # are listed, and neither is an extra revolution from the centre 0 (closed form of the rule)
    for value in (180.0, -180.0):
        at_value = [m for m, v in zip(slots, j6, strict=True) if abs(v - value) < 1e-6]
        assert at_value
        for m in at_value:
            assert result.revolutions[0, m, 5] == 0
            assert "j6" not in result.branch_label(0, m)
    # the cell layer counts the same way (closed form of the rule)
    counts = revolution_counts(robot, np.radians([[0.0, 0.0, 0.0, 0.0, 0.0, j6_deg]]))
    assert counts[0, 5] == 0


def test_solver_choice_is_made_once_per_robot() -> None:
    robot = load_robot("pb-arm6")
    assert ik_solver(robot) is ik_solver(robot)  # common practice, no source: memoised choice
    assert ik_solver(robot).family == "ortho_parallel"  # Brandstötter et al. 2014 applies

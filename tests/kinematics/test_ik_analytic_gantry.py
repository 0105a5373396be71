"""Tests of posebridge.kinematics.ik.analytic.gantry.

References: the geometry of robots/pb-gantry3.toml (closed forms beside the
checks) and forward kinematics (posebridge.kinematics.fk).
"""

from __future__ import annotations

import numpy as np
import pytest

from posebridge.kinematics.fk import fk_tool
from posebridge.kinematics.ik.analytic.gantry import GantryGeometry, solve_gantry
from posebridge.kinematics.ik.solutions import REASON_NO_WITHIN_LIMITS
from posebridge.robot.library import load_robot
from posebridge.robot.model import Robot
from posebridge.transforms import rotation_matrix_about_axis


@pytest.fixture(scope="module")
def gantry() -> Robot:
    return load_robot("pb-gantry3")


@pytest.fixture(scope="module")
def geometry(gantry: Robot) -> GantryGeometry:
    extracted = GantryGeometry.from_robot(gantry)
    assert extracted is not None
    return extracted


def test_closed_form_of_pb_gantry3(gantry: Robot, geometry: GantryGeometry) -> None:
    # robots/pb-gantry3.toml: x along +x and y along +y from a beam 1800 mm up, z pointing
    # down, the tool rotation c about +z 150 mm below, flange facing down. With the TCP
    # on the rotation axis the TCP moves with x, y and -z: q = (px, py, z_tcp0 - pz), and
    # c is the turn about z from the zero orientation
    tcp0 = fk_tool(gantry, np.zeros((1, 4)))[0]
    assert abs(tcp0[0, 3]) < 1e-12
    assert abs(tcp0[1, 3]) < 1e-12  # TCP on the rotation axis
    target = tcp0.copy()
    target[:3, :3] = rotation_matrix_about_axis([0.0, 0.0, 1.0], 0.7) @ tcp0[:3, :3]
    target[:3, 3] = [1.2, 0.4, tcp0[2, 3] - 0.3]
    result = solve_gantry(gantry, geometry, target[None])
    np.testing.assert_allclose(result.q[0, 0], [1.2, 0.4, 0.3, 0.7], atol=1e-12)
    assert result.ignored_components == ("roll", "pitch")
    assert result.branch_label(0, 0) == "single branch"


def test_generating_configuration_with_tool_offset(gantry: Robot, geometry: GantryGeometry) -> None:
    tool = np.eye(4)
    tool[:3, 3] = [0.08, -0.03, 0.2]  # off the rotation axis: the TCP swings with c
    q = np.random.default_rng(4).uniform(gantry.lower, gantry.upper, size=(500, 4))
    targets = fk_tool(gantry, q, tool)
    result = solve_gantry(gantry, geometry, targets, T_flange_tool=tool, seed=q)
    # closed form: the generating configuration solves its pose and is nearest its seed
    np.testing.assert_allclose(result.q[:, 0], q, atol=1e-9)
    # reference: forward kinematics of the solutions
    np.testing.assert_allclose(fk_tool(gantry, result.q[:, 0], tool), targets, atol=1e-9)


def test_outside_the_travel(gantry: Robot, geometry: GantryGeometry) -> None:
    target = fk_tool(gantry, np.zeros((1, 4)))
    target[0, 0, 3] = 2.5  # robots/pb-gantry3.toml: x travel 0..2000 mm
    result = solve_gantry(gantry, geometry, target)
    # the linear system has a solution everywhere; only the limits rule it out
    assert result.valid[0, 0]
    assert not result.within_limits[0, 0]
    assert result.q[0, 0, 0] == pytest.approx(2.5)
    assert result.reason == (REASON_NO_WITHIN_LIMITS,)


def test_revolution_variants_of_the_tool_rotation(gantry: Robot, geometry: GantryGeometry) -> None:
    q = np.array([[1.0, 0.5, 0.2, np.radians(30.0)]])
    result = solve_gantry(gantry, geometry, fk_tool(gantry, q), all_revolutions=True)
    angles = sorted(np.degrees(result.q[0, result.valid[0], 3]).round(6))
    # robots/pb-gantry3.toml: c within +-270 deg; 30 + 360 k lies within only for k = 0
    assert angles == [30.0]
    q = np.array([[1.0, 0.5, 0.2, np.radians(200.0)]])
    result = solve_gantry(gantry, geometry, fk_tool(gantry, q), all_revolutions=True)
    angles = sorted(np.degrees(result.q[0, result.valid[0], 3]).round(6))
    # 200 deg wraps to -160 deg; -160 + 360 k within +-270 deg for k = 0 and k = 1
    assert angles == [-160.0, 200.0]


@pytest.mark.parametrize("name", ["pb-arm6", "pb-scara4", "pb-planar2r"])
def test_extractor_rejects_other_arms(name: str) -> None:
    assert GantryGeometry.from_robot(load_robot(name)) is None

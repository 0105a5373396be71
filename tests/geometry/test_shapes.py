"""Shape containers: tool capsules in the last link frame, bounding radii, pair mask, validation.

References: closed forms written beside each check.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from posebridge.geometry.shapes import (
    BOX,
    CYLINDER,
    FLOOR,
    ArmCapsules,
    Box,
    Cylinder,
    Floor,
    GeometryInputError,
    ObstacleSet,
    default_pair_mask,
)
from posebridge.robot.model import Capsule


def test_tool_capsule_moves_into_last_link_frame(robot) -> None:
    """pb-arm6's flange is Ry(90 deg) in link 6 (rpy (0, 90, 0) in its description), which maps
    the flange z axis onto link x: (0, 0, 0.12) -> (0.12, 0, 0) (closed form)."""
    model = robot("pb-arm6")
    tool = Capsule("pointer", 0, np.zeros(3), np.array([0.0, 0.0, 0.12]), 0.03)
    arm = ArmCapsules.from_robot(model, [tool])
    assert arm.count == len(model.capsules) + 1
    assert arm.link[-1] == 6
    assert arm.is_tool[-1]
    assert not arm.is_tool[:-1].any()
    np.testing.assert_allclose(arm.start[-1], [0.0, 0.0, 0.0], atol=1e-12)
    np.testing.assert_allclose(arm.end[-1], [0.12, 0.0, 0.0], atol=1e-12)  # closed form
    # Bounding sphere: half length 0.06 plus radius 0.03 (closed form).
    assert arm.bound_radius[-1] == pytest.approx(0.09, abs=1e-12)
    np.testing.assert_allclose(arm.bound_centre[-1], [0.06, 0.0, 0.0], atol=1e-12)


def test_obstacle_arrays_and_bounding_radii() -> None:
    T = np.eye(4)
    T[:3, 3] = (1.0, 2.0, 3.0)
    obstacles = ObstacleSet.from_shapes(
        [
            Box("box", T, np.array([0.1, 0.2, 0.2])),
            Cylinder("post", np.eye(4), 0.3, 0.4),
            Floor(0.25),
        ]
    )
    np.testing.assert_array_equal(obstacles.kind, [BOX, CYLINDER, FLOOR])
    np.testing.assert_allclose(obstacles.translation, [[1, 2, 3], [0, 0, 0], [0, 0, 0.25]])
    np.testing.assert_allclose(obstacles.params[1], [0.3, 0.4, 0.0])
    # |h| = sqrt(0.01 + 0.04 + 0.04) = 0.3; hypot(0.3, 0.4) = 0.5; floor unbounded (closed forms).
    np.testing.assert_allclose(obstacles.bound_radius, [0.3, 0.5, math.inf])
    assert obstacles.names == ("box", "post", "floor")


def test_default_pair_mask_excludes_base_against_floor(robot) -> None:
    arm = ArmCapsules.from_robot(robot("pb-arm6"))
    obstacles = ObstacleSet.from_shapes([Floor(), Box("box", np.eye(4), np.ones(3))])
    mask = default_pair_mask(arm, obstacles)
    expected = np.ones((arm.count, 2), dtype=bool)
    expected[arm.link == 0, 0] = (
        False  # base link capsules stand on the floor (common practice, no source)
    )
    np.testing.assert_array_equal(mask, expected)


@pytest.mark.parametrize(
    ("shape", "message"),
    [
        (
            Box("b", np.eye(4), np.array([0.1, 0.0, 0.1])),
            r"box 'b' half_extents: expected values > 0 m",
        ),
        (Box("b", np.eye(4), np.array([0.1, 0.1])), r"box 'b' half_extents: expected shape \(3,\)"),
        (
            Box("b", np.diag([1.0, 2.0, 1.0, 1.0]), np.ones(3)),
            "box 'b' T_world_box: rotation matrix: not orthonormal",
        ),
        (
            Cylinder("c", np.eye(4), -0.1, 0.2),
            r"cylinder 'c' radius: expected a finite value > 0 m",
        ),
        (
            Cylinder("c", np.eye(4), 0.1, math.nan),
            r"cylinder 'c' half_length: expected a finite value > 0 m",
        ),
        (Floor(math.inf), "floor 'floor' height: expected a finite value"),
        ("wall", "obstacle 0: expected Box, Cylinder, Floor or Mesh, got str"),
    ],
)
def test_obstacles_are_validated(shape, message: str) -> None:
    with pytest.raises(GeometryInputError, match=message):
        ObstacleSet.from_shapes([shape])


def test_capsules_are_validated(robot) -> None:
    model = robot("pb-arm6")
    bad = Capsule("spike", 0, np.zeros(3), np.array([0.0, 0.0, 0.1]), 0.0)
    with pytest.raises(
        GeometryInputError, match=r"tool capsule 'spike' radius: expected a finite value > 0 m"
    ):
        ArmCapsules.from_robot(model, [bad])
    bad = Capsule("spike", 0, np.zeros(2), np.array([0.0, 0.0, 0.1]), 0.01)
    with pytest.raises(
        GeometryInputError, match=r"tool capsule 'spike' start: expected shape \(3,\)"
    ):
        ArmCapsules.from_robot(model, [bad])

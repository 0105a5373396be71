"""Tests of posebridge.spaces.images: waypoints and segments in joint space, joint points in the cell.

posebridge's FK is the code under test here, so poses are checked with pinocchio on
robots/pb-arm6.urdf (fixture ``pin_arm`` in conftest.py).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.spatial.transform import Rotation, Slerp

from posebridge.geometry.shapes import ArmCapsules
from posebridge.robot.model import Robot
from posebridge.spaces.errors import SpacesInputError
from posebridge.spaces.images import cartesian_image, segment_image, waypoint_images
from posebridge.transforms import transform_from_position_rpy

T_WORLD_BASE = transform_from_position_rpy([0.5, 0.25, 0.4], [0.0, 0.0, -40.0], degrees=True)
TOOL = transform_from_position_rpy([0.0, 0.02, 0.15], [0.0, 10.0, 0.0], degrees=True)


def random_in_limits(arm: Robot, count: int, seed: int) -> np.ndarray:
    return np.random.default_rng(seed).uniform(arm.lower, arm.upper, size=(count, arm.dof))


def test_every_waypoint_solution_reaches_the_waypoint(robot, pin_arm) -> None:
    arm = robot("pb-arm6")
    reference = pin_arm(TOOL)
    q_true = random_in_limits(arm, 6, seed=2)
    waypoints = T_WORLD_BASE @ reference.tool_poses(q_true)  # pinocchio FK
    image = waypoint_images(arm, waypoints, (1, 2), T_world_base=T_WORLD_BASE, T_flange_tool=TOOL)
    assert set(image.waypoint.tolist()) == set(range(6))
    # pinocchio FK of every image solution is its waypoint.
    np.testing.assert_allclose(
        T_WORLD_BASE @ reference.tool_poses(image.q), waypoints[image.waypoint], atol=1e-6
    )
    np.testing.assert_array_equal(image.points, image.q[:, [1, 2]])
    # Each waypoint was made by an in-limit configuration, so it has an in-limit image.
    assert all(image.within_limits[image.waypoint == w].any() for w in range(6))
    assert image.reason == ("",) * 6
    # The configuration that made each waypoint is among its images (joint 6 spans about two
    # revolutions and every in-limit revolution is listed).
    for w in range(6):
        mine = image.q[image.waypoint == w]
        assert np.min(np.abs(mine - q_true[w]).max(axis=1)) < 1e-6
    assert all(label for label in image.labels)
    # Up to 8 branches of an ortho-parallel arm (Brandstötter et al. 2014),
    # each with up to 2 in-limit revolutions of joint 6 (range -355..355 deg) and of joint 4
    # (-193..193 deg).
    assert np.bincount(image.waypoint).max() <= 8 * 2 * 2


def test_planar_reference_target_has_both_elbow_images(unit_planar_2r: Robot) -> None:
    arm = unit_planar_2r
    target = np.eye(4)
    target[:2, 3] = [np.sqrt(3) / 2 - 0.5, np.sqrt(3) / 2 + 0.5]
    image = waypoint_images(arm, target[None], (0, 1))
    found = np.degrees(image.points)
    # closed form: L1 = L2 = 1, (0.366, 1.366) = (cos 30 + cos 120, sin 30 + sin 120) -> (30, 90) deg; the mirrored elbow is
    # (30 + 90, -90) = (120, -90) deg (common practice, no source).
    for expected in ([30.0, 90.0], [120.0, -90.0]):
        assert np.min(np.abs(found - expected).max(axis=1)) < 1e-6
    assert len(set(image.labels)) == 2


def interpolated_poses(start: np.ndarray, end: np.ndarray, s: np.ndarray) -> np.ndarray:
    """Reference straight-line poses: linear positions, scipy Slerp orientations."""
    T = np.zeros((s.shape[0], 4, 4))
    T[:, :3, :3] = Slerp([0, 1], Rotation.from_matrix([start[:3, :3], end[:3, :3]]))(s).as_matrix()
    T[:, :3, 3] = np.outer(1 - s, start[:3, 3]) + np.outer(s, end[:3, 3])
    T[:, 3, 3] = 1
    return T


def test_segment_curves_reach_the_interpolated_poses(robot, pin_arm) -> None:
    arm = robot("pb-arm6")
    reference = pin_arm(TOOL)
    q_ends = np.radians(
        [[20.0, 10.0, -30.0, 40.0, 50.0, 10.0], [-15.0, 30.0, -60.0, -20.0, 70.0, 80.0]]
    )
    start, end = T_WORLD_BASE @ reference.tool_poses(q_ends)
    image = segment_image(
        arm, start, end, (0, 1), samples=40, T_world_base=T_WORLD_BASE, T_flange_tool=TOOL
    )
    np.testing.assert_allclose(
        image.T_world_tool, interpolated_poses(start, end, image.s), atol=1e-12
    )
    assert image.reachable.all()
    assert image.curves
    covered = np.zeros(40, dtype=bool)
    for curve in image.curves:
        covered[curve.sample] = True
        # pinocchio FK of every curve point is the sampled pose at its parameter.
        np.testing.assert_allclose(
            T_WORLD_BASE @ reference.tool_poses(curve.q),
            interpolated_poses(start, end, curve.s),
            atol=1e-6,
        )
        assert np.all(np.diff(curve.sample) == 1)
        np.testing.assert_array_equal(curve.points, curve.q[:, [0, 1]])
        # Continuity: no joint moves more than a quarter of its range between samples.
        assert np.all(np.abs(np.diff(curve.q, axis=0)) <= 0.25 * (arm.upper - arm.lower) + 1e-12)
    assert covered.all()
    # The branch through the start configuration is traced to the end: a curve starts at q_ends[0].
    first = [
        c for c in image.curves if c.sample[0] == 0 and np.abs(c.q[0] - q_ends[0]).max() < 1e-6
    ]
    assert len(first) == 1
    assert first[0].sample[-1] == 39


def test_segment_leaving_the_workspace_breaks_its_curves(robot) -> None:
    arm = robot("pb-arm6")
    start = transform_from_position_rpy([0.9, 0.0, 0.8], [180.0, 0.0, 0.0], degrees=True)
    end = transform_from_position_rpy([3.0, 0.0, 0.8], [180.0, 0.0, 0.0], degrees=True)
    image = segment_image(arm, start, end, (1, 2), samples=30)
    # Beyond 1.78 m from axis 1 nothing is reachable (triangle inequality over pb-arm6.toml's
    # link offsets and its 120 mm tool), so the last samples are unreachable.
    assert image.reachable[0]
    assert not image.reachable[-1]
    last_reachable = int(np.flatnonzero(image.reachable)[-1])
    assert all(curve.sample[-1] <= last_reachable for curve in image.curves)
    assert not np.any(image.reachable[last_reachable + 1 :])


def test_joint_point_image_matches_pinocchio(robot, pin_arm) -> None:
    arm = robot("pb-arm6")
    reference = pin_arm(TOOL)
    q = random_in_limits(arm, 5, seed=8)
    image = cartesian_image(
        ArmCapsules.from_robot(arm), q, T_world_base=T_WORLD_BASE, T_flange_tool=TOOL
    )
    np.testing.assert_allclose(
        image.T_world_tool, T_WORLD_BASE @ reference.tool_poses(q), atol=1e-9
    )
    np.testing.assert_allclose(image.T_world_frames[:, -1], image.T_world_tool)
    np.testing.assert_allclose(image.T_world_frames[:, 0], np.broadcast_to(T_WORLD_BASE, (5, 4, 4)))
    # Capsule axes against the URDF's collision cylinders placed by pinocchio (same order).
    cylinders = reference.collision_segments(q)
    world = np.einsum("ij,nmkj->nmki", T_WORLD_BASE[:3, :3], cylinders) + T_WORLD_BASE[:3, 3]
    segments = image.capsule_segments
    same = np.abs(segments - world).max(axis=(2, 3))
    swapped = np.abs(segments[:, :, ::-1] - world).max(axis=(2, 3))
    assert np.all(np.minimum(same, swapped) < 1e-9)
    np.testing.assert_allclose(
        image.capsule_radius,
        [g.geometry.radius for g in reference.geometry.geometryObjects],
    )


@pytest.mark.parametrize(
    ("call", "message"),
    [
        (lambda arm: waypoint_images(arm, np.eye(4)[None], (0, 6)), "expected distinct indices"),
        (lambda arm: waypoint_images(arm, np.eye(4), (0, 1)), r"expected shape \(N, 4, 4\)"),
        (lambda arm: segment_image(arm, np.eye(4), np.eye(4), (0, 1), samples=1), "samples"),
    ],
)
def test_bad_image_requests_are_refused(robot, call, message) -> None:
    with pytest.raises(SpacesInputError, match=message):
        call(robot("pb-arm6"))

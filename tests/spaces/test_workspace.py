"""Tests of posebridge.spaces.workspace: point clouds, voxel reach maps, sections, executors."""

from __future__ import annotations

import threading

import numpy as np
import pytest
from scipy.spatial.transform import Rotation

from posebridge.compute import (
    ComputationCancelled,
    DaskExecutor,
    LocalPoolExecutor,
    SerialExecutor,
)
from posebridge.kinematics.ik import solve_ik_all
from posebridge.kinematics.ik.numeric import solve_ik_numeric
from posebridge.spaces.errors import SpacesInputError
from posebridge.spaces.planar_boundary import PlanarChain, planar_reachable
from posebridge.spaces.workspace import (
    ReachMap,
    reach_map,
    reach_section,
    sample_workspace,
    tcp_distance_bound,
    tool_directions,
    tool_rotations,
)
from posebridge.transforms import transform_from_position_rpy

T_WORLD_BASE = transform_from_position_rpy([0.3, -0.2, 0.4], [0.0, 0.0, 30.0], degrees=True)


def test_directions_are_the_cube_faces_edges_and_corners() -> None:
    d = tool_directions()
    assert d.shape == (26, 3)
    np.testing.assert_allclose(np.linalg.norm(d, axis=1), 1.0, atol=1e-15)
    # A cube seen from its centre (common practice, no source): 6 face directions with one
    # non-zero component, 12 edge directions with two of 1/sqrt(2), 8 corners with three of 1/sqrt(3).
    nonzero = np.count_nonzero(np.abs(d) > 1e-12, axis=1)
    np.testing.assert_array_equal(nonzero, [1] * 6 + [2] * 12 + [3] * 8)
    for count, value in [(1, 1.0), (2, 1 / np.sqrt(2)), (3, 1 / np.sqrt(3))]:
        group = np.abs(d[nonzero == count])
        np.testing.assert_allclose(group[group > 1e-12], value, atol=1e-15)
    assert len({tuple(np.round(v, 9)) for v in d}) == 26
    # Closed under negation, like the cube.
    assert {tuple(np.round(v, 9)) for v in d} == {tuple(np.round(-v, 9)) for v in d}


def test_tool_rotations_point_z_along_each_direction_and_roll_about_it() -> None:
    d = tool_directions()
    R = tool_rotations(d, rolls=4)
    assert R.shape == (26, 4, 3, 3)
    # Rotation matrices (scipy accepts and round-trips them) with z column = direction.
    np.testing.assert_allclose(
        Rotation.from_matrix(R.reshape(-1, 3, 3)).as_matrix(), R.reshape(-1, 3, 3), atol=1e-12
    )
    np.testing.assert_allclose(R[..., :, 2], np.broadcast_to(d[:, None, :], (26, 4, 3)), atol=1e-12)
    # Roll k is roll 0 turned by k * 90 deg about the tool z axis (scipy rotation vector).
    for k in range(4):
        turn = Rotation.from_rotvec(d * (k * np.pi / 2)).as_matrix()
        np.testing.assert_allclose(R[:, k], turn @ R[:, 0], atol=1e-12)


def test_point_cloud_samples_the_joint_box_and_matches_pinocchio(robot, pin_arm) -> None:
    arm = robot("pb-arm6")
    cloud = sample_workspace(arm, 500, T_world_base=T_WORLD_BASE, rng_seed=4)
    # The joint space of a serial arm with independent limits is the box of the joint
    # ranges (common practice, no source): every sample lies in it.
    assert np.all((cloud.q >= arm.lower) & (cloud.q <= arm.upper))
    reference = T_WORLD_BASE @ pin_arm(arm.T_flange_tool).tool_poses(cloud.q)  # pinocchio FK
    np.testing.assert_allclose(cloud.position, reference[:, :3, 3], atol=1e-9)
    again = sample_workspace(arm, 500, T_world_base=T_WORLD_BASE, rng_seed=4)
    np.testing.assert_array_equal(again.q, cloud.q)


def test_distance_bound_of_the_planar_arm(robot) -> None:
    # Closed form: the stretched arm reaches r = l1 + l2 = 0.7 m from axis 1.
    assert tcp_distance_bound(robot("pb-planar2r"), np.zeros(3)) == pytest.approx(0.7, abs=1e-9)


def test_planar_reach_map_agrees_with_the_exact_region(robot) -> None:
    arm = robot("pb-planar2r")
    chain = PlanarChain.from_robot(arm)
    result = reach_map(arm, voxel_size_m=0.05, box_m=[[-0.8, -0.8, -0.1], [0.8, 0.8, 0.1]])
    assert result.shape == (32, 32, 4)
    centres = result.centres()
    inside = planar_reachable(chain, centres[..., :2].reshape(-1, 2)).reshape(result.shape)
    # The planar IK ignores height and orientation (z, roll, pitch, yaw), so a reachable voxel
    # reaches every one of the 26 directions and every layer is alike.
    assert set(np.unique(result.count)) == {0, 26}
    # Exact region (law of cosines, planar_boundary) at the voxel centres.
    np.testing.assert_array_equal(result.count > 0, inside)
    # Yoshikawa (1985) 2R closed form: w = l1 l2 |sin theta2| with
    # cos theta2 = (r^2 - l1^2 - l2^2) / (2 l1 l2), the same for both elbow branches.
    r = np.linalg.norm(centres[..., :2], axis=-1)[inside]
    cosine = np.clip((r**2 - 0.4**2 - 0.3**2) / (2 * 0.4 * 0.3), -1, 1)
    np.testing.assert_allclose(
        result.best_manipulability[inside], 0.4 * 0.3 * np.sqrt(1 - cosine**2), atol=1e-9
    )
    assert np.all(np.isnan(result.best_manipulability[~inside]))


@pytest.fixture(scope="module")
def arm6_map(robot) -> ReachMap:
    return reach_map(robot("pb-arm6"), voxel_size_m=0.25, T_world_base=T_WORLD_BASE)


def test_reachable_directions_are_reached_within_limits(robot, pin_arm, arm6_map) -> None:
    arm = robot("pb-arm6")
    result = arm6_map
    voxels = np.argwhere(result.count > 0)
    assert 0 < voxels.shape[0] < np.prod(result.shape)
    rng = np.random.default_rng(1)
    rotations = tool_rotations(result.directions)[:, 0]
    reference = pin_arm(arm.T_flange_tool)
    for i, j, k in voxels[rng.choice(voxels.shape[0], 12, replace=False)]:
        centre = np.array([result.x[i], result.y[j], result.z[k]])
        for d in np.flatnonzero((result.direction_mask[i, j, k] >> np.arange(26)) & 1):
            target = np.eye(4)
            target[:3, :3] = rotations[d]
            target[:3, 3] = centre
            T_base_tool = np.linalg.inv(T_WORLD_BASE) @ target
            solutions = solve_ik_all(arm, T_base_tool[None])
            ok = solutions.valid[0] & solutions.within_limits[0]
            q = solutions.q[0, np.flatnonzero(ok)[0]]
            assert np.all((q >= arm.lower) & (q <= arm.upper))
            # pinocchio FK of the solution reaches the voxel centre with the direction's frame.
            np.testing.assert_allclose(reference.tool_poses(q[None])[0], T_base_tool, atol=1e-6)


def test_unreachable_directions_are_not_found_by_the_numerical_solver(robot, arm6_map) -> None:
    arm = robot("pb-arm6")
    result = arm6_map
    rotations = tool_rotations(result.directions)[:, 0]
    centres = result.centres()
    distance = np.linalg.norm(centres - result.centre, axis=-1)
    # Voxels inside the bound that miss some direction.
    candidates = np.argwhere((distance < result.radius_bound) & (result.count < 26))
    rng = np.random.default_rng(3)
    targets = []
    for i, j, k in candidates[rng.choice(candidates.shape[0], 30, replace=False)]:
        missing = np.flatnonzero(((result.direction_mask[i, j, k] >> np.arange(26)) & 1) == 0)
        target = np.eye(4)
        target[:3, :3] = rotations[rng.choice(missing)]
        target[:3, 3] = centres[i, j, k]
        targets.append(np.linalg.inv(T_WORLD_BASE) @ target)
    # Reference: the multi-start Levenberg-Marquardt solver (a different method from the
    # analytic one the map uses) finds no in-limit solution either.
    numeric = solve_ik_numeric(arm, np.array(targets), restarts=64, max_solutions=1)
    assert not np.any(numeric.valid & numeric.within_limits)


def test_best_manipulability_matches_pinocchio(robot, pin_arm, arm6_map) -> None:
    arm = robot("pb-arm6")
    result = arm6_map
    reference = pin_arm(arm.T_flange_tool)
    rotations = tool_rotations(result.directions)[:, 0]
    voxels = np.argwhere(result.count > 0)
    rng = np.random.default_rng(7)
    for i, j, k in voxels[rng.choice(voxels.shape[0], 4, replace=False)]:
        target = np.zeros((26, 4, 4))
        target[:, :3, :3] = rotations
        target[:, :3, 3] = [result.x[i], result.y[j], result.z[k]]
        target[:, 3, 3] = 1.0
        solutions = solve_ik_all(arm, np.linalg.inv(T_WORLD_BASE) @ target)
        ok = solutions.valid & solutions.within_limits
        # pinocchio frame Jacobian, Yoshikawa (1985) w = sqrt(det(J_v J_v^T)).
        w = reference.translational_manipulability(solutions.q[ok])
        assert result.best_manipulability[i, j, k] == pytest.approx(w.max(), rel=1e-9)


def test_sections_are_voxel_layers_with_their_axes(arm6_map) -> None:
    result = arm6_map
    k = 5
    plan = reach_section(result, axis="z", value_m=result.z[k] + 0.1)
    np.testing.assert_array_equal(plan.count, result.count[:, :, k].T)
    assert (plan.u_axis, plan.v_axis) == ("x", "y")
    # closed form: a z section's axes are the map's x and y centres, its value the layer's z
    np.testing.assert_array_equal(plan.u_m, result.x)
    np.testing.assert_array_equal(plan.v_m, result.y)
    assert plan.value_m == result.z[k]
    side = reach_section(result, axis="y", value_m=result.y[3])
    np.testing.assert_array_equal(side.count, result.count[:, 3, :].T)
    np.testing.assert_array_equal(side.best_manipulability, result.best_manipulability[:, 3, :].T)
    assert (side.u_axis, side.v_axis) == ("x", "z")
    front = reach_section(result, axis="x", value_m=result.x[2])
    assert front.count.shape == (result.shape[2], result.shape[1])
    with pytest.raises(SpacesInputError, match="value_m: expected a z coordinate within"):
        reach_section(result, axis="z", value_m=100.0)


def test_voxels_beyond_the_bound_are_empty(arm6_map) -> None:
    result = arm6_map
    distance = np.linalg.norm(result.centres() - result.centre, axis=-1)
    assert np.all(result.count[distance > result.radius_bound] == 0)
    # Triangle inequality: no TCP is farther from axis 1's origin than the sum of the link
    # offsets after it (pb-arm6.toml: 0.3117 + 0.597 + 0.2850 + 0.359 + 0.087 + 0.12 m, tool
    # 120 mm).
    assert result.radius_bound < 1.01 * 1.76 + 0.25


def test_identical_maps_on_every_executor(robot, dask_scheduler) -> None:
    arm = robot("pb-arm6")
    kwargs = {"voxel_size_m": 0.3, "T_world_base": T_WORLD_BASE}
    with SerialExecutor() as serial:
        reference = reach_map(arm, executor=serial, **kwargs)
    assert np.prod(reference.shape) > 2 * 1024  # several chunks
    with LocalPoolExecutor(2) as pool:
        pooled = reach_map(arm, executor=pool, **kwargs)
    with DaskExecutor(dask_scheduler) as dask:
        clustered = reach_map(arm, executor=dask, **kwargs)
    for other in (pooled, clustered):
        np.testing.assert_array_equal(other.direction_mask, reference.direction_mask)
        np.testing.assert_array_equal(other.count, reference.count)
        np.testing.assert_array_equal(other.best_manipulability, reference.best_manipulability)


def test_progress_and_cancel(robot) -> None:
    arm = robot("pb-planar2r")
    calls: list[tuple[int, int]] = []
    reach_map(
        arm,
        voxel_size_m=0.02,
        box_m=[[-0.8, -0.8, -0.01], [0.8, 0.8, 0.01]],
        progress=lambda done, total: calls.append((done, total)),
    )
    # 80 x 80 x 1 voxels in chunks of 1024: 7 chunks.
    assert calls == [(k, 7) for k in range(1, 8)]
    cancel = threading.Event()
    cancel.set()
    with pytest.raises(ComputationCancelled, match="cancelled after 0 of 7 chunks"):
        reach_map(
            arm, voxel_size_m=0.02, box_m=[[-0.8, -0.8, -0.01], [0.8, 0.8, 0.01]], cancel=cancel
        )


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"voxel_size_m": 0.0}, "voxel_size_m: expected a finite value > 0"),
        ({"voxel_size_m": 0.001}, "at most 2097152 allowed"),
        ({"voxel_size_m": 0.1, "box_m": [[0, 0, 0], [0, 1, 1]]}, "box_m: expected"),
        ({"voxel_size_m": 0.1, "rolls": 0}, "rolls: expected an integer >= 1"),
        ({"voxel_size_m": 0.1, "directions": np.ones((33, 3)) / np.sqrt(3)}, "expected 1..32"),
    ],
)
def test_bad_reach_requests_are_refused(robot, kwargs, message) -> None:
    with pytest.raises(SpacesInputError, match=message):
        reach_map(robot("pb-planar2r"), **kwargs)

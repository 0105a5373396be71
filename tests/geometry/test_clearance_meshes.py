"""Mesh obstacles in the fused clearance kernels, against brute force per pair.

References: the brute-force capsule-mesh value of the ``reference`` fixture
(every triangle, conftest.py), the exact box distance of
:mod:`posebridge.geometry.distance` for the box pairs (held to brute force
and python-fcl in test_distance.py and test_clearance.py), the floor's closed
form, capsule end points from
:func:`posebridge.geometry.clearance.capsule_segments_world` (forward
kinematics checked against pinocchio in tests/kinematics). Meshes are
generated in the test.
"""

from __future__ import annotations

import numpy as np
import pytest

from posebridge.bench.meshes import box_arrays, housing_mesh
from posebridge.geometry.clearance import (
    ClearanceScene,
    capsule_segments_world,
    clearance_batch,
    clearance_per_obstacle_batch,
    collision_batch,
)
from posebridge.geometry.distance import (
    closest_points_capsule_obstacle,
    closest_points_point_obstacle,
)
from posebridge.geometry.meshes import TriangleMesh
from posebridge.geometry.self_pairs import self_collision_pairs
from posebridge.geometry.shapes import (
    MESH,
    ArmCapsules,
    Box,
    Floor,
    GeometryInputError,
    Mesh,
    ObstacleSet,
)
from posebridge.kinematics.fk import PARALLEL_THRESHOLD
from posebridge.robot.model import Capsule
from posebridge.transforms import rotation_matrix_from_rotation_vector

SEED = 515
EXACT = 1e-6
"""0.001 mm, m."""


def pose(rotation_vector, translation) -> np.ndarray:
    T = np.eye(4)
    T[:3, :3] = rotation_matrix_from_rotation_vector(np.asarray(rotation_vector, dtype=float))
    T[:3, 3] = translation
    return T


@pytest.fixture(scope="module")
def arm(robot) -> ArmCapsules:
    tool = Capsule("pointer", 6, np.zeros(3), np.array([0.0, 0.0, 0.12]), 0.03)
    return ArmCapsules.from_robot(robot("pb-arm6"), [tool])


@pytest.fixture(scope="module")
def meshes() -> tuple[TriangleMesh, TriangleMesh]:
    v, f = box_arrays(np.array([-0.25, -0.2, -0.08]), np.array([0.25, 0.2, 0.08]), 2)
    centre = v[f].mean(axis=1)
    tray = TriangleMesh.from_arrays(v, f[centre[:, 2] < 0.08 - 1e-9], name="tray")
    return housing_mesh(1.0, triangles=3_000), tray


@pytest.fixture(scope="module")
def cell(arm, meshes):
    """Housing and tray meshes (the tray twice, sharing one mesh), two boxes and the floor."""
    housing, tray = meshes
    rng = np.random.default_rng(SEED)
    shapes = [
        Box("crate", pose((0.0, 0.0, 0.3), (-0.6, 0.5, 0.3)), np.array([0.2, 0.15, 0.3])),
        Mesh("housing", pose((0.0, 0.0, 0.2), (0.1, -0.1, 0.0)), housing),
        Mesh("tray-a", pose((0.4, 0.0, 0.0), (-0.3, -0.7, 0.9)), tray),
        Box("post", pose((0.1, 0.2, 0.0), (0.0, -0.8, 0.5)), np.array([0.05, 0.05, 0.5])),
        Mesh("tray-b", pose((0.0, -0.3, 1.0), (-0.7, 0.0, 1.2)), tray),
        Floor(-0.02),
    ]
    obstacles = ObstacleSet.from_shapes(shapes)
    scene = ClearanceScene.build(arm, obstacles, np.eye(4), self_pairs=self_collision_pairs(arm))
    q = rng.uniform(arm.robot.lower, arm.robot.upper, (80, arm.robot.dof))
    return shapes, scene, q


def _pair_reference(reference, shapes, scene, q) -> np.ndarray:
    """Brute force per capsule-obstacle pair, shape (N, m, k); inf where the mask excludes a pair."""
    arm = scene.arm
    segments = capsule_segments_world(arm, q, scene.T_world_base)
    n, m = segments.shape[:2]
    a = segments[:, :, 0].reshape(-1, 3)
    b = segments[:, :, 1].reshape(-1, 3)
    r = np.tile(arm.radius, n)
    out = np.empty((n, m, len(shapes)))
    for o, shape in enumerate(shapes):
        if isinstance(shape, Mesh):
            T = shape.T_world_mesh
            la = (a - T[:3, 3]) @ T[:3, :3]
            lb = (b - T[:3, 3]) @ T[:3, :3]
            value, _ = reference.capsule_mesh_distance(shape.mesh, la, lb, r)
        elif isinstance(shape, Box):
            # Box pairs: the exact solver, held to 0.001 mm in test_distance.py.
            value, _ = closest_points_capsule_obstacle(a, b, r, scene.obstacles, o)
        else:
            # Floor: min(z_a, z_b) - h - r (closed form).
            value = np.minimum(a[:, 2], b[:, 2]) - shape.height - r
        out[:, :, o] = value.reshape(n, m)
    return np.where(scene.pair_mask[None], out, np.inf)


def test_mesh_obstacles_in_the_set(meshes, cell) -> None:
    shapes, scene, _ = cell
    obstacles = scene.obstacles
    np.testing.assert_array_equal(obstacles.kind == MESH, [False, True, True, False, True, False])
    # The two trays share one mesh and so one hierarchy.
    assert len(obstacles.meshes) == 2
    assert obstacles.mesh_index[2] == obstacles.mesh_index[4]
    np.testing.assert_array_equal(obstacles.is_signed, [True, True, False, True, False, True])
    # A mesh's bounding sphere holds every vertex (definition of a bounding sphere).
    for o in (1, 2, 4):
        T = shapes[o].T_world_mesh
        world = shapes[o].mesh.vertices @ T[:3, :3].T + T[:3, 3]
        reach = np.linalg.norm(world - obstacles.bound_centre[o], axis=1)
        assert reach.max() <= obstacles.bound_radius[o] + 1e-12


def test_clearance_with_meshes_matches_brute_force(reference, cell) -> None:
    shapes, scene, q = cell
    pairs = _pair_reference(reference, shapes, scene, q)
    result = clearance_batch(scene, q)
    per = clearance_per_obstacle_batch(scene, q)
    environment = pairs.min(axis=1)
    np.testing.assert_allclose(per.distance, environment, rtol=0, atol=EXACT)
    # Minimum over obstacles and self pairs (self distance from the kernel, checked in test_clearance.py).
    np.testing.assert_allclose(
        result.distance, np.minimum(environment.min(axis=1), per.self_distance), rtol=0, atol=EXACT
    )
    mesh_closest = ~result.is_self & np.isin(result.other, [1, 2, 4])
    assert mesh_closest.any()
    for k in np.flatnonzero(mesh_closest):
        gap = np.linalg.norm(result.witness[k, 0] - result.witness[k, 1])
        assert gap == pytest.approx(abs(result.distance[k]), abs=EXACT)
        # The mesh witness lies on that mesh's surface (brute force over its triangles).
        shape = shapes[result.other[k]]
        T = shape.T_world_mesh
        local = (result.witness[k, 1] - T[:3, 3]) @ T[:3, :3]
        assert reference.point_triangles_distance(local, shape.mesh.triangles).min() < EXACT


@pytest.mark.parametrize("threshold", [0.0, 0.03, 0.15, -0.02])
def test_collision_with_meshes_agrees_with_clearance(cell, threshold: float) -> None:
    _, scene, q = cell
    distance = clearance_batch(scene, q).distance
    # collision_batch decides distance < threshold (its definition).
    np.testing.assert_array_equal(
        collision_batch(scene, q, threshold_m=threshold), distance < threshold
    )


def test_parallel_kernels_with_meshes_equal_serial(cell, arm) -> None:
    _, scene, _ = cell
    rng = np.random.default_rng(SEED + 1)
    q = rng.uniform(arm.robot.lower, arm.robot.upper, (PARALLEL_THRESHOLD + 5, arm.robot.dof))
    batch = clearance_batch(scene, q)
    head = clearance_batch(scene, q[:40])
    # Same kernel body on all threads: identical numbers (determinism).
    np.testing.assert_array_equal(batch.distance[:40], head.distance)
    per = clearance_per_obstacle_batch(scene, q)
    np.testing.assert_array_equal(
        per.distance[:40], clearance_per_obstacle_batch(scene, q[:40]).distance
    )
    np.testing.assert_array_equal(collision_batch(scene, q), batch.distance < 0.0)


def test_point_queries_on_mesh_obstacles(reference, cell) -> None:
    shapes, scene, _ = cell
    rng = np.random.default_rng(SEED + 2)
    x = rng.uniform(-1.0, 1.5, (60, 3))
    distance, closest = closest_points_point_obstacle(x, scene.obstacles, 1)
    T = shapes[1].T_world_mesh
    local = (x - T[:3, 3]) @ T[:3, :3]
    # Brute force: signed by winding number (closed housing).
    np.testing.assert_allclose(
        distance, reference.signed_point_mesh_distance(shapes[1].mesh, local), atol=EXACT
    )
    np.testing.assert_allclose(np.linalg.norm(x - closest, axis=1), np.abs(distance), atol=EXACT)


def test_subset_keeps_meshes(cell) -> None:
    _, scene, q = cell
    part = scene.obstacles.subset([4, 0])
    assert part.names == ("tray-b", "crate")
    assert len(part.meshes) == 1
    full = clearance_per_obstacle_batch(scene, q).distance
    alone = ClearanceScene.build(scene.arm, part, np.eye(4), self_pairs=np.empty((0, 2)))
    # The same pairs give the same distances (no obstacle interacts with another).
    np.testing.assert_array_equal(clearance_per_obstacle_batch(alone, q).distance, full[:, [4, 0]])


def test_mesh_kind_without_mesh_data_is_refused(cell) -> None:
    obstacles = cell[1].obstacles
    with pytest.raises(
        GeometryInputError, match="obstacle 'housing': a mesh obstacle needs its mesh"
    ):
        ObstacleSet(
            names=obstacles.names,
            kind=obstacles.kind,
            rotation=obstacles.rotation,
            translation=obstacles.translation,
            params=obstacles.params,
        )


def test_deep_penetration_keeps_the_deepest_pair(arm) -> None:
    # A solid block mesh the arm is deep inside and a box it only grazes: the minimum must be
    # the block's (the pruning bounds stay below even penetration estimates). Reference: the
    # per-pair values of closest_points_capsule_obstacle, each held to brute force above.
    v, f = box_arrays(np.array([-0.2, -0.6, 0.2]), np.array([1.0, 0.6, 1.4]), 2)
    block = TriangleMesh.from_arrays(v, f, name="block")
    shapes = [
        Box("post", pose((0.0, 0.0, 0.0), (0.0, 0.75, 0.6)), np.array([0.1, 0.2, 0.6])),
        Mesh("block", np.eye(4), block),
    ]
    obstacles = ObstacleSet.from_shapes(shapes)
    scene = ClearanceScene.build(arm, obstacles, np.eye(4), self_pairs=np.empty((0, 2)))
    rng = np.random.default_rng(SEED + 3)
    q = rng.uniform(arm.robot.lower, arm.robot.upper, (300, arm.robot.dof))
    segments = capsule_segments_world(arm, q, np.eye(4))
    a = segments[:, :, 0].reshape(-1, 3)
    b = segments[:, :, 1].reshape(-1, 3)
    r = np.tile(arm.radius, q.shape[0])
    pairs = np.stack(
        [closest_points_capsule_obstacle(a, b, r, obstacles, o)[0] for o in range(2)], axis=1
    ).reshape(q.shape[0], arm.count, 2)
    pairs = np.where(scene.pair_mask[None], pairs, np.inf)
    result = clearance_batch(scene, q)
    assert (pairs[:, :, 1].min(axis=1) < -0.2).any()  # some capsules deep inside the block
    np.testing.assert_allclose(result.distance, pairs.min(axis=(1, 2)), atol=1e-12)
    per = clearance_per_obstacle_batch(scene, q)
    np.testing.assert_allclose(per.distance, pairs.min(axis=1), atol=1e-12)

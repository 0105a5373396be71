"""Batched clearance against brute force, closed forms and python-fcl.

References: python-fcl (``fcl.distance`` per capsule-obstacle pair) run in the
tests; the independent segment-segment enumeration of the ``reference``
fixture (conftest.py); the floor's closed form ``min(z_a, z_b) - h - r`` on
capsule end points from :func:`posebridge.kinematics.fk.fk_frames` (itself
checked against pinocchio in tests/kinematics); rigid-motion invariance of
distances.
"""

from __future__ import annotations

import fcl
import numpy as np
import pytest

from posebridge.geometry.clearance import (
    ClearanceScene,
    capsule_segments_world,
    clearance_batch,
    clearance_per_obstacle_batch,
    collision_batch,
)
from posebridge.geometry.distance import closest_points_capsule_obstacle
from posebridge.geometry.self_pairs import self_collision_pairs
from posebridge.geometry.shapes import (
    ArmCapsules,
    Box,
    Cylinder,
    Floor,
    GeometryInputError,
    ObstacleSet,
    default_pair_mask,
)
from posebridge.kinematics.fk import PARALLEL_THRESHOLD, KinematicsInputError
from posebridge.robot.model import Capsule
from posebridge.transforms import rotation_matrix_from_rotation_vector

SEED = 8080


def pose(rotation_vector, translation) -> np.ndarray:
    T = np.eye(4)
    T[:3, :3] = rotation_matrix_from_rotation_vector(np.asarray(rotation_vector, dtype=float))
    T[:3, 3] = translation
    return T


def cell_shapes(rng: np.random.Generator, count: int = 20) -> list[Box | Cylinder]:
    """Random boxes and cylinders 0.3-1.5 m from the base axis (invented cell)."""
    shapes: list[Box | Cylinder] = []
    for i in range(count):
        angle = rng.uniform(0.0, 2.0 * np.pi)
        distance = rng.uniform(0.3, 1.5)
        T = pose(
            rng.normal(0.0, 1.0, 3),
            (distance * np.cos(angle), distance * np.sin(angle), rng.uniform(0.0, 1.6)),
        )
        if i % 4 == 3:
            shapes.append(Cylinder(f"post-{i}", T, rng.uniform(0.04, 0.2), rng.uniform(0.1, 0.5)))
        else:
            shapes.append(Box(f"box-{i}", T, rng.uniform(0.05, 0.3, 3)))
    return shapes


@pytest.fixture(scope="module")
def arm(robot) -> ArmCapsules:
    tool = Capsule("pointer", 6, np.zeros(3), np.array([0.0, 0.0, 0.12]), 0.03)
    return ArmCapsules.from_robot(robot("pb-arm6"), [tool])


@pytest.fixture(scope="module")
def cell(arm):
    rng = np.random.default_rng(SEED)
    shapes = [*cell_shapes(rng), Floor(-0.05)]
    T_world_base = pose((0.0, 0.0, 0.4), (0.2, -0.1, 0.0))
    obstacles = ObstacleSet.from_shapes(shapes)
    scene = ClearanceScene.build(arm, obstacles, T_world_base, self_pairs=self_collision_pairs(arm))
    q = rng.uniform(arm.robot.lower, arm.robot.upper, (1_500, arm.robot.dof))
    return shapes, scene, q


def brute_force(scene: ClearanceScene, q: np.ndarray, reference) -> tuple[np.ndarray, np.ndarray]:
    """All pair distances, shape (N, m * k + P): obstacle pairs ``c * k + o`` by the per-pair
    routine (checked in test_distance.py), then self pairs by the reference enumeration."""
    arm, obstacles = scene.arm, scene.obstacles
    segments = capsule_segments_world(arm, q, scene.T_world_base)
    k = obstacles.count
    values = np.full((q.shape[0], arm.count * k + len(scene.self_pairs)), np.inf)
    for c in range(arm.count):
        for o in range(k):
            if scene.pair_mask[c, o]:
                values[:, c * k + o] = closest_points_capsule_obstacle(
                    segments[:, c, 0], segments[:, c, 1], arm.radius[c], obstacles, o
                )[0]
    for p, (i, j) in enumerate(scene.self_pairs):
        axis = reference.segment_segment_distance(
            segments[:, i, 0], segments[:, i, 1], segments[:, j, 0], segments[:, j, 1]
        )
        values[:, arm.count * k + p] = axis - arm.radius[i] - arm.radius[j]
    return values, segments


def test_minimum_equals_brute_force_over_all_pairs(cell, reference) -> None:
    """The broad phase never changes the minimum, and the reported pair attains it."""
    _, scene, q = cell
    result = clearance_batch(scene, q)
    values, _ = brute_force(scene, q, reference)
    expected = values.min(axis=1)  # brute force over every pair
    np.testing.assert_allclose(result.distance, expected, atol=1e-9)
    assert 0.02 < np.mean(expected < 0.0) < 0.98  # both free and colliding configurations
    assert result.is_self.any()
    assert not result.is_self.all()
    m, k = scene.arm.count, scene.obstacles.count
    index = np.where(
        result.is_self,
        m * k
        + np.array(
            [
                np.flatnonzero((scene.self_pairs == (i, j)).all(axis=1))[0] if s else 0
                for i, j, s in zip(result.capsule, result.other, result.is_self, strict=True)
            ]
        ),
        result.capsule * k + result.other,
    )
    np.testing.assert_allclose(values[np.arange(len(q)), index], expected, atol=1e-9)
    separation = np.linalg.norm(result.witness[:, 0] - result.witness[:, 1], axis=1)
    np.testing.assert_allclose(separation, np.abs(result.distance), atol=1e-9)


def test_per_obstacle_and_self_minima_equal_brute_force(cell, reference) -> None:
    _, scene, q = cell
    result = clearance_per_obstacle_batch(scene, q, threshold_m=0.02)
    values, _ = brute_force(scene, q, reference)
    m, k = scene.arm.count, scene.obstacles.count
    per_obstacle = values[:, : m * k].reshape(len(q), m, k).min(axis=1)  # brute force
    self_minimum = values[:, m * k :].min(axis=1)  # reference enumeration
    np.testing.assert_allclose(result.distance, per_obstacle, atol=1e-9)
    np.testing.assert_allclose(result.self_distance, self_minimum, atol=1e-9)
    np.testing.assert_array_equal(result.in_collision, per_obstacle < 0.02)
    np.testing.assert_array_equal(result.self_collision, self_minimum < 0.02)
    assert result.in_collision.any(axis=0).sum() > 3  # several obstacles are hit somewhere


@pytest.mark.parametrize("threshold", [0.0, 0.05])
def test_collision_check_equals_thresholded_minimum(cell, reference, threshold: float) -> None:
    _, scene, q = cell
    values, _ = brute_force(scene, q, reference)
    expected = values.min(axis=1) < threshold  # brute force
    np.testing.assert_array_equal(collision_batch(scene, q, threshold_m=threshold), expected)


def test_parallel_driver_matches_serial(cell) -> None:
    _, scene, _q = cell
    rng = np.random.default_rng(SEED + 1)
    big = rng.uniform(scene.arm.robot.lower, scene.arm.robot.upper, (PARALLEL_THRESHOLD + 300, 6))
    parallel = clearance_batch(scene, big)
    serial = [
        clearance_batch(scene, part) for part in np.array_split(big, 4)
    ]  # each below the threshold
    np.testing.assert_array_equal(parallel.distance, np.concatenate([s.distance for s in serial]))
    np.testing.assert_array_equal(parallel.capsule, np.concatenate([s.capsule for s in serial]))
    per_parallel = clearance_per_obstacle_batch(scene, big)
    per_serial = np.concatenate(
        [clearance_per_obstacle_batch(scene, part).distance for part in np.array_split(big, 4)]
    )
    np.testing.assert_array_equal(per_parallel.distance, per_serial)
    np.testing.assert_array_equal(
        collision_batch(scene, big),
        np.concatenate([collision_batch(scene, part) for part in np.array_split(big, 4)]),
    )


@pytest.mark.parametrize("name", ["pb-arm6", "pb-gantry3", "pb-scara4", "pb-arm7"])
def test_fused_forward_kinematics_against_floor_closed_form(robot, name: str) -> None:
    """Against the floor alone: min over capsules of ``min(z_a, z_b) - h - r`` (closed form)
    on end points placed by fk_frames (checked against pinocchio in tests/kinematics)."""
    model = robot(name)
    arm = ArmCapsules.from_robot(model)
    obstacles = ObstacleSet.from_shapes([Floor(-2.0)])
    T_world_base = pose((0.3, -0.2, 1.1), (0.5, 0.2, 0.1))
    scene = ClearanceScene.build(
        arm, obstacles, T_world_base, self_pairs=np.empty((0, 2)), pair_mask=np.ones((arm.count, 1))
    )
    q = np.random.default_rng(SEED + 2).uniform(model.lower, model.upper, (300, model.dof))
    segments = capsule_segments_world(arm, q, T_world_base)
    expected = (segments[..., 2].min(axis=2) + 2.0 - arm.radius).min(axis=1)  # closed form
    np.testing.assert_allclose(clearance_batch(scene, q).distance, expected, atol=1e-12)


def test_capsule_segments_at_zero_configuration(robot) -> None:
    """pb-arm6 upper arm at q = 0: link 2 origin at (143, 0, 188 + 277) mm (sum of the
    description's joint offsets), segment along z for 597 mm; base moved by (1, 2, 0) m."""
    arm = ArmCapsules.from_robot(robot("pb-arm6"))
    T_world_base = pose((0.0, 0.0, 0.0), (1.0, 2.0, 0.0))
    segments = capsule_segments_world(arm, np.zeros((1, 6)), T_world_base)
    upper_arm = arm.names.index("upper-arm")
    expected = [[1.143, 2.0, 0.465], [1.143, 2.0, 1.062]]  # closed form (docstring)
    np.testing.assert_allclose(segments[0, upper_arm], expected, atol=1e-12)


def test_rigid_motion_of_whole_cell_keeps_distances(cell) -> None:
    """Moving the base and every obstacle by one rigid motion leaves all distances unchanged."""
    shapes, scene, q = cell
    M = pose((0.7, -0.4, 2.0), (3.0, -1.0, 0.5))
    moved = [
        Box(s.name, M @ s.T_world_box, s.half_extents)
        if isinstance(s, Box)
        else Cylinder(s.name, M @ s.T_world_cylinder, s.radius, s.half_length)
        for s in shapes
        if not isinstance(s, Floor)
    ]
    no_floor = scene.pair_mask[:, :-1]
    original = ClearanceScene.build(
        scene.arm,
        ObstacleSet.from_shapes(shapes[:-1]),
        scene.T_world_base,
        self_pairs=scene.self_pairs,
        pair_mask=no_floor,
    )
    moved_scene = ClearanceScene.build(
        scene.arm,
        ObstacleSet.from_shapes(moved),
        M @ scene.T_world_base,
        self_pairs=scene.self_pairs,
        pair_mask=no_floor,
    )
    np.testing.assert_allclose(
        clearance_per_obstacle_batch(moved_scene, q).distance,
        clearance_per_obstacle_batch(original, q).distance,
        atol=1e-9,
    )


def test_scene_with_another_base_equals_one_built_there(cell, reference) -> None:
    """``with_base`` reuses the prepared obstacles; its distances are the brute force's there."""
    _, scene, q = cell
    T = pose((0.1, -0.3, 1.2), (0.5, 0.4, 0.1))
    moved = scene.with_base(T)
    # reference: all pair distances by the per-pair routine and the reference enumeration
    # (brute_force) with the scene built afresh at that base
    fresh = ClearanceScene.build(
        scene.arm, scene.obstacles, T, self_pairs=scene.self_pairs, pair_mask=scene.pair_mask
    )
    values, _ = brute_force(fresh, q[:200], reference)
    np.testing.assert_allclose(
        clearance_batch(moved, q[:200]).distance, values.min(axis=1), atol=1e-9
    )


def test_closest_pair_and_distance_match_python_fcl(cell) -> None:
    """Collision-free configurations: the minimum over capsule-obstacle pairs by ``fcl.distance``.

    python-fcl's distances are upper bounds overestimating by up to about
    0.5 mm (measured, see test_distance.py), so the pair is compared where its
    best pair beats the second best by more than that.
    """
    shapes, scene, q = cell
    arm = scene.arm
    boxes_and_cylinders = ObstacleSet.from_shapes(shapes[:-1])
    free_scene = ClearanceScene.build(
        arm, boxes_and_cylinders, scene.T_world_base, self_pairs=np.empty((0, 2))
    )
    result = clearance_batch(free_scene, q[:400])
    segments = capsule_segments_world(arm, q[:400], scene.T_world_base)
    objects = []
    for s in shapes[:-1]:
        if isinstance(s, Box):
            geometry, T = fcl.Box(*(2.0 * s.half_extents)), s.T_world_box
        else:
            geometry, T = fcl.Cylinder(s.radius, 2.0 * s.half_length), s.T_world_cylinder
        objects.append(fcl.CollisionObject(geometry, fcl.Transform(T[:3, :3], T[:3, 3])))
    request = fcl.DistanceRequest()
    compared = 0
    for n in np.flatnonzero(result.distance > 1e-3)[:120]:
        table = np.empty((arm.count, len(objects)))
        for c in range(arm.count):
            a, b = segments[n, c]
            axis = b - a
            length = float(np.linalg.norm(axis))
            z = axis / length
            x = np.cross([1.0, 0.0, 0.0] if abs(z[0]) < 0.9 else [0.0, 1.0, 0.0], z)
            x /= np.linalg.norm(x)
            R = np.column_stack([x, np.cross(z, x), z])
            capsule = fcl.CollisionObject(
                fcl.Capsule(float(arm.radius[c]), length), fcl.Transform(R, 0.5 * (a + b))
            )
            for o, obstacle in enumerate(objects):
                table[c, o] = fcl.distance(capsule, obstacle, request, fcl.DistanceResult())
        best = table.min()
        assert result.distance[n] <= best + 1e-9  # python-fcl: an upper bound
        assert best - result.distance[n] <= 0.6e-3  # python-fcl, measured worst overestimate
        order = np.sort(table.ravel())
        if order[1] - order[0] > 0.6e-3:
            c, o = np.unravel_index(np.argmin(table), table.shape)
            assert (result.capsule[n], result.other[n]) == (c, o)  # python-fcl's closest pair
            compared += 1
    assert compared > 50


def test_empty_scene_reports_no_pair(arm) -> None:
    scene = ClearanceScene.build(arm, ObstacleSet.from_shapes([]), np.eye(4), self_pairs=[])
    result = clearance_batch(scene, np.zeros((2, 6)))
    assert np.all(np.isinf(result.distance))
    assert np.all(result.capsule == -1)
    assert np.all(np.isnan(result.witness))
    assert not collision_batch(scene, np.zeros((2, 6)), threshold_m=1.0).any()


def test_pair_mask_excludes_pairs(arm) -> None:
    """A box around the whole arm at q = 0, masked out: only the floor remains (closed form
    for the floor at z = -1: lowest end point z = 0 (base capsule start), radius 0.147 m)."""
    shapes = [Box("enclosure", np.eye(4), np.array([3.0, 3.0, 3.0])), Floor(-1.0)]
    mask = np.ones((arm.count, 2), dtype=bool)
    mask[:, 0] = False
    scene = ClearanceScene.build(
        arm, ObstacleSet.from_shapes(shapes), np.eye(4), self_pairs=[], pair_mask=mask
    )
    result = clearance_per_obstacle_batch(scene, np.zeros((1, 6)))
    assert np.isinf(result.distance[0, 0])
    assert result.distance[0, 1] == pytest.approx(1.0 - 0.147, abs=1e-12)  # closed form (docstring)


def test_default_mask_leaves_base_on_the_floor(arm) -> None:
    """The base capsule starts at the floor with radius 0.147: excluded by default (common practice)."""
    scene = ClearanceScene.build(
        arm, ObstacleSet.from_shapes([Floor(0.0)]), np.eye(4), self_pairs=[]
    )
    assert not scene.pair_mask[arm.names.index("base"), 0]
    assert clearance_batch(scene, np.zeros((1, 6))).distance[0] > 0.0


def test_inputs_are_checked(arm) -> None:
    obstacles = ObstacleSet.from_shapes([Floor(0.0)])
    with pytest.raises(GeometryInputError, match="T_world_base: rotation matrix: not orthonormal"):
        ClearanceScene.build(arm, obstacles, np.diag([2.0, 1.0, 1.0, 1.0]), self_pairs=[])
    with pytest.raises(GeometryInputError, match=r"pair_mask: expected shape \(8, 1\)"):
        ClearanceScene.build(arm, obstacles, np.eye(4), self_pairs=[], pair_mask=np.ones((8, 2)))
    with pytest.raises(
        GeometryInputError,
        match=r"self_pairs: expected pairs of two different capsule indices in 0\.\.7",
    ):
        ClearanceScene.build(arm, obstacles, np.eye(4), self_pairs=[[0, 8]])
    with pytest.raises(GeometryInputError, match=r"self_pairs: expected shape \(P, 2\)"):
        ClearanceScene.build(arm, obstacles, np.eye(4), self_pairs=[0, 1, 2])
    scene = ClearanceScene.build(arm, obstacles, np.eye(4), self_pairs=[])
    with pytest.raises(KinematicsInputError, match=r"expected shape \(N, 6\)"):
        clearance_batch(scene, np.zeros((3, 5)))
    with pytest.raises(GeometryInputError, match="threshold_m: expected a finite value"):
        collision_batch(scene, np.zeros((1, 6)), threshold_m=float("nan"))
    assert default_pair_mask(arm, obstacles).shape == (8, 1)

"""Tests of posebridge.spaces.joint_map and posebridge.cell.clearance on the demo cell.

Collision states are checked against python-fcl (``fcl.distance`` with signed distance)
for capsules against boxes and cylinders, against the closed form of a capsule above a
plane for the floor, and against densely sampled capsule axes for capsule pairs (fcl's
GJK capsule-capsule distance was seen off by up to 2e-4 m here, too coarse near contact).
"""

from __future__ import annotations

import json
import threading

import fcl
import numpy as np
import pytest

from posebridge.cell.clearance import clearance_scene
from posebridge.cell.files import load_cell
from posebridge.cell.scene import Scene, resolve_scene
from posebridge.compute import ComputationCancelled, SerialExecutor
from posebridge.geometry.clearance import ClearanceScene, capsule_segments_world
from posebridge.geometry.shapes import BOX, CYLINDER, FLOOR, ArmCapsules, Box, Floor, ObstacleSet
from posebridge.resources import data_folder
from posebridge.results.spaces import joint_map_axes_user, joint_map_limits_user
from posebridge.spaces.errors import SpacesInputError
from posebridge.spaces.joint_map import joint_map
from posebridge.transforms import transform_from_position_rpy

DEMO = data_folder("robots") / "demo-cell.json"
BOUNDARY_M = 2e-3
"""Cells whose reference distance is within this of zero are too close to the boundary
for two independent distance codes to be compared by sign (GJK/EPA tolerance in fcl)."""


@pytest.fixture(scope="module")
def demo() -> tuple[Scene, ClearanceScene]:
    scene = resolve_scene(load_cell(DEMO), DEMO)
    return scene, clearance_scene(scene)


def test_obstacle_order_and_names_follow_the_cell_file(demo) -> None:
    _, clearance = demo
    cell = json.loads(DEMO.read_text(encoding="utf-8"))
    # Documented order: box fixtures, cylinder fixtures, keep-out zones, pedestal, floor.
    expected = (
        [f["name"] for f in cell["fixtures"] if f["shape"] == "box"]
        + [f["name"] for f in cell["fixtures"] if f["shape"] == "cylinder"]
        + [zone["name"] for zone in cell["keep_outs"]]
        + ["pedestal", "floor"]
    )
    assert list(clearance.obstacles.names) == expected


def test_map_covers_exactly_the_joint_range_box(demo) -> None:
    _, clearance = demo
    robot = clearance.arm.robot
    hold = np.radians([10.0, 0.0, 0.0, 0.0, 30.0, 0.0])
    result = joint_map(clearance, (1, 2), hold, resolution=(40, 30))
    # The joint space of a serial arm with independent limits is the box of the joint
    # ranges (common practice, no source): the grid spans [lower, upper] of the chosen joints.
    np.testing.assert_array_equal(result.lower, robot.lower[[1, 2]])
    np.testing.assert_array_equal(result.upper, robot.upper[[1, 2]])
    for axis, lo, hi, cells in zip(result.axes, result.lower, result.upper, (40, 30), strict=True):
        width = (hi - lo) / cells
        # Cell centres lower + (i + 1/2) width (definition of the grid, module docstring).
        np.testing.assert_allclose(axis, lo + (np.arange(cells) + 0.5) * width, atol=1e-12)
        assert axis[0] - width / 2 == pytest.approx(lo)
        assert axis[-1] + width / 2 == pytest.approx(hi)
    q = result.configurations()
    assert q.shape == (40, 30, 6)
    np.testing.assert_array_equal(
        q[..., [0, 3, 4, 5]], np.broadcast_to(hold[[0, 3, 4, 5]], (40, 30, 4))
    )
    # pb-arm6 limits j2 -87..151 deg, j3 -197..76 deg (robots/pb-arm6.toml).
    np.testing.assert_allclose(np.degrees(result.lower), [-87.0, -197.0])
    np.testing.assert_allclose(np.degrees(result.upper), [151.0, 76.0])


def _capsule_object(a: np.ndarray, b: np.ndarray, radius: float) -> fcl.CollisionObject:
    axis = b - a
    length = float(np.linalg.norm(axis))
    z = axis / length if length > 0 else np.array([0.0, 0.0, 1.0])
    helper = np.eye(3)[np.argmin(np.abs(z))]
    x = np.cross(helper, z)
    x /= np.linalg.norm(x)
    R = np.stack([x, np.cross(z, x), z], axis=1)
    return fcl.CollisionObject(fcl.Capsule(radius, length), fcl.Transform(R, 0.5 * (a + b)))


def _obstacle_object(clearance: ClearanceScene, o: int) -> fcl.CollisionObject:
    obstacles = clearance.obstacles
    kind = obstacles.kind[o]
    params = obstacles.params[o]
    if kind == BOX:
        geometry = fcl.Box(*(2.0 * params))
    else:
        assert kind == CYLINDER
        geometry = fcl.Cylinder(params[0], 2.0 * params[1])
    return fcl.CollisionObject(
        geometry, fcl.Transform(obstacles.rotation[o], obstacles.translation[o])
    )


def _signed(a: fcl.CollisionObject, b: fcl.CollisionObject) -> float:
    request = fcl.DistanceRequest(enable_signed_distance=True)
    return float(fcl.distance(a, b, request, fcl.DistanceResult()))


def _sampled_axis_distance(first: np.ndarray, second: np.ndarray) -> float:
    """Smallest distance between sampled points of two segments, shape (2, 3) each.

    33 evenly spaced points per segment, refined four times over four spacings around the
    closest pair; the squared distance is convex in the two segment parameters, so each
    refined grid holds the minimiser. Final spacing about 2e-5 m, error below 1e-8 m here.
    """
    s_range = t_range = (0.0, 1.0)
    best = np.inf
    for _ in range(5):
        s = np.linspace(*s_range, 33)
        t = np.linspace(*t_range, 33)
        a = first[0] + s[:, None] * (first[1] - first[0])
        b = second[0] + t[:, None] * (second[1] - second[0])
        d = np.linalg.norm(a[:, None, :] - b[None, :, :], axis=2)
        i, j = np.unravel_index(np.argmin(d), d.shape)
        best = float(d[i, j])
        ds, dt = 2 * (s[1] - s[0]), 2 * (t[1] - t[0])
        s_range = (max(s[i] - ds, 0.0), min(s[i] + ds, 1.0))
        t_range = (max(t[j] - dt, 0.0), min(t[j] + dt, 1.0))
    return best


def _deepest_point_bound(clearance: ClearanceScene, o: int) -> float:
    """Largest depth of any point inside solid ``o``: its smallest half-extent, m (closed form:
    a point inside a box or cylinder is that close to some face)."""
    params = clearance.obstacles.params[o]
    if clearance.obstacles.kind[o] == BOX:
        return float(params.min())
    return float(min(params[0], params[1]))  # cylinder: radius, half length


def reference_distances(
    clearance: ClearanceScene, q: np.ndarray
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Per-obstacle signed distances from python-fcl (floor: closed form), self distances from
    sampled capsule axes, and where an fcl depth is not comparable; shapes (N, k), (N,), (N,).

    fcl's penetration depth is the smallest separating translation, posebridge's the depth
    of the capsule's deepest point (posebridge.geometry.distance). They agree for shallow
    contacts; a capsule crossing a thin solid can need a translation deeper than any point
    can lie (radius + smallest half-extent). Such configurations are flagged.
    """
    arm = clearance.arm
    segments = capsule_segments_world(arm, q, clearance.T_world_base)
    k = clearance.obstacles.count
    per_obstacle = np.full((q.shape[0], k), np.inf)
    self_distance = np.full(q.shape[0], np.inf)
    not_comparable = np.zeros(q.shape[0], dtype=bool)
    solids = {
        o: _obstacle_object(clearance, o) for o in range(k) if clearance.obstacles.kind[o] != FLOOR
    }
    for n in range(q.shape[0]):
        capsules = [
            _capsule_object(segments[n, c, 0], segments[n, c, 1], arm.radius[c])
            for c in range(arm.count)
        ]
        for o in range(k):
            for c in np.flatnonzero(clearance.pair_mask[:, o]):
                if clearance.obstacles.kind[o] == FLOOR:
                    # Capsule above the plane z = h: lowest end point's height minus the radius.
                    d = (
                        segments[n, c, :, 2].min()
                        - arm.radius[c]
                        - clearance.obstacles.params[o, 0]
                    )
                else:
                    d = _signed(capsules[c], solids[o])
                    bound = arm.radius[c] + _deepest_point_bound(clearance, o)
                    not_comparable[n] |= d < -bound - BOUNDARY_M
                per_obstacle[n, o] = min(per_obstacle[n, o], d)
        for i, j in clearance.self_pairs:
            self_distance[n] = min(
                self_distance[n],
                _sampled_axis_distance(segments[n, i], segments[n, j])
                - arm.radius[i]
                - arm.radius[j],
            )
    return per_obstacle, self_distance, not_comparable


def test_collision_cells_agree_with_fcl(demo) -> None:
    _, clearance = demo
    hold = np.radians([10.0, 0.0, 0.0, 0.0, 30.0, 0.0])
    result = joint_map(clearance, (1, 2), hold, resolution=64)
    colliding = ~result.free
    assert 0.05 < colliding.mean() < 0.95  # the sample below has both kinds
    rng = np.random.default_rng(2)
    cells = np.concatenate(
        [
            rng.choice(np.flatnonzero(colliding.ravel()), 60, replace=False),
            rng.choice(np.flatnonzero(~colliding.ravel()), 60, replace=False),
        ]
    )
    q = result.configurations().reshape(-1, 6)[cells]
    per_obstacle, self_distance, not_comparable = reference_distances(clearance, q)
    nearest = per_obstacle.min(axis=1)
    decided = np.abs(nearest) > BOUNDARY_M
    assert decided.sum() > 100
    # python-fcl signed distance: in collision exactly where the distance is negative.
    np.testing.assert_array_equal(
        result.obstacle.ravel()[cells][decided] >= 0, nearest[decided] < 0.0
    )
    decided_self = np.abs(self_distance) > BOUNDARY_M
    np.testing.assert_array_equal(
        result.self_collision.ravel()[cells][decided_self], self_distance[decided_self] < 0.0
    )
    # Separation distances agree with the references (fcl GJK converges to about 1e-6 m).
    reference = np.minimum(nearest, self_distance)
    free = reference > 0.0
    assert free.sum() > 40
    np.testing.assert_allclose(result.clearance.ravel()[cells][free], reference[free], atol=1e-5)
    # The label is the obstacle with the smallest fcl distance where the two nearest differ
    # clearly and fcl's depths measure the same thing (see reference_distances).
    ordered = np.sort(per_obstacle, axis=1)
    clear_label = (ordered[:, 0] < -BOUNDARY_M) & (ordered[:, 1] - ordered[:, 0] > BOUNDARY_M)
    clear_label &= ~not_comparable
    assert clear_label.sum() > 20
    np.testing.assert_array_equal(
        result.obstacle.ravel()[cells][clear_label], np.argmin(per_obstacle, axis=1)[clear_label]
    )
    # Every obstacle marked colliding in a cell has a negative fcl distance (or is at the boundary).
    hits = result.colliding.reshape(-1, result.colliding_obstacles.shape[0])[cells]
    hit_distance = per_obstacle[:, result.colliding_obstacles]
    assert np.all(hit_distance[hits] < BOUNDARY_M)
    assert np.all(hits[hit_distance < -BOUNDARY_M])


def test_three_joint_map_through_an_executor_equals_in_process(demo) -> None:
    _, clearance = demo
    hold = np.radians([0.0, 0.0, 0.0, 0.0, 30.0, 0.0])
    calls: list[tuple[int, int]] = []
    direct = joint_map(clearance, (0, 1, 2), hold, resolution=(12, 40, 80))
    with SerialExecutor() as executor:
        chunked = joint_map(
            clearance,
            (0, 1, 2),
            hold,
            resolution=(12, 40, 80),
            executor=executor,
            progress=lambda done, total: calls.append((done, total)),
        )
    assert chunked.shape == (12, 40, 80)
    # Same cells, same kernel: the chunked result equals the in-process one exactly.
    for name in ("obstacle", "self_collision", "clearance", "colliding_obstacles", "colliding"):
        np.testing.assert_array_equal(getattr(chunked, name), getattr(direct, name))
    assert calls[-1] == (2, 2)  # 38 400 cells in chunks of 32 768
    assert len(calls) == 2


def test_cancel_stops_the_map(demo) -> None:
    _, clearance = demo
    cancel = threading.Event()
    cancel.set()
    with pytest.raises(ComputationCancelled, match="cancelled after 0 of"):
        joint_map(clearance, (0, 1), np.zeros(6), resolution=16, cancel=cancel)


@pytest.mark.parametrize(
    ("joints", "resolution", "message"),
    [
        ((1,), 16, "expected 2 or 3 joint indices"),
        ((1, 1), 16, "expected distinct indices in 0..5"),
        ((1, 6), 16, "expected distinct indices in 0..5"),
        ((1, 2), 513, "expected 2 cell counts in 2..512"),
        ((0, 1, 2), 129, "expected 3 cell counts in 2..128"),
        ((0, 1), (16, 16, 16), "expected 2 cell counts"),
    ],
)
def test_bad_requests_are_refused(demo, joints, resolution, message) -> None:
    _, clearance = demo
    with pytest.raises(SpacesInputError, match=message):
        joint_map(clearance, joints, np.zeros(6), resolution=resolution)


def test_bad_held_values_are_refused(demo) -> None:
    _, clearance = demo
    with pytest.raises(
        SpacesInputError, match=r"q_hold: expected 6 finite joint values, got shape \(5,\)"
    ):
        joint_map(clearance, (0, 1), np.zeros(5), resolution=8)


def test_gantry_map_in_mm_matches_the_closed_form(robot) -> None:
    gantry = robot("pb-gantry3")
    box = Box(
        "hanging-box", transform_from_position_rpy([1.0, 0.75, 1.2], [0, 0, 0]), np.full(3, 0.1)
    )
    clearance = ClearanceScene.build(
        ArmCapsules.from_robot(gantry),
        ObstacleSet.from_shapes([box, Floor(0.0)]),
        np.eye(4),
        self_pairs=np.empty((0, 2)),
    )
    hold = np.array([0.0, 0.75, 0.0, 0.3])
    result = joint_map(clearance, (0, 2), hold, resolution=(200, 80))
    # Prismatic axes at the boundary in mm: x 0..2000 mm, z 0..800 mm (robots/pb-gantry3.toml),
    # 10 mm cells with centres at 5, 15, ... mm.
    lower, upper = joint_map_limits_user(result)
    np.testing.assert_allclose(lower, [0.0, 0.0])
    np.testing.assert_allclose(upper, [2000.0, 800.0])
    x_mm, z_mm = joint_map_axes_user(result)
    np.testing.assert_allclose(x_mm, 5.0 + 10.0 * np.arange(200))
    np.testing.assert_allclose(z_mm, 5.0 + 10.0 * np.arange(80))
    # Two vertical capsules (robots/pb-gantry3.toml: x origin at 1.8 m, z axis pointing down):
    # the ram, radius 60 mm, from (x, y, 1.8 - z) to (x, y, 1.65 - z) m, and the head, radius
    # 45 mm, from 1.65 - z to 1.62 - z m. Distance of a vertical segment to an axis-aligned box,
    # axis by axis (Ericson 2004, sec. 5.1.3, point-AABB), minimum over the two capsules.
    x, z = np.meshgrid(*result.axes, indexing="ij")
    dx = np.maximum(np.abs(x - 1.0) - 0.1, 0.0)

    def capsule_distance(top: np.ndarray, bottom: np.ndarray, radius: float) -> np.ndarray:
        dz = np.maximum.reduce([1.1 - top, bottom - 1.3, np.zeros_like(top)])
        return np.hypot(dx, dz) - radius

    distance = np.minimum(
        capsule_distance(1.8 - z, 1.65 - z, 0.06), capsule_distance(1.65 - z, 1.62 - z, 0.045)
    )
    decided = np.abs(distance) > 1e-3
    np.testing.assert_array_equal((result.obstacle == 0)[decided], (distance < 0.0)[decided])
    # Clearance also counts the floor: the head's lowest point is 1.62 - z - 0.045 m high.
    nearest = np.minimum(distance, 1.575 - z)
    free = distance > 0.0
    np.testing.assert_allclose(result.clearance[free], nearest[free], atol=1e-9)
    assert result.obstacle_names == ("hanging-box", "floor")
    assert 0 < np.count_nonzero(result.obstacle == 0) < result.obstacle.size

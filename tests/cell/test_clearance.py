"""Clearance of the arm to the cell: obstacle order, pair rules, python-fcl and closed forms.

References: python-fcl distances with pinocchio placements (``fcl_cell`` fixture,
conftest.py); scipy.optimize for capsule-capsule penetration depth (the minimum
over the two segment parameters of the axis distance, minus both radii); the closed
form ``distance = gap - radius`` of a vertical capsule above a box.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
from scipy.optimize import minimize

from posebridge.cell.clearance import (
    SELF_PAIR_SAMPLES,
    cell_arm,
    cell_obstacles,
    clearance_scene,
    clearance_to_cell,
    obstacle_kinds,
    obstacle_names,
)
from posebridge.cell.model import validate_cell
from posebridge.cell.scene import resolve_scene
from posebridge.geometry.self_pairs import self_collision_pairs
from posebridge.resources import data_folder

DEMO_CELL = data_folder("robots") / "demo-cell.json"

# python-fcl's capsule distances are upper bounds that overestimate by up to about
# 0.5 mm (measured in tests/geometry/test_distance.py); compare within 0.6 mm.
FCL_TOLERANCE_M = 0.6e-3

LIFT_TOML = (Path(__file__).parents[1] / "fixtures" / "robots" / "lift-1.toml").read_text(
    encoding="utf-8"
)
"""The shared test robot: a one-joint vertical lift (prismatic z)."""


def demo_configurations(scene, documented_joints) -> np.ndarray:
    """The documented joint values of every target, then 6 seeded random in-limit ones."""
    robot = scene.robot
    documented = np.radians([documented_joints[name] for name in scene.targets.names])
    rng = np.random.default_rng(20)
    return np.concatenate([documented, rng.uniform(robot.lower, robot.upper, (6, robot.dof))])


def test_obstacle_order_and_kinds_follow_the_cell_file(demo_scene) -> None:
    raw = json.loads(DEMO_CELL.read_text())
    boxes = [f["name"] for f in raw["fixtures"] if f["shape"] == "box"]
    cylinders = [f["name"] for f in raw["fixtures"] if f["shape"] == "cylinder"]
    keep_outs = [zone["name"] for zone in raw["keep_outs"]]
    # our own contract (module docstring): boxes, cylinders, keep-outs, pedestal, floor
    expected = [*boxes, *cylinders, *keep_outs, "pedestal", "floor"]
    assert obstacle_names(demo_scene) == expected
    assert list(cell_obstacles(demo_scene).names) == expected
    assert obstacle_kinds(demo_scene) == (
        ["fixture"] * (len(boxes) + len(cylinders))
        + ["keep-out"] * len(keep_outs)
        + ["pedestal", "floor"]
    )
    arm = cell_arm(demo_scene)
    # robot capsules from robots/pb-arm6.toml, then the cell tool's capsule
    assert arm.names == (*(c.name for c in demo_scene.robot.capsules), "gripper-body")


def test_clearance_scene_is_built_once_with_the_documented_pairs(demo_scene) -> None:
    built = clearance_scene(demo_scene)
    assert clearance_scene(demo_scene) is built
    arm = built.arm
    names = list(built.obstacles.names)
    base = arm.link == 0
    # our own contract: base-link capsules skip the pedestal and the floor, all else checked
    assert not built.pair_mask[np.ix_(base, [names.index("pedestal"), names.index("floor")])].any()
    rest = np.ones_like(built.pair_mask)
    rest[np.ix_(base, [names.index("pedestal"), names.index("floor")])] = False
    np.testing.assert_array_equal(built.pair_mask, rest)
    expected = self_collision_pairs(arm, samples=SELF_PAIR_SAMPLES, seed=0)
    np.testing.assert_array_equal(built.self_pairs, expected)


def test_environment_clearance_matches_python_fcl(demo_scene, documented_joints, fcl_cell) -> None:
    q = demo_configurations(demo_scene, documented_joints)
    result = clearance_to_cell(demo_scene, q, scope="environment")
    compared = 0
    for k in range(q.shape[0]):
        table = fcl_cell.obstacle_distances(q[k])
        pair, best = min(table.items(), key=lambda item: item[1])
        if best <= 0.0:  # python-fcl gives no penetration depth; covered by the next test
            assert result.distance[k] <= FCL_TOLERANCE_M
            continue
        # python-fcl (reference library): an upper bound, at most 0.6 mm above
        assert result.distance[k] <= best + 1e-9
        assert best - result.distance[k] <= FCL_TOLERANCE_M
        second = sorted(table.values())[1]
        if second - best > FCL_TOLERANCE_M:
            assert result.pair(k)[:2] == pair  # python-fcl's closest pair
            compared += 1
        # definition: the witness points are the distance apart
        witness = result.witness_world[k]
        assert np.linalg.norm(witness[0] - witness[1]) == pytest.approx(
            result.distance[k], abs=1e-9
        )
    assert compared >= 8


def _penetration(first, second) -> float:
    """Capsule-capsule signed distance by scipy.optimize over both segment parameters."""

    def gap(st: np.ndarray) -> float:
        p = first.start + st[0] * (first.end - first.start)
        r = second.start + st[1] * (second.end - second.start)
        return float(np.linalg.norm(p - r))

    starts = [(s, t) for s in (0.1, 0.5, 0.9) for t in (0.1, 0.5, 0.9)]
    best = min(
        minimize(gap, x0, bounds=[(0.0, 1.0), (0.0, 1.0)], method="L-BFGS-B").fun for x0 in starts
    )
    return best - first.radius - second.radius


def test_self_clearance_matches_python_fcl_and_scipy(
    demo_scene, documented_joints, fcl_cell
) -> None:
    q = demo_configurations(demo_scene, documented_joints)
    result = clearance_to_cell(demo_scene, q, scope="self")
    for k in range(q.shape[0]):
        first, second, kind = result.pair(k)
        assert kind == "self"
        capsules = {c.name: c for c in fcl_cell.capsules(q[k])}
        if result.distance[k] > 0.0:
            # python-fcl capsule-capsule distance (reference library)
            reference = fcl_cell.capsule_distance(q[k], first, second)
            assert result.distance[k] == pytest.approx(reference, abs=FCL_TOLERANCE_M)
        else:
            # scipy.optimize (reference library): axis distance minus both radii
            reference = _penetration(capsules[first], capsules[second])
            assert result.distance[k] == pytest.approx(reference, abs=1e-6)


def test_all_scope_is_the_smaller_of_environment_and_self(demo_scene, documented_joints) -> None:
    q = demo_configurations(demo_scene, documented_joints)
    everything = clearance_to_cell(demo_scene, q)
    environment = clearance_to_cell(demo_scene, q, scope="environment")
    itself = clearance_to_cell(demo_scene, q, scope="self")
    # definition: the minimum over all pairs is the minimum of the two groups' minima
    np.testing.assert_allclose(
        everything.distance, np.minimum(environment.distance, itself.distance), atol=1e-12
    )
    np.testing.assert_array_equal(everything.is_self, itself.distance < environment.distance)


def lift_scene(floor_mm: float = -1000.0):
    cell = validate_cell(
        {
            "schema_version": 1,
            "title": "lift above a table",
            "robot": {"toml": LIFT_TOML},
            "tool": {
                "name": "probe",
                "tcp": {"position_mm": [0.0, 0.0, 200.0]},
                "capsules": [
                    {
                        "name": "rod",
                        "start_mm": [0.0, 0.0, 0.0],
                        "end_mm": [0.0, 0.0, 200.0],
                        "radius_mm": 30.0,
                    }
                ],
            },
            "floor_height_mm": floor_mm,
            "fixtures": [
                {
                    "name": "table",
                    "shape": "box",
                    "position_mm": [0.0, 0.0, -100.0],
                    "size_mm": [400.0, 400.0, 200.0],
                }
            ],
        }
    )
    return resolve_scene(cell)


@pytest.mark.parametrize("height_mm", [100.0, 31.0, 10.0])
def test_capsule_above_a_box_closed_form(height_mm: float) -> None:
    scene = lift_scene()
    result = clearance_to_cell(scene, [[height_mm / 1000.0]])
    # closed form: a vertical capsule whose lowest axis point is ``gap`` above the
    # box top: distance = gap - radius (negative: penetration depth)
    assert result.distance[0] == pytest.approx((height_mm - 30.0) / 1000.0, abs=1e-12)
    assert result.pair(0) == ("rod", "table", "fixture")
    np.testing.assert_allclose(result.witness_world[0, 1], [0.0, 0.0, 0.0], atol=1e-12)


def test_floor_is_named_and_nothing_to_check_is_infinite() -> None:
    scene = lift_scene(floor_mm=50.0)
    result = clearance_to_cell(scene, [[0.1]])
    # closed form: the floor plane 50 mm above the table top is nearer than the table:
    # distance = 100 mm - 50 mm - 30 mm radius
    assert result.pair(0) == ("rod", "floor", "floor")
    assert result.distance[0] == pytest.approx(0.02, abs=1e-12)
    itself = clearance_to_cell(scene, [[0.1]], scope="self")
    # a one-capsule arm has no self pairs: nothing to check
    assert itself.distance[0] == np.inf
    assert itself.pair(0) == ("", "", "")


def test_unknown_scope_is_refused(demo_scene) -> None:
    with pytest.raises(ValueError, match="scope: expected 'all', 'environment' or 'self', got 'x'"):
        clearance_to_cell(demo_scene, np.zeros((1, 6)), scope="x")  # type: ignore[arg-type]

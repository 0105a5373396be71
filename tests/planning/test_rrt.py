"""RRT-Connect joint moves on the demo cell, checked independently with python-fcl."""

from __future__ import annotations

import itertools

import fcl
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from posebridge.cell.clearance import clearance_scene
from posebridge.cell.files import load_cell
from posebridge.cell.model import validate_cell
from posebridge.cell.scene import Scene, resolve_scene
from posebridge.geometry.clearance import capsule_segments_world
from posebridge.geometry.shapes import BOX, CYLINDER, FLOOR, ArmCapsules
from posebridge.planning.errors import PlanningInputError
from posebridge.planning.path_sampling import sample_path
from posebridge.planning.rrt import edge_configurations, lever_arms, plan_joint_move
from posebridge.resources import data_folder
from posebridge.results.joint_plan import joint_plan_result, render_joint_plan
from posebridge.robot.library import load_robot

START = np.radians([60.0, 30.0, 10.0, 0.0, 20.0, 0.0])
GOAL = np.radians([-60.0, 30.0, 10.0, 0.0, 20.0, 0.0])


@pytest.fixture(scope="module")
def demo() -> Scene:
    path = data_folder("robots") / "demo-cell.json"
    return resolve_scene(load_cell(path), path)


def _capsule(start: np.ndarray, end: np.ndarray, radius: float) -> fcl.CollisionObject:
    """An fcl capsule (axis along its local z, centred) on the segment ``start -> end``."""
    axis = end - start
    length = float(np.linalg.norm(axis))
    z = axis / length if length > 0 else np.array([0.0, 0.0, 1.0])
    helper = np.array([1.0, 0.0, 0.0]) if abs(z[0]) < 0.9 else np.array([0.0, 1.0, 0.0])
    x = np.cross(helper, z)
    x /= np.linalg.norm(x)
    R = np.stack([x, np.cross(z, x), z], axis=1)
    return fcl.CollisionObject(fcl.Capsule(radius, length), fcl.Transform(R, 0.5 * (start + end)))


def fcl_min_distance(scene: Scene, q: np.ndarray) -> tuple[float, float]:
    """Smallest arm-obstacle and arm-arm distance over configurations, by python-fcl.

    Uses the pairs the cell checks (pair mask and self pairs of the clearance scene);
    the floor is a half-space, measured in closed form from the lowest capsule point.
    """
    cs = clearance_scene(scene)
    obstacles = cs.obstacles
    shapes = []
    for o in range(obstacles.count):
        kind = obstacles.kind[o]
        transform = fcl.Transform(obstacles.rotation[o], obstacles.translation[o])
        if kind == BOX:
            shapes.append(fcl.CollisionObject(fcl.Box(*(2.0 * obstacles.params[o])), transform))
        elif kind == CYLINDER:
            radius, half, _ = obstacles.params[o]
            shapes.append(fcl.CollisionObject(fcl.Cylinder(radius, 2.0 * half), transform))
        else:
            shapes.append(None)
    segments = capsule_segments_world(cs.arm, q, cs.T_world_base)
    radius = cs.arm.radius
    environment = np.inf
    own = np.inf
    request = fcl.DistanceRequest()
    for k in range(q.shape[0]):
        capsules = [_capsule(s[0], s[1], r) for s, r in zip(segments[k], radius, strict=True)]
        for c, capsule in enumerate(capsules):
            for o in range(obstacles.count):
                if not cs.pair_mask[c, o]:
                    continue
                if obstacles.kind[o] == FLOOR:
                    low = segments[k, c, :, 2].min() - radius[c]  # closed form: half-space
                    environment = min(environment, low - obstacles.params[o, 0])
                    continue
                result = fcl.DistanceResult()
                environment = min(environment, fcl.distance(capsule, shapes[o], request, result))
        for i, j in cs.self_pairs:
            result = fcl.DistanceResult()
            own = min(own, fcl.distance(capsules[i], capsules[j], request, result))
    return environment, own


def test_lever_arms_of_the_planar_arm() -> None:
    robot = load_robot("pb-planar2r")
    levers = lever_arms(ArmCapsules.from_robot(robot))
    # closed form from pb-planar2r.toml: from joint 1 the farthest arm point is the end of
    # link 2 plus its radius, 400 + 300 + 30 mm; from joint 2 it is 300 + 30 mm
    assert np.allclose(levers, [0.73, 0.33])


@settings(derandomize=True, deadline=None, max_examples=25)
@given(st.integers(0, 10_000))
def test_edge_steps_bound_every_capsule_point(seed: int) -> None:
    robot = load_robot("pb-arm6")
    arm = ArmCapsules.from_robot(robot)
    rng = np.random.default_rng(seed)
    q_a, q_b = rng.uniform(robot.lower, robot.upper, size=(2, robot.dof))
    q = edge_configurations(q_a, q_b, lever_arms(arm), 0.01)
    segments = capsule_segments_world(arm, q, np.eye(4))
    # reference: forward kinematics of the capsule end points; a point's displacement is at
    # most sum_i |dq_i| L_i per step (triangle inequality along the chain), here <= 10 mm
    step = np.linalg.norm(np.diff(segments, axis=0), axis=-1)
    assert step.max() <= 0.01 + 1e-9


def test_plans_around_the_press_column(demo: Scene) -> None:
    report = joint_plan_result(plan_joint_move(demo, START, GOAL, seed=7, safety_margin_m=0.01))
    assert report.status == "solved"
    # the straight move is refused; python-fcl confirms it comes closer than the margin
    # (the cell file: it sweeps past both press columns; the report names its worst point)
    assert report.straight_move_obstacle in ("press-column-left", "press-column-right")
    straight = edge_configurations(START, GOAL, lever_arms(clearance_scene(demo).arm), 0.01)
    straight_environment, _ = fcl_min_distance(demo, straight)
    assert straight_environment < 0.01
    waypoints = np.radians(report.waypoints_deg)
    assert np.allclose(waypoints[0], START)
    assert np.allclose(waypoints[-1], GOAL)
    dense = np.concatenate(
        [
            edge_configurations(a, b, lever_arms(clearance_scene(demo).arm), 0.01)
            for a, b in itertools.pairwise(waypoints)
        ]
    )
    environment, own = fcl_min_distance(demo, dense)
    # reference: python-fcl distances at every checked configuration: at least the 10 mm
    # safety margin to obstacles (between them the motion step keeps > 5 mm) and no self contact
    assert environment >= 0.01 - 1e-6
    assert own >= -1e-6
    assert report.min_clearance_mm is not None
    assert report.min_clearance_mm >= -1e-6
    assert report.check is not None
    assert not [f for f in report.check.findings if f.kind == "collision"]
    assert report.straight_move_obstacle in report.message
    assert render_joint_plan(report).startswith("Joint move plan: solved")


def test_same_seed_same_path(demo: Scene) -> None:
    first = joint_plan_result(plan_joint_move(demo, START, GOAL, seed=11, recheck=False))
    second = joint_plan_result(plan_joint_move(demo, START, GOAL, seed=11, recheck=False))
    # common practice, no source: a seeded planner ended by success repeats itself exactly
    assert first.status == second.status == "solved"
    assert first.waypoints_deg == second.waypoints_deg
    assert first.validity_checks == second.validity_checks


def test_goal_in_collision_is_refused_with_the_obstacle(demo: Scene) -> None:
    goal = np.radians([0.0, 60.0, 0.0, 0.0, 0.0, 0.0])
    report = joint_plan_result(plan_joint_move(demo, START, goal))
    # reference: python-fcl puts the goal configuration inside the press bed
    environment, _ = fcl_min_distance(demo, goal[None])
    assert environment < 0.0
    assert report.status == "goal_in_collision"
    assert report.straight_move_obstacle == "press-bed"
    assert "press-bed" in report.message
    assert report.message.startswith("refused")
    assert report.waypoints_deg == []


def test_no_path_within_the_time_limit(demo: Scene) -> None:
    report = joint_plan_result(plan_joint_move(demo, START, GOAL, time_limit_s=0.0))
    assert report.status == "timeout"
    assert report.message.startswith("no path found within the time limit")
    assert report.waypoints_deg == []


def test_free_straight_move_is_returned_directly(demo: Scene) -> None:
    goal = START + np.radians([5.0, 0.0, 0.0, 0.0, 0.0, 0.0])
    report = joint_plan_result(plan_joint_move(demo, START, goal, recheck=False))
    # reference: python-fcl finds the short straight move 10 mm clear of every obstacle
    q = edge_configurations(START, goal, lever_arms(clearance_scene(demo).arm), 0.01)
    assert fcl_min_distance(demo, q)[0] >= 0.01
    assert report.status == "direct"
    assert len(report.waypoints_deg) == 2


def test_bad_requests_are_refused(demo: Scene) -> None:
    with pytest.raises(PlanningInputError, match="q_goal: expected 6 finite joint values"):
        joint_plan_result(plan_joint_move(demo, START, np.zeros(5)))
    with pytest.raises(PlanningInputError, match="motion_step_m"):
        joint_plan_result(
            plan_joint_move(demo, START, GOAL, safety_margin_m=0.005, motion_step_m=0.008)
        )
    outside = START.copy()
    outside[0] = np.radians(175.0)  # j1 limit is 167 deg (pb-arm6.toml)
    assert joint_plan_result(plan_joint_move(demo, outside, GOAL)).status == "outside_limits"


def test_straight_move_is_described_by_its_worst_point() -> None:
    def down(x_mm: float) -> dict[str, object]:
        pose = {"position_mm": [x_mm, 500.0, 1000.0], "rpy_deg": [180.0, 0.0, 0.0]}
        return {"pose": pose, "motion": "joint", "speed_percent": 100.0}

    box = {
        "name": "block",
        "shape": "box",
        "position_mm": [750.0, 500.0, 900.0],
        "size_mm": [100.0, 100.0, 100.0],
    }
    data = {
        "robot": {"name": "pb-gantry3"},
        "fixtures": [box],
        "paths": [{"name": "p", "waypoints": [down(500.0), down(1000.0)]}],
    }
    scene = resolve_scene(validate_cell(data))
    q_start, q_goal = sample_path(scene, 0).waypoint_q
    report = joint_plan_result(
        plan_joint_move(scene, q_start, q_goal, time_limit_s=1.0, max_checks=2000, recheck=False)
    )
    # closed form (as in test_path_check): the gantry's straight joint move carries the TCP on
    # the line x 500 -> 1000 mm; the head capsule's lowest point (925 mm) is 25 mm inside the
    # block's top (950 mm) while the TCP is over the block, x 700..800 mm (fraction 0.4..0.6);
    # the first point inside the 10 mm safety margin is still clear of the block
    assert report.straight_move_obstacle == "block"
    assert report.straight_move_worst_mm == pytest.approx(-25.0, abs=1e-6)
    assert report.straight_move_worst_fraction is not None
    assert 0.4 <= report.straight_move_worst_fraction <= 0.6
    assert "25.0 mm deep" in report.message

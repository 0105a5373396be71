"""Clearance throughput: the six-axis arm's capsules against a cell of 20 obstacles.

Scene: pb-arm6 with its seven link capsules and one tool capsule (8 capsules)
and 20 seeded random obstacles, 16 oriented boxes and 4 cylinders, placed
0.5-1.6 m from the base axis at 0-1.6 m height (around the arm's workspace).
Measured: exact minimum capsule-obstacle distance of random in-limit
configurations including forward kinematics of the link frames
(:func:`posebridge.geometry.clearance.clearance_batch`; no self pairs, the
same quantity as the baseline).

Baseline: python-fcl's broad-phase manager (``DynamicAABBTreeCollisionManager``),
the capsules in one manager and the obstacles in another, one manager-to-manager
distance query per configuration after updating the capsule transforms (their
forward kinematics is computed beforehand and not timed), measured in the same
run on a subset, so the ratio survives a noisy machine.
"""

from __future__ import annotations

import math

import numpy as np

from posebridge.bench.timing import best_seconds
from posebridge.geometry.clearance import ClearanceScene, clearance_batch
from posebridge.geometry.shapes import ArmCapsules, Box, Cylinder, ObstacleSet
from posebridge.kinematics.fk import fk_frames
from posebridge.robot.library import load_robot
from posebridge.robot.model import Capsule
from posebridge.transforms import rotation_matrix_from_rotation_vector
from posebridge.units import FloatArray

__all__ = ["bench_clearance"]

ROBOT = "pb-arm6"
SEED = 2024


def _cell(rng: np.random.Generator) -> list[Box | Cylinder]:
    """16 boxes and 4 cylinders with random poses around the arm (invented)."""
    shapes: list[Box | Cylinder] = []
    for i in range(20):
        angle = rng.uniform(0.0, 2.0 * np.pi)
        distance = rng.uniform(0.5, 1.6)
        T = np.eye(4)
        T[:3, :3] = rotation_matrix_from_rotation_vector(rng.normal(0.0, 1.0, 3))
        T[:3, 3] = (distance * np.cos(angle), distance * np.sin(angle), rng.uniform(0.0, 1.6))
        if i < 16:
            shapes.append(Box(f"box-{i}", T, rng.uniform(0.05, 0.35, 3)))
        else:
            shapes.append(Cylinder(f"post-{i}", T, rng.uniform(0.04, 0.2), rng.uniform(0.1, 0.6)))
    return shapes


def _capsule_poses_link(arm: ArmCapsules) -> FloatArray:
    """Pose of each capsule's own frame (centre, z along the segment) in its link frame, shape (m, 4, 4)."""
    poses = np.tile(np.eye(4), (arm.count, 1, 1))
    for c in range(arm.count):
        axis = arm.end[c] - arm.start[c]
        length = float(np.linalg.norm(axis))
        if length > 0.0:
            z = axis / length
            helper = np.array([1.0, 0.0, 0.0]) if abs(z[0]) < 0.9 else np.array([0.0, 1.0, 0.0])
            x = np.cross(helper, z)
            x /= np.linalg.norm(x)
            poses[c, :3, :3] = np.column_stack([x, np.cross(z, x), z])
        poses[c, :3, 3] = 0.5 * (arm.start[c] + arm.end[c])
    return poses


def _fcl_manager_configs_per_s(
    arm: ArmCapsules, shapes: list[Box | Cylinder], q: FloatArray
) -> float:
    """Configurations/s of python-fcl manager-to-manager distance, or NaN without python-fcl."""
    try:
        import fcl
    except ImportError:
        return math.nan
    obstacles = []
    for shape in shapes:
        if isinstance(shape, Box):
            geometry = fcl.Box(*(2.0 * shape.half_extents))
            pose = shape.T_world_box
        else:
            geometry = fcl.Cylinder(shape.radius, 2.0 * shape.half_length)
            pose = shape.T_world_cylinder
        obstacles.append(fcl.CollisionObject(geometry, fcl.Transform(pose[:3, :3], pose[:3, 3])))
    lengths = np.linalg.norm(arm.end - arm.start, axis=1)
    capsules = [
        fcl.CollisionObject(fcl.Capsule(float(r), float(length)), fcl.Transform())
        for r, length in zip(arm.radius, lengths, strict=True)
    ]
    obstacle_manager = fcl.DynamicAABBTreeCollisionManager()
    obstacle_manager.registerObjects(obstacles)
    obstacle_manager.setup()
    arm_manager = fcl.DynamicAABBTreeCollisionManager()
    arm_manager.registerObjects(capsules)
    arm_manager.setup()
    poses = fk_frames(arm.robot, q)[:, arm.link] @ _capsule_poses_link(arm)

    def loop() -> None:
        for k in range(q.shape[0]):
            for c, capsule in enumerate(capsules):
                capsule.setTransform(fcl.Transform(poses[k, c, :3, :3], poses[k, c, :3, 3]))
            arm_manager.update()
            data = fcl.DistanceData()
            arm_manager.distance(obstacle_manager, data, fcl.defaultDistanceCallback)

    return q.shape[0] / best_seconds(loop, repeats=2)


FCL_MISSING = "python-fcl is not installed (pip install 'posebridge[bench]')"


def bench_clearance(quick: bool) -> dict[str, float | str]:
    """Exact clearance configs/s (FK included) and its ratio to the python-fcl manager.

    Without python-fcl the ratio is ``clearance_ratio_vs_fcl_manager_missing`` with the reason.
    """
    robot = load_robot(ROBOT)
    rng = np.random.default_rng(SEED)
    tool = Capsule("bench-tool", robot.dof, np.zeros(3), np.array([0.0, 0.0, 0.12]), 0.03)
    arm = ArmCapsules.from_robot(robot, [tool])
    shapes = _cell(rng)
    scene = ClearanceScene.build(
        arm, ObstacleSet.from_shapes(shapes), np.eye(4), self_pairs=np.empty((0, 2))
    )
    q = rng.uniform(robot.lower, robot.upper, size=(10_000, robot.dof))
    rate = q.shape[0] / best_seconds(lambda: clearance_batch(scene, q), repeats=3 if quick else 7)
    fcl_rate = _fcl_manager_configs_per_s(arm, shapes, q[: 300 if quick else 2_000])
    if math.isnan(fcl_rate):
        return {
            "clearance_configs_per_s": rate,
            "clearance_ratio_vs_fcl_manager_missing": FCL_MISSING,
        }
    return {
        "clearance_configs_per_s": rate,
        "clearance_ratio_vs_fcl_manager": rate / fcl_rate,
    }

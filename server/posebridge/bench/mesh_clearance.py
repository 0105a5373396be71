"""Clearance and collide-only throughput against a ~100k-triangle mesh, and the ratio to coal.

Scene: the demo cell's robot (pb-arm6) with its link capsules and the demo
tool's capsules, a generated machine housing of about 100 000 triangles
(:func:`posebridge.bench.meshes.housing_mesh`: walls, roof and floor plate
around a door opening facing the robot, an inner table; sized by the robot's
reach) and 10 seeded boxes behind and beside the robot, no self pairs.

Figures
-------
``mesh_clearance_configs_per_s``
    Exact minimum signed distance of random in-limit configurations to the
    scene, forward kinematics included
    (:func:`posebridge.geometry.clearance.clearance_batch`).
``mesh_clearance_ratio_vs_coal``
    That rate over coal's: ``coal.distance`` once per capsule-obstacle pair
    (``BVHModelOBBRSS`` for the housing, ``coal.Box`` for the boxes), summed
    per configuration; capsule poses from forward kinematics beforehand (not
    timed); measured in the same run on a subset.
``mesh_collide_configs_per_s``
    :func:`posebridge.geometry.clearance.collision_batch` (threshold 0) on the
    same configurations.
``mesh_collide_ratio_vs_coal``
    That rate over coal's ``coal.collide`` per pair, stopping at a
    configuration's first colliding pair (the same early exit).

Without coal (``pip install 'posebridge[bench]'``) the ratio keys are
replaced by ``<key>_missing`` with the reason. Quick mode measures fewer
configurations; the keys stay the same.
"""

from __future__ import annotations

import numpy as np

from posebridge.bench.meshes import housing_mesh
from posebridge.bench.timing import best_seconds
from posebridge.cell.clearance import cell_arm
from posebridge.cell.files import load_cell
from posebridge.cell.scene import resolve_scene
from posebridge.geometry.clearance import ClearanceScene, clearance_batch, collision_batch
from posebridge.geometry.shapes import ArmCapsules, Box, Mesh, ObstacleSet
from posebridge.kinematics.fk import fk_flange, fk_frames
from posebridge.resources import data_folder
from posebridge.transforms import rotation_matrix_about_z
from posebridge.units import FloatArray

__all__ = [
    "COAL_MISSING",
    "bench_mesh_clearance",
    "capsule_poses_link",
    "mesh_scene",
    "robot_reach",
]

SEED = 2026
HOUSING_TRIANGLES = 100_000
COAL_MISSING = "coal is not installed (pip install 'posebridge[bench]')"


def robot_reach(arm: ArmCapsules, samples: int = 4_000) -> float:
    """Largest horizontal distance of the flange from the base axis over seeded samples, m."""
    robot = arm.robot
    rng = np.random.default_rng(SEED)
    q = rng.uniform(robot.lower, robot.upper, (samples, robot.dof))
    return float(np.max(np.linalg.norm(fk_flange(robot, q)[:, :2, 3], axis=1)))


def mesh_scene() -> tuple[ArmCapsules, list[Box | Mesh]]:
    """Return the demo arm with its tool, the generated housing and 10 boxes (module docstring)."""
    path = data_folder("robots") / "demo-cell.json"
    arm = cell_arm(resolve_scene(load_cell(path), path))
    reach = robot_reach(arm)
    shapes: list[Box | Mesh] = [
        Mesh("housing", np.eye(4), housing_mesh(reach, triangles=HOUSING_TRIANGLES))
    ]
    rng = np.random.default_rng(SEED)
    for i in range(10):
        angle = (
            rng.uniform(0.6 * np.pi, 1.4 * np.pi)
            if i < 6
            else rng.choice([-1, 1]) * rng.uniform(0.35 * np.pi, 0.55 * np.pi)
        )
        distance = rng.uniform(0.4, 0.9) * reach
        T = np.eye(4)
        T[:3, :3] = rotation_matrix_about_z(rng.uniform(0.0, np.pi))
        T[:3, 3] = (
            distance * np.cos(angle),
            distance * np.sin(angle),
            rng.uniform(0.0, 1.0) * reach,
        )
        shapes.append(Box(f"box-{i}", T, rng.uniform(0.03, 0.15, 3) * reach))
    return arm, shapes


def capsule_poses_link(arm: ArmCapsules) -> FloatArray:
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


def _coal_rates(arm: ArmCapsules, shapes: list[Box | Mesh], q: FloatArray) -> tuple[float, float]:
    """Configurations/s of coal's per-pair distance and collide loops (module docstring)."""
    import coal

    obstacles = []
    for shape in shapes:
        if isinstance(shape, Mesh):
            model = coal.BVHModelOBBRSS()
            model.beginModel(shape.mesh.triangle_count, shape.mesh.vertices.shape[0])
            model.addVertices(shape.mesh.vertices)
            model.addTriangles(shape.mesh.faces)
            model.endModel()
            pose = shape.T_world_mesh
        else:
            model = coal.Box(*(2.0 * shape.half_extents))
            pose = shape.T_world_box
        obstacles.append((model, coal.Transform3s(pose[:3, :3], pose[:3, 3])))
    lengths = np.linalg.norm(arm.end - arm.start, axis=1)
    capsules = [
        coal.Capsule(float(r), float(length)) for r, length in zip(arm.radius, lengths, strict=True)
    ]
    poses = fk_frames(arm.robot, q)[:, arm.link] @ capsule_poses_link(arm)
    transforms = [
        [coal.Transform3s(poses[k, c, :3, :3], poses[k, c, :3, 3]) for c in range(arm.count)]
        for k in range(q.shape[0])
    ]
    distance_request = coal.DistanceRequest()
    collision_request = coal.CollisionRequest()

    def distances() -> None:
        for k in range(q.shape[0]):
            best = np.inf
            for c, capsule in enumerate(capsules):
                for model, pose in obstacles:
                    result = coal.DistanceResult()
                    best = min(
                        best,
                        coal.distance(
                            model, pose, capsule, transforms[k][c], distance_request, result
                        ),
                    )

    def collisions() -> None:
        for k in range(q.shape[0]):
            hit = False
            for c, capsule in enumerate(capsules):
                for model, pose in obstacles:
                    result = coal.CollisionResult()
                    if coal.collide(
                        model, pose, capsule, transforms[k][c], collision_request, result
                    ):
                        hit = True
                        break
                if hit:
                    break

    return (
        q.shape[0] / best_seconds(distances, repeats=2),
        q.shape[0] / best_seconds(collisions, repeats=2),
    )


def bench_mesh_clearance(quick: bool) -> dict[str, float | str]:
    """Mesh clearance and collide-only configs/s and their ratios to coal (module docstring)."""
    arm, shapes = mesh_scene()
    scene = ClearanceScene.build(
        arm, ObstacleSet.from_shapes(shapes), np.eye(4), self_pairs=np.empty((0, 2))
    )
    rng = np.random.default_rng(SEED)
    robot = arm.robot
    q = rng.uniform(robot.lower, robot.upper, (2_000 if quick else 10_000, robot.dof))
    repeats = 3 if quick else 5
    distance_rate = q.shape[0] / best_seconds(lambda: clearance_batch(scene, q), repeats=repeats)
    collide_rate = q.shape[0] / best_seconds(lambda: collision_batch(scene, q), repeats=repeats)
    figures: dict[str, float | str] = {
        "mesh_clearance_configs_per_s": distance_rate,
        "mesh_collide_configs_per_s": collide_rate,
    }
    try:
        import coal  # noqa: F401
    except ImportError:
        figures["mesh_clearance_ratio_vs_coal_missing"] = COAL_MISSING
        figures["mesh_collide_ratio_vs_coal_missing"] = COAL_MISSING
        return figures
    coal_distance, coal_collide = _coal_rates(arm, shapes, q[: 20 if quick else 100])
    figures["mesh_clearance_ratio_vs_coal"] = distance_rate / coal_distance
    figures["mesh_collide_ratio_vs_coal"] = collide_rate / coal_collide
    return figures

"""A resolved cell's shapes as the geometry engine's arrays: arm capsules, obstacles, pairs.

Obstacle order (the index used by every map that names an obstacle): box
fixtures, cylinder fixtures, keep-out zones, the pedestal, the floor, each
in the cell file's order. Keep-out zones are obstacles like any other: a
capsule inside one is in collision with it.

Pairs: every capsule is checked against every obstacle except the base-link
capsules (link 0) against the floor and the pedestal, which the robot stands
on (:func:`posebridge.geometry.shapes.default_pair_mask` and the same rule for
the pedestal; common practice, no source). Self pairs come from
:func:`posebridge.geometry.self_pairs.self_collision_pairs`.
"""

from __future__ import annotations

from posebridge.cell.scene import BoxSet, CylinderSet, Scene
from posebridge.geometry.clearance import ClearanceScene
from posebridge.geometry.self_pairs import self_collision_pairs
from posebridge.geometry.shapes import (
    ArmCapsules,
    Box,
    Cylinder,
    Floor,
    ObstacleSet,
    default_pair_mask,
)
from posebridge.robot.model import Capsule

__all__ = ["scene_arm", "scene_clearance", "scene_obstacles"]


def scene_arm(scene: Scene) -> ArmCapsules:
    """The robot's link capsules and the cell tool's capsules (flange frame).

    Returns
    -------
    ArmCapsules
    """
    tool = scene.tool_capsules
    capsules = [
        Capsule(name=name, link=scene.robot.dof, start=start, end=end, radius=float(radius))
        for name, start, end, radius in zip(
            tool.names, tool.start, tool.end, tool.radius, strict=True
        )
    ]
    return ArmCapsules.from_robot(scene.robot, capsules)


def _boxes(boxes: BoxSet) -> list[Box]:
    return [
        Box(name, T, half)
        for name, T, half in zip(boxes.names, boxes.T_world, boxes.half_extents, strict=True)
    ]


def _cylinders(cylinders: CylinderSet) -> list[Cylinder]:
    return [
        Cylinder(name, T, float(radius), float(half))
        for name, T, radius, half in zip(
            cylinders.names, cylinders.T_world, cylinders.radius, cylinders.half_length, strict=True
        )
    ]


def scene_obstacles(scene: Scene) -> ObstacleSet:
    """Every obstacle of the cell in the documented order (module docstring).

    Returns
    -------
    ObstacleSet
        ``k = B + C + K + P + 1`` obstacles (boxes, cylinders, keep-outs,
        pedestal, floor).
    """
    shapes: list[Box | Cylinder | Floor] = []
    shapes.extend(_boxes(scene.boxes))
    shapes.extend(_cylinders(scene.cylinders))
    shapes.extend(_boxes(scene.keep_outs))
    shapes.extend(_cylinders(scene.pedestal))
    shapes.append(Floor(scene.floor_height))
    return ObstacleSet.from_shapes(shapes)


def scene_clearance(scene: Scene, *, self_samples: int = 1000) -> ClearanceScene:
    """The clearance scene of a cell: arm with tool, obstacles, base pose, pairs (module docstring).

    Parameters
    ----------
    scene : Scene
    self_samples : int, keyword-only
        Configurations sampled to find capsule pairs in contact by design
        (:func:`~posebridge.geometry.self_pairs.self_collision_pairs`, seed 0).

    Returns
    -------
    ClearanceScene
    """
    arm = scene_arm(scene)
    obstacles = scene_obstacles(scene)
    mask = default_pair_mask(arm, obstacles)
    first_pedestal = (
        len(scene.boxes.names) + len(scene.cylinders.names) + len(scene.keep_outs.names)
    )
    mask[arm.link == 0, first_pedestal : first_pedestal + len(scene.pedestal.names)] = False
    return ClearanceScene.build(
        arm,
        obstacles,
        scene.T_world_base,
        self_pairs=self_collision_pairs(arm, samples=self_samples, seed=0),
        pair_mask=mask,
    )

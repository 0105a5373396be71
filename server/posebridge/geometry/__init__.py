"""Collision geometry: capsules, boxes, cylinders, the floor, and exact batched clearance.

* :mod:`~posebridge.geometry.shapes`: the arm's capsules and the cell's obstacles as arrays.
* :mod:`~posebridge.geometry.distance`: exact closest points (segment-segment,
  point/segment-box, segment-cylinder, segment-floor).
* :mod:`~posebridge.geometry.clearance`: the fused FK + clearance kernels.
* :mod:`~posebridge.geometry.self_pairs`: which capsule pairs are checked for self-collision.
"""

from posebridge.geometry.clearance import (
    ClearanceResult,
    ClearanceScene,
    ObstacleClearanceResult,
    capsule_segments_world,
    clearance_batch,
    clearance_per_obstacle_batch,
    collision_batch,
)
from posebridge.geometry.distance import (
    closest_points_capsule_obstacle,
    closest_points_point_obstacle,
    closest_points_segment_segment,
)
from posebridge.geometry.self_pairs import non_adjacent_pairs, self_collision_pairs
from posebridge.geometry.shapes import (
    ArmCapsules,
    Box,
    Cylinder,
    Floor,
    GeometryInputError,
    ObstacleSet,
    default_pair_mask,
)

__all__ = [
    "ArmCapsules",
    "Box",
    "ClearanceResult",
    "ClearanceScene",
    "Cylinder",
    "Floor",
    "GeometryInputError",
    "ObstacleClearanceResult",
    "ObstacleSet",
    "capsule_segments_world",
    "clearance_batch",
    "clearance_per_obstacle_batch",
    "closest_points_capsule_obstacle",
    "closest_points_point_obstacle",
    "closest_points_segment_segment",
    "collision_batch",
    "default_pair_mask",
    "non_adjacent_pairs",
    "self_collision_pairs",
]

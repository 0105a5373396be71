"""Collision geometry: capsules, boxes, cylinders, the floor, triangle meshes, exact batched clearance.

* :mod:`~posebridge.geometry.shapes`: the arm's capsules and the cell's obstacles as arrays.
* :mod:`~posebridge.geometry.distance`: exact closest points (segment-segment,
  point/segment-box, segment-cylinder, segment-floor).
* :mod:`~posebridge.geometry.clearance`: the fused FK + clearance kernels.
* :mod:`~posebridge.geometry.self_pairs`: which capsule pairs are checked for self-collision.
* :mod:`~posebridge.geometry.meshes`: :class:`TriangleMesh`, a clean mesh in metres.
* :mod:`~posebridge.geometry.mesh_files`: reading STL, OBJ, PLY, glTF/GLB, COLLADA, STEP.
* :mod:`~posebridge.geometry.mesh_cache`: processed results on disk by content hash.
* :mod:`~posebridge.geometry.mesh_display`: decimation to a triangle budget for drawing.
* :mod:`~posebridge.geometry.triangle_distance`: point/segment-triangle closest points.
* :mod:`~posebridge.geometry.mesh_bvh`: the bounding-volume hierarchy and exact
  capsule-mesh distances, inside test, collide-only mode.
* :mod:`~posebridge.geometry.capsule_fit`: capsules enclosing a link's vertices.
* :mod:`~posebridge.geometry.errors`: :class:`GeometryInputError`, :class:`MeshFileError`.
"""

from posebridge.geometry.capsule_fit import CapsuleFit, FittedCapsule, fit_capsules
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
from posebridge.geometry.errors import GeometryInputError, MeshFileError
from posebridge.geometry.mesh_bvh import (
    MeshBVH,
    MeshDistanceResult,
    closest_points_capsule_mesh,
    collision_capsules_mesh,
    points_inside_mesh,
    signed_distance_points_mesh,
)
from posebridge.geometry.mesh_cache import MeshCache, cache_key
from posebridge.geometry.mesh_display import (
    DisplayMesh,
    decimate_for_display,
    split_triangle_budget,
)
from posebridge.geometry.mesh_files import (
    LENGTH_UNITS,
    MESH_SUFFIXES,
    LengthUnit,
    MeshLimits,
    load_mesh_file,
    suggest_length_unit,
)
from posebridge.geometry.meshes import TriangleMesh
from posebridge.geometry.self_pairs import non_adjacent_pairs, self_collision_pairs
from posebridge.geometry.shapes import (
    ArmCapsules,
    Box,
    Cylinder,
    Floor,
    Mesh,
    ObstacleSet,
    default_pair_mask,
)

__all__ = [
    "LENGTH_UNITS",
    "MESH_SUFFIXES",
    "ArmCapsules",
    "Box",
    "CapsuleFit",
    "ClearanceResult",
    "ClearanceScene",
    "Cylinder",
    "DisplayMesh",
    "FittedCapsule",
    "Floor",
    "GeometryInputError",
    "LengthUnit",
    "Mesh",
    "MeshBVH",
    "MeshCache",
    "MeshDistanceResult",
    "MeshFileError",
    "MeshLimits",
    "ObstacleClearanceResult",
    "ObstacleSet",
    "TriangleMesh",
    "cache_key",
    "capsule_segments_world",
    "clearance_batch",
    "clearance_per_obstacle_batch",
    "closest_points_capsule_mesh",
    "closest_points_capsule_obstacle",
    "closest_points_point_obstacle",
    "closest_points_segment_segment",
    "collision_batch",
    "collision_capsules_mesh",
    "decimate_for_display",
    "default_pair_mask",
    "fit_capsules",
    "load_mesh_file",
    "non_adjacent_pairs",
    "points_inside_mesh",
    "self_collision_pairs",
    "signed_distance_points_mesh",
    "split_triangle_budget",
    "suggest_length_unit",
]

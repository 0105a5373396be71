"""Array containers for the collision shapes: the arm's capsules and the cell's obstacles.

Everything is SI (m) and batch-friendly: the containers hold flat arrays that
the numba kernels in :mod:`posebridge.geometry.clearance` read directly.

* Arm capsules (:class:`ArmCapsules`) are the robot's link capsules
  (:attr:`posebridge.robot.model.Robot.capsules`, segment end points in their
  link frames) plus optional tool capsules given in the flange frame, which are
  moved into the last link frame here so every capsule rides on one link frame.
* Obstacles (:class:`ObstacleSet`) are oriented boxes (pose + half extents),
  cylinders (pose + radius + half length along their local z), the floor,
  the half-space ``z <= height`` of the world frame, and triangle meshes
  (pose + :class:`~posebridge.geometry.meshes.TriangleMesh` in its own frame,
  queried through :mod:`posebridge.geometry.mesh_bvh`). Poses are
  ``T_world_shape``.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from functools import cached_property
from typing import TYPE_CHECKING

import numpy as np
import numpy.typing as npt

from posebridge.geometry.errors import GeometryInputError
from posebridge.robot.model import Capsule, Robot
from posebridge.transforms import TransformError, check_transform
from posebridge.units import BoolArray, FloatArray

if TYPE_CHECKING:
    from posebridge.geometry.mesh_bvh import MeshTable
    from posebridge.geometry.meshes import TriangleMesh

__all__ = [
    "BOX",
    "CYLINDER",
    "FLOOR",
    "MESH",
    "ArmCapsules",
    "Box",
    "Cylinder",
    "Floor",
    "GeometryInputError",
    "IntArray",
    "Mesh",
    "ObstacleSet",
    "default_pair_mask",
]

IntArray = npt.NDArray[np.int64]

BOX = 0
"""Obstacle kind code of an oriented box."""
CYLINDER = 1
"""Obstacle kind code of a cylinder (axis along its local z)."""
FLOOR = 2
"""Obstacle kind code of the floor half-space ``z <= height`` (world frame)."""
MESH = 3
"""Obstacle kind code of a triangle mesh."""


def _finite_vector(value: npt.ArrayLike, length: int, field: str) -> FloatArray:
    array = np.asarray(value, dtype=np.float64)
    if array.shape != (length,):
        raise GeometryInputError(f"{field}: expected shape ({length},), got {array.shape}")
    if not np.all(np.isfinite(array)):
        raise GeometryInputError(f"{field}: contains NaN or infinite values")
    return array


def _positive(value: float, field: str, *, allow_zero: bool = False) -> float:
    number = float(value)
    if not np.isfinite(number) or number < 0.0 or (number == 0.0 and not allow_zero):
        expected = "a finite value >= 0" if allow_zero else "a finite value > 0"
        raise GeometryInputError(f"{field}: expected {expected} m, got {value!r}")
    return number


def _pose(T: npt.ArrayLike, field: str) -> FloatArray:
    try:
        pose = check_transform(T)
    except TransformError as e:
        raise GeometryInputError(f"{field}: {e}") from e
    if pose.shape != (4, 4):
        raise GeometryInputError(f"{field}: expected shape (4, 4), got {pose.shape}")
    return pose


@dataclass(frozen=True)
class Box:
    """An oriented box obstacle.

    Attributes
    ----------
    name : str
    T_world_box : array, shape (4, 4)
        Pose of the box centre frame in the world.
    half_extents : array, shape (3,)
        Half side lengths along the box's local x, y, z, m (each > 0).
    """

    name: str
    T_world_box: FloatArray
    half_extents: FloatArray


@dataclass(frozen=True)
class Cylinder:
    """A solid cylinder obstacle, axis along its local z, centred on its frame origin.

    Attributes
    ----------
    name : str
    T_world_cylinder : array, shape (4, 4)
    radius : float
        m, > 0.
    half_length : float
        Half the length along the local z axis, m, > 0.
    """

    name: str
    T_world_cylinder: FloatArray
    radius: float
    half_length: float


@dataclass(frozen=True)
class Floor:
    """The floor: the half-space ``z <= height`` of the world frame.

    Attributes
    ----------
    height : float
        m.
    name : str
    """

    height: float = 0.0
    name: str = "floor"


@dataclass(frozen=True, eq=False)
class Mesh:
    """A triangle-mesh obstacle: a mesh in its own frame and the pose of that frame.

    Attributes
    ----------
    name : str
    T_world_mesh : array, shape (4, 4)
    mesh : TriangleMesh
        Vertices in the mesh frame, m. Closed meshes get signed distances,
        open ones unsigned (:mod:`posebridge.geometry.mesh_bvh`).
    """

    name: str
    T_world_mesh: FloatArray
    mesh: TriangleMesh


@dataclass(frozen=True, eq=False)
class ArmCapsules:
    """The collision capsules of an arm (and its tool), each fixed to one link frame.

    Attributes
    ----------
    robot : Robot
    names : tuple of str, length m
    link : array of int64, shape (m,)
        Link frame each capsule rides on: 0 base, ``i`` the link moved by joint ``i``.
    start, end : array, shape (m, 3)
        Segment end points in the link frame, m.
    radius : array, shape (m,)
        m.
    is_tool : array of bool, shape (m,)
        Capsules that came from the tool.
    """

    robot: Robot
    names: tuple[str, ...]
    link: IntArray
    start: FloatArray
    end: FloatArray
    radius: FloatArray
    is_tool: BoolArray

    @classmethod
    def from_robot(cls, robot: Robot, tool_capsules: Sequence[Capsule] = ()) -> ArmCapsules:
        """Collect the robot's link capsules and the tool's capsules.

        Parameters
        ----------
        robot : Robot
        tool_capsules : sequence of Capsule
            Tool capsules with end points in the flange frame; their ``link``
            field is not read (a tool rides on the last link). They are moved
            into the last link frame with ``robot.T_link_flange``.

        Returns
        -------
        ArmCapsules
        """
        names: list[str] = []
        link: list[int] = []
        start: list[FloatArray] = []
        end: list[FloatArray] = []
        radius: list[float] = []
        is_tool: list[bool] = []
        for capsule in robot.capsules:
            if not 0 <= capsule.link <= robot.dof:
                raise GeometryInputError(
                    f"capsule {capsule.name!r}: link must be 0..{robot.dof}, got {capsule.link}"
                )
            names.append(capsule.name)
            link.append(capsule.link)
            start.append(_finite_vector(capsule.start, 3, f"capsule {capsule.name!r} start"))
            end.append(_finite_vector(capsule.end, 3, f"capsule {capsule.name!r} end"))
            radius.append(_positive(capsule.radius, f"capsule {capsule.name!r} radius"))
            is_tool.append(False)
        R = robot.T_link_flange[:3, :3]
        p = robot.T_link_flange[:3, 3]
        for capsule in tool_capsules:
            field = f"tool capsule {capsule.name!r}"
            names.append(capsule.name)
            link.append(robot.dof)
            start.append(R @ _finite_vector(capsule.start, 3, f"{field} start") + p)
            end.append(R @ _finite_vector(capsule.end, 3, f"{field} end") + p)
            radius.append(_positive(capsule.radius, f"{field} radius"))
            is_tool.append(True)
        m = len(names)
        return cls(
            robot=robot,
            names=tuple(names),
            link=np.array(link, dtype=np.int64),
            start=np.array(start, dtype=np.float64).reshape(m, 3),
            end=np.array(end, dtype=np.float64).reshape(m, 3),
            radius=np.array(radius, dtype=np.float64),
            is_tool=np.array(is_tool, dtype=bool),
        )

    @property
    def count(self) -> int:
        """Number of capsules ``m``."""
        return len(self.names)

    @property
    def bound_centre(self) -> FloatArray:
        """Centre of each capsule's bounding sphere (segment midpoint) in its link frame, shape (m, 3)."""
        return 0.5 * (self.start + self.end)

    @property
    def bound_radius(self) -> FloatArray:
        """Bounding-sphere radius: half the segment length plus the radius, shape (m,)."""
        return 0.5 * np.linalg.norm(self.end - self.start, axis=1) + self.radius


@dataclass(frozen=True, eq=False)
class ObstacleSet:
    """The cell's obstacles as flat arrays.

    Attributes
    ----------
    names : tuple of str, length k
    kind : array of int64, shape (k,)
        :data:`BOX`, :data:`CYLINDER`, :data:`FLOOR` or :data:`MESH`.
    rotation : array, shape (k, 3, 3)
        ``R_world_obstacle`` (identity for the floor).
    translation : array, shape (k, 3)
        Obstacle frame origin in the world (``(0, 0, height)`` for the floor).
    params : array, shape (k, 3)
        Box: half extents; cylinder: ``(radius, half_length, 0)``;
        floor: ``(height, 0, 0)``; mesh: the centre of its bounding sphere in
        the mesh frame, m.
    meshes : tuple of TriangleMesh
        The distinct meshes the mesh obstacles refer to (empty without meshes).
    mesh_index : array of int64, shape (k,)
        Index into ``meshes`` of each mesh obstacle, -1 for the other kinds
        (all -1 when omitted).
    """

    names: tuple[str, ...]
    kind: IntArray
    rotation: FloatArray
    translation: FloatArray
    params: FloatArray
    meshes: tuple[TriangleMesh, ...] = ()
    mesh_index: IntArray = field(default_factory=lambda: np.empty(0, dtype=np.int64))

    def __post_init__(self) -> None:
        """Check the array shapes against the number of obstacles."""
        k = len(self.names)
        if self.mesh_index.shape != (k,):
            if self.mesh_index.size != 0:
                raise GeometryInputError(
                    f"mesh_index: expected shape ({k},), got {self.mesh_index.shape}"
                )
            object.__setattr__(self, "mesh_index", np.full(k, -1, dtype=np.int64))
        is_mesh = self.kind == MESH
        index = self.mesh_index
        if np.any(index[is_mesh] < 0) or np.any(index[is_mesh] >= len(self.meshes)):
            name = self.names[int(np.argmax(is_mesh & ((index < 0) | (index >= len(self.meshes)))))]
            raise GeometryInputError(
                f"obstacle {name!r}: a mesh obstacle needs its mesh (meshes and mesh_index); "
                "take parts of an obstacle set with ObstacleSet.subset"
            )
        if np.any(index[~is_mesh] != -1):
            raise GeometryInputError(
                "mesh_index: expected -1 for every obstacle that is not a mesh"
            )

    @classmethod
    def from_shapes(cls, shapes: Sequence[Box | Cylinder | Floor | Mesh]) -> ObstacleSet:
        """Validate obstacle shapes and pack them into arrays (obstacle ``i`` is ``shapes[i]``).

        Parameters
        ----------
        shapes : sequence of Box, Cylinder, Floor or Mesh
            Mesh obstacles sharing one :class:`~posebridge.geometry.meshes.TriangleMesh`
            object share its hierarchy.

        Returns
        -------
        ObstacleSet
        """
        k = len(shapes)
        kind = np.empty(k, dtype=np.int64)
        rotation = np.empty((k, 3, 3))
        translation = np.empty((k, 3))
        params = np.zeros((k, 3))
        mesh_index = np.full(k, -1, dtype=np.int64)
        meshes: list[TriangleMesh] = []
        for i, shape in enumerate(shapes):
            if isinstance(shape, Box):
                pose = _pose(shape.T_world_box, f"box {shape.name!r} T_world_box")
                half = _finite_vector(shape.half_extents, 3, f"box {shape.name!r} half_extents")
                if np.any(half <= 0.0):
                    raise GeometryInputError(
                        f"box {shape.name!r} half_extents: expected values > 0 m, got {half.tolist()}"
                    )
                kind[i] = BOX
                rotation[i] = pose[:3, :3]
                translation[i] = pose[:3, 3]
                params[i] = half
            elif isinstance(shape, Cylinder):
                field_name = f"cylinder {shape.name!r}"
                pose = _pose(shape.T_world_cylinder, f"{field_name} T_world_cylinder")
                kind[i] = CYLINDER
                rotation[i] = pose[:3, :3]
                translation[i] = pose[:3, 3]
                params[i, 0] = _positive(shape.radius, f"{field_name} radius")
                params[i, 1] = _positive(shape.half_length, f"{field_name} half_length")
            elif isinstance(shape, Floor):
                height = float(shape.height)
                if not np.isfinite(height):
                    raise GeometryInputError(
                        f"floor {shape.name!r} height: expected a finite value, got {shape.height!r}"
                    )
                kind[i] = FLOOR
                rotation[i] = np.eye(3)
                translation[i] = (0.0, 0.0, height)
                params[i, 0] = height
            elif isinstance(shape, Mesh):
                pose = _pose(shape.T_world_mesh, f"mesh {shape.name!r} T_world_mesh")
                known = [j for j, mesh in enumerate(meshes) if mesh is shape.mesh]
                if not known:
                    meshes.append(shape.mesh)
                kind[i] = MESH
                rotation[i] = pose[:3, :3]
                translation[i] = pose[:3, 3]
                mesh_index[i] = known[0] if known else len(meshes) - 1
                params[i] = shape.mesh.bounding_sphere[0]
            else:
                raise GeometryInputError(
                    f"obstacle {i}: expected Box, Cylinder, Floor or Mesh, got {type(shape).__name__}"
                )
        return cls(
            names=tuple(shape.name for shape in shapes),
            kind=kind,
            rotation=rotation,
            translation=translation,
            params=params,
            meshes=tuple(meshes),
            mesh_index=mesh_index,
        )

    def subset(self, indices: Sequence[int] | IntArray) -> ObstacleSet:
        """Return the obstacles ``indices`` (in that order) as a set of their own, meshes included.

        Parameters
        ----------
        indices : sequence of int

        Returns
        -------
        ObstacleSet
        """
        chosen = np.asarray(indices, dtype=np.int64).reshape(-1)
        if chosen.size and (chosen.min() < 0 or chosen.max() >= self.count):
            raise GeometryInputError(
                f"indices: expected obstacle indices 0..{self.count - 1}, got {chosen.tolist()}"
            )
        used = sorted({int(j) for j in self.mesh_index[chosen] if j >= 0})
        remap = {old: new for new, old in enumerate(used)}
        return ObstacleSet(
            names=tuple(self.names[i] for i in chosen),
            kind=self.kind[chosen].copy(),
            rotation=self.rotation[chosen].copy(),
            translation=self.translation[chosen].copy(),
            params=self.params[chosen].copy(),
            meshes=tuple(self.meshes[j] for j in used),
            mesh_index=np.array(
                [remap[int(j)] if j >= 0 else -1 for j in self.mesh_index[chosen]], dtype=np.int64
            ),
        )

    @property
    def count(self) -> int:
        """Number of obstacles ``k``."""
        return len(self.names)

    @property
    def bound_radius(self) -> FloatArray:
        """Bounding-sphere radius about :attr:`bound_centre`, shape (k,); infinite for the floor."""
        radius = np.full(self.count, np.inf)
        box = self.kind == BOX
        radius[box] = np.linalg.norm(self.params[box], axis=1)
        cylinder = self.kind == CYLINDER
        radius[cylinder] = np.hypot(self.params[cylinder, 0], self.params[cylinder, 1])
        for o in np.flatnonzero(self.kind == MESH):
            radius[o] = self.meshes[self.mesh_index[o]].bounding_sphere[1]
        return radius

    @property
    def bound_centre(self) -> FloatArray:
        """Bounding-sphere centre in the world, shape (k, 3): the frame origin except for meshes."""
        centre = self.translation.copy()
        mesh = self.kind == MESH
        centre[mesh] = (
            np.einsum("kij,kj->ki", self.rotation[mesh], self.params[mesh]) + centre[mesh]
        )
        return centre

    @property
    def bound_half_extents(self) -> FloatArray:
        """Half extents of each mesh's bounding box in its frame (centre ``params``), shape (k, 3); 0 otherwise."""
        half = np.zeros((self.count, 3))
        for o in np.flatnonzero(self.kind == MESH):
            bounds = self.meshes[self.mesh_index[o]].bounds
            half[o] = 0.5 * (bounds[1] - bounds[0])
        return half

    @property
    def is_signed(self) -> BoolArray:
        """Obstacles with an inside (negative distances inside), shape (k,): all but open meshes."""
        signed = np.ones(self.count, dtype=bool)
        for o in np.flatnonzero(self.kind == MESH):
            signed[o] = self.meshes[self.mesh_index[o]].is_closed
        return signed

    @cached_property
    def mesh_table(self) -> MeshTable:
        """The meshes' hierarchies packed for the kernels (:class:`~posebridge.geometry.mesh_bvh.MeshTable`)."""
        from posebridge.geometry.mesh_bvh import MeshTable

        return MeshTable.pack([mesh.bvh for mesh in self.meshes])


def default_pair_mask(arm: ArmCapsules, obstacles: ObstacleSet) -> BoolArray:
    """Which capsule-obstacle pairs to check by default.

    Every pair is checked except capsules of the base link (link 0) against
    the floor: the robot stands on it, so its pedestal capsule touches it in
    every configuration (common practice, no source).

    Parameters
    ----------
    arm : ArmCapsules
    obstacles : ObstacleSet

    Returns
    -------
    mask : array of bool, shape (m, k)
        ``mask[c, o]`` is True where capsule ``c`` is checked against obstacle ``o``.
    """
    mask = np.ones((arm.count, obstacles.count), dtype=bool)
    mask[np.ix_(arm.link == 0, obstacles.kind == FLOOR)] = False
    return mask

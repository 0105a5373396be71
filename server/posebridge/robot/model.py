"""The robot model: a serial chain of joints with limits, capsules, flange and tool.

Every joint is a fixed transform from its parent frame (``origin``, the pose of
the joint frame in the parent link frame at zero joint value) followed by a
motion about a unit ``axis`` given in the joint frame: a rotation for revolute
joints, a translation for prismatic joints. Link frame ``i`` is the joint frame
after the motion of joint ``i``; link frame ``0`` is the robot base frame.
The flange (ISO 9787 mechanical interface) is a fixed transform from the last
link frame, the default tool (TCP) a fixed transform from the flange.

All values are SI (m, rad, s). Every array of these models is read-only
(:func:`posebridge.arrays.read_only`): a robot never changes after it is
made, so what is computed from it once (its IK solver, its kernel tables)
stays valid. Robot descriptions are loaded by
:mod:`posebridge.robot.toml_format` and :mod:`posebridge.robot.urdf_import`.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property
from pathlib import Path
from typing import Literal

import numpy as np

from posebridge.arrays import freeze_array_fields, read_only
from posebridge.units import BoolArray, FloatArray

JointKind = Literal["revolute", "prismatic"]
MeshRole = Literal["visual", "collision"]

__all__ = [
    "GEOMETRY_MISSING",
    "Capsule",
    "Joint",
    "JointKind",
    "LinkFit",
    "LinkMesh",
    "MeshRole",
    "Robot",
]


GEOMETRY_MISSING = (
    "ROBOT GEOMETRY IS MISSING: the robot has no collision capsules (no meshes found, no shapes "
    "given), so it is treated as a line that collides with nothing and every clearance, map, "
    "path check, plan and placement below says nothing about collisions; give the mesh folders "
    "or capsules (robot overlay) and check again"
)
"""The one warning every clearance answer carries for a robot without geometry."""


@dataclass(frozen=True, eq=False)
class Joint:
    """One joint of a serial chain (SI units).

    Attributes
    ----------
    name : str
    kind : "revolute" or "prismatic"
    origin : array, shape (4, 4)
        Pose of the joint frame in the parent link frame at zero joint value.
    axis : array, shape (3,)
        Unit motion axis in the joint frame.
    lower, upper : float
        Position limits, rad or m. For ``continuous`` joints these are the
        range used for sampling and maps (one revolution), not a limit.
    velocity_max : float
        rad/s or m/s.
    acceleration_max : float
        rad/s^2 or m/s^2.
    continuous : bool
        A revolute joint without position limits.
    jerk_max : float or None
        rad/s^3 or m/s^3 where the description gives one (robot overlays).
    """

    name: str
    kind: JointKind
    origin: FloatArray
    axis: FloatArray
    lower: float
    upper: float
    velocity_max: float
    acceleration_max: float
    continuous: bool = False
    jerk_max: float | None = None

    def __post_init__(self) -> None:
        """Make the array fields read-only."""
        freeze_array_fields(self)


@dataclass(frozen=True, eq=False)
class Capsule:
    """A collision capsule fixed to one link: all points within ``radius`` of a segment.

    Attributes
    ----------
    name : str
    link : int
        0 for the base link, ``i`` for the link moved by joint ``i`` (1-based).
    start, end : array, shape (3,)
        Segment end points in the link frame, m.
    radius : float
        m.
    source_link : str
        The description link it belongs to, where known (URDF imports), else ``""``.
    """

    name: str
    link: int
    start: FloatArray
    end: FloatArray
    radius: float
    source_link: str = ""

    def __post_init__(self) -> None:
        """Make the array fields read-only."""
        freeze_array_fields(self)


@dataclass(frozen=True, eq=False)
class LinkMesh:
    """A mesh file of the description, fixed to one link (drawn, or collided through capsules).

    Attributes
    ----------
    source_link : str
        The description's link name (a URDF link; several may share one internal link).
    link : int
        Internal link index (0 base, ``i`` moved by joint ``i``).
    role : "visual" or "collision"
    filename : str
        The reference as written (``package://pkg/meshes/a.stl``, ``meshes/a.dae``).
    path : Path or None
        The file it resolved to; ``None`` when it was not found (see :attr:`Robot.notes`).
    scale : array, shape (3,)
        Per-axis ``<mesh scale>``.
    T_link_mesh : array, shape (4, 4)
        Pose of the mesh frame in the internal link frame (translation m).
    """

    source_link: str
    link: int
    role: MeshRole
    filename: str
    path: Path | None
    scale: FloatArray
    T_link_mesh: FloatArray

    def __post_init__(self) -> None:
        """Make the array fields read-only."""
        freeze_array_fields(self)


@dataclass(frozen=True, eq=False)
class LinkFit:
    """Capsules fitted to one description link's meshes (filled by the mesh layer).

    Attributes
    ----------
    source_link : str
    link : int
        Internal link index the capsules are on.
    role : "visual" or "collision"
        Which meshes were fitted (collision meshes, else visual ones).
    meshes : tuple of str
        The files fitted (as written in the description).
    capsule_names : tuple of str
    capsule_volume_m3, hull_volume_m3 : float
    excess : float or None
        Capsule volume over the convex-hull volume of the vertices; ``None`` for a flat link.
    """

    source_link: str
    link: int
    role: MeshRole
    meshes: tuple[str, ...]
    capsule_names: tuple[str, ...]
    capsule_volume_m3: float
    hull_volume_m3: float
    excess: float | None


@dataclass(frozen=True, eq=False)
class Robot:
    """A serial robot arm (SI units).

    Attributes
    ----------
    name : str
        Library name, e.g. ``"pb-arm6"``.
    kind : str
        Family label from the description (e.g. ``"six_axis"``); analytic
        solvers decide applicability from the geometry, not from this label.
    joints : tuple of Joint
    T_link_flange : array, shape (4, 4)
        Flange pose in the last link frame.
    T_flange_tool : array, shape (4, 4)
        Default tool (TCP) pose in the flange frame.
    capsules : tuple of Capsule
    description : str
    source : str
        File the robot was loaded from, or ``""``.
    notes : tuple of str
        Non-fatal remarks from loading (e.g. mesh files not found, joints held at zero).
    home : array, shape (n,), optional
        The description's home configuration (rad, m); see :meth:`home_configuration`.
    from_link, to_link : str
        The chosen chain ends of a URDF (``""`` for other descriptions).
    held_joints : tuple of str
        Joints off the chosen chain (or mimic joints on it) held at zero.
    meshes : tuple of LinkMesh
        Mesh files referenced by the description, resolved or not.
    link_fits : tuple of LinkFit
        Capsules fitted to meshes (empty until the mesh layer has fitted them).
    link_poses : dict of str to (int, array of shape (4, 4))
        Every description link of a URDF import: internal link index and its
        pose in that link frame (joints off the chain at zero).
    replaced_links : tuple of str
        Links whose imported capsules a robot overlay replaced (their meshes are not fitted).
    removed_capsules : tuple of str
        Capsules an overlay removes once meshes are fitted (then empty).
    leaf_links : tuple of str
        URDF: the leaf links below ``from_link`` (the ``to_link`` choices a page offers).
    chain_starts : tuple of str
        URDF: the links above ``to_link``, from the root down (the ``from_link`` choices a
        page offers).
    """

    name: str
    kind: str
    joints: tuple[Joint, ...]
    T_link_flange: FloatArray
    T_flange_tool: FloatArray
    capsules: tuple[Capsule, ...] = ()
    description: str = ""
    source: str = ""
    notes: tuple[str, ...] = field(default=())
    home: FloatArray | None = None
    from_link: str = ""
    to_link: str = ""
    held_joints: tuple[str, ...] = ()
    meshes: tuple[LinkMesh, ...] = ()
    link_fits: tuple[LinkFit, ...] = ()
    link_poses: dict[str, tuple[int, FloatArray]] = field(default_factory=dict)
    replaced_links: tuple[str, ...] = ()
    removed_capsules: tuple[str, ...] = ()
    leaf_links: tuple[str, ...] = ()
    chain_starts: tuple[str, ...] = ()

    def __post_init__(self) -> None:
        """Make the array fields read-only."""
        freeze_array_fields(self)
        object.__setattr__(
            self,
            "link_poses",
            {name: (link, read_only(pose)) for name, (link, pose) in self.link_poses.items()},
        )

    @property
    def has_geometry(self) -> bool:
        """Whether any link carries collision geometry (a capsule); else clearance means nothing."""
        return bool(self.capsules)

    @property
    def geometry_missing(self) -> str | None:
        """:data:`GEOMETRY_MISSING` for a robot without geometry, else ``None``."""
        return None if self.has_geometry else GEOMETRY_MISSING

    @property
    def dof(self) -> int:
        """Number of joints ``n``."""
        return len(self.joints)

    @cached_property
    def joint_names(self) -> tuple[str, ...]:
        """Joint names in chain order, length n."""
        return tuple(joint.name for joint in self.joints)

    @cached_property
    def origins(self) -> FloatArray:
        """Joint origins, shape (n, 4, 4)."""
        return read_only(np.stack([joint.origin for joint in self.joints]).astype(np.float64))

    @cached_property
    def axes(self) -> FloatArray:
        """Unit joint axes in their joint frames, shape (n, 3)."""
        return read_only(np.stack([joint.axis for joint in self.joints]).astype(np.float64))

    @cached_property
    def prismatic(self) -> BoolArray:
        """Prismatic-joint mask, shape (n,)."""
        return read_only(np.array([joint.kind == "prismatic" for joint in self.joints], dtype=bool))

    @cached_property
    def continuous(self) -> BoolArray:
        """Continuous (unlimited revolute) joint mask, shape (n,)."""
        return read_only(np.array([joint.continuous for joint in self.joints], dtype=bool))

    @cached_property
    def lower(self) -> FloatArray:
        """Lower position limits, shape (n,), rad or m."""
        return read_only(np.array([joint.lower for joint in self.joints], dtype=np.float64))

    @cached_property
    def upper(self) -> FloatArray:
        """Upper position limits, shape (n,), rad or m."""
        return read_only(np.array([joint.upper for joint in self.joints], dtype=np.float64))

    @cached_property
    def velocity_max(self) -> FloatArray:
        """Velocity limits, shape (n,), rad/s or m/s."""
        return read_only(np.array([joint.velocity_max for joint in self.joints], dtype=np.float64))

    @cached_property
    def acceleration_max(self) -> FloatArray:
        """Acceleration limits, shape (n,), rad/s^2 or m/s^2."""
        return read_only(
            np.array([joint.acceleration_max for joint in self.joints], dtype=np.float64)
        )

    @cached_property
    def T_link_tool(self) -> FloatArray:
        """Default tool pose in the last link frame, shape (4, 4)."""
        return read_only(self.T_link_flange @ self.T_flange_tool)

    @cached_property
    def motion_table(self) -> FloatArray:
        """Per-joint coefficients for fast forward kinematics, shape (n, 33).

        For joint ``i`` with origin rotation ``A``, origin translation ``o``
        and unit axis ``a`` (``K`` its cross-product matrix), Rodrigues'
        formula gives ``A @ Rot(a, q) = C + cos(q) P + sin(q) B`` with
        ``C = A a a^T``, ``P = A - C`` and ``B = A K``. Row layout:
        ``P`` (9, row-major), ``B`` (9), ``C`` (9), ``o`` (3), ``A a`` (3).
        A prismatic joint moves by ``q A a`` and keeps rotation ``P + C = A``.
        """
        table = np.empty((self.dof, 33))
        for i, (origin, axis) in enumerate(zip(self.origins, self.axes, strict=True)):
            A = origin[:3, :3]
            K = np.array(
                [[0.0, -axis[2], axis[1]], [axis[2], 0.0, -axis[0]], [-axis[1], axis[0], 0.0]]
            )
            C = A @ np.outer(axis, axis)
            table[i, 0:9] = (A - C).ravel()
            table[i, 9:18] = (A @ K).ravel()
            table[i, 18:27] = C.ravel()
            table[i, 27:30] = origin[:3, 3]
            table[i, 30:33] = A @ axis
        return read_only(table)

    def mid_configuration(self) -> FloatArray:
        """Centre of the joint-range box, shape (n,)."""
        return 0.5 * (self.lower + self.upper)

    def home_configuration(self) -> FloatArray:
        """Return the description's home configuration, else the centre of the joint-range box, shape (n,)."""
        return (
            self.mid_configuration() if self.home is None else np.array(self.home, dtype=np.float64)
        )

"""External axes of a cell in SI: a linear track under the robot and turntables under fixtures.

The cell's joint vector is the robot's ``n`` joints followed by its ``m``
external axes: the track (if any), then the turntables in file order. Each
external axis is one joint of a serial chain rooted in the world:

* **track** (prismatic): ``T_world_carriage(s) = T_world_rail @ Trans(s, 0, 0)
  @ Trans(0, 0, h)`` with the rail frame's x along the travel direction and z
  up (world z made normal to the rail, Gram-Schmidt), ``h`` the carriage
  height; the robot base follows as ``T_world_base(s) = T_world_carriage(s) @
  T_carriage_base`` (pedestal included);
* **turntable** (revolute about a line through ``p`` along the unit axis
  ``a``): a carried frame moves by ``D(theta) = Trans(p) @ Rot(a, theta) @
  Trans(-p)`` (Rodrigues' formula, Lynch & Park, *Modern Robotics*, eq. 3.51),
  applied to the frame's pose at table angle 0.

The product of exponentials form of the same chains (Lynch & Park, ch. 4) is
what the tests compare with pinocchio on a composed URDF.

:class:`ExternalAxes` holds the axes and the values the scene is posed at;
:func:`posed_scene` (in :mod:`posebridge.cell.scene`) moves a scene to other
values. Values the user leaves out are each axis's home value.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

from posebridge.arrays import freeze_array_fields
from posebridge.transforms import rotation_matrix_about_axis
from posebridge.units import FloatArray, m_from_mm, rad_from_deg

__all__ = [
    "NO_EXTERNAL_AXES",
    "ExternalAxes",
    "TrackAxis",
    "TurntableAxis",
    "rail_frame",
    "turntable_motion",
]


def rail_frame(origin: npt.ArrayLike, direction: npt.ArrayLike) -> FloatArray:
    """Return the rail frame: at ``origin`` (m), x along ``direction``, z up, shape (4, 4).

    z is world z with its component along x removed (Gram-Schmidt), y = z x x.
    """
    x = np.asarray(direction, dtype=np.float64)
    x = x / np.linalg.norm(x)
    z = np.array([0.0, 0.0, 1.0]) - x[2] * x
    z = z / np.linalg.norm(z)
    T = np.eye(4)
    T[:3, 0] = x
    T[:3, 1] = np.cross(z, x)
    T[:3, 2] = z
    T[:3, 3] = np.asarray(origin, dtype=np.float64)
    return T


def turntable_motion(point: FloatArray, axis: FloatArray, angle: npt.ArrayLike) -> FloatArray:
    """``Trans(p) Rot(a, theta) Trans(-p)``: a turn about the line through ``point`` along ``axis``.

    Parameters
    ----------
    point : array, shape (3,)
        A point of the line, m.
    axis : array, shape (3,)
        Unit direction.
    angle : array-like, shape (N,)
        rad.

    Returns
    -------
    D : array, shape (N, 4, 4)
    """
    theta = np.atleast_1d(np.asarray(angle, dtype=np.float64))
    R = rotation_matrix_about_axis(np.broadcast_to(axis, (*theta.shape, 3)), theta)
    D = np.zeros((*theta.shape, 4, 4))
    D[..., :3, :3] = R
    D[..., :3, 3] = point - R @ point
    D[..., 3, 3] = 1.0
    return D


@dataclass(frozen=True, eq=False)
class TrackAxis:
    """The track in SI.

    Attributes
    ----------
    T_world_rail : array, shape (4, 4)
        Rail frame at track position 0 (x along the travel).
    carriage_height : float
        m.
    carriage_size : array, shape (2,)
        Length along the rail and width, m.
    T_carriage_base : array, shape (4, 4)
        Robot base frame (top of the pedestal) in the carriage-top frame.
    """

    T_world_rail: FloatArray
    carriage_height: float
    carriage_size: FloatArray
    T_carriage_base: FloatArray

    def __post_init__(self) -> None:
        """Make the array fields read-only."""
        freeze_array_fields(self)

    @property
    def direction(self) -> FloatArray:
        """Unit direction of travel in the world, shape (3,)."""
        return self.T_world_rail[:3, 0].copy()

    def T_world_carriage(self, position: npt.ArrayLike) -> FloatArray:
        """Carriage-top frames at track positions ``position`` (m, shape (N,)), shape (N, 4, 4)."""
        s = np.atleast_1d(np.asarray(position, dtype=np.float64))
        T = np.broadcast_to(self.T_world_rail, (*s.shape, 4, 4)).copy()
        T[..., :3, 3] += s[..., None] * self.direction + self.carriage_height * T[..., :3, 2]
        return T

    def T_world_base(self, position: npt.ArrayLike) -> FloatArray:
        """Robot base frames at track positions ``position`` (m, shape (N,)), shape (N, 4, 4)."""
        return self.T_world_carriage(position) @ self.T_carriage_base


@dataclass(frozen=True, eq=False)
class TurntableAxis:
    """One turntable in SI.

    Attributes
    ----------
    point : array, shape (3,)
        Top centre of the plate, m.
    axis : array, shape (3,)
        Unit turning axis.
    plate_radius, plate_thickness : float
        m.
    fixtures : tuple of int
        Indices (file order) of the fixtures it turns, children included.
    """

    point: FloatArray
    axis: FloatArray
    plate_radius: float
    plate_thickness: float
    fixtures: tuple[int, ...]

    def __post_init__(self) -> None:
        """Make the array fields read-only."""
        freeze_array_fields(self)

    def motion(self, angle: npt.ArrayLike) -> FloatArray:
        """:func:`turntable_motion` of this table, shape (N, 4, 4)."""
        return turntable_motion(self.point, self.axis, angle)

    def T_world_plate(self, angle: npt.ArrayLike) -> FloatArray:
        """Plate frames (top centre, z along the axis) at ``angle`` (rad, (N,)), shape (N, 4, 4).

        At angle 0 the plate's x is the world axis most normal to the turning axis,
        made normal to it.
        """
        z = self.axis
        seed = np.eye(3)[int(np.argmin(np.abs(z)))]
        x = seed - (seed @ z) * z
        x = x / np.linalg.norm(x)
        T0 = np.eye(4)
        T0[:3, 0], T0[:3, 1], T0[:3, 2], T0[:3, 3] = x, np.cross(z, x), z, self.point
        return self.motion(angle) @ T0


@dataclass(frozen=True, eq=False)
class ExternalAxes:
    """The cell's external axes and the values a scene is posed at (SI).

    Attributes
    ----------
    names : tuple of str, length m
        Track first (if any), then the turntables in file order.
    prismatic : array of bool, shape (m,)
        True for the track (mm at the boundary), False for tables (deg).
    lower, upper, home : array, shape (m,)
        Range and default value, m or rad.
    velocity_max, acceleration_max : array, shape (m,)
        m/s, m/s² or rad/s, rad/s².
    values : array, shape (m,)
        The values the scene is posed at.
    track : TrackAxis or None
    turntables : tuple of TurntableAxis
    """

    names: tuple[str, ...]
    prismatic: npt.NDArray[np.bool_]
    lower: FloatArray
    upper: FloatArray
    home: FloatArray
    velocity_max: FloatArray
    acceleration_max: FloatArray
    values: FloatArray
    track: TrackAxis | None
    turntables: tuple[TurntableAxis, ...]

    def __post_init__(self) -> None:
        """Make the array fields read-only."""
        freeze_array_fields(self)

    @property
    def count(self) -> int:
        """Number of external axes ``m``."""
        return len(self.names)

    @property
    def units(self) -> list[str]:
        """Boundary unit per axis: ``"mm"`` or ``"deg"``."""
        return ["mm" if p else "deg" for p in self.prismatic]

    def index(self, name: str) -> int:
        """Position of the axis called ``name`` (``KeyError`` if absent)."""
        try:
            return self.names.index(name)
        except ValueError:
            raise KeyError(name) from None

    @property
    def table_offset(self) -> int:
        """Index of the first turntable in the external vector (1 with a track, else 0)."""
        return 0 if self.track is None else 1

    def si_from_user(self, values: npt.ArrayLike) -> FloatArray:
        """External values from mm/deg to m/rad, shape (..., m)."""
        v = np.asarray(values, dtype=np.float64)
        return np.where(self.prismatic, m_from_mm(v), rad_from_deg(v))

    def T_world_base(self, values: npt.ArrayLike, T_world_base_fixed: FloatArray) -> FloatArray:
        """Robot base frames for external vectors ``values`` (m/rad, shape (N, m)), shape (N, 4, 4).

        ``T_world_base_fixed`` is used when the cell has no track.
        """
        v = np.atleast_2d(np.asarray(values, dtype=np.float64))
        if self.track is None:
            return np.broadcast_to(T_world_base_fixed, (len(v), 4, 4)).copy()
        return self.track.T_world_base(v[:, 0])

    def within_limits(self, values: npt.ArrayLike, slack: float = 1e-9) -> npt.NDArray[np.bool_]:
        """Whether every external value is inside its range, shape (N,) for (N, m)."""
        v = np.atleast_2d(np.asarray(values, dtype=np.float64))
        inside = (v >= self.lower - slack) & (v <= self.upper + slack)
        return np.asarray(np.all(inside, axis=1))


NO_EXTERNAL_AXES = ExternalAxes(
    names=(),
    prismatic=np.zeros(0, dtype=bool),
    lower=np.zeros(0),
    upper=np.zeros(0),
    home=np.zeros(0),
    velocity_max=np.zeros(0),
    acceleration_max=np.zeros(0),
    values=np.zeros(0),
    track=None,
    turntables=(),
)
"""A cell without external axes."""

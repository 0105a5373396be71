"""The exact reachable region of planar two- and three-link arms (position of the TCP).

A planar arm with all joint axes parallel to the base z axis moves its TCP in
one horizontal plane. In canonical form (:class:`PlanarChain`) the TCP is

    p = b + l1 e^{i θ1} + l2 e^{i (θ1 + θ2)} [+ l3 e^{i (θ1 + θ2 + θ3)}],

with complex numbers for plane points, link lengths ``l_k`` and canonical
joint angles ``θ_k = s_k q_k + o_k`` (sign and offset from the robot's joint
frames) limited to ``[lo_k, hi_k]``.

Two links (law of cosines, e.g. Spong, Hutchinson, Vidyasagar, *Robot
Modeling and Control*, sec. 5.3, planar elbow arm): a point at distance ``r``
from ``b`` and polar angle ``α`` is reached with

    cos θ2 = (r² - l1² - l2²) / (2 l1 l2),     θ2 = ± arccos(...)   (two elbow branches),
    θ1 = α - atan2(l2 sin θ2, l1 + l2 cos θ2),

so it is reachable exactly when, for one branch, θ2 lies in its range (some
whole turn) and the implied θ1 lies in its range. With full ranges the region
is the annulus ``|l1 - l2| <= r <= l1 + l2``; a limited θ2 range narrows the
radii to ``r(θ2)`` over the range, a limited θ1 range cuts angular sectors.

Three links: for fixed θ3 the last two links act as one link of length
``L(θ3) = |l2 + l3 e^{i θ3}|`` turned by ``φ(θ3) = arg(l2 + l3 e^{i θ3})``,
a two-link arm with θ2 range ``[lo2 + φ, hi2 + φ]``. The set of θ3 that
reach a point is closed, so each of its intervals has end points where a
constraint is active: θ3 at a limit, θ2 at a limit, θ1 at a limit, or the
virtual two-link arm stretched or folded (``L = |r ± l1|``). Each of these
gives θ3 in closed form (law of cosines once more), so testing the
two-link condition at these finitely many candidates decides membership
exactly (up to the rounding tolerance).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import numpy.typing as npt
from scipy.integrate import quad

from posebridge.kinematics.fk import fk_tool
from posebridge.robot.model import Robot
from posebridge.spaces.errors import SpacesInputError
from posebridge.units import BoolArray, FloatArray

__all__ = [
    "PlanarChain",
    "PlanarReach",
    "planar_radius_range",
    "planar_reach",
    "planar_reachable",
    "planar_region_area",
    "planar_section_mask",
]

_TWO_PI = 2.0 * np.pi
_PLANE_TOLERANCE = 1e-9
"""Largest out-of-plane component (m or unit-vector component) accepted in a planar chain."""
_VERIFY_SAMPLES = 64
ANGLE_TOLERANCE = 1e-9
"""Rad by which a joint angle may pass a limit, and by which ``|cos|`` may exceed 1."""


@dataclass(frozen=True, eq=False)
class PlanarChain:
    """A planar serial arm in canonical form (SI units, base frame).

    ``p = base_xy + sum_k lengths[k] e^{i (θ_1 + ... + θ_k)}`` with
    ``θ_k = signs[k] q_k + offsets[k]`` limited to ``[lower[k], upper[k]]``.

    Attributes
    ----------
    lengths : array, shape (n,)
        Link lengths in the plane, m (the last one ends at the TCP).
    signs : array, shape (n,)
        +1 where the joint axis is the base +z axis, -1 for -z.
    offsets : array, shape (n,)
        rad.
    lower, upper : array, shape (n,)
        Canonical angle limits, rad.
    base_xy : array, shape (2,)
        Axis 1 in the base x-y plane, m.
    height : float
        Base z of the TCP plane, m.
    """

    lengths: FloatArray
    signs: FloatArray
    offsets: FloatArray
    lower: FloatArray
    upper: FloatArray
    base_xy: FloatArray
    height: float

    @classmethod
    def from_robot(cls, robot: Robot, T_flange_tool: npt.ArrayLike | None = None) -> PlanarChain:
        """Canonical form of a planar arm with two or three revolute joints about the base z axis.

        Each joint origin must be a rotation about z (angle ``γ_k``) and a
        translation ``t_k``; each axis ``±z``. The link from joint ``k`` to the
        next joint (or the TCP) is the x-y part of ``t_{k+1}``, length ``l_k``,
        direction ``δ_k``; then ``o_1 = γ_1 + δ_1`` and ``o_k = γ_k + δ_k - δ_{k-1}``.
        The result is checked against :func:`~posebridge.kinematics.fk.fk_tool`
        on random configurations.

        Parameters
        ----------
        robot : Robot
        T_flange_tool : array-like, shape (4, 4), optional
            Tool in the flange frame; the robot's default tool if omitted.

        Raises
        ------
        SpacesInputError
            Not two or three revolute joints about parallel z axes, a link of
            zero length, or a tool that leaves the plane.
        """
        n = robot.dof
        if n not in (2, 3) or np.any(robot.prismatic):
            raise SpacesInputError(
                f"robot {robot.name!r}: expected a planar arm with 2 or 3 revolute joints, "
                f"got {n} joints ({int(np.sum(robot.prismatic))} prismatic)"
            )
        tail = robot.T_link_flange @ (
            robot.T_flange_tool if T_flange_tool is None else np.asarray(T_flange_tool, float)
        )
        translations = [origin[:3, 3] for origin in robot.origins[1:]] + [tail[:3, 3]]
        signs = np.empty(n)
        gamma = np.empty(n)
        for k, (origin, axis) in enumerate(zip(robot.origins, robot.axes, strict=True)):
            R = origin[:3, :3]
            if abs(R[2, 2] - 1.0) > _PLANE_TOLERANCE or abs(abs(axis[2]) - 1.0) > _PLANE_TOLERANCE:
                raise SpacesInputError(
                    f"robot {robot.name!r} joint {robot.joint_names[k]!r}: expected a revolute "
                    "joint about the base z axis (origin rotated about z only, axis +-z)"
                )
            signs[k] = np.sign(axis[2])
            gamma[k] = np.arctan2(R[1, 0], R[0, 0])
        lengths = np.array([np.hypot(t[0], t[1]) for t in translations])
        if np.any(lengths <= _PLANE_TOLERANCE):
            raise SpacesInputError(
                f"robot {robot.name!r}: every link must have a length in the x-y plane, "
                f"got lengths {lengths.round(9).tolist()} m"
            )
        delta = np.array([np.arctan2(t[1], t[0]) for t in translations])
        offsets = gamma + delta - np.concatenate([[0.0], delta[:-1]])
        lower = np.where(signs > 0, robot.lower, -robot.upper) + offsets
        upper = np.where(signs > 0, robot.upper, -robot.lower) + offsets
        base = robot.origins[0][:3, 3]
        height = float(base[2] + sum(t[2] for t in translations))
        chain = cls(lengths, signs, offsets, lower, upper, base[:2].copy(), height)
        rng = np.random.default_rng(0)
        q = rng.uniform(robot.lower, robot.upper, size=(_VERIFY_SAMPLES, n))
        T = fk_tool(robot, q, T_flange_tool)
        error = max(
            float(np.abs(T[:, :2, 3] - chain.positions(q)).max()),
            float(np.abs(T[:, 2, 3] - height).max()),
        )
        if error > 1e-9:
            raise SpacesInputError(
                f"robot {robot.name!r}: not a planar chain in the base x-y plane "
                f"(canonical form differs from forward kinematics by {error:.3g} m)"
            )
        return chain

    @property
    def dof(self) -> int:
        """Number of joints ``n``."""
        return int(self.lengths.shape[0])

    def positions(self, q: npt.ArrayLike) -> FloatArray:
        """TCP positions in the base x-y plane from joint values, shape (N, 2), m.

        Parameters
        ----------
        q : array-like, shape (N, n)
            Joint values of the robot (not canonical angles), rad.
        """
        theta = np.cumsum(self.signs * np.asarray(q, dtype=np.float64) + self.offsets, axis=1)
        x = self.base_xy[0] + (self.lengths * np.cos(theta)).sum(axis=1)
        y = self.base_xy[1] + (self.lengths * np.sin(theta)).sum(axis=1)
        return np.stack([x, y], axis=1)


def _in_range(theta: FloatArray, lower: npt.ArrayLike, upper: npt.ArrayLike) -> BoolArray:
    """Tell whether some ``theta + 2 pi k`` lies in ``[lower, upper]`` (with :data:`ANGLE_TOLERANCE`); NaN gives False."""
    lo = np.asarray(lower, dtype=np.float64) - ANGLE_TOLERANCE
    hi = np.asarray(upper, dtype=np.float64) + ANGLE_TOLERANCE
    k = np.ceil((lo - theta) / _TWO_PI)
    with np.errstate(invalid="ignore"):
        return (theta + _TWO_PI * k <= hi) | ((hi - lo >= _TWO_PI) & np.isfinite(theta))


def _cosine_angles(value: FloatArray) -> tuple[FloatArray, FloatArray]:
    """``± arccos(value)``; NaN where ``|value| > 1 + ANGLE_TOLERANCE``, clipped otherwise."""
    ok = np.abs(value) <= 1.0 + ANGLE_TOLERANCE
    angle = np.where(ok, np.arccos(np.clip(value, -1.0, 1.0)), np.nan)
    return angle, -angle


def _two_link(
    r: FloatArray,
    alpha: FloatArray,
    l1: float,
    l2: FloatArray,
    lo1: float,
    hi1: float,
    lo2: FloatArray,
    hi2: FloatArray,
) -> BoolArray:
    """Exact reachability of polar points ``(r, α)`` by a two-link arm (law of cosines, see module).

    ``l2``, ``lo2``, ``hi2`` broadcast against ``r`` (the virtual second link
    of a three-link arm). All arrays shape (N, ...).
    """
    scale = l1 + l2
    length_tolerance = ANGLE_TOLERANCE * scale
    cosine = (r * r - l1 * l1 - l2 * l2) / (2.0 * l1 * np.maximum(l2, length_tolerance))
    at_origin = r <= length_tolerance
    reachable = np.zeros(np.broadcast(r, l2).shape, dtype=bool)
    for theta2 in _cosine_angles(cosine):
        psi = np.arctan2(l2 * np.sin(theta2), l1 + l2 * np.cos(theta2))
        theta1_ok = at_origin | _in_range(alpha - psi, lo1, hi1)
        reachable |= _in_range(theta2, lo2, hi2) & theta1_ok
    # A vanishing virtual link (l2 = l3, θ3 = π): the point is on the circle r = l1, θ2 free.
    folded = l2 <= length_tolerance
    reachable |= folded & (np.abs(r - l1) <= length_tolerance) & _in_range(alpha, lo1, hi1)
    return reachable


def _polar(chain: PlanarChain, points_xy: npt.ArrayLike) -> tuple[FloatArray, FloatArray]:
    points = np.asarray(points_xy, dtype=np.float64)
    if points.ndim != 2 or points.shape[1] != 2 or not np.all(np.isfinite(points)):
        raise SpacesInputError(
            f"points_xy: expected finite values of shape (N, 2), got shape {points.shape}"
        )
    w = points - chain.base_xy
    return np.hypot(w[:, 0], w[:, 1]), np.arctan2(w[:, 1], w[:, 0])


def _three_link_candidates(chain: PlanarChain, r: FloatArray, alpha: FloatArray) -> FloatArray:
    """Candidate θ3 values where a membership constraint is active, shape (N, 18); NaN for none."""
    l1, l2, l3 = chain.lengths
    lo, hi = chain.lower, chain.upper
    N = r.shape[0]
    columns: list[FloatArray] = [np.full(N, lo[2]), np.full(N, hi[2])]
    # θ2 at a limit: |u + l3 e^{i(θ2 + θ3)}| = r with u = l1 + l2 e^{iθ2}.
    for theta2 in (lo[1], hi[1]):
        u = l1 + l2 * np.exp(1j * theta2)
        cosine = (r * r - abs(u) ** 2 - l3 * l3) / (2.0 * abs(u) * l3)
        for angle in _cosine_angles(cosine):
            columns.append(np.angle(u) - theta2 + angle)
    # θ1 at a limit: |l2 + l3 e^{iθ3}| = |e^{-iθ1} p - l1|.
    point = r * np.exp(1j * alpha)
    for theta1 in (lo[0], hi[0]):
        w = np.abs(point * np.exp(-1j * theta1) - l1)
        columns.extend(_cosine_angles((w * w - l2 * l2 - l3 * l3) / (2.0 * l2 * l3)))
    # Virtual two-link arm stretched or folded: L(θ3) = r - l1, l1 - r or r + l1.
    for length in (r - l1, l1 - r, r + l1):
        cosine = np.where(
            length >= 0.0, (length * length - l2 * l2 - l3 * l3) / (2.0 * l2 * l3), 2.0
        )
        columns.extend(_cosine_angles(cosine))
    return np.stack(columns, axis=1)


def planar_reachable(chain: PlanarChain, points_xy: npt.ArrayLike) -> BoolArray:
    """Exact membership of base-frame plane points in the reachable region of a planar arm.

    Two links: the law-of-cosines test of the module docstring for both elbow
    branches. Three links: that test for the virtual two-link arm at every
    candidate θ3 where a constraint is active (module docstring).

    Parameters
    ----------
    chain : PlanarChain
    points_xy : array-like, shape (N, 2)
        Points in the base x-y plane, m (the TCP plane's height is not checked).

    Returns
    -------
    reachable : array of bool, shape (N,)
        True within :data:`ANGLE_TOLERANCE` of the region (boundary included).
    """
    r, alpha = _polar(chain, points_xy)
    lo, hi = chain.lower, chain.upper
    if chain.dof == 2:
        return _two_link(r, alpha, chain.lengths[0], chain.lengths[1], lo[0], hi[0], lo[1], hi[1])
    l1, l2, l3 = chain.lengths
    theta3 = _three_link_candidates(chain, r, alpha)
    virtual = l2 + l3 * np.exp(1j * np.nan_to_num(theta3))
    phi = np.angle(virtual)
    ok = _two_link(
        r[:, None], alpha[:, None], l1, np.abs(virtual), lo[0], hi[0], lo[1] + phi, hi[1] + phi
    )
    return np.any(ok & _in_range(theta3, lo[2], hi[2]), axis=1)


def planar_radius_range(chain: PlanarChain) -> tuple[float, float]:
    """Smallest and largest TCP distance from axis 1 of a two-link arm, m.

    ``r(θ2)² = l1² + l2² + 2 l1 l2 cos θ2`` (law of cosines) falls as θ2 moves
    from 0 towards ±π, so the extremes are at the in-range angles nearest 0
    and nearest π (mod 2π); with full ranges ``(|l1 - l2|, l1 + l2)``.

    Raises
    ------
    SpacesInputError
        The chain has three links.
    """
    if chain.dof != 2:
        raise SpacesInputError(f"chain: expected a two-link arm, got {chain.dof} links")
    l1, l2 = chain.lengths
    lo, hi = chain.lower[1], chain.upper[1]

    def radius(theta: float) -> float:
        return float(np.sqrt(max(l1 * l1 + l2 * l2 + 2.0 * l1 * l2 * np.cos(theta), 0.0)))

    def nearest(target: float) -> float:
        """Return the angle in [lo, hi] nearest ``target`` modulo 2 pi."""
        k = np.ceil((lo - target) / _TWO_PI)
        candidate = target + _TWO_PI * k
        if candidate <= hi:
            return float(candidate)
        below = candidate - _TWO_PI
        return lo if lo - below <= candidate - hi else hi

    return radius(nearest(np.pi)), radius(nearest(0.0))


def _angular_measure(chain: PlanarChain, r: float) -> float:
    """Measure (rad) of the polar angles reachable at distance ``r``: union of one arc per valid branch."""
    l1, l2 = chain.lengths
    lo1, hi1 = chain.lower[0], chain.upper[0]
    span = min(hi1 - lo1, _TWO_PI)
    starts = []
    for theta2 in _cosine_angles(np.array([(r * r - l1 * l1 - l2 * l2) / (2.0 * l1 * l2)])):
        if _in_range(theta2, chain.lower[1], chain.upper[1])[0]:
            starts.append(float(np.arctan2(l2 * np.sin(theta2[0]), l1 + l2 * np.cos(theta2[0]))))
    if not starts:
        return 0.0
    if len(starts) == 1:
        return span
    d = (starts[1] - starts[0]) % _TWO_PI
    overlap = max(0.0, span - d) + max(0.0, span + d - _TWO_PI)
    return min(_TWO_PI, 2.0 * span - overlap)


def planar_region_area(chain: PlanarChain) -> float:
    """Area of the reachable region of a two-link arm, m².

    In polar coordinates about axis 1, ``A = ∫ m(r) r dr`` where ``m(r)`` is
    the measure of the reachable polar angles at distance ``r``: one arc of
    length ``min(hi1 - lo1, 2π)`` per elbow branch whose θ2 is in range (module
    docstring), two arcs united on the circle. Integrated by adaptive
    quadrature (``scipy.integrate.quad``) with break points where a branch
    enters or leaves the θ2 range.
    """
    r_min, r_max = planar_radius_range(chain)
    l1, l2 = chain.lengths
    breaks = [
        float(np.sqrt(max(l1 * l1 + l2 * l2 + 2.0 * l1 * l2 * np.cos(angle), 0.0)))
        for angle in (chain.lower[1], chain.upper[1], 0.0)
    ]
    inner = sorted(b for b in breaks if r_min < b < r_max)
    area, _ = quad(
        lambda r: _angular_measure(chain, r) * r,
        r_min,
        r_max,
        points=inner or None,
        limit=400,
        epsabs=1e-12,
        epsrel=1e-10,
    )
    return float(area)


@dataclass(frozen=True)
class PlanarReach:
    """Where a planar arm's TCP reaches: an area in one plane (SI units).

    Attributes
    ----------
    plane_height_m : float
        The TCP plane is the base x-y plane shifted to this base z, m.
    area_m2 : float
        Area of the reachable region in that plane.
    inner_radius_m, outer_radius_m : float
        Smallest and largest TCP distance from axis 1 (two-link arms; for
        three links the largest is the sum of the lengths and the smallest 0
        or the closest approach over the region's grid).
    full_turns : bool
        Every joint range spans at least one revolution.
    """

    plane_height_m: float
    area_m2: float
    inner_radius_m: float
    outer_radius_m: float
    full_turns: bool


def planar_reach(
    robot: Robot, T_flange_tool: npt.ArrayLike | None = None, *, grid_m: float = 0.005
) -> PlanarReach | None:
    """Return the reachable area of a planar two- or three-link arm, or None for any other robot.

    Two links: :func:`planar_region_area` and :func:`planar_radius_range`
    (closed form for full ranges: the annulus ``|l1 - l2| <= r <= l1 + l2`` of
    area ``π((l1 + l2)² - (l1 - l2)²)``; the swept region of the ranges
    otherwise). Three links: the exact membership test
    :func:`planar_reachable` on a square grid of ``grid_m`` cells, area =
    reachable cells times the cell area.
    """
    try:
        chain = PlanarChain.from_robot(robot, T_flange_tool)
    except SpacesInputError:
        return None
    full = bool(np.all(chain.upper - chain.lower >= _TWO_PI - ANGLE_TOLERANCE))
    if chain.dof == 2:
        inner, outer = planar_radius_range(chain)
        return PlanarReach(chain.height, planar_region_area(chain), inner, outer, full)
    outer = float(chain.lengths.sum())
    axis = np.arange(-outer + grid_m / 2, outer, grid_m)
    x, y = np.meshgrid(axis, axis, indexing="ij")
    points = np.stack([x.ravel(), y.ravel()], axis=1) + chain.base_xy
    reached = planar_reachable(chain, points)
    radius = np.hypot(*(points[reached] - chain.base_xy).T)
    inner = float(max(radius.min() - grid_m, 0.0)) if radius.size else 0.0
    return PlanarReach(
        chain.height, float(np.count_nonzero(reached)) * grid_m * grid_m, inner, outer, full
    )


def planar_section_mask(
    robot: Robot,
    *,
    axis: str,
    value_m: float,
    u_m: npt.ArrayLike,
    v_m: npt.ArrayLike,
    T_world_base: npt.ArrayLike,
    T_flange_tool: npt.ArrayLike | None = None,
    half_thickness_m: float,
) -> BoolArray | None:
    """Return which cells of a reach section (world frame) a planar arm reaches in its plane.

    None for any other robot.

    A cell counts when its centre lies within ``half_thickness_m`` (half a voxel) of the
    arm's TCP plane and the centre's projection onto the plane is reachable
    (:func:`planar_reachable`): the plan section through the plane shows the exact region
    (the annulus of a two-link arm with full turns), an elevation shows one row of cells.
    A voxel reach map of a planar arm counts every height, because its IK ignores the
    out-of-plane components; this mask keeps the section in agreement with
    :func:`planar_reach`.

    Parameters
    ----------
    robot : Robot
    axis : "x", "y" or "z"
        The axis normal to the section (as in ``spaces.workspace.reach_section``).
    value_m : float
        World coordinate of the section along ``axis``, m.
    u_m, v_m : array-like, shapes (U,), (V,)
        Cell-centre coordinates along the section's axes (z: x and y; y: x and z;
        x: y and z), m.
    T_world_base : array-like, shape (4, 4)
    T_flange_tool : array-like, shape (4, 4), optional
        The robot's default tool if omitted.
    half_thickness_m : float
        Largest distance of a cell centre from the plane, m.

    Returns
    -------
    mask : array of bool, shape (V, U), or None
    """
    try:
        chain = PlanarChain.from_robot(robot, T_flange_tool)
    except SpacesInputError:
        return None
    u, v = np.meshgrid(np.asarray(u_m, float), np.asarray(v_m, float), indexing="xy")
    value = np.full_like(u, value_m)
    world = {
        "z": (u, v, value),
        "y": (u, value, v),
        "x": (value, u, v),
    }[axis]
    points = np.stack([*world, np.ones_like(u)], axis=-1).reshape(-1, 4)
    base = points @ np.linalg.inv(np.asarray(T_world_base, float)).T
    in_plane = np.abs(base[:, 2] - chain.height) <= half_thickness_m
    reachable = np.zeros(base.shape[0], dtype=bool)
    reachable[in_plane] = planar_reachable(chain, base[in_plane, :2])
    return reachable.reshape(u.shape)

"""Blended cycle time: time-optimal continuous motion through a path's waypoints.

The rest-to-rest timing of :mod:`posebridge.planning.cycle_time` stops at every
waypoint, an upper bound. Here the arm passes through every waypoint that has a
blend radius without stopping, and the whole motion is timed time-optimally
under the same limits (SI units throughout).

**Stops.** The motion is at rest at the first and the last waypoint, at every
waypoint with a blend radius of 0 (exact stop), and where a segment next to the
waypoint cannot be timed (an end or a sample unreached), does not move any
joint, or moves an external axis (a track, a turntable: the blend curves and
TOPP-RA below run over the robot joints only, so a waypoint is not blended
where an axis travels into or out of it). The stops cut the path into *blocks*;
a block of one segment is a rest-to-rest move and gets exactly the rest-to-rest
timing and profile of :func:`posebridge.planning.cycle_time.path_cycle_time`
(the trapezoid is the time-optimal profile on a straight joint-space line,
Lynch & Park, *Modern Robotics*, 2017, sec. 9.2.2.2), external axes included
(``external=``: a joint move synchronised with them, a linear move at least as
long as their own move; the arm's profile is stretched in time to that
duration).

**Blend geometry (corner rounding in joint space).** At a blended waypoint the
arm leaves the incoming segment where the TCP enters the blend zone (the sphere
of the blend radius about the waypoint's TCP) and rejoins the outgoing segment
where the TCP leaves it, each cut at most at the middle of its segment so that
two zones never overlap (a controller shrinks overlapping zones the same way;
common practice, no source). Between the two cut points ``P`` and ``Q`` the
joint-space path is the cubic Bezier curve with control points
``P + 2/3 |W - P| t_in`` and ``Q - 2/3 |Q - W| t_out`` (``W`` the waypoint's
joint values, ``t_in``, ``t_out`` the unit tangents of the segments at the cut
points). Between two joint moves (straight joint-space lines pointing at ``W``)
this is exactly the parabola of a linear-segment-with-parabolic-blend via point
(the quadratic Bezier with control point ``W``, Craig, *Introduction to
Robotics*, 3rd ed., sec. 7.3); along linear moves, whose joint paths are
curved, it is the same construction on the tangents, so the joint path stays
tangent-continuous. The rest of each segment is followed exactly (the joint
line of a joint move, the branch-continuous IK samples of a linear move). The
block's joint path is then one cubic spline through all these points
(:class:`toppra.SplineInterpolator`, parameter ``s`` = cumulative joint-space
chord length). Corner rounding in joint space rather than a joint-space spline
through the waypoints keeps linear moves on their line and keeps the deviation
inside the blend zone, which is what a blend radius promises.

**Time-optimal timing.** Each block is parameterised by TOPP-RA (Pham & Pham,
"A new approach to time-optimal path parameterization based on reachability
analysis", IEEE Transactions on Robotics 34(3), 2018) with the ``toppra``
library, rest at both ends, subject at every grid point to

* joint velocity ``|q'(s) s_dot| <= k v`` and joint acceleration
  ``|q'(s) s_ddot + q''(s) s_dot^2| <= k^2 a`` (the curvature term included),
  with ``k`` the segment's speed percentage / 100 for joint moves and 1 for
  linear moves, as in the rest-to-rest timing;
* on linear moves, the TCP speed ``sigma'(s) s_dot <= v_tcp`` (the waypoint's
  requested speed) and the TCP path acceleration
  ``|sigma'(s) s_ddot + sigma''(s) s_dot^2| <= a_tcp``, where ``sigma`` is the
  TCP path length.

A blend takes the limits of the incoming segment up to its middle and those of
the outgoing segment after it; the middle of the blend (where the arm passes the
waypoint) is where one segment's duration ends and the next one's begins.
Between grid points the path acceleration is constant (the TOPP-RA
discretisation). Jerk is not limited.

**Never slower than stopping.** A waypoint where the joint path turns straight
back (opposite tangents) is a stop: the arm comes to rest there anyway. A block
whose blended motion is not faster than the rest-to-rest moves of its segments
(a blend radius so small that the arm nearly stops anyway), or that TOPP-RA
cannot parameterise, is timed and sampled as rest-to-rest moves: the
arm can always stop, so the time-optimal choice among the two motions is never
the slower one. Hence the blended total is at most the rest-to-rest total,
segment for segment within every block.
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass
from typing import Protocol

import numpy as np
import numpy.typing as npt
import toppra
from scipy.interpolate import CubicSpline
from toppra.algorithm import TOPPRA
from toppra.constants import INFTY
from toppra.constraint import DiscretizationType, LinearConstraint
from toppra.constraint.linear_constraint import canlinear_colloc_to_interpolate
from toppra.interpolator import AbstractGeometricPath

from posebridge.cell.scene import Scene
from posebridge.kinematics.fk import fk_tool
from posebridge.planning.cycle_time import (
    DEFAULT_LINEAR_ACCELERATION_M_S2,
    ExternalAxisMotion,
    SegmentTiming,
    external_axis_motion,
    path_cycle_time,
)
from posebridge.planning.errors import PlanningInputError, check_positive
from posebridge.planning.path_sampling import SampledPath, SegmentSamples
from posebridge.planning.time_scaling import (
    JointMove,
    RestToRestProfile,
    joint_move,
    trapezoidal_profile,
)
from posebridge.robot.model import Robot
from posebridge.units import BoolArray, FloatArray

__all__ = [
    "BLENDED_NOTE",
    "MAX_MOTION_SAMPLES",
    "BlendedCycleTime",
    "MotionPiece",
    "MotionSamples",
    "NoParameterizationError",
    "PathParameterization",
    "blended_cycle_time",
    "sample_motion",
    "time_optimal_parameterization",
]

BLENDED_NOTE = (
    "blended: the arm passes blended waypoints without stopping (corner rounding in joint "
    "space within the blend radius), timed time-optimally (TOPP-RA) under the joint velocity "
    "and acceleration limits and the linear moves' TCP speed and acceleration; jerk not limited"
)
MAX_MOTION_SAMPLES = 2_000_000
"""Largest number of rows :func:`sample_motion` returns; a finer period is refused."""
_BLEND_MIN_POINTS = 16
"""Fewest points on one blend curve (an even number: the middle is a point)."""
_STILL = 1e-9
"""Joint travel (rad or m) below which a segment counts as not moving."""


class NoParameterizationError(PlanningInputError):
    """TOPP-RA found no time parameterisation of a path (badly conditioned, e.g. a cusp)."""


class MotionPiece(Protocol):
    """A timed stretch of the motion that can be sampled (local time from 0 to ``duration``)."""

    @property
    def duration(self) -> float:
        """S."""
        ...

    def sample(self, t: FloatArray) -> tuple[FloatArray, FloatArray, npt.NDArray[np.int64]]:
        """``q`` (T, n), ``qdot`` (T, n) and the segment index (T,) at local times ``t`` (T,)."""
        ...


@dataclass(frozen=True, eq=False)
class PathParameterization:
    """A time-optimal timing ``s(t)`` of one geometric joint path ``q(s)`` (SI units).

    Attributes
    ----------
    path : toppra.interpolator.AbstractGeometricPath
        The joint path ``q(s)``; ``path(s, 1)`` and ``path(s, 2)`` are ``q'`` and ``q''``.
    gridpoints : array, shape (G,)
        Path parameter of the grid, increasing.
    path_speed : array, shape (G,)
        ``s_dot`` at the grid points, per s.
    times : array, shape (G,)
        Time at the grid points, s: ``t_{i+1} = t_i + 2 (s_{i+1} - s_i) / (s_dot_i + s_dot_{i+1})``
        (constant path acceleration between grid points).
    """

    path: AbstractGeometricPath
    gridpoints: FloatArray
    path_speed: FloatArray
    times: FloatArray

    @property
    def duration(self) -> float:
        """Total time, s."""
        return float(self.times[-1])

    def evaluate(self, t: npt.ArrayLike) -> tuple[FloatArray, FloatArray, FloatArray]:
        """Path parameter, joint values and joint velocities at times ``t``.

        Constant path acceleration ``u_i = (s_dot_{i+1}^2 - s_dot_i^2) / (2 (s_{i+1} - s_i))``
        between grid points, as TOPP-RA assumes (Pham & Pham 2018, sec. III);
        times outside ``[0, duration]`` are clipped to it.

        Parameters
        ----------
        t : array-like, shape (T,)
            s.

        Returns
        -------
        s : array, shape (T,)
        q : array, shape (T, n)
            rad or m.
        qdot : array, shape (T, n)
            rad/s or m/s.
        """
        times = np.clip(np.asarray(t, dtype=np.float64), 0.0, self.duration)
        i = np.clip(np.searchsorted(self.times, times, side="right") - 1, 0, self.times.size - 2)
        ds = np.diff(self.gridpoints)
        x = self.path_speed**2
        u = (x[1:] - x[:-1]) / (2.0 * ds)
        dt = times - self.times[i]
        speed = np.maximum(self.path_speed[i] + u[i] * dt, 0.0)
        s = np.minimum(
            self.gridpoints[i] + self.path_speed[i] * dt + 0.5 * u[i] * dt * dt,
            self.gridpoints[i + 1],
        )
        return s, self.path(s), self.path(s, 1) * speed[:, None]


class _PathLimits(LinearConstraint):
    """Per-grid-point joint and TCP limits in TOPP-RA's canonical linear form.

    ``a_i u + b_i x + c_i = v``, ``F v <= g`` (Pham & Pham 2018, eq. 5) with
    ``u = s_ddot``, ``x = s_dot^2``: row ``j < n`` is joint ``j``'s acceleration
    divided by its limit (``a = q'_j / A_j``, ``b = q''_j / A_j``), row ``n`` the
    TCP path acceleration divided by its limit; ``F = [I; -I]``, ``g = 1``. The
    velocity limits bound ``x`` directly: ``x <= min_j (V_j / |q'_j|)^2`` and
    ``x <= (v_tcp / sigma')^2``. Interpolation discretisation (the constraint
    holds at both ends of every stage), as toppra's own acceleration constraint
    uses by default.
    """

    def __init__(
        self,
        velocity_max: FloatArray,
        acceleration_max: FloatArray,
        tcp_rate: FloatArray,
        tcp_rate_derivative: FloatArray,
        tcp_speed_max: FloatArray,
        tcp_acceleration_max: FloatArray,
    ) -> None:
        super().__init__()
        self.dof = velocity_max.shape[1]
        self.velocity_max = velocity_max
        self.acceleration_max = acceleration_max
        self.tcp_rate = tcp_rate
        self.tcp_rate_derivative = tcp_rate_derivative
        self.tcp_speed_max = tcp_speed_max
        self.tcp_acceleration_max = tcp_acceleration_max
        self.identical = True
        self.set_discretization_type(DiscretizationType.Interpolation)

    def compute_constraint_params(
        self, path: AbstractGeometricPath, gridpoints: FloatArray, *args: object, **kwargs: object
    ) -> tuple[object, ...]:
        q_s = np.asarray(path(gridpoints, 1)).reshape(-1, self.dof)
        q_ss = np.asarray(path(gridpoints, 2)).reshape(-1, self.dof)
        if q_s.shape[0] != self.velocity_max.shape[0]:
            raise PlanningInputError(
                f"limits: expected one row per grid point ({q_s.shape[0]}), "
                f"got {self.velocity_max.shape[0]}"
            )
        tcp_scale = np.where(
            np.isfinite(self.tcp_acceleration_max), 1.0 / self.tcp_acceleration_max, 0.0
        )
        a = np.concatenate(
            [q_s / self.acceleration_max, (self.tcp_rate * tcp_scale)[:, None]], axis=1
        )
        b = np.concatenate(
            [q_ss / self.acceleration_max, (self.tcp_rate_derivative * tcp_scale)[:, None]], axis=1
        )
        m = self.dof + 1
        F = np.vstack([np.eye(m), -np.eye(m)])
        g = np.ones(2 * m)
        with np.errstate(divide="ignore", over="ignore"):
            joint_x = np.min((self.velocity_max / np.abs(q_s)) ** 2, axis=1)
            tcp_x = (self.tcp_speed_max / np.abs(self.tcp_rate)) ** 2
        xbound = np.zeros((gridpoints.shape[0], 2))
        xbound[:, 1] = np.minimum(np.minimum(joint_x, tcp_x), INFTY)
        a, b, c, F, g, _, _ = canlinear_colloc_to_interpolate(
            a, b, np.zeros_like(a), F, g, None, None, gridpoints, identical=True
        )
        return a, b, c, F, g, None, xbound


def _per_point(name: str, value: npt.ArrayLike | None, G: int, fill: float) -> FloatArray:
    if value is None:
        return np.full(G, fill)
    array = np.asarray(value, dtype=np.float64)
    if array.shape != (G,):
        raise PlanningInputError(f"{name}: expected shape ({G},), got {array.shape}")
    return array


def time_optimal_parameterization(
    path: AbstractGeometricPath,
    gridpoints: npt.ArrayLike,
    velocity_max: npt.ArrayLike,
    acceleration_max: npt.ArrayLike,
    *,
    tcp_rate: npt.ArrayLike | None = None,
    tcp_rate_derivative: npt.ArrayLike | None = None,
    tcp_speed_max: npt.ArrayLike | None = None,
    tcp_acceleration_max: npt.ArrayLike | None = None,
) -> PathParameterization:
    """Time-optimal rest-to-rest timing of a joint path under per-grid-point limits (TOPP-RA).

    TOPP-RA (Pham & Pham 2018) through ``toppra``'s ``TOPPRA`` algorithm with the
    seidel solver, start and end at rest; constraints as in :class:`_PathLimits`.

    Parameters
    ----------
    path : toppra.interpolator.AbstractGeometricPath
        Joint path ``q(s)`` with ``n`` joints, e.g. :class:`toppra.SplineInterpolator`.
    gridpoints : array-like, shape (G,)
        Increasing, from the start to the end of ``path.path_interval``.
    velocity_max, acceleration_max : array-like, shape (G, n) or (n,)
        Positive joint limits at each grid point, rad/s (m/s) and rad/s^2 (m/s^2).
    tcp_rate, tcp_rate_derivative : array-like, shape (G,), optional, keyword-only
        ``sigma'(s)`` and ``sigma''(s)`` of the TCP path length ``sigma``
        (m per unit of ``s``); zero where omitted.
    tcp_speed_max, tcp_acceleration_max : array-like, shape (G,), optional, keyword-only
        TCP speed (m/s) and path acceleration (m/s^2) limits; ``inf`` where none.

    Returns
    -------
    PathParameterization

    Raises
    ------
    PlanningInputError
        Bad shapes or limits.
    NoParameterizationError
        TOPP-RA found no parameterisation.
    """
    grid = np.asarray(gridpoints, dtype=np.float64)
    if grid.ndim != 1 or grid.size < 2 or np.any(np.diff(grid) <= 0.0):
        raise PlanningInputError("gridpoints: expected an increasing array of at least 2 values")
    G, n = grid.size, int(path.dof)
    limits = []
    for name, value in (("velocity_max", velocity_max), ("acceleration_max", acceleration_max)):
        array = np.broadcast_to(np.asarray(value, dtype=np.float64), (G, n))
        if not np.all(np.isfinite(array) & (array > 0.0)):
            raise PlanningInputError(f"{name}: expected positive finite limits")
        limits.append(np.ascontiguousarray(array))
    constraint = _PathLimits(
        limits[0],
        limits[1],
        _per_point("tcp_rate", tcp_rate, G, 0.0),
        _per_point("tcp_rate_derivative", tcp_rate_derivative, G, 0.0),
        _per_point("tcp_speed_max", tcp_speed_max, G, math.inf),
        _per_point("tcp_acceleration_max", tcp_acceleration_max, G, math.inf),
    )
    instance = TOPPRA([constraint], path, gridpoints=grid, solver_wrapper="seidel")
    _, speed, _ = instance.compute_parameterization(0.0, 0.0)
    if speed is None or not np.all(np.isfinite(speed)):
        raise NoParameterizationError(
            f"TOPP-RA found no time parameterisation ({instance.problem_data.return_code})"
        )
    speed = np.maximum(np.asarray(speed, dtype=np.float64), 0.0)
    pair = speed[:-1] + speed[1:]
    steps = np.where(pair > 0.0, 2.0 * np.diff(grid) / np.where(pair > 0.0, pair, 1.0), np.inf)
    times = np.concatenate([[0.0], np.cumsum(steps)])
    return PathParameterization(path, grid, speed, times)


# --- motion pieces -------------------------------------------------------------------------


@dataclass(frozen=True, eq=False)
class _JointPiece:
    """A rest-to-rest joint move (the rest-to-rest timing's synchronised trapezoid)."""

    segment: int
    move: JointMove
    duration: float

    def sample(self, t: FloatArray) -> tuple[FloatArray, FloatArray, npt.NDArray[np.int64]]:
        stretch = self.move.duration / self.duration if self.duration > 0.0 else 1.0
        samples = self.move.sample(np.clip(t, 0.0, self.duration) * stretch)
        return samples.position, samples.velocity * stretch, np.full(t.shape, self.segment)


@dataclass(frozen=True, eq=False)
class _LinearPiece:
    """A rest-to-rest linear move: the trapezoid in TCP travel mapped onto the IK samples."""

    segment: int
    profile: RestToRestProfile
    along: CubicSpline
    duration: float
    """At least the profile's; longer where the external axes' own move is (stretched in time)."""

    def sample(self, t: FloatArray) -> tuple[FloatArray, FloatArray, npt.NDArray[np.int64]]:
        stretch = self.profile.duration / self.duration if self.duration > 0.0 else 1.0
        profile = self.profile.sample(np.clip(t, 0.0, self.duration) * stretch)
        travel = np.clip(profile.position, 0.0, abs(self.profile.distance))
        q = self.along(travel)
        velocity = self.along(travel, 1) * (profile.velocity * stretch)[:, None]
        return q, velocity, np.full(t.shape, self.segment)


@dataclass(frozen=True, eq=False)
class _BlendedPiece:
    """A block passing its blended waypoints, timed by TOPP-RA."""

    segments: npt.NDArray[np.int64]
    boundaries: FloatArray
    """Path parameter where each of ``segments`` after the first begins, shape (K - 1,)."""
    timing: PathParameterization

    @property
    def duration(self) -> float:
        return self.timing.duration

    def sample(self, t: FloatArray) -> tuple[FloatArray, FloatArray, npt.NDArray[np.int64]]:
        s, q, qdot = self.timing.evaluate(t)
        return q, qdot, self.segments[np.searchsorted(self.boundaries, s, side="right")]


@dataclass(frozen=True, eq=False)
class _RestPiece:
    """Standing still (a segment that moves no joint)."""

    segment: int
    q: FloatArray
    duration: float = 0.0

    def sample(self, t: FloatArray) -> tuple[FloatArray, FloatArray, npt.NDArray[np.int64]]:
        q = np.broadcast_to(self.q, (t.shape[0], self.q.shape[0])).copy()
        return q, np.zeros_like(q), np.full(t.shape, self.segment)


@dataclass(frozen=True, eq=False)
class BlendedCycleTime:
    """Blended timing of a path (module docstring), SI units.

    Attributes
    ----------
    segment_durations : array, shape (W - 1,)
        s; a blended segment runs from the middle of the blend at its start to
        the middle of the blend at its end. NaN where the path cannot be timed.
    total : float
        s; NaN if any segment cannot be timed.
    rest_to_rest_durations : array, shape (W - 1,)
        The rest-to-rest timing of the same path (:func:`path_cycle_time`), the upper bound.
    rest_to_rest_total : float
        s.
    blended : array of bool, shape (W,)
        The arm passes the waypoint without stopping.
    pass_distance : array, shape (W,)
        Closest TCP distance to a blended waypoint's TCP, m (0 where the arm stops there).
    pieces : tuple of MotionPiece
        The timed motion in order, for :func:`sample_motion`.
    linear_acceleration : float
        TCP path acceleration limit of linear moves, m/s^2.
    note : str
    """

    segment_durations: FloatArray
    total: float
    rest_to_rest_durations: FloatArray
    rest_to_rest_total: float
    blended: BoolArray
    pass_distance: FloatArray
    pieces: tuple[MotionPiece, ...]
    linear_acceleration: float
    note: str = BLENDED_NOTE


@dataclass(frozen=True, eq=False)
class MotionSamples:
    """The timed motion sampled at a fixed period (SI units).

    Attributes
    ----------
    t : array, shape (T,)
        s: ``0, period, 2 period, ...`` and the end time as the last row.
    q : array, shape (T, n)
        rad or m.
    qdot : array, shape (T, n)
        rad/s or m/s.
    segment : array of int64, shape (T,)
        Segment the arm is on (``k``: from waypoint ``k`` to ``k + 1``).
    """

    t: FloatArray
    q: FloatArray
    qdot: FloatArray
    segment: npt.NDArray[np.int64]


# --- geometry of a blended block ------------------------------------------------------------


def _speed_factor(sampled: SampledPath, k: int) -> float:
    """``p / 100`` of a joint move into waypoint ``k + 1``; 1 for a linear move."""
    if sampled.segments[k].motion == "linear":
        return 1.0
    percent = float(sampled.path.speed_percent[k + 1])
    if not math.isfinite(percent) or not 0.0 < percent <= 100.0:
        raise PlanningInputError(
            f"speed_percent of waypoint {k + 1}: expected a value above 0 and at most 100, "
            f"got {percent!r}"
        )
    return percent / 100.0


def _segment_curve(segment: SegmentSamples) -> CubicSpline | None:
    """``q(fraction)`` of a linear move through its IK samples; None for a joint move (a line)."""
    if segment.motion == "joint":
        return None
    return CubicSpline(segment.fraction, segment.q, axis=0)


def _evaluate(
    segment: SegmentSamples, curve: CubicSpline | None, f: FloatArray, order: int = 0
) -> FloatArray:
    """Joint values (order 0) or ``dq/dfraction`` (order 1) of a segment at fractions ``f``."""
    if curve is None:
        delta = segment.q[-1] - segment.q[0]
        if order == 1:
            return np.broadcast_to(delta, (f.shape[0], delta.shape[0])).copy()
        return segment.q[0] + f[:, None] * delta
    return np.asarray(curve(f, order))


def _cut_fraction(segment: SegmentSamples, radius: float, *, at_end: bool) -> float:
    """Fraction where the TCP crosses the blend sphere about the segment's end (or start).

    Sample TCP distances to the end point, the crossing interpolated linearly
    between the two samples around it; never past the segment's middle.
    """
    p = segment.T_world_tool[:, :3, 3]
    f = segment.fraction
    if at_end:
        distance = np.linalg.norm(p - p[-1], axis=1)[::-1]
        position = 1.0 - f[::-1]
    else:
        distance = np.linalg.norm(p - p[0], axis=1)
        position = f
    outside = np.flatnonzero(distance >= radius)
    if outside.size == 0:
        return 0.5
    i = int(outside[0])
    if i == 0:
        reach = 0.0
    else:
        d0, d1 = distance[i - 1], distance[i]
        weight = (radius - d0) / (d1 - d0) if d1 > d0 else 1.0
        reach = float(position[i - 1] + weight * (position[i] - position[i - 1]))
    reach = min(reach, 0.5)
    return 1.0 - reach if at_end else reach


def _unit(v: FloatArray) -> FloatArray:
    norm = float(np.linalg.norm(v))
    return v / norm if norm > 0.0 else v


@dataclass(frozen=True)
class _BlockGeometry:
    points: FloatArray  # (P, n)
    owner: npt.NDArray[np.int64]  # (P,) segment index
    middles: list[int]  # point index of each blend's middle
    blend_points: list[npt.NDArray[np.int64]]  # point indices of each blend curve


def _block_geometry(sampled: SampledPath, first: int, last: int) -> _BlockGeometry:
    """Joint-space points of segments ``first..last`` with rounded corners (module docstring)."""
    path = sampled.path
    segments = sampled.segments
    curves = {k: _segment_curve(segments[k]) for k in range(first, last + 1)}
    lo = {first: 0.0}
    hi = {last: 1.0}
    for w in range(first + 1, last + 1):
        radius = float(path.blend_radius[w])
        hi[w - 1] = _cut_fraction(segments[w - 1], radius, at_end=True)
        lo[w] = _cut_fraction(segments[w], radius, at_end=False)
    points: list[FloatArray] = []
    owner: list[npt.NDArray[np.int64]] = []
    middles: list[int] = []
    blend_points: list[npt.NDArray[np.int64]] = []
    count = 0
    for k in range(first, last + 1):
        segment = segments[k]
        inside = segment.fraction[(segment.fraction > lo[k]) & (segment.fraction < hi[k])]
        f = np.concatenate([[lo[k]], inside, [hi[k]]])
        q = _evaluate(segment, curves[k], f)
        if curves[k] is not None:  # the IK samples themselves where they are kept
            keep = np.isin(segment.fraction, inside)
            q[1:-1] = segment.q[keep]
        if k > first:
            q = q[1:]  # the blend curve ended on this point
        points.append(q)
        owner.append(np.full(q.shape[0], k, dtype=np.int64))
        count += q.shape[0]
        if k == last:
            break
        start = _evaluate(segment, curves[k], np.array([hi[k]]))[0]
        end = _evaluate(segments[k + 1], curves[k + 1], np.array([lo[k + 1]]))[0]
        t_in = _unit(_evaluate(segment, curves[k], np.array([hi[k]]), 1)[0])
        t_out = _unit(_evaluate(segments[k + 1], curves[k + 1], np.array([lo[k + 1]]), 1)[0])
        corner = sampled.waypoint_q[k + 1]
        c1 = start + (2.0 / 3.0) * float(np.linalg.norm(corner - start)) * t_in
        c2 = end - (2.0 / 3.0) * float(np.linalg.norm(end - corner)) * t_out
        length = float(np.linalg.norm(corner - start) + np.linalg.norm(end - corner))
        steps = max(_BLEND_MIN_POINTS, 2 * math.ceil(length / (2.0 * sampled.resolution_rad)))
        u = np.linspace(0.0, 1.0, steps + 1)[1:, None]
        curve = (
            (1 - u) ** 3 * start + 3 * (1 - u) ** 2 * u * c1 + 3 * (1 - u) * u * u * c2 + u**3 * end
        )
        middle = steps // 2 - 1
        points.append(curve)
        owner.append(np.where(np.arange(steps) < middle, k, k + 1).astype(np.int64))
        middles.append(count + middle)
        blend_points.append(count - 1 + np.arange(steps + 1))
        count += steps
    return _BlockGeometry(np.concatenate(points), np.concatenate(owner), middles, blend_points)


def _blended_block(
    scene: Scene,
    sampled: SampledPath,
    first: int,
    last: int,
    linear_acceleration: float,
) -> tuple[_BlendedPiece, FloatArray, FloatArray]:
    """TOPP-RA timing of one block; the piece, its segment durations and pass distances."""
    robot = scene.robot
    geometry = _block_geometry(sampled, first, last)
    step = np.linalg.norm(np.diff(geometry.points, axis=0), axis=1)
    kept = np.concatenate([[True], step > 1e-12])
    index_map = np.cumsum(kept) - 1
    points = geometry.points[kept]
    owner = geometry.owner[kept]
    s = np.concatenate([[0.0], np.cumsum(step[step > 1e-12])])
    path = toppra.SplineInterpolator(s, points)
    k_factor = np.array([_speed_factor(sampled, k) for k in range(first, last + 1)])[owner - first]
    middles = index_map[np.asarray(geometry.middles, dtype=np.int64)]
    # the middle of a blend belongs to both segments: the tighter of their limits holds there,
    # so no stage between grid points runs under the other segment's limits
    k_factor[middles] = np.minimum(k_factor[middles - 1], k_factor[middles])
    tcp = fk_tool(robot, points, scene.T_flange_tool)[:, :3, 3]
    sigma = np.concatenate([[0.0], np.cumsum(np.linalg.norm(np.diff(tcp, axis=0), axis=1))])
    rate = np.gradient(sigma, s)
    rate_derivative = np.gradient(rate, s)
    linear = np.array(
        [
            sampled.segments[k].motion == "linear" and not sampled.segments[k].travel_is_angle
            for k in range(first, last + 1)
        ]
    )[owner - first]
    speed_cap = np.where(linear, sampled.path.linear_speed[owner + 1], np.inf)
    acceleration_cap = np.where(linear, linear_acceleration, np.inf)
    linear[middles] |= linear[middles - 1]
    for cap in (speed_cap, acceleration_cap):
        cap[middles] = np.minimum(cap[middles - 1], cap[middles])
    timing = time_optimal_parameterization(
        path,
        s,
        robot.velocity_max * k_factor[:, None],
        robot.acceleration_max * (k_factor**2)[:, None],
        tcp_rate=np.where(linear, rate, 0.0),
        tcp_rate_derivative=np.where(linear, rate_derivative, 0.0),
        tcp_speed_max=speed_cap,
        tcp_acceleration_max=acceleration_cap,
    )
    boundary_times = np.concatenate([[0.0], timing.times[middles], [timing.duration]])
    W = len(sampled.waypoint_names)
    passes = np.zeros(W)
    waypoint_tcp = sampled.path.T_world_tool[:, :3, 3]
    # the external axes stand still inside a block (_stops): the base where they stand
    T_world_base = scene.external.T_world_base(
        sampled.segments[first].external[:1], scene.T_world_base
    )[0]
    for j, blend in enumerate(geometry.blend_points):
        world = tcp[index_map[blend]] @ T_world_base[:3, :3].T + T_world_base[:3, 3]
        w = first + 1 + j
        passes[w] = float(np.min(np.linalg.norm(world - waypoint_tcp[w], axis=1)))
    piece = _BlendedPiece(
        segments=np.arange(first, last + 1, dtype=np.int64),
        boundaries=s[middles],
        timing=timing,
    )
    return piece, np.diff(boundary_times), passes


def _rest_piece(robot: Robot, sampled: SampledPath, timing: SegmentTiming) -> MotionPiece:
    """Return the rest-to-rest motion of one segment as :func:`path_cycle_time` timed it."""
    k = timing.index
    segment = sampled.segments[k]
    if timing.duration == 0.0 or segment.length <= 0.0:
        return _RestPiece(k, segment.q[-1].copy(), timing.duration)  # the axes may move
    if segment.motion == "joint":
        factor = _speed_factor(sampled, k)
        move = joint_move(
            segment.q[0],
            segment.q[-1],
            robot.velocity_max * factor,
            robot.acceleration_max * factor * factor,
        )
        return _JointPiece(k, move, timing.duration)
    profile = trapezoidal_profile(segment.length, timing.speed_used, timing.acceleration_used)
    along = CubicSpline(segment.travel, segment.q, axis=0)
    return _LinearPiece(k, profile, along, max(timing.duration, profile.duration))


def _moves(segment: SegmentSamples) -> bool:
    """Tell whether the segment moves a joint by more than :data:`_STILL`."""
    return bool(
        float(np.max(np.abs(segment.q[-1] - segment.q[0]))) > _STILL and segment.length > _STILL
    )


def _reverses(before: SegmentSamples, after: SegmentSamples) -> bool:
    """Tell whether the joint path turns straight back at the waypoint (tangents opposite within 1e-6)."""
    t_in = _unit(_evaluate(before, _segment_curve(before), np.array([1.0]), 1)[0])
    t_out = _unit(_evaluate(after, _segment_curve(after), np.array([0.0]), 1)[0])
    return bool(float(t_in @ t_out) < -1.0 + 1e-6)


def _stops(
    sampled: SampledPath, rest: FloatArray, external: ExternalAxisMotion | None
) -> BoolArray:
    """Waypoints where the motion is at rest (module docstring)."""
    W = len(sampled.waypoint_names)
    stop = np.ones(W, dtype=bool)
    axes_move = np.zeros(W - 1, dtype=bool)
    if external is not None:
        axes_move = np.any(np.diff(external.values, axis=0) != 0.0, axis=1)
    for w in range(1, W - 1):
        before, after = sampled.segments[w - 1], sampled.segments[w]
        stop[w] = not (
            sampled.path.blend_radius[w] > 0.0
            and np.isfinite(rest[w - 1])
            and np.isfinite(rest[w])
            and not axes_move[w - 1]
            and not axes_move[w]
            and _moves(before)
            and _moves(after)
            and not _reverses(before, after)
        )
    return stop


def blended_cycle_time(
    scene: Scene,
    sampled: SampledPath,
    *,
    linear_acceleration_m_s2: float = DEFAULT_LINEAR_ACCELERATION_M_S2,
) -> BlendedCycleTime:
    """Blended (continuous) timing of a sampled path, per segment and in total (module docstring).

    Parameters
    ----------
    scene : Scene
        Supplies the robot, its limits and the tool.
    sampled : SampledPath
        From :func:`posebridge.planning.path_sampling.sample_path` on ``scene``.
    linear_acceleration_m_s2 : float, keyword-only
        TCP path acceleration limit of linear moves, m/s^2 (as in the rest-to-rest timing).

    Returns
    -------
    BlendedCycleTime
    """
    check_positive("linear_acceleration_m_s2", linear_acceleration_m_s2)
    robot = scene.robot
    external = external_axis_motion(scene, sampled.path)
    rest_timing = path_cycle_time(
        robot, sampled, linear_acceleration_m_s2=linear_acceleration_m_s2, external=external
    )
    rest = np.array([t.duration for t in rest_timing.segments], dtype=np.float64)
    W = len(sampled.waypoint_names)
    stop = _stops(sampled, rest, external)
    durations = rest.copy()
    passes = np.zeros(W)
    blended = ~stop
    pieces: list[MotionPiece] = []
    stop_index = np.flatnonzero(stop)
    for a, b in itertools.pairwise(stop_index):
        first, last = int(a), int(b) - 1
        if last > first:
            try:
                piece, block, block_passes = _blended_block(
                    scene, sampled, first, last, float(linear_acceleration_m_s2)
                )
            except NoParameterizationError:
                piece = None
            if piece is not None and piece.duration < float(np.sum(rest[first : last + 1])):
                pieces.append(piece)
                durations[first : last + 1] = block
                passes[first + 1 : last + 1] = block_passes[first + 1 : last + 1]
                continue
            blended[first + 1 : last + 1] = False
        for timing in rest_timing.segments[first : last + 1]:
            if math.isfinite(timing.duration):
                pieces.append(_rest_piece(robot, sampled, timing))
    total = float(np.sum(durations)) if durations.size else 0.0
    return BlendedCycleTime(
        segment_durations=durations,
        total=total,
        rest_to_rest_durations=rest,
        rest_to_rest_total=rest_timing.total,
        blended=blended,
        pass_distance=passes,
        pieces=tuple(pieces),
        linear_acceleration=float(linear_acceleration_m_s2),
    )


def sample_motion(timing: BlendedCycleTime, period_s: float) -> MotionSamples:
    """Return the timed motion at a fixed period: time, joint values, joint velocities, segment.

    Rows at ``t = 0, period, 2 period, ...`` up to the end, plus the end time
    itself when it is not a multiple of the period (the arm at rest at the last
    waypoint).

    Parameters
    ----------
    timing : BlendedCycleTime
    period_s : float
        Sampling period, s.

    Returns
    -------
    MotionSamples

    Raises
    ------
    PlanningInputError
        The path cannot be timed, the period is not positive, or it gives more
        than :data:`MAX_MOTION_SAMPLES` rows.
    """
    check_positive("period_s", period_s)
    if not math.isfinite(timing.total):
        untimed = np.flatnonzero(~np.isfinite(timing.segment_durations)).tolist()
        raise PlanningInputError(
            f"the path cannot be timed: segments {untimed} have unreached configurations"
        )
    if not timing.pieces:
        raise PlanningInputError("the path has no segment to sample")
    rows = math.floor(timing.total / period_s + 1e-9) + 1
    if rows + 1 > MAX_MOTION_SAMPLES:
        raise PlanningInputError(
            f"period_s: {period_s!r} s gives {rows + 1} rows for {timing.total:.3f} s, "
            f"more than {MAX_MOTION_SAMPLES}; use a longer period"
        )
    t: FloatArray = np.arange(rows, dtype=np.float64) * float(period_s)
    if timing.total - t[-1] > 1e-9:
        t = np.append(t, timing.total)
    starts = np.concatenate([[0.0], np.cumsum([piece.duration for piece in timing.pieces])])
    which = np.clip(np.searchsorted(starts, t, side="right") - 1, 0, len(timing.pieces) - 1)
    n = timing.pieces[0].sample(np.zeros(1))[0].shape[1]
    q = np.empty((t.shape[0], n))
    qdot = np.empty((t.shape[0], n))
    segment = np.empty(t.shape[0], dtype=np.int64)
    for p in np.unique(which):
        rows_p = which == p
        q[rows_p], qdot[rows_p], segment[rows_p] = timing.pieces[p].sample(t[rows_p] - starts[p])
    return MotionSamples(t=t, q=q, qdot=qdot, segment=segment)

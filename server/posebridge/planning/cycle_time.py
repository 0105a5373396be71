"""Cycle time of a path: the duration of every segment and their sum.

Every segment is timed rest to rest with the profiles of
:mod:`posebridge.planning.time_scaling`:

* **Joint move**: a synchronised move (:func:`~posebridge.planning.time_scaling.joint_move`)
  between the segment's end configurations with the joints' velocity and
  acceleration limits (and jerk limits when given) scaled by the
  waypoint's speed percentage ``p``. Scaling by ``k = p / 100`` (velocity
  ``k``, acceleration ``k^2``, jerk ``k^3``) stretches the 100 % move by
  exactly ``1 / k``, so the duration is the 100 % duration divided by ``k``
  (this also covers ``p`` below 1 %, which the cell file allows).
* **Linear move**: a trapezoidal (or, with a jerk limit, double-S) profile in
  TCP path length (:func:`~posebridge.planning.time_scaling.linear_move_profile`)
  at the requested Cartesian speed, capped by the joint velocity limits
  along the sampled path (:func:`~posebridge.planning.time_scaling.path_speed_limit`
  on ``dq/ds``, the chain rule ``dq/dt = dq/ds * ds/dt``; Lynch & Park,
  *Modern Robotics*, sec. 9.4). The path acceleration is the given Cartesian
  acceleration, capped in the same way by the joint acceleration limits
  ``a_i / |dq_i/ds|``; this cap leaves out the curvature term
  ``d2q/ds2 (ds/dt)^2`` of the joint acceleration, so it is an
  approximation (exact on straight joint-space lines). A pure
  reorientation (no TCP travel) is timed in its rotation angle at the
  speed and acceleration the joint limits allow.

**Blends are not applied**: every segment starts and ends at rest, so the
blend radius of a waypoint does not shorten the time. The result is an
upper bound of what a controller that blends would need (conservative),
typically by a few tenths of a second per blended waypoint.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np
import numpy.typing as npt

from posebridge.cell.scene import ResolvedPath, Scene
from posebridge.planning.errors import PlanningInputError, check_positive
from posebridge.planning.path_sampling import SampledPath, SegmentSamples
from posebridge.planning.time_scaling import joint_move, linear_move_profile, path_speed_limit
from posebridge.robot.model import Robot
from posebridge.units import FloatArray

__all__ = [
    "BLEND_NOTE",
    "DEFAULT_LINEAR_ACCELERATION_M_S2",
    "CycleTime",
    "ExternalAxisMotion",
    "SegmentTiming",
    "external_axes_duration",
    "external_axis_motion",
    "joint_move_duration",
    "joint_move_durations",
    "linear_move_timing",
    "path_cycle_time",
    "path_derivative",
]

DEFAULT_LINEAR_ACCELERATION_M_S2 = 2.0
"""Cartesian path acceleration of linear moves when none is given, m/s^2 (common practice, no source)."""

BLEND_NOTE = (
    "blend radii are not applied: every segment is timed rest to rest, "
    "so the cycle time is an upper bound (conservative)"
)


@dataclass(frozen=True)
class SegmentTiming:
    """Timing of one segment (SI units).

    Attributes
    ----------
    index : int
    motion : str
        ``"joint"`` or ``"linear"``.
    duration : float
        s; NaN when the segment cannot be timed (an end or a sample unreached).
    speed_percent : float
        Joint moves: the waypoint's speed percentage; NaN for linear moves.
    speed_requested : float
        Linear moves: requested TCP speed, m/s (NaN for joint moves and pure
        reorientations).
    speed_cap : float
        Linear moves: highest path speed the joint velocity limits allow
        (m/s, rad/s for a pure reorientation); ``inf`` if no joint moves; NaN
        for joint moves.
    speed_used : float
        Linear moves: peak path speed of the profile, m/s (rad/s).
    speed_capped : bool
        The joint velocity limits lowered the requested speed.
    limiting_joint : int
        Joint that sets ``speed_cap`` (-1: none).
    limiting_fraction : float
        Position along the segment (0..1) where it does (NaN: none).
    acceleration_used : float
        Linear moves: path acceleration of the profile, m/s^2 (rad/s^2).
    acceleration_capped : bool
        The joint acceleration limits lowered the path acceleration.
    """

    index: int
    motion: str
    duration: float
    speed_percent: float = math.nan
    speed_requested: float = math.nan
    speed_cap: float = math.nan
    speed_used: float = math.nan
    speed_capped: bool = False
    limiting_joint: int = -1
    limiting_fraction: float = math.nan
    acceleration_used: float = math.nan
    acceleration_capped: bool = False


@dataclass(frozen=True)
class CycleTime:
    """Segment timings and their sum.

    Attributes
    ----------
    segments : tuple of SegmentTiming
    total : float
        s; NaN if any segment cannot be timed.
    linear_acceleration : float
        Cartesian path acceleration used for linear moves, m/s^2.
    jerk_limited : bool
        Double-S profiles were used.
    note : str
        How blends are treated (:data:`BLEND_NOTE`).
    """

    segments: tuple[SegmentTiming, ...]
    total: float
    linear_acceleration: float
    jerk_limited: bool
    note: str = BLEND_NOTE


def _speed_factor(speed_percent: float) -> float:
    percent = float(speed_percent)
    if not math.isfinite(percent) or not 0.0 < percent <= 100.0:
        raise PlanningInputError(
            f"speed_percent: expected a value above 0 and at most 100, got {speed_percent!r}"
        )
    return percent / 100.0


def joint_move_duration(
    robot: Robot,
    q_start: npt.ArrayLike,
    q_end: npt.ArrayLike,
    speed_percent: float,
    *,
    jerk_max: npt.ArrayLike | None = None,
) -> float:
    """Duration of a synchronised joint move at a speed percentage, s (module docstring).

    Parameters
    ----------
    robot : Robot
        Supplies the velocity and acceleration limits.
    q_start, q_end : array-like, shape (n,)
        rad or m.
    speed_percent : float
        Above 0, at most 100.
    jerk_max : array-like, shape (n,), optional
        Joint jerk limits (rad/s^3, m/s^3) for double-S profiles.

    Returns
    -------
    float
    """
    k = _speed_factor(speed_percent)
    move = joint_move(q_start, q_end, robot.velocity_max, robot.acceleration_max, jerk_max)
    return move.duration / k


def joint_move_durations(
    q_start: npt.ArrayLike,
    q_end: npt.ArrayLike,
    velocity_max: npt.ArrayLike,
    acceleration_max: npt.ArrayLike,
    speed_percent: npt.ArrayLike,
) -> FloatArray:
    """Durations of many synchronised trapezoidal joint moves, vectorised.

    The method of :func:`~posebridge.planning.time_scaling.joint_move` for a
    batch: with ``d = q_end - q_start``, ``D = max_i |d_i|`` and
    ``c = |d| / D``, the path limits are ``V = 1 / max_i(c_i / v_i)`` and
    ``A = 1 / max_i(c_i / a_i)``; the trapezoid lasts ``D / V + V / A`` if
    ``D >= V^2 / A``, else ``2 sqrt(D / A)`` (Lynch & Park, *Modern
    Robotics*, sec. 9.2.2.2); the result is divided by ``k = p / 100``.

    Parameters
    ----------
    q_start, q_end : array-like, shape (N, n)
    velocity_max, acceleration_max : array-like, shape (n,)
        Positive joint limits.
    speed_percent : array-like, shape (N,) or scalar
        Above 0, at most 100.

    Returns
    -------
    duration : array, shape (N,)
        s; NaN where an end is NaN.
    """
    delta = np.asarray(q_end, dtype=np.float64) - np.asarray(q_start, dtype=np.float64)
    v = np.asarray(velocity_max, dtype=np.float64)
    a = np.asarray(acceleration_max, dtype=np.float64)
    k = np.broadcast_to(np.asarray(speed_percent, dtype=np.float64), delta.shape[:1]) / 100.0
    if np.any(~(k > 0.0) | (k > 1.0)):
        raise PlanningInputError("speed_percent: expected values above 0 and at most 100")
    span = np.max(np.abs(delta), axis=1)
    moving = span > 0.0
    share = np.abs(delta) / np.where(moving, span, 1.0)[:, None]
    V = 1.0 / np.where(moving, np.max(share / v, axis=1), 1.0)
    A = 1.0 / np.where(moving, np.max(share / a, axis=1), 1.0)
    cruise = span >= V * V / A
    duration = np.where(cruise, span / V + V / A, 2.0 * np.sqrt(np.where(moving, span, 0.0) / A))
    return np.where(moving, duration, 0.0) / k


def path_derivative(segment: SegmentSamples) -> FloatArray:
    """``dq/ds`` along a sampled segment by central differences, shape (S, n).

    ``numpy.gradient`` over the along-path coordinate (second-order central
    differences inside, first-order at the ends); rad/m (m/m), or per rad
    for a pure reorientation.
    """
    if segment.q.shape[0] < 2 or segment.length <= 0.0:
        return np.zeros_like(segment.q)
    return np.gradient(segment.q, segment.travel, axis=0)


def linear_move_timing(
    robot: Robot,
    segment: SegmentSamples,
    speed_m_s: float,
    *,
    acceleration_m_s2: float = DEFAULT_LINEAR_ACCELERATION_M_S2,
    jerk_m_s3: float | None = None,
) -> SegmentTiming:
    """Time a sampled linear move, capped by the joint limits (module docstring).

    Parameters
    ----------
    robot : Robot
    segment : SegmentSamples
        A linear segment from :func:`posebridge.planning.path_sampling.sample_path`.
    speed_m_s : float
        Requested TCP speed, m/s (ignored for a pure reorientation).
    acceleration_m_s2 : float, keyword-only
        Cartesian path acceleration, m/s^2.
    jerk_m_s3 : float, optional, keyword-only
        Cartesian path jerk for a double-S profile, m/s^3.

    Returns
    -------
    SegmentTiming
    """
    if not segment.sampled or not np.all(segment.reachable):
        return SegmentTiming(segment.index, "linear", math.nan, speed_requested=speed_m_s)
    if segment.length <= 0.0:
        return SegmentTiming(segment.index, "linear", 0.0, speed_requested=speed_m_s)
    dq_ds = path_derivative(segment)
    limit = path_speed_limit(dq_ds, robot.velocity_max)
    magnitude = np.abs(dq_ds)
    ratio = np.full(magnitude.shape, np.inf)
    np.divide(robot.acceleration_max, magnitude, out=ratio, where=magnitude > 0.0)
    acceleration_cap = float(np.min(ratio))
    rotation = segment.travel_is_angle
    requested = math.inf if rotation else float(speed_m_s)
    speed = min(requested, limit.speed_max)
    accel_request = math.inf if rotation else float(acceleration_m_s2)
    acceleration = min(accel_request, acceleration_cap)
    if not (math.isfinite(speed) and math.isfinite(acceleration)):
        raise PlanningInputError(
            f"segment {segment.index}: a pure reorientation with no moving joint cannot be timed"
        )
    profile = linear_move_profile(segment.length, speed, acceleration, jerk_m_s3)
    capped = limit.speed_max < requested
    return SegmentTiming(
        index=segment.index,
        motion="linear",
        duration=profile.duration,
        speed_requested=math.nan if rotation else float(speed_m_s),
        speed_cap=limit.speed_max,
        speed_used=profile.velocity_peak,
        speed_capped=bool(capped),
        limiting_joint=int(limit.limiting_joint_per_sample[limit.limiting_sample]),
        limiting_fraction=float(segment.fraction[limit.limiting_sample]),
        acceleration_used=acceleration,
        acceleration_capped=bool(acceleration_cap < accel_request),
    )


@dataclass(frozen=True, eq=False)
class ExternalAxisMotion:
    """External axes along a path: values per waypoint and limits (SI).

    Attributes
    ----------
    values : array, shape (W, m)
        m or rad per waypoint.
    velocity_max, acceleration_max : array, shape (m,)
    """

    values: FloatArray
    velocity_max: FloatArray
    acceleration_max: FloatArray


def external_axis_motion(scene: Scene, path: ResolvedPath) -> ExternalAxisMotion | None:
    """Return the path's external axis values per waypoint with the scene's axis limits.

    None for a cell without external axes (or a path without their values), which
    :func:`path_cycle_time` then times with the robot joints alone.
    """
    external = scene.external
    if external.count == 0 or path.external.shape[1] != external.count:
        return None
    return ExternalAxisMotion(path.external, external.velocity_max, external.acceleration_max)


def external_axes_duration(
    external: ExternalAxisMotion, start: int, end: int, speed_percent: float
) -> float:
    """Duration of the external axes' synchronised trapezoid from waypoint ``start`` to ``end``, s.

    The trapezoid of :func:`joint_move_durations` (Lynch & Park, *Modern Robotics*,
    sec. 9.2.2.2) over the external axes only; 0 when none moves.
    """
    if external.values.shape[1] == 0:
        return 0.0
    return float(
        joint_move_durations(
            external.values[start][None],
            external.values[end][None],
            external.velocity_max,
            external.acceleration_max,
            speed_percent,
        )[0]
    )


def path_cycle_time(
    robot: Robot,
    sampled: SampledPath,
    *,
    linear_acceleration_m_s2: float = DEFAULT_LINEAR_ACCELERATION_M_S2,
    joint_jerk_max: npt.ArrayLike | None = None,
    linear_jerk_m_s3: float | None = None,
    external: ExternalAxisMotion | None = None,
) -> CycleTime:
    """Per-segment durations and the total of a sampled path (module docstring).

    With ``external`` (a track, turntables), a joint move runs the robot joints and
    the external axes on one synchronised trapezoid over all ``n + m`` values; a
    linear move lasts at least as long as the external axes' own synchronised move
    between its ends (the line is sampled with the axes moving,
    :mod:`posebridge.planning.path_sampling`; its speed is the TCP's along the
    line in the frame it is straight in).

    Parameters
    ----------
    robot : Robot
    sampled : SampledPath
    linear_acceleration_m_s2 : float, keyword-only
        Cartesian path acceleration of linear moves, m/s^2.
    joint_jerk_max : array-like, shape (n,), optional, keyword-only
        Joint jerk limits for double-S joint moves (the robot descriptions
        carry none).
    linear_jerk_m_s3 : float, optional, keyword-only
        Path jerk for double-S linear moves, m/s^3.
    external : ExternalAxisMotion, optional, keyword-only
        External axis values per waypoint and their limits.

    Returns
    -------
    CycleTime
    """
    check_positive("linear_acceleration_m_s2", linear_acceleration_m_s2)
    path = sampled.path
    timings: list[SegmentTiming] = []
    for segment in sampled.segments:
        w = segment.index + 1
        if segment.motion == "linear":
            timing = linear_move_timing(
                robot,
                segment,
                float(path.linear_speed[w]),
                acceleration_m_s2=linear_acceleration_m_s2,
                jerk_m_s3=linear_jerk_m_s3,
            )
            if external is not None:
                own = external_axes_duration(external, w - 1, w, 100.0)
                timing = replace(timing, duration=max(timing.duration, own))
            timings.append(timing)
            continue
        percent = float(path.speed_percent[w])
        if not segment.sampled:
            timings.append(SegmentTiming(segment.index, "joint", math.nan, speed_percent=percent))
            continue
        if external is None:
            duration = joint_move_duration(
                robot, segment.q[0], segment.q[-1], percent, jerk_max=joint_jerk_max
            )
        else:
            duration = float(
                joint_move_durations(
                    np.concatenate([segment.q[0], external.values[w - 1]])[None],
                    np.concatenate([segment.q[-1], external.values[w]])[None],
                    np.concatenate([robot.velocity_max, external.velocity_max]),
                    np.concatenate([robot.acceleration_max, external.acceleration_max]),
                    percent,
                )[0]
            )
        timings.append(SegmentTiming(segment.index, "joint", duration, speed_percent=percent))
    total = float(sum(t.duration for t in timings))
    return CycleTime(
        segments=tuple(timings),
        total=total,
        linear_acceleration=float(linear_acceleration_m_s2),
        jerk_limited=joint_jerk_max is not None or linear_jerk_m_s3 is not None,
    )

"""Time scaling of point-to-point motions: how fast to move along a given path.

A time scaling ``s(t)`` maps time onto a path; every function here is in SI
units (s, m or rad) and rest-to-rest (zero velocity at both ends). Before the
start and after the end of a motion its samples hold the rest state (start or
end position, zero velocity, acceleration and jerk).

- Polynomial time scalings, cubic and quintic, of the unit path ``s in [0, 1]``
  (Lynch & Park, *Modern Robotics*, 2017, sec. 9.2.2.1).
- Trapezoidal velocity profiles with velocity and acceleration limits
  (Lynch & Park, sec. 9.2.2.2), triangular when the distance is too short to
  reach the velocity limit.
- Jerk-limited "double S" (seven-segment) profiles with velocity,
  acceleration and jerk limits (Biagiotti & Melchiorri, *Trajectory Planning
  for Automatic Machines and Robots*, 2008, sec. 3.4), including the reduced
  cases where the acceleration or the velocity limit is not reached.
- Synchronised joint moves: all joints start and stop together on the
  straight line between two joint vectors (:func:`joint_move`).
- Linear moves: a profile in path length with Cartesian limits
  (:func:`linear_move_profile`) and the path speed that joint velocity
  limits allow along a sampled path (:func:`path_speed_limit`).

A trapezoidal profile is the double-S profile with infinite jerk (zero-length
jerk segments), so both share one representation, :class:`RestToRestProfile`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import NamedTuple

import numpy as np
import numpy.typing as npt

from posebridge.errors import InputError, check_positive
from posebridge.units import FloatArray

__all__ = [
    "JointMove",
    "PathSpeedLimit",
    "ProfileSamples",
    "RestToRestProfile",
    "TimeScalingInputError",
    "cubic_time_scaling",
    "double_s_profile",
    "joint_move",
    "linear_move_profile",
    "path_speed_limit",
    "quintic_time_scaling",
    "trapezoidal_profile",
]


IntArray = npt.NDArray[np.intp]


class TimeScalingInputError(InputError):
    """A distance, limit, duration or sample array that is not usable for time scaling."""


class ProfileSamples(NamedTuple):
    """Position, velocity and acceleration sampled at given times.

    Each field has the shape of the sample times ``t`` for scalar profiles,
    ``(T, n)`` for joint moves. Units: m or rad, per s, per s^2.
    """

    position: FloatArray
    velocity: FloatArray
    acceleration: FloatArray


def _check_positive(name: str, value: float, *, allow_inf: bool = False) -> float:
    return check_positive(name, value, TimeScalingInputError, allow_inf=allow_inf)


def _check_finite(name: str, value: float) -> float:
    number = float(value)
    if not math.isfinite(number):
        raise TimeScalingInputError(f"{name}: expected a finite number, got {value!r}")
    return number


def _check_times(t: npt.ArrayLike) -> FloatArray:
    times = np.asarray(t, dtype=np.float64)
    if not np.all(np.isfinite(times)):
        raise TimeScalingInputError("t: sample times contain NaN or infinite values")
    return times


def _speed_factor(speed_percent: float) -> float:
    percent = float(speed_percent)
    if not 1.0 <= percent <= 100.0:
        raise TimeScalingInputError(
            f"speed_percent: expected a value from 1 to 100, got {speed_percent!r}"
        )
    return percent / 100.0


def cubic_time_scaling(t: npt.ArrayLike, duration: float) -> ProfileSamples:
    """Third-order polynomial time scaling of the unit path, rest to rest.

    ``s(t) = 3 (t/T)^2 - 2 (t/T)^3`` with ``s(0) = 0``, ``s(T) = 1`` and zero
    velocity at both ends (Lynch & Park, *Modern Robotics*, sec. 9.2.2.1).
    The acceleration jumps from 0 to ``6/T^2`` at the start and back at the end.

    Parameters
    ----------
    t : array-like, any shape
        Sample times, s.
    duration : float
        ``T``, s, positive.

    Returns
    -------
    ProfileSamples
        ``s``, ``ds/dt`` (1/s) and ``d2s/dt2`` (1/s^2), each shaped like ``t``.

    Examples
    --------
    >>> float(cubic_time_scaling(0.6, 2.0).position)
    0.216
    """
    T = _check_positive("duration", duration)
    times = _check_times(t)
    inside = (times >= 0.0) & (times <= T)
    tau = np.clip(times / T, 0.0, 1.0)
    position = tau * tau * (3.0 - 2.0 * tau)
    velocity = np.where(inside, 6.0 * tau * (1.0 - tau) / T, 0.0)
    acceleration = np.where(inside, (6.0 - 12.0 * tau) / (T * T), 0.0)
    return ProfileSamples(position, velocity, acceleration)


def quintic_time_scaling(t: npt.ArrayLike, duration: float) -> ProfileSamples:
    """Fifth-order polynomial time scaling of the unit path, rest to rest.

    ``s(t) = 10 (t/T)^3 - 15 (t/T)^4 + 6 (t/T)^5`` with ``s(0) = 0``,
    ``s(T) = 1`` and zero velocity and acceleration at both ends (Lynch & Park,
    *Modern Robotics*, sec. 9.2.2.1).

    Parameters
    ----------
    t : array-like, any shape
        Sample times, s.
    duration : float
        ``T``, s, positive.

    Returns
    -------
    ProfileSamples
        ``s``, ``ds/dt`` (1/s) and ``d2s/dt2`` (1/s^2), each shaped like ``t``.

    Examples
    --------
    >>> round(float(quintic_time_scaling(0.6, 2.0).position), 5)
    0.16308
    """
    T = _check_positive("duration", duration)
    times = _check_times(t)
    inside = (times >= 0.0) & (times <= T)
    tau = np.clip(times / T, 0.0, 1.0)
    position = tau**3 * (10.0 + tau * (-15.0 + 6.0 * tau))
    velocity = np.where(inside, 30.0 * tau**2 * (1.0 - tau) ** 2 / T, 0.0)
    acceleration = np.where(inside, 60.0 * tau * (1.0 - tau) * (1.0 - 2.0 * tau) / (T * T), 0.0)
    return ProfileSamples(position, velocity, acceleration)


def _acceleration_phase(
    tau: FloatArray, t_jerk: float, t_accel: float, jerk: float, accel: float, speed: float
) -> tuple[FloatArray, FloatArray, FloatArray, FloatArray]:
    """Position, velocity, acceleration and jerk at ``0 <= tau <= t_accel`` from rest.

    The three segments of the acceleration phase of a double-S profile
    (Biagiotti & Melchiorri 2008, sec. 3.4, evaluation equations with
    ``q0 = v0 = 0``): jerk ``+j`` up to ``t_jerk``, constant acceleration up to
    ``t_accel - t_jerk``, jerk ``-j`` up to ``t_accel``. With ``t_jerk = 0``
    it is the constant-acceleration ramp of a trapezoidal profile.
    """
    rest = t_accel - tau
    first = tau < t_jerk
    third = tau >= t_accel - t_jerk
    position = np.where(
        first,
        jerk * tau**3 / 6.0,
        np.where(
            third,
            speed * t_accel / 2.0 - speed * rest + jerk * rest**3 / 6.0,
            accel / 6.0 * (3.0 * tau**2 - 3.0 * t_jerk * tau + t_jerk**2),
        ),
    )
    velocity = np.where(
        first,
        jerk * tau**2 / 2.0,
        np.where(third, speed - jerk * rest**2 / 2.0, accel * (tau - t_jerk / 2.0)),
    )
    acceleration = np.where(first, jerk * tau, np.where(third, jerk * rest, accel))
    jerk_out = np.where(first, jerk, np.where(third, -jerk, 0.0))
    return position, velocity, acceleration, jerk_out


@dataclass(frozen=True)
class RestToRestProfile:
    """A symmetric rest-to-rest profile of one coordinate: double S or trapezoidal.

    Seven segments (Biagiotti & Melchiorri 2008, sec. 3.4): jerk ``+j``,
    constant acceleration, jerk ``-j``, cruise, jerk ``-j``, constant
    deceleration, jerk ``+j``. The deceleration phase mirrors the acceleration
    phase. A trapezoidal profile has ``t_jerk = 0`` and ``jerk_peak = inf``.

    Attributes
    ----------
    distance : float
        Signed displacement, m or rad; positions are measured from the start.
    duration : float
        Total time ``T = 2 t_accel + t_cruise``, s.
    t_jerk : float
        Duration of each jerk segment, s (0 for a trapezoid).
    t_accel : float
        Duration of the acceleration phase (= deceleration phase), s.
    t_cruise : float
        Duration of the constant-velocity phase, s.
    velocity_peak, acceleration_peak : float
        Magnitudes reached, per s and per s^2.
    jerk_peak : float
        Magnitude of the jerk in the jerk segments, per s^3 (inf for a trapezoid).
    """

    distance: float
    duration: float
    t_jerk: float
    t_accel: float
    t_cruise: float
    velocity_peak: float
    acceleration_peak: float
    jerk_peak: float

    @property
    def switching_times(self) -> FloatArray:
        """Distinct times where the jerk (or, for a trapezoid, the acceleration) changes.

        Returns
        -------
        times : array, shape (k,)
            Increasing, from 0 to ``duration``; ``k = 8`` for a double-S profile
            reaching both limits, ``k = 4`` for a trapezoid with cruise, ``k = 3``
            for a triangle.
        """
        cruise_end = self.t_accel + self.t_cruise
        return np.unique(
            np.array(
                [
                    0.0,
                    self.t_jerk,
                    self.t_accel - self.t_jerk,
                    self.t_accel,
                    cruise_end,
                    cruise_end + self.t_jerk,
                    self.duration - self.t_jerk,
                    self.duration,
                ]
            )
        )

    def _evaluate(self, t: npt.ArrayLike) -> tuple[FloatArray, ...]:
        times = _check_times(t)
        T = self.duration
        if T == 0.0:
            zeros = np.zeros_like(times)
            return zeros, zeros, zeros, zeros
        clipped = np.clip(times, 0.0, T)
        moving = (times >= 0.0) & (times <= T)
        jerk = self.jerk_peak if self.t_jerk > 0.0 else 0.0
        phase = (self.t_jerk, self.t_accel, jerk, self.acceleration_peak, self.velocity_peak)
        accel_phase = _acceleration_phase(clipped, *phase)
        mirror_phase = _acceleration_phase(T - clipped, *phase)
        h = abs(self.distance)
        in_accel = clipped <= self.t_accel
        in_decel = ~in_accel & (clipped >= T - self.t_accel)
        cruise_position = self.velocity_peak * (clipped - self.t_accel / 2.0)
        position = np.where(
            in_accel, accel_phase[0], np.where(in_decel, h - mirror_phase[0], cruise_position)
        )
        velocity = np.where(
            in_accel,
            accel_phase[1],
            np.where(in_decel, mirror_phase[1], self.velocity_peak),
        )
        acceleration = np.where(in_accel, accel_phase[2], np.where(in_decel, -mirror_phase[2], 0.0))
        jerk_out = np.where(in_accel, accel_phase[3], np.where(in_decel, mirror_phase[3], 0.0))
        sign = math.copysign(1.0, self.distance)
        return (
            sign * position,
            np.where(moving, sign * velocity, 0.0),
            np.where(moving, sign * acceleration, 0.0),
            np.where(moving, sign * jerk_out, 0.0),
        )

    def sample(self, t: npt.ArrayLike) -> ProfileSamples:
        """Position (from the start), velocity and acceleration at times ``t``.

        Parameters
        ----------
        t : array-like, any shape
            Sample times, s. Outside ``[0, duration]`` the profile is at rest.

        Returns
        -------
        ProfileSamples
            Each field shaped like ``t``.
        """
        position, velocity, acceleration, _ = self._evaluate(t)
        return ProfileSamples(position, velocity, acceleration)

    def sample_jerk(self, t: npt.ArrayLike) -> FloatArray:
        """Jerk at times ``t``, piecewise constant, shaped like ``t``, per s^3.

        A trapezoidal profile (infinite jerk) returns zeros: its acceleration
        steps are not represented.
        """
        return self._evaluate(t)[3]


def _acceleration_phase_times(
    speed: float, accel_max: float, jerk_max: float
) -> tuple[float, float]:
    """``(t_jerk, t_accel)`` of the shortest rise from rest to ``speed``.

    Biagiotti & Melchiorri 2008, sec. 3.4: if ``speed * j_max >= a_max^2`` the
    acceleration limit is reached, ``t_jerk = a_max / j_max`` and
    ``t_accel = t_jerk + speed / a_max``; otherwise
    ``t_jerk = sqrt(speed / j_max)`` and ``t_accel = 2 t_jerk``. Infinite jerk
    gives the trapezoid ramp ``t_accel = speed / a_max``.
    """
    if speed * jerk_max >= accel_max * accel_max:
        t_jerk = accel_max / jerk_max
        return t_jerk, t_jerk + speed / accel_max
    t_jerk = math.sqrt(speed / jerk_max)
    return t_jerk, 2.0 * t_jerk


def _rest_to_rest(
    distance: float, velocity_max: float, acceleration_max: float, jerk_max: float
) -> RestToRestProfile:
    """Time-optimal symmetric rest-to-rest profile (Biagiotti & Melchiorri 2008, sec. 3.4).

    The distance covered without cruise when peaking at speed ``v`` is
    ``D(v) = v * t_accel(v)``, increasing in ``v``. If ``D(v_max) <= h`` the
    velocity limit is reached and the cruise lasts ``h / v_max - t_accel``.
    Otherwise the peak speed solves ``D(v) = h``:
    with the acceleration limit reached, ``v^2 + (a^2/j) v - h a = 0``
    (the book's case 2, ``Delta = a^4/j^2 + 4 h a``); without it,
    ``2 v sqrt(v/j) = h``, i.e. ``t_jerk = (h / (2 j))^(1/3)``.
    """
    h = abs(distance)
    if h == 0.0:
        return RestToRestProfile(distance, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, jerk_max)
    t_jerk, t_accel = _acceleration_phase_times(velocity_max, acceleration_max, jerk_max)
    if velocity_max * t_accel <= h:
        speed = velocity_max
        t_cruise = max(h / velocity_max - t_accel, 0.0)
    else:
        t_cruise = 0.0
        b = acceleration_max * acceleration_max / jerk_max
        speed = 2.0 * h * acceleration_max / (b + math.sqrt(b * b + 4.0 * h * acceleration_max))
        if speed * jerk_max >= acceleration_max * acceleration_max:
            t_jerk = acceleration_max / jerk_max
            t_accel = t_jerk + speed / acceleration_max
        else:
            t_jerk = (h / (2.0 * jerk_max)) ** (1.0 / 3.0)
            t_accel = 2.0 * t_jerk
            speed = jerk_max * t_jerk * t_jerk
    accel_peak = acceleration_max if t_jerk == 0.0 else min(jerk_max * t_jerk, acceleration_max)
    return RestToRestProfile(
        distance=distance,
        duration=2.0 * t_accel + t_cruise,
        t_jerk=t_jerk,
        t_accel=t_accel,
        t_cruise=t_cruise,
        velocity_peak=speed,
        acceleration_peak=accel_peak,
        jerk_peak=jerk_max,
    )


def trapezoidal_profile(
    distance: float, velocity_max: float, acceleration_max: float
) -> RestToRestProfile:
    """Time-optimal trapezoidal velocity profile over a signed distance, rest to rest.

    Lynch & Park, *Modern Robotics*, sec. 9.2.2.2: with ``h = |distance|``,
    if ``h >= v^2 / a`` the duration is ``h / v + v / a`` (accelerate for
    ``v / a``, cruise, decelerate); otherwise the profile is triangular with
    peak speed ``sqrt(h a)`` and duration ``2 sqrt(h / a)``. Zero distance
    gives zero duration.

    Parameters
    ----------
    distance : float
        m or rad, signed.
    velocity_max : float
        Positive, per s.
    acceleration_max : float
        Positive, per s^2.

    Returns
    -------
    RestToRestProfile
        With ``t_jerk = 0`` and ``jerk_peak = inf``.

    Examples
    --------
    >>> trapezoidal_profile(1.0, 1.0, 2.0).duration
    1.5
    """
    return _rest_to_rest(
        _check_finite("distance", distance),
        _check_positive("velocity_max", velocity_max),
        _check_positive("acceleration_max", acceleration_max),
        math.inf,
    )


def double_s_profile(
    distance: float, velocity_max: float, acceleration_max: float, jerk_max: float
) -> RestToRestProfile:
    """Time-optimal jerk-limited (double S, seven-segment) profile, rest to rest.

    Biagiotti & Melchiorri, *Trajectory Planning for Automatic Machines and
    Robots*, 2008, sec. 3.4, with zero initial and final velocity and
    acceleration. When all three limits are reached the duration is
    ``h / v + v / a + a / j``; shorter distances or tighter limits give the
    reduced cases without cruise and/or without constant acceleration (see
    :func:`_rest_to_rest`).

    Parameters
    ----------
    distance : float
        m or rad, signed.
    velocity_max, acceleration_max, jerk_max : float
        Positive limits, per s, s^2 and s^3.

    Returns
    -------
    RestToRestProfile

    Examples
    --------
    >>> round(double_s_profile(1.0, 1.0, 2.0, 10.0).duration, 12)
    1.7
    """
    return _rest_to_rest(
        _check_finite("distance", distance),
        _check_positive("velocity_max", velocity_max),
        _check_positive("acceleration_max", acceleration_max),
        _check_positive("jerk_max", jerk_max),
    )


def linear_move_profile(
    path_length: float,
    speed_max: float,
    acceleration_max: float,
    jerk_max: float | None = None,
    *,
    speed_percent: float = 100.0,
) -> RestToRestProfile:
    """Profile in path length of a linear (Cartesian straight-line) move, rest to rest.

    A trapezoidal profile (:func:`trapezoidal_profile`), or a double-S profile
    (:func:`double_s_profile`) when ``jerk_max`` is given. ``speed_percent``
    ``p`` scales the limits by ``k = p / 100``: speed by ``k``, acceleration
    by ``k^2`` and jerk by ``k^3``, which stretches the whole profile in
    time by exactly ``1 / k`` (time scaling ``s(k t)``), so a 50 % move takes
    twice as long along the same shape.

    Parameters
    ----------
    path_length : float
        m, not negative.
    speed_max : float
        Cartesian speed limit, m/s.
    acceleration_max : float
        m/s^2.
    jerk_max : float, optional
        m/s^3; ``None`` for a trapezoidal profile.
    speed_percent : float, keyword-only
        1 to 100.

    Returns
    -------
    RestToRestProfile
        Positions are path lengths from the start, m.
    """
    length = _check_finite("path_length", path_length)
    if length < 0.0:
        raise TimeScalingInputError(f"path_length: expected a length >= 0 m, got {path_length!r}")
    k = _speed_factor(speed_percent)
    jerk = math.inf if jerk_max is None else _check_positive("jerk_max", jerk_max) * k**3
    return _rest_to_rest(
        length,
        _check_positive("speed_max", speed_max) * k,
        _check_positive("acceleration_max", acceleration_max) * k * k,
        jerk,
    )


def _check_joint_vector(name: str, values: npt.ArrayLike, n: int | None) -> FloatArray:
    array = np.asarray(values, dtype=np.float64)
    if array.ndim != 1 or (n is not None and array.shape[0] != n):
        expected = "(n,)" if n is None else f"({n},)"
        raise TimeScalingInputError(f"{name}: expected shape {expected}, got {array.shape}")
    if not np.all(np.isfinite(array)):
        raise TimeScalingInputError(f"{name}: contains NaN or infinite values")
    return array


def _check_joint_limits(name: str, values: npt.ArrayLike, n: int) -> FloatArray:
    array = _check_joint_vector(name, values, n)
    if np.any(array <= 0.0):
        raise TimeScalingInputError(f"{name}: expected positive limits, got {array.tolist()}")
    return array


@dataclass(frozen=True)
class JointMove:
    """A synchronised joint move: every joint on one straight line in joint space.

    ``q(t) = q_start + c * s(t)`` with ``c = (q_end - q_start) / D`` and
    ``D = max_i |q_end_i - q_start_i|``; the path parameter ``s`` follows the
    profile :attr:`path` from 0 to ``D``. All joints share its phase
    durations, start and stop together, and joint ``i``'s velocity,
    acceleration and jerk are ``|c_i|`` (at most 1) times those of ``s``.

    Attributes
    ----------
    q_start, q_end : array, shape (n,)
        Joint values, rad or m.
    path : RestToRestProfile
        Profile of the path parameter, distance ``D`` (0 when no joint moves).
    """

    q_start: FloatArray
    q_end: FloatArray
    path: RestToRestProfile

    @property
    def duration(self) -> float:
        """Total time, s."""
        return self.path.duration

    @property
    def direction(self) -> FloatArray:
        """``c = (q_end - q_start) / D``, shape (n,), largest magnitude 1 (zeros if no motion)."""
        if self.path.distance == 0.0:
            return np.zeros_like(self.q_start)
        return (self.q_end - self.q_start) / self.path.distance

    @property
    def velocity_peak(self) -> FloatArray:
        """Peak joint speeds, shape (n,), rad/s or m/s."""
        return np.abs(self.direction) * self.path.velocity_peak

    @property
    def acceleration_peak(self) -> FloatArray:
        """Peak joint accelerations, shape (n,), rad/s^2 or m/s^2."""
        return np.abs(self.direction) * self.path.acceleration_peak

    def sample(self, t: npt.ArrayLike) -> ProfileSamples:
        """Joint positions, velocities and accelerations at times ``t``.

        Parameters
        ----------
        t : array-like, shape (T,)
            Sample times, s.

        Returns
        -------
        ProfileSamples
            Each field of shape (T, n).
        """
        times = _check_times(t)
        if times.ndim != 1:
            raise TimeScalingInputError(f"t: expected shape (T,), got {times.shape}")
        s = self.path.sample(times)
        c = self.direction
        position = self.q_start + s.position[:, None] * c
        position[times >= self.duration] = self.q_end
        return ProfileSamples(position, s.velocity[:, None] * c, s.acceleration[:, None] * c)


def joint_move(
    q_start: npt.ArrayLike,
    q_end: npt.ArrayLike,
    velocity_max: npt.ArrayLike,
    acceleration_max: npt.ArrayLike,
    jerk_max: npt.ArrayLike | None = None,
    *,
    speed_percent: float = 100.0,
) -> JointMove:
    """Return a synchronised joint move: all joints start and stop together, within their limits.

    Method: the move is ``q_start + c * s(t)`` with ``d = q_end - q_start``,
    ``D = max_i |d_i|``, ``c = d / D`` and a path parameter ``s`` from 0 to
    ``D``. Joint ``i`` moves with ``|c_i|`` times the path's velocity,
    acceleration and jerk, so the path's limits are the tightest scaled joint
    limits ``V = 1 / max_i(|c_i| / v_i)``, ``A = 1 / max_i(|c_i| / a_i)``,
    ``J = 1 / max_i(|c_i| / j_i)`` (joints that do not move impose nothing);
    the path gets the time-optimal trapezoidal (or, with ``jerk_max``,
    double-S) profile for those limits. This is the usual synchronisation that
    scales each joint's speed and acceleration to a common timing, with the
    common timing chosen so that no joint exceeds any of its limits. The
    duration is at least that of the slowest joint moving alone, and equal to
    it when one joint is the tightest in velocity, acceleration (and jerk)
    alike; copying the slowest joint's phase times to the others instead can
    overload a joint whose acceleration limit is relatively lower.

    ``speed_percent`` ``p`` scales the limits by ``k = p / 100`` (velocity
    ``k``, acceleration ``k^2``, jerk ``k^3``), which stretches the move in time
    by exactly ``1 / k`` along the same shape.

    Parameters
    ----------
    q_start, q_end : array-like, shape (n,)
        Joint values, rad or m.
    velocity_max, acceleration_max : array-like, shape (n,)
        Positive joint limits, rad/s (m/s) and rad/s^2 (m/s^2).
    jerk_max : array-like, shape (n,), optional
        Positive jerk limits, rad/s^3 (m/s^3); ``None`` for trapezoidal profiles.
    speed_percent : float, keyword-only
        1 to 100.

    Returns
    -------
    JointMove
        Zero duration when ``q_start == q_end``.
    """
    start = _check_joint_vector("q_start", q_start, None)
    n = start.shape[0]
    end = _check_joint_vector("q_end", q_end, n)
    v_max = _check_joint_limits("velocity_max", velocity_max, n)
    a_max = _check_joint_limits("acceleration_max", acceleration_max, n)
    j_max = None if jerk_max is None else _check_joint_limits("jerk_max", jerk_max, n)
    k = _speed_factor(speed_percent)
    delta = end - start
    span = float(np.max(np.abs(delta))) if n else 0.0
    if span == 0.0:
        return JointMove(start, end, _rest_to_rest(0.0, 1.0, 1.0, math.inf))
    share = np.abs(delta) / span
    path_v = k / float(np.max(share / v_max))
    path_a = k * k / float(np.max(share / a_max))
    path_j = math.inf if j_max is None else k**3 / float(np.max(share / j_max))
    return JointMove(start, end, _rest_to_rest(span, path_v, path_a, path_j))


class PathSpeedLimit(NamedTuple):
    """Largest path speed that the joint velocity limits allow along a sampled path.

    Attributes
    ----------
    speed_max_per_sample : array, shape (S,)
        m/s (per unit of the path parameter); ``inf`` where no joint moves.
    limiting_joint_per_sample : array of int, shape (S,)
        Index of the joint that sets the limit, ``-1`` where no joint moves.
    speed_max : float
        Minimum over the samples: the highest path speed feasible everywhere.
    limiting_sample : int
        Index of the sample that sets ``speed_max``.
    """

    speed_max_per_sample: FloatArray
    limiting_joint_per_sample: IntArray
    speed_max: float
    limiting_sample: int


def path_speed_limit(dq_ds: npt.ArrayLike, velocity_max: npt.ArrayLike) -> PathSpeedLimit:
    """Largest path speed at which no joint exceeds its velocity limit.

    Along a path ``q(s)`` the joint velocities are ``dq/dt = (dq/ds) * ds/dt``,
    so joint ``i`` stays within ``v_i`` while the path speed is at most
    ``v_i / |dq_i/ds|`` (chain rule; the velocity constraint of path-velocity
    decomposition, Lynch & Park, *Modern Robotics*, sec. 9.4). The feasible
    speed at a sample is the minimum over joints, the feasible speed of the
    whole path the minimum over samples.

    Parameters
    ----------
    dq_ds : array-like, shape (S, n)
        Joint motion per unit path length at each sample, rad/m or m/m.
    velocity_max : array-like, shape (n,)
        Positive joint velocity limits, rad/s or m/s.

    Returns
    -------
    PathSpeedLimit
    """
    demand = np.asarray(dq_ds, dtype=np.float64)
    if demand.ndim != 2 or demand.shape[0] == 0:
        raise TimeScalingInputError(f"dq_ds: expected shape (S, n) with S >= 1, got {demand.shape}")
    if not np.all(np.isfinite(demand)):
        raise TimeScalingInputError("dq_ds: contains NaN or infinite values")
    limits = _check_joint_limits("velocity_max", velocity_max, demand.shape[1])
    magnitude = np.abs(demand)
    ratio = np.full(demand.shape, np.inf)
    np.divide(limits, magnitude, out=ratio, where=magnitude > 0.0)
    joint = np.argmin(ratio, axis=1)
    per_sample = ratio[np.arange(demand.shape[0]), joint]
    joint = np.where(np.isfinite(per_sample), joint, -1)
    sample = int(np.argmin(per_sample))
    return PathSpeedLimit(per_sample, joint, float(per_sample[sample]), sample)

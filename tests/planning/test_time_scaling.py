"""Time scaling: polynomial, trapezoidal, double-S, synchronised joint moves, linear moves."""

from __future__ import annotations

import math

import modern_robotics as mr
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from ruckig import InputParameter, Result, Ruckig, Trajectory
from scipy.integrate import cumulative_trapezoid, trapezoid

from posebridge.planning.time_scaling import (
    TimeScalingInputError,
    cubic_time_scaling,
    double_s_profile,
    joint_move,
    linear_move_profile,
    path_speed_limit,
    quintic_time_scaling,
    trapezoidal_profile,
)

PROPERTY_SETTINGS = settings(derandomize=True, deadline=2000, max_examples=60)

limits = st.floats(0.05, 20.0)
distances = st.floats(1e-3, 10.0)


def _ruckig_rest_to_rest(
    distance: float, velocity_max: float, acceleration_max: float, jerk_max: float
) -> Trajectory:
    """Time-optimal 1-DoF rest-to-rest trajectory from the ruckig library."""
    parameters = InputParameter(1)
    parameters.current_position = [0.0]
    parameters.target_position = [distance]
    parameters.max_velocity = [velocity_max]
    parameters.max_acceleration = [acceleration_max]
    parameters.max_jerk = [jerk_max]
    trajectory = Trajectory(1)
    assert Ruckig(1).calculate(parameters, trajectory) == Result.Working
    return trajectory


def _dense_times(duration: float, count: int = 20001) -> np.ndarray:
    return np.linspace(0.0, duration, count)


# --- polynomial time scaling ------------------------------------------------------------


def test_cubic_time_scaling_reference_value() -> None:
    # Lynch & Park, Modern Robotics, ch. 9: cubic s(0.6, T=2) = 0.216
    assert float(cubic_time_scaling(0.6, 2.0).position) == pytest.approx(0.216, abs=1e-12)


def test_quintic_time_scaling_reference_value() -> None:
    # Lynch & Park, Modern Robotics, ch. 9: quintic s(0.6, T=2) = 0.16308
    assert float(quintic_time_scaling(0.6, 2.0).position) == pytest.approx(0.16308, abs=1e-12)


@pytest.mark.parametrize(
    ("ours", "reference"),
    [(cubic_time_scaling, mr.CubicTimeScaling), (quintic_time_scaling, mr.QuinticTimeScaling)],
)
def test_polynomial_time_scaling_matches_modern_robotics(ours, reference) -> None:
    duration = 3.7
    times = np.linspace(0.0, duration, 41)
    expected = [reference(duration, float(t)) for t in times]  # modern_robotics package
    np.testing.assert_allclose(ours(times, duration).position, expected, atol=1e-12)


def test_cubic_time_scaling_boundary_conditions() -> None:
    # Lynch & Park, Modern Robotics, sec. 9.2.2.1: s(0)=0, s(T)=1, ds/dt = 0 at both ends
    samples = cubic_time_scaling([0.0, 2.5], 2.5)
    np.testing.assert_allclose(samples.position, [0.0, 1.0], atol=1e-15)
    np.testing.assert_allclose(samples.velocity, [0.0, 0.0], atol=1e-15)
    # closed form: d2s/dt2 = 6/T^2 - 12 t/T^3, i.e. +-6/T^2 at the ends
    np.testing.assert_allclose(samples.acceleration, [6.0 / 2.5**2, -6.0 / 2.5**2], rtol=1e-12)


def test_quintic_time_scaling_boundary_conditions() -> None:
    # Lynch & Park, Modern Robotics, sec. 9.2.2.1: s(0)=0, s(T)=1, zero velocity and
    # acceleration at both ends
    samples = quintic_time_scaling([0.0, 1.3], 1.3)
    np.testing.assert_allclose(samples.position, [0.0, 1.0], atol=1e-15)
    np.testing.assert_allclose(samples.velocity, [0.0, 0.0], atol=1e-15)
    np.testing.assert_allclose(samples.acceleration, [0.0, 0.0], atol=1e-15)


@pytest.mark.parametrize("scaling", [cubic_time_scaling, quintic_time_scaling])
def test_polynomial_time_scaling_derivatives_match_numerical_differentiation(scaling) -> None:
    duration = 1.7
    times = _dense_times(duration)
    samples = scaling(times, duration)
    # numerical differentiation (independent of the closed-form derivatives)
    velocity = np.gradient(samples.position, times)
    acceleration = np.gradient(samples.velocity, times)
    np.testing.assert_allclose(samples.velocity[1:-1], velocity[1:-1], atol=1e-6)
    np.testing.assert_allclose(samples.acceleration[1:-1], acceleration[1:-1], atol=1e-4)


def test_polynomial_time_scaling_holds_rest_outside_motion() -> None:
    # a rest-to-rest motion is at rest before it starts and after it ends
    # (common practice, no source)
    samples = quintic_time_scaling([-1.0, 5.0], 2.0)
    np.testing.assert_array_equal(samples.position, [0.0, 1.0])
    np.testing.assert_array_equal(samples.velocity, [0.0, 0.0])
    np.testing.assert_array_equal(samples.acceleration, [0.0, 0.0])


# --- trapezoidal profile ----------------------------------------------------------------


def test_trapezoidal_profile_reference_durations() -> None:
    # closed form d/v + v/a (Lynch & Park sec. 9.2.2.2): v_max = 1, a_max = 2, distance 1 -> 1.5 s
    assert trapezoidal_profile(1.0, 1.0, 2.0).duration == pytest.approx(1.5, abs=1e-12)
    # distance 0.25 -> triangular, closed form 2 sqrt(d/a) = 0.7071 s
    triangle = trapezoidal_profile(0.25, 1.0, 2.0)
    assert triangle.duration == pytest.approx(2.0 * math.sqrt(0.25 / 2.0), abs=1e-12)
    assert triangle.duration == pytest.approx(0.7071, abs=1e-4)
    # closed form: triangular peak speed sqrt(d a) = sqrt(0.5)
    assert triangle.velocity_peak == pytest.approx(math.sqrt(0.5), rel=1e-12)


def test_trapezoidal_profile_switching_times() -> None:
    # closed form: accelerate for v/a = 0.5 s, cruise (d - v^2/a)/v = 0.5 s, decelerate 0.5 s
    np.testing.assert_allclose(
        trapezoidal_profile(1.0, 1.0, 2.0).switching_times, [0.0, 0.5, 1.0, 1.5], atol=1e-12
    )
    # closed form: triangle switches at sqrt(d/a) and ends at 2 sqrt(d/a)
    root = math.sqrt(0.25 / 2.0)
    np.testing.assert_allclose(
        trapezoidal_profile(0.25, 1.0, 2.0).switching_times, [0.0, root, 2 * root], atol=1e-12
    )


def test_trapezoidal_profile_zero_distance_has_zero_duration() -> None:
    # nothing to move takes no time (common practice, no source)
    profile = trapezoidal_profile(0.0, 1.0, 2.0)
    assert profile.duration == 0.0
    np.testing.assert_array_equal(profile.sample([0.0, 1.0]).position, [0.0, 0.0])


def test_trapezoidal_profile_negative_distance_mirrors_positive() -> None:
    # symmetry of the closed form in the sign of the distance (common practice, no source)
    forward, backward = trapezoidal_profile(0.8, 1.0, 2.0), trapezoidal_profile(-0.8, 1.0, 2.0)
    times = np.linspace(0.0, forward.duration, 101)
    assert backward.duration == forward.duration
    np.testing.assert_allclose(backward.sample(times).position, -forward.sample(times).position)
    np.testing.assert_allclose(backward.sample(times).velocity, -forward.sample(times).velocity)


@PROPERTY_SETTINGS
@given(distance=distances, velocity_max=limits, acceleration_max=limits)
def test_trapezoidal_profile_properties(
    distance: float, velocity_max: float, acceleration_max: float
) -> None:
    profile = trapezoidal_profile(distance, velocity_max, acceleration_max)
    # Lynch & Park sec. 9.2.2.2 closed forms: d/v + v/a with cruise, 2 sqrt(d/a) without
    if distance >= velocity_max**2 / acceleration_max:
        expected = distance / velocity_max + velocity_max / acceleration_max
    else:
        expected = 2.0 * math.sqrt(distance / acceleration_max)
    assert profile.duration == pytest.approx(expected, rel=1e-9)
    # ruckig library, time-optimal with infinite jerk (acceleration-limited)
    reference = _ruckig_rest_to_rest(distance, velocity_max, acceleration_max, math.inf)
    assert profile.duration == pytest.approx(reference.duration, rel=1e-6)
    times = _dense_times(profile.duration)
    samples = profile.sample(times)
    # area under the velocity = distance (numerical integration, independent check); the
    # trapezoid rule errs by at most |da| step^2 / 8 at each of the four acceleration steps
    step = times[1] - times[0]
    assert trapezoid(samples.velocity, times) == pytest.approx(
        distance, abs=acceleration_max * step**2 + 1e-12
    )
    # limits respected
    assert np.max(np.abs(samples.velocity)) <= velocity_max * (1 + 1e-12)
    assert np.max(np.abs(samples.acceleration)) <= acceleration_max * (1 + 1e-12)
    # rest to rest: starts at 0, ends at the distance with zero velocity
    assert samples.position[0] == 0.0
    assert samples.position[-1] == pytest.approx(distance, rel=1e-12)
    assert samples.velocity[0] == 0.0
    assert samples.velocity[-1] == pytest.approx(0.0, abs=1e-9 * velocity_max)


# --- double-S (jerk-limited) profile ----------------------------------------------------


def test_double_s_duration_with_all_limits_reached() -> None:
    # closed form T = h/v + v/a + a/j when velocity, acceleration and jerk limits are all
    # reached (Biagiotti & Melchiorri 2008, sec. 3.4; formula from memory)
    h, v, a, j = 2.0, 1.0, 2.0, 10.0
    profile = double_s_profile(h, v, a, j)
    assert profile.duration == pytest.approx(h / v + v / a + a / j, rel=1e-12)
    assert profile.velocity_peak == pytest.approx(v)
    assert profile.acceleration_peak == pytest.approx(a)
    # closed form: jerk segments a/j, acceleration phase a/j + v/a
    np.testing.assert_allclose(
        [profile.t_jerk, profile.t_accel], [a / j, a / j + v / a], rtol=1e-12
    )
    assert len(profile.switching_times) == 8


def test_double_s_duration_without_acceleration_limit_reached() -> None:
    # v j < a^2: acceleration limit not reached, t_jerk = sqrt(v/j), t_accel = 2 t_jerk
    # (Biagiotti & Melchiorri 2008, sec. 3.4); with cruise T = h/v + t_accel (closed form)
    h, v, a, j = 3.0, 0.5, 2.0, 1.0
    profile = double_s_profile(h, v, a, j)
    assert profile.duration == pytest.approx(h / v + 2.0 * math.sqrt(v / j), rel=1e-12)
    assert profile.acceleration_peak == pytest.approx(math.sqrt(v * j), rel=1e-12)


def test_double_s_duration_without_velocity_or_acceleration_limit_reached() -> None:
    # short move, neither v nor a reached: h = 2 j t_jerk^3, T = 4 t_jerk (closed form
    # derived from the four jerk segments of Biagiotti & Melchiorri 2008, sec. 3.4)
    h, v, a, j = 0.01, 1.0, 2.0, 10.0
    t_jerk = (h / (2.0 * j)) ** (1.0 / 3.0)
    profile = double_s_profile(h, v, a, j)
    assert profile.duration == pytest.approx(4.0 * t_jerk, rel=1e-12)
    assert profile.t_cruise == 0.0
    assert profile.velocity_peak == pytest.approx(j * t_jerk**2, rel=1e-12)


def test_double_s_duration_without_velocity_limit_reached() -> None:
    # a reached, v not: v^2 + (a^2/j) v - h a = 0 gives the peak speed, T = 2 (a/j + v/a)
    # (Biagiotti & Melchiorri 2008, sec. 3.4, case 2; closed form)
    h, v, a, j = 1.0, 5.0, 2.0, 10.0
    b = a * a / j
    speed = (-b + math.sqrt(b * b + 4 * h * a)) / 2.0
    profile = double_s_profile(h, v, a, j)
    assert profile.velocity_peak == pytest.approx(speed, rel=1e-12)
    assert profile.duration == pytest.approx(2.0 * (a / j + speed / a), rel=1e-12)


@PROPERTY_SETTINGS
@given(
    distance=st.floats(1e-3, 10.0).map(float),
    velocity_max=limits,
    acceleration_max=limits,
    jerk_max=st.floats(0.1, 200.0),
    negative=st.booleans(),
)
def test_double_s_properties(
    distance: float,
    velocity_max: float,
    acceleration_max: float,
    jerk_max: float,
    negative: bool,
) -> None:
    signed = -distance if negative else distance
    profile = double_s_profile(signed, velocity_max, acceleration_max, jerk_max)
    # ruckig library: time-optimal jerk-limited rest-to-rest trajectory
    reference = _ruckig_rest_to_rest(signed, velocity_max, acceleration_max, jerk_max)
    assert profile.duration == pytest.approx(reference.duration, rel=1e-6)
    check_times = np.linspace(0.0, profile.duration, 9)
    reference_position = [reference.at_time(float(t))[0][0] for t in check_times]
    np.testing.assert_allclose(
        profile.sample(check_times).position, reference_position, atol=1e-6 * distance
    )

    times = _dense_times(profile.duration)
    samples = profile.sample(times)
    jerk = profile.sample_jerk(times)
    # numerical integration of the sampled jerk (independent check of every segment)
    acceleration = cumulative_trapezoid(jerk, times, initial=0.0)
    velocity = cumulative_trapezoid(samples.acceleration, times, initial=0.0)
    position = cumulative_trapezoid(samples.velocity, times, initial=0.0)
    step = profile.duration / (len(times) - 1)
    # each jerk step of size |dj| costs the trapezoid rule at most |dj| * step / 2; the jerk
    # has total variation 8 j, hence 4 j step
    np.testing.assert_allclose(acceleration, samples.acceleration, atol=4 * jerk_max * step)
    # trapezoid-rule error bounds: piecewise-linear acceleration with kinks summing to 8 j
    # gives at most 8 j step^2 / 8; the velocity has |d2v/dt2| <= j, hence T j step^2 / 12
    np.testing.assert_allclose(velocity, samples.velocity, atol=2 * jerk_max * step**2)
    np.testing.assert_allclose(
        position, samples.position, atol=2 * profile.duration * jerk_max * step**2 / 12 + 1e-12
    )
    assert position[-1] == pytest.approx(signed, rel=1e-6)
    # limits are never exceeded
    assert np.max(np.abs(samples.velocity)) <= velocity_max * (1 + 1e-12)
    assert np.max(np.abs(samples.acceleration)) <= acceleration_max * (1 + 1e-12)
    assert np.max(np.abs(jerk)) <= jerk_max
    # rest to rest with zero acceleration at both ends
    assert samples.position[-1] == pytest.approx(signed, rel=1e-12)
    assert samples.velocity[0] == 0.0
    assert samples.acceleration[0] == 0.0
    assert abs(samples.velocity[-1]) <= 1e-9 * velocity_max
    assert abs(samples.acceleration[-1]) <= 1e-9 * acceleration_max + 1e-12


def test_double_s_approaches_trapezoid_for_large_jerk() -> None:
    # as j -> inf the jerk segments vanish: T -> h/v + v/a (closed form, Lynch & Park 9.2.2.2)
    profile = double_s_profile(1.0, 1.0, 2.0, 1e9)
    assert profile.duration == pytest.approx(1.0 / 1.0 + 1.0 / 2.0, rel=1e-8)


@pytest.mark.parametrize(
    ("function", "arguments", "field"),
    [
        (trapezoidal_profile, (1.0, 0.0, 1.0), "velocity_max"),
        (trapezoidal_profile, (1.0, 1.0, -2.0), "acceleration_max"),
        (trapezoidal_profile, (math.nan, 1.0, 1.0), "distance"),
        (double_s_profile, (1.0, 1.0, 1.0, math.inf), "jerk_max"),
        (cubic_time_scaling, (0.5, 0.0), "duration"),
    ],
)
def test_profiles_reject_bad_input(function, arguments, field) -> None:
    with pytest.raises(TimeScalingInputError, match=f"^{field}: expected"):
        function(*arguments)


# --- synchronised joint moves -----------------------------------------------------------


@PROPERTY_SETTINGS
@given(
    data=st.data(),
    n=st.integers(1, 7),
    jerk_limited=st.booleans(),
)
def test_joint_move_synchronised_within_limits(data, n: int, jerk_limited: bool) -> None:
    vectors = st.lists(st.floats(-3.0, 3.0), min_size=n, max_size=n)
    positive = st.lists(st.floats(0.2, 10.0), min_size=n, max_size=n)
    q_start, q_end = np.array(data.draw(vectors)), np.array(data.draw(vectors))
    v_max, a_max = np.array(data.draw(positive)), np.array(data.draw(positive))
    j_max = np.array(data.draw(positive)) * 10.0 if jerk_limited else None
    move = joint_move(q_start, q_end, v_max, a_max, j_max)

    single = [
        (
            double_s_profile(d, v, a, float(j))
            if j_max is not None
            else trapezoidal_profile(d, v, a)
        ).duration
        for d, v, a, j in zip(
            q_end - q_start, v_max, a_max, j_max if j_max is not None else v_max, strict=True
        )
    ]
    # a synchronised move cannot beat its slowest joint moving alone (closed-form profiles)
    assert move.duration >= max(single) * (1 - 1e-12)

    times = _dense_times(move.duration, 4001)
    samples = move.sample(times)
    # all joints start and stop together at the target, at rest (common practice, no source)
    np.testing.assert_allclose(samples.position[0], q_start, atol=1e-12)
    np.testing.assert_allclose(samples.position[-1], q_end, atol=1e-9)
    np.testing.assert_allclose(samples.velocity[-1], 0.0, atol=1e-9 * np.max(v_max))
    # each joint within its own limits
    assert np.all(np.max(np.abs(samples.velocity), axis=0) <= v_max * (1 + 1e-12))
    assert np.all(np.max(np.abs(samples.acceleration), axis=0) <= a_max * (1 + 1e-12))
    # straight line in joint space: q - q_start is parallel to q_end - q_start (the move is
    # defined as q_start + c s(t); common practice, no source)
    delta = q_end - q_start
    moved = samples.position - q_start
    cross = moved[:, :, None] * delta[None, None, :] - moved[:, None, :] * delta[None, :, None]
    assert np.max(np.abs(cross)) <= 1e-9 * max(1.0, float(np.max(np.abs(delta))) ** 2)


def test_joint_move_equals_slowest_joint_when_limits_are_proportional() -> None:
    # limits proportional to the distances: every joint is equally tight, so the duration is
    # the single-joint closed form d/v + v/a of any of them (Lynch & Park sec. 9.2.2.2)
    delta = np.array([2.0, -1.0, 0.5])
    move = joint_move(np.zeros(3), delta, np.abs(delta) * 0.5, np.abs(delta) * 1.0)
    assert move.duration == pytest.approx(2.0 / 1.0 + 1.0 / 2.0, rel=1e-12)


def test_joint_move_respects_limits_where_scaling_to_the_slowest_joint_would_not() -> None:
    # joint 0 is slow (velocity-limited), joint 1 is acceleration-limited: copying joint 0's
    # acceleration phase to joint 1 would need 0.9 * 10 = 9 rad/s^2 > 0.5 (closed form)
    move = joint_move([0.0, 0.0], [1.0, 0.9], [0.1, 1.0], [10.0, 0.5])
    samples = move.sample(_dense_times(move.duration))
    assert np.max(np.abs(samples.acceleration[:, 1])) <= 0.5 * (1 + 1e-12)
    # closed form: path limits V = min(0.1/1, 1/0.9), A = min(10/1, 0.5/0.9); T = 1/V + V/A
    V, A = 0.1, 0.5 / 0.9
    assert move.duration == pytest.approx(1.0 / V + V / A, rel=1e-12)


@pytest.mark.parametrize("jerk_max", [None, [50.0, 80.0]])
def test_joint_move_speed_percent_stretches_time(jerk_max) -> None:
    # scaling v, a, j by k, k^2, k^3 gives q_k(t) = q_100(k t): the time scaling s(k t)
    # has exactly those derivatives (chain rule, closed form)
    arguments = ([0.0, 1.0], [1.5, -0.5], [2.0, 1.0], [4.0, 3.0], jerk_max)
    full = joint_move(*arguments)
    half = joint_move(*arguments, speed_percent=50.0)
    assert half.duration == pytest.approx(2.0 * full.duration, rel=1e-12)
    times = np.linspace(0.0, half.duration, 37)
    np.testing.assert_allclose(
        half.sample(times).position, full.sample(0.5 * times).position, atol=1e-12
    )
    np.testing.assert_allclose(
        half.sample(times).velocity, 0.5 * full.sample(0.5 * times).velocity, atol=1e-12
    )


def test_joint_move_without_motion_has_zero_duration() -> None:
    # nothing to move takes no time (common practice, no source)
    move = joint_move([0.3, -0.2], [0.3, -0.2], [1.0, 1.0], [1.0, 1.0])
    assert move.duration == 0.0
    np.testing.assert_array_equal(move.sample([0.0, 1.0]).position, [[0.3, -0.2], [0.3, -0.2]])


def test_joint_move_ignores_joints_that_do_not_move() -> None:
    # a joint that stays put does not constrain the others: duration is joint 0's own
    # closed form d/v + v/a (Lynch & Park sec. 9.2.2.2)
    move = joint_move([0.0, 1.0], [2.0, 1.0], [1.0, 1e-3], [1.0, 1e-3])
    assert move.duration == pytest.approx(2.0 / 1.0 + 1.0 / 1.0, rel=1e-12)


@pytest.mark.parametrize(
    ("arguments", "keywords", "message"),
    [
        (([0.0, 0.0], [1.0], [1.0, 1.0], [1.0, 1.0]), {}, r"^q_end: expected shape \(2,\)"),
        (([0.0], [1.0], [0.0], [1.0]), {}, "^velocity_max: expected positive limits"),
        (([0.0], [1.0], [1.0], [1.0]), {"speed_percent": 0.5}, "^speed_percent: expected"),
        (([0.0], [1.0], [1.0], [1.0]), {"speed_percent": 120.0}, "^speed_percent: expected"),
        (([0.0], [np.inf], [1.0], [1.0]), {}, "^q_end: contains NaN"),
    ],
)
def test_joint_move_rejects_bad_input(arguments, keywords, message) -> None:
    with pytest.raises(TimeScalingInputError, match=message):
        joint_move(*arguments, **keywords)


# --- linear moves -----------------------------------------------------------------------


def test_linear_move_profile_is_trapezoid_in_path_length() -> None:
    # trapezoid closed form d/v + v/a (Lynch & Park sec. 9.2.2.2): 1 m at 1 m/s and 2 m/s^2 takes 1.5 s
    profile = linear_move_profile(1.0, 1.0, 2.0)
    assert profile.duration == pytest.approx(1.5, abs=1e-12)
    # speed_percent 50: v * 0.5, a * 0.25 -> closed form d/v + v/a = 2 + 1 = 3 s
    assert linear_move_profile(1.0, 1.0, 2.0, speed_percent=50.0).duration == pytest.approx(3.0)


def test_linear_move_profile_with_jerk_limit() -> None:
    # closed form T = h/v + v/a + a/j with all limits reached (Biagiotti & Melchiorri sec. 3.4)
    profile = linear_move_profile(2.0, 0.5, 1.0, 10.0)
    assert profile.duration == pytest.approx(2.0 / 0.5 + 0.5 / 1.0 + 1.0 / 10.0, rel=1e-12)


def test_linear_move_profile_rejects_negative_length() -> None:
    with pytest.raises(TimeScalingInputError, match=r"^path_length: expected a length >= 0 m"):
        linear_move_profile(-0.1, 1.0, 1.0)


def test_path_speed_limit_closed_form() -> None:
    dq_ds = np.array([[0.5, 4.0], [2.0, 0.0], [0.0, 0.0], [-8.0, 1.0]])
    v_max = np.array([1.0, 2.0])
    result = path_speed_limit(dq_ds, v_max)
    # closed form: min over joints of v_i / |dq_i/ds| (chain rule dq/dt = dq/ds * ds/dt)
    np.testing.assert_allclose(
        result.speed_max_per_sample, [min(1 / 0.5, 2 / 4), 1 / 2, np.inf, min(1 / 8, 2 / 1)]
    )
    np.testing.assert_array_equal(result.limiting_joint_per_sample, [1, 0, -1, 0])
    assert result.speed_max == pytest.approx(1 / 8)
    assert result.limiting_sample == 3


def test_path_speed_limit_keeps_joint_speeds_within_limits() -> None:
    # at the returned path speed the fastest joint runs exactly at its limit
    # (chain rule, closed form)
    rng = np.random.default_rng(7)
    dq_ds = rng.normal(size=(50, 6))
    v_max = rng.uniform(0.5, 3.0, size=6)
    speed = path_speed_limit(dq_ds, v_max).speed_max
    ratio = np.abs(dq_ds) * speed / v_max
    assert np.max(ratio) == pytest.approx(1.0, rel=1e-12)


def test_path_speed_limit_rejects_bad_shapes() -> None:
    with pytest.raises(TimeScalingInputError, match=r"^velocity_max: expected shape \(3,\)"):
        path_speed_limit(np.ones((4, 3)), [1.0, 1.0])
    with pytest.raises(TimeScalingInputError, match=r"^dq_ds: expected shape \(S, n\)"):
        path_speed_limit(np.ones(3), [1.0, 1.0, 1.0])

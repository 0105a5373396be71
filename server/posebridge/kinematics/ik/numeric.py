"""Numerical inverse kinematics for any serial chain, batch-first.

Method: the Levenberg-Marquardt iteration with the error-dependent damping of
Sugihara (2011), "Solvability-unconcerned inverse kinematics by the
Levenberg-Marquardt method", IEEE Trans. Robotics 27(5):

    dq = (J^T J + (E + b) I)^-1 J^T e,    E = |e|^2 / 2,

with ``J`` the geometric Jacobian of the TCP in the base frame
(:func:`posebridge.kinematics.chain_kernels.pose_and_jacobian`, the kernel of
:mod:`posebridge.kinematics.jacobian`) and ``e = [p_target - p;
log(R_target R^T)]`` the position error (m) and the rotation-vector
orientation error (rad, Lynch & Park, Modern Robotics, sec. 3.2.3.3), both
weighted 1. The damping ``E + b`` is large far from the target (a short
gradient-like step) and vanishes at the solution (Gauss-Newton, quadratic
convergence). ``b`` = :data:`DAMPING_BIAS` keeps the system positive definite
at singular configurations.

Joint limits: every iterate is projected onto the limit box (each limited
joint clamped to [lower, upper]); continuous joints are free. Projection
cannot pass through a limit to a solution on the other side; multi-start
restarts cover that.

Restarts: the first start is the seed (the mid-range configuration by
default); later starts are random configurations drawn uniformly inside the
limits from ``rng_seed`` (the same starts for every pose, so results are
reproducible and do not depend on the batch). A start stops when both
tolerances are met, when an iterate no longer moves (a local minimum or a
limit-blocked descent) or after ``max_iterations`` iterations; a start that
is then within 1 mm and 1 mrad may continue up to ten times as long, because
near singular configurations (stretched elbow, straight wrist) the iteration
converges only linearly.

Distinct solutions: a converged configuration is kept unless one already
kept lies within :data:`DISTINCT_TOLERANCE` in every joint, revolute joints
compared modulo 2 pi (revolution variants are produced afterwards by
:func:`posebridge.kinematics.ik.finishing.finish_solutions`). ``max_solutions=1``
stops at the first solution (fast, for batch checks and dragging); larger
values keep restarting until that many distinct solutions were found or the
starts are used up. A redundant arm (seven axes) has infinitely many
solutions; the result holds those the starts happened to reach. No
null-space term is used: it would pull every start toward the same point of
each self-motion family, and the plain iteration already solves every
benchmark pose (posebridge.bench.ik_numeric).
"""

from __future__ import annotations

import numba as nb
import numpy as np
import numpy.typing as npt

from posebridge.kinematics.branches import branch_geometry
from posebridge.kinematics.chain_kernels import pose_and_jacobian
from posebridge.kinematics.fk import KinematicsInputError, tool_tail
from posebridge.kinematics.ik.finishing import finish_solutions, joint_modes
from posebridge.kinematics.ik.inputs import check_positive, check_seed, check_target_poses
from posebridge.kinematics.ik.solutions import REASON_OUT_OF_REACH, IkSolutions
from posebridge.robot.model import Robot
from posebridge.units import FloatArray, angle_text, length_text

__all__ = [
    "DAMPING_BIAS",
    "DISTINCT_TOLERANCE",
    "IK_PARALLEL_THRESHOLD",
    "METHOD",
    "random_starts",
    "solve_ik_numeric",
]

METHOD = "numerical: Levenberg-Marquardt, Sugihara 2011, multi-start"

DAMPING_BIAS = 1e-7
"""Constant part ``b`` of the damping (Sugihara's small bias term). Measured on
10 000 random reachable poses each of pb-arm6, pb-arm6-offset and pb-arm7: 1e-3 lowers the
success rate of a start, 1e-5 and 1e-6 leave a few near-singular poses unsolved (the
damping dominates the small singular values), 1e-7 to 1e-9 solved all."""

DISTINCT_TOLERANCE = 1e-3
"""Two solutions closer than this in every joint (rad or m) are the same solution."""

IK_PARALLEL_THRESHOLD = 16
"""Batches of at least this many poses use all numba threads (one pose costs
about as much as a few hundred forward kinematics)."""

_EXTENSION = 10
_CLOSE_M = 1e-3
_CLOSE_RAD = 1e-3
"""A start within ``_CLOSE_M`` and ``_CLOSE_RAD`` after ``max_iterations`` may go on
for up to ``_EXTENSION`` times as many iterations (module docstring)."""

_STALL_STEP = 1e-12
"""An iterate that moves less than this in every joint (rad or m) ends its start."""


@nb.njit(cache=True, inline="always")
def _pose_error(R_target, p_target, T, e):
    """Return the pose error ``e = [p_target - p; log(R_target R^T)]``.

    For the pose ``T = [R | p]`` (4, 4), the rotation part as a rotation vector.

    Matrix logarithm (Lynch & Park, Modern Robotics, sec. 3.2.3.3):
    ``theta = atan2(|a| / 2, (tr M - 1) / 2)`` with ``a`` the skew part of
    ``M = R_target R^T``; near ``theta = pi`` the axis comes from the
    symmetric part, ``u u^T = ((M + M^T) / 2 - cos(theta) I) / (1 - cos(theta))``.
    """
    for r in range(3):
        e[r] = p_target[r] - T[r, 3]
    m00 = R_target[0, 0] * T[0, 0] + R_target[0, 1] * T[0, 1] + R_target[0, 2] * T[0, 2]
    m01 = R_target[0, 0] * T[1, 0] + R_target[0, 1] * T[1, 1] + R_target[0, 2] * T[1, 2]
    m02 = R_target[0, 0] * T[2, 0] + R_target[0, 1] * T[2, 1] + R_target[0, 2] * T[2, 2]
    m10 = R_target[1, 0] * T[0, 0] + R_target[1, 1] * T[0, 1] + R_target[1, 2] * T[0, 2]
    m11 = R_target[1, 0] * T[1, 0] + R_target[1, 1] * T[1, 1] + R_target[1, 2] * T[1, 2]
    m12 = R_target[1, 0] * T[2, 0] + R_target[1, 1] * T[2, 1] + R_target[1, 2] * T[2, 2]
    m20 = R_target[2, 0] * T[0, 0] + R_target[2, 1] * T[0, 1] + R_target[2, 2] * T[0, 2]
    m21 = R_target[2, 0] * T[1, 0] + R_target[2, 1] * T[1, 1] + R_target[2, 2] * T[1, 2]
    m22 = R_target[2, 0] * T[2, 0] + R_target[2, 1] * T[2, 1] + R_target[2, 2] * T[2, 2]
    ax = m21 - m12
    ay = m02 - m20
    az = m10 - m01
    twice_sin = np.sqrt(ax * ax + ay * ay + az * az)
    cos_theta = 0.5 * (m00 + m11 + m22 - 1.0)
    theta = np.arctan2(0.5 * twice_sin, cos_theta)
    if cos_theta > -0.99:
        scale = 0.5 if twice_sin < 1e-12 else theta / twice_sin
        e[3] = scale * ax
        e[4] = scale * ay
        e[5] = scale * az
        return
    one_minus_cos = 1.0 - cos_theta
    d0 = (m00 - cos_theta) / one_minus_cos
    d1 = (m11 - cos_theta) / one_minus_cos
    d2 = (m22 - cos_theta) / one_minus_cos
    if d0 >= d1 and d0 >= d2:
        u0 = np.sqrt(max(d0, 0.0))
        u1 = 0.5 * (m01 + m10) / one_minus_cos / u0
        u2 = 0.5 * (m02 + m20) / one_minus_cos / u0
    elif d1 >= d2:
        u1 = np.sqrt(max(d1, 0.0))
        u0 = 0.5 * (m01 + m10) / one_minus_cos / u1
        u2 = 0.5 * (m12 + m21) / one_minus_cos / u1
    else:
        u2 = np.sqrt(max(d2, 0.0))
        u0 = 0.5 * (m02 + m20) / one_minus_cos / u2
        u1 = 0.5 * (m12 + m21) / one_minus_cos / u2
    if u0 * ax + u1 * ay + u2 * az < 0.0:
        u0 = -u0
        u1 = -u1
        u2 = -u2
    e[3] = theta * u0
    e[4] = theta * u1
    e[5] = theta * u2


@nb.njit(cache=True, inline="always")
def _solve_positive_definite(H, g, L, x):
    """``x = H^-1 g`` by Cholesky factorisation ``H = L L^T`` (Golub & Van Loan, alg. 4.2.1)."""
    n = g.shape[0]
    for i in range(n):
        for j in range(i + 1):
            s = H[i, j]
            for k in range(j):
                s -= L[i, k] * L[j, k]
            if i == j:
                L[i, i] = np.sqrt(s)
            else:
                L[i, j] = s / L[j, j]
    for i in range(n):
        s = g[i]
        for k in range(i):
            s -= L[i, k] * x[k]
        x[i] = s / L[i, i]
    for i in range(n - 1, -1, -1):
        s = x[i]
        for k in range(i + 1, n):
            s -= L[k, i] * x[k]
        x[i] = s / L[i, i]


@nb.njit(cache=True, inline="always")
def _distinct(q, kept, count, modes):
    """``q`` differs from every one of the first ``count`` rows of ``kept`` (modulo 2 pi for revolute joints)."""
    two_pi = 2.0 * np.pi
    for m in range(count):
        same = True
        for j in range(q.shape[0]):
            d = q[j] - kept[m, j]
            if modes[j] != 0:
                d -= two_pi * np.floor(d / two_pi + 0.5)
            if abs(d) > DISTINCT_TOLERANCE:
                same = False
                break
        if same:
            return False
    return True


@nb.njit(cache=True)
def _solve_one(R_target, p_target, seed, problem, q_out, closest_out):
    """Multi-start LM for one pose; fills ``q_out`` (M, n) from the top, returns the count.

    ``problem`` holds what every pose shares: ``(starts, table, prismatic,
    axes, tail, lower, upper, clamp, modes, position_tolerance,
    orientation_tolerance, max_iterations, damping_bias)``
    (:func:`solve_ik_numeric`). Not inlined into the two drivers (unlike the
    FK kernels): the body is large, and inlining it twice tripled the first
    compile time.

    ``closest_out`` (3,) receives the position error (m), orientation error
    (rad) and starts used; the errors are those of the start that came
    closest (smallest ``E``), zero when a solution was found.
    """
    (
        starts,
        table,
        prismatic,
        axes,
        tail,
        lower,
        upper,
        clamp,
        modes,
        position_tolerance,
        orientation_tolerance,
        max_iterations,
        damping_bias,
    ) = problem
    n = seed.shape[0]
    M = q_out.shape[0]
    R = np.empty((3, 3))
    p = np.empty(3)
    R2 = np.empty((3, 3))
    p2 = np.empty(3)
    w = np.empty((n, 3))
    origin = np.empty((n, 3))
    T = np.empty((4, 4))
    J = np.empty((6, n))
    e = np.empty(6)
    H = np.empty((n, n))
    g = np.empty(n)
    L = np.empty((n, n))
    dq = np.empty(n)
    q = np.empty(n)
    count = 0
    best_energy = np.inf
    closest_out[0] = np.inf
    closest_out[1] = np.inf
    used = 0
    for s in range(starts.shape[0] + 1):
        used += 1
        for j in range(n):
            v = seed[j] if s == 0 else starts[s - 1, j]
            if clamp[j]:
                v = min(max(v, lower[j]), upper[j])
            q[j] = v
        converged = False
        energy = np.inf
        position_error = np.inf
        orientation_error = np.inf
        for iteration in range(_EXTENSION * max_iterations + 1):
            pose_and_jacobian(q, table, prismatic, axes, tail, False, R, p, R2, p2, w, origin, T, J)
            _pose_error(R_target, p_target, T, e)
            position_error = np.sqrt(e[0] * e[0] + e[1] * e[1] + e[2] * e[2])
            orientation_error = np.sqrt(e[3] * e[3] + e[4] * e[4] + e[5] * e[5])
            energy = 0.5 * (position_error * position_error + orientation_error * orientation_error)
            if position_error <= position_tolerance and orientation_error <= orientation_tolerance:
                converged = True
                break
            if iteration >= max_iterations and (
                position_error > _CLOSE_M or orientation_error > _CLOSE_RAD
            ):
                break
            damping = energy + damping_bias
            for i in range(n):
                gi = 0.0
                for r in range(6):
                    gi += J[r, i] * e[r]
                g[i] = gi
                for k in range(i + 1):
                    h = 0.0
                    for r in range(6):
                        h += J[r, i] * J[r, k]
                    H[i, k] = h
                    H[k, i] = h
                H[i, i] += damping
            _solve_positive_definite(H, g, L, dq)
            moved = 0.0
            for j in range(n):
                v = q[j] + dq[j]
                if clamp[j]:
                    v = min(max(v, lower[j]), upper[j])
                moved = max(moved, abs(v - q[j]))
                q[j] = v
            if moved < _STALL_STEP:
                break
        if converged:
            if _distinct(q, q_out, count, modes):
                q_out[count, :] = q
                count += 1
                if count >= M:
                    break
        elif energy < best_energy:
            best_energy = energy
            closest_out[0] = position_error
            closest_out[1] = orientation_error
    if count > 0:
        closest_out[0] = 0.0
        closest_out[1] = 0.0
    closest_out[2] = used
    return count


@nb.njit(cache=True)
def _solve_serial(targets, seeds, problem, q_out, counts, closest):
    for k in range(targets.shape[0]):
        T = targets[k]
        counts[k] = _solve_one(T[:3, :3], T[:3, 3], seeds[k], problem, q_out[k], closest[k])


@nb.njit(cache=True, parallel=True)
def _solve_parallel(targets, seeds, problem, q_out, counts, closest):
    for k in nb.prange(targets.shape[0]):
        T = targets[k]
        counts[k] = _solve_one(T[:3, :3], T[:3, 3], seeds[k], problem, q_out[k], closest[k])


def random_starts(robot: Robot, count: int, rng_seed: int) -> FloatArray:
    """Restart configurations drawn uniformly inside the joint ranges.

    Parameters
    ----------
    robot : Robot
    count : int
    rng_seed : int
        Seed of ``numpy.random.default_rng``.

    Returns
    -------
    starts : array, shape (count, n)
        Continuous joints are drawn over their one-revolution range.
    """
    rng = np.random.default_rng(rng_seed)
    return rng.uniform(robot.lower, robot.upper, size=(count, robot.dof))


def _count(value: int, name: str, minimum: int) -> int:
    if int(value) != value or value < minimum:
        raise KinematicsInputError(f"{name}: expected an integer >= {minimum}, got {value!r}")
    return int(value)


def solve_ik_numeric(
    robot: Robot,
    T_base_tool: npt.ArrayLike,
    *,
    T_flange_tool: npt.ArrayLike | None = None,
    seed: npt.ArrayLike | None = None,
    position_tolerance_m: float = 1e-6,
    orientation_tolerance_rad: float = 1e-6,
    max_solutions: int = 16,
    restarts: int = 200,
    max_iterations: int = 30,
    rng_seed: int = 0,
    enforce_limits: bool = True,
    all_revolutions: bool = False,
) -> IkSolutions:
    """Joint configurations that put the TCP at target poses, by multi-start Levenberg-Marquardt.

    Method, limits, restarts and distinctness: module docstring (Sugihara 2011).

    Parameters
    ----------
    robot : Robot
    T_base_tool : array-like, shape (N, 4, 4)
        Target tool poses in the base frame, m.
    T_flange_tool : array-like, shape (4, 4), optional
        Tool pose in the flange frame; the robot's default tool if omitted.
    seed : array-like, shape (n,) or (N, n), optional
        First start (e.g. the current configuration while dragging); the
        mid-range configuration if omitted. With a seed, solutions are
        ordered by joint distance to it.
    position_tolerance_m, orientation_tolerance_rad : float
        A solution's TCP lies within these of the target (Euclidean position
        error, rotation angle of the orientation error).
    max_solutions : int
        Distinct solutions to collect per pose; 1 stops at the first solution.
    restarts : int
        Random starts after the seed (0: the seed only).
    max_iterations : int
        Iterations per start.
    rng_seed : int
        Seed of the random starts.
    enforce_limits : bool
        Project iterates onto the joint limits. With False the search is
        unconstrained and ``within_limits`` tells which solutions respect them.
    all_revolutions : bool
        One slot per in-limit revolution variant of joints whose range exceeds one
        revolution (see :func:`posebridge.kinematics.ik.finishing.finish_solutions`).

    Returns
    -------
    IkSolutions
        ``M = max_solutions`` slots per pose (times the revolution variants with
        ``all_revolutions``); poses without a solution get the reason
        ``"out of reach (...)"`` with the closest approach found. A numerical
        search cannot prove a pose unreachable: a failure after all starts
        is reported as out of reach.

    Examples
    --------
    >>> from posebridge.robot.library import load_robot
    >>> from posebridge.kinematics.fk import fk_tool
    >>> robot = load_robot("pb-arm6-offset")
    >>> target = fk_tool(robot, [[0.3, 0.2, -0.4, 0.5, 0.6, 0.7]])
    >>> result = solve_ik_numeric(robot, target, max_solutions=1)
    >>> bool(result.valid[0, 0])
    True
    """
    targets = check_target_poses(T_base_tool)
    N = targets.shape[0]
    max_solutions = _count(max_solutions, "max_solutions", 1)
    restarts = _count(restarts, "restarts", 0)
    max_iterations = _count(max_iterations, "max_iterations", 1)
    position_tolerance = check_positive(position_tolerance_m, "position_tolerance_m")
    orientation_tolerance = check_positive(orientation_tolerance_rad, "orientation_tolerance_rad")
    seeds, has_seed = check_seed(robot, seed, N)
    # a writable copy: read-only views would compile a second kernel signature
    starts_from = np.array(
        seeds if has_seed else np.broadcast_to(robot.mid_configuration(), (N, robot.dof)),
        dtype=np.float64,
        order="C",
    )
    tail = tool_tail(robot, T_flange_tool)
    modes = joint_modes(robot)
    clamp = ~robot.continuous if enforce_limits else np.zeros(robot.dof, dtype=bool)
    q_raw = np.full((N, max_solutions, robot.dof), np.nan)
    counts = np.zeros(N, dtype=np.int64)
    closest = np.zeros((N, 3))
    kernel = _solve_parallel if N >= IK_PARALLEL_THRESHOLD else _solve_serial
    problem = (
        random_starts(robot, restarts, rng_seed),
        robot.motion_table,
        robot.prismatic,
        robot.axes,
        tail,
        robot.lower,
        robot.upper,
        clamp,
        modes,
        position_tolerance,
        orientation_tolerance,
        max_iterations,
        DAMPING_BIAS,
    )
    kernel(targets, starts_from, problem, q_raw, counts, closest)
    ok = np.arange(max_solutions)[None, :] < counts[:, None]
    unreachable = [
        ""
        if counts[i] > 0
        else f"{REASON_OUT_OF_REACH} (numerical search from {int(closest[i, 2])} starts; "
        f"closest {length_text(closest[i, 0], 3, significant=True)}, "
        f"{angle_text(closest[i, 1], 3, unit='deg', significant=True)} away)"
        for i in range(N)
    ]
    return finish_solutions(
        robot,
        q_raw,
        ok,
        seed=seeds if has_seed else None,
        all_revolutions=all_revolutions,
        unreachable_reason=unreachable,
        method=METHOD,
        label_scheme=branch_geometry(robot).scheme,
    )

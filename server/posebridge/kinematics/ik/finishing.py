"""The finishing step every IK solver shares.

Raw candidates become :class:`IkSolutions` (:mod:`posebridge.kinematics.ik.solutions`) slots.

Slots in each row are sorted: valid and within limits first, then valid but
outside limits, then empty; inside each group by the weighted joint distance
to the seed when a seed was given, otherwise by a stable branch order (front
before back, up/left before down/right, positive before negative, then fewer
extra revolutions). :func:`finish_solutions` turns raw candidates of any solver into this
form (revolution variants, limit flags, order); the numba block kernel
:func:`finish_rows` does the same inside the analytic kernels.

Revolution variants: a revolute joint value ``v`` is first wrapped to (-pi, pi];
``v + 2 pi k`` is stored. Without ``all_revolutions`` each candidate appears once
with the ``k`` nearest the seed among the values inside the limits (nearest
zero without a seed; the value nearest the range when no ``k`` fits). With
``all_revolutions`` every in-limit ``k`` of every joint gives its own slot.
Continuous joints have no limits: only the nearest ``k`` is given. The
reported ``revolutions`` count whole revolutions away from the revolution
centred on the joint's range, ``q - (lower + upper) / 2`` in whole revolutions
rounded half toward zero (:func:`posebridge.kinematics.branches.centred_revolution`:
the closed window [centre - pi, centre + pi] is revolution 0, so exactly +-180 deg
from the centre is no extra revolution): a joint whose range spans at most one
revolution (e.g. -197..76 deg) always reports 0, and only joints with more than
one revolution of range can show extra revolutions. Continuous joints count from zero.

Seed distance: ``sum_j ((q_j - seed_j) / v_max_j)^2``, the squared joint
distance weighted by each joint's speed limit, so that metres and radians are
comparable (a time-like measure; common practice, no source).
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numba as nb
import numpy as np
import numpy.typing as npt

from posebridge.arrays import (
    BoolArray,
    FloatArray,
    Int8Array,
    Int16Array,
    writable_float_array,
)
from posebridge.kinematics.branches import centred_revolution, label_branches
from posebridge.kinematics.fk import KinematicsInputError
from posebridge.kinematics.ik.inputs import check_seed
from posebridge.kinematics.ik.solutions import (
    REASON_NO_WITHIN_LIMITS,
    REASON_OUT_OF_REACH,
    IkSolutions,
    reasons_from_codes,
)
from posebridge.robot.model import Robot

__all__ = [
    "BLOCK_SIZE",
    "JOINT_CONTINUOUS",
    "JOINT_PRISMATIC",
    "JOINT_REVOLUTE",
    "JOINT_REVOLUTE_ONE_REVOLUTION",
    "PARALLEL_POSES",
    "BlockSolver",
    "FinishInputs",
    "KernelOutputs",
    "block_count",
    "block_rows",
    "empty_candidates",
    "empty_outputs",
    "finish_inputs",
    "finish_rows",
    "finish_solutions",
    "joint_modes",
    "joint_table",
    "joint_weights",
    "revolution_variant_counts",
    "run_blocks",
    "slots_per_candidate",
    "solutions_from_outputs",
]

FinishInputs = tuple[FloatArray, bool, FloatArray, bool]
"""Inputs of the finishing step every solver kernel passes on (:func:`finish_inputs`):
seed, has_seed, joint table, all_revolutions."""

KernelOutputs = tuple[
    FloatArray, BoolArray, BoolArray, Int8Array, Int8Array, Int8Array, Int16Array, Int8Array
]
"""Output arrays of a solver kernel (:func:`empty_outputs`): q, valid, within, shoulder,
elbow, wrist, revolutions, reason codes."""


JOINT_PRISMATIC = 0
JOINT_REVOLUTE = 1
"""Revolute joint whose range reaches outside (-pi, pi] (revolution variants possible)."""
JOINT_CONTINUOUS = 2
JOINT_REVOLUTE_ONE_REVOLUTION = 3
"""Revolute joint whose range lies inside (-pi, pi]: only the wrapped value can be in limits."""


_TWO_PI = 2.0 * np.pi
BLOCK_SIZE = 128
"""Poses per block in the IK drivers (one scratch allocation per block). Small enough that the
batches of a few hundred poses of an interval search (:mod:`posebridge.cell.external_kinematics`)
split evenly over two threads; on the external-axis benchmark 128 took 14 % less time than 256."""
PARALLEL_POSES = 2 * BLOCK_SIZE
"""Batches of at least two blocks run on the parallel driver (:func:`run_blocks`)."""
_REVOLUTION_SLACK = 1e-12
"""Revolutions (fractions of 2 pi) by which a value may pass a limit and still count as inside."""


def joint_modes(robot: Robot) -> Int8Array:
    """Per-joint revolution handling, one of the ``JOINT_*`` constants.

    Returns
    -------
    modes : array of int8, shape (n,)
    """
    modes = np.full(robot.dof, JOINT_REVOLUTE, dtype=np.int8)
    modes[(robot.lower > -np.pi) & (robot.upper <= np.pi)] = JOINT_REVOLUTE_ONE_REVOLUTION
    modes[robot.continuous] = JOINT_CONTINUOUS
    modes[robot.prismatic] = JOINT_PRISMATIC
    return modes


def joint_weights(robot: Robot) -> FloatArray:
    """Seed-distance weights ``1 / v_max`` per joint (s/rad or s/m), shape (n,).

    Joints without a positive finite speed limit get weight 1.
    """
    v = robot.velocity_max
    ok = np.isfinite(v) & (v > 0.0)
    return np.where(ok, 1.0 / np.where(ok, v, 1.0), 1.0)


def joint_table(robot: Robot) -> FloatArray:
    """Per-joint kernel inputs ``[lower, upper, mode, weight]``, shape (n, 4).

    ``mode`` from :func:`joint_modes`, ``weight`` from :func:`joint_weights`.
    """
    return np.ascontiguousarray(
        np.stack(
            [robot.lower, robot.upper, joint_modes(robot).astype(np.float64), joint_weights(robot)],
            axis=1,
        )
    )


def revolution_variant_counts(robot: Robot) -> npt.NDArray[np.int64]:
    """Largest number of 2 pi variants of one joint value inside the limits, shape (n,).

    ``floor((upper - lower) / 2 pi) + 1`` for limited revolute joints, 1 for
    prismatic and continuous joints.
    """
    counts = np.ones(robot.dof, dtype=np.int64)
    limited = joint_modes(robot) == JOINT_REVOLUTE
    span = (robot.upper - robot.lower)[limited] / _TWO_PI
    counts[limited] = np.floor(span + _REVOLUTION_SLACK).astype(np.int64) + 1
    return counts


def slots_per_candidate(robot: Robot, all_revolutions: bool) -> int:
    """Output slots needed per raw candidate: 1, or the product of :func:`revolution_variant_counts`."""
    return int(np.prod(revolution_variant_counts(robot))) if all_revolutions else 1


@nb.njit(cache=True, inline="always")
def _wrap_angle(v):
    """``v`` wrapped to (-pi, pi]."""
    return v - 2.0 * np.pi * np.ceil((v - np.pi) * (0.5 / np.pi))


@nb.njit(cache=True, inline="always")
def _revolution_bounds(base, lower, upper):
    """Smallest and largest ``k`` with ``base + 2 pi k`` inside [lower, upper] (kmin > kmax if none)."""
    inverse_two_pi = 0.5 / np.pi
    kmin = np.ceil((lower - base) * inverse_two_pi - 1e-12)
    kmax = np.floor((upper - base) * inverse_two_pi + 1e-12)
    return int(kmin), int(kmax)


@nb.njit(cache=True, inline="always")
def _nearest_revolution(base, seed, lower, upper, mode):
    """Revolution count ``k`` of the representative nearest ``seed`` (see module docstring)."""
    two_pi = 2.0 * np.pi
    k = int(np.floor((seed - base) * (0.5 / np.pi) + 0.5))
    if mode == 2.0:
        return k
    kmin, kmax = _revolution_bounds(base, lower, upper)
    if kmin <= kmax:
        return min(max(k, kmin), kmax)
    below = lower - (base + two_pi * kmax)
    above = base + two_pi * kmin - upper
    return kmax if below <= above else kmin


@nb.njit(cache=True, inline="always")
def _rank(label):
    """Stable branch order of one label: +1 first, then 0, then -1."""
    return 1 - label


@nb.njit(cache=True, inline="always")
def block_count(N):
    """Blocks of :data:`BLOCK_SIZE` poses that cover ``N`` poses."""
    return (N + BLOCK_SIZE - 1) // BLOCK_SIZE


@nb.njit(cache=True, inline="always")
def block_rows(block, N):
    """First and one-past-last pose of block ``block`` of ``N`` poses."""
    start = block * BLOCK_SIZE
    return start, min(N, start + BLOCK_SIZE)


@nb.njit(cache=True)
def empty_candidates(B, M0, n):
    """Scratch arrays of one block's raw candidates, the input of :func:`finish_rows`.

    Returns ``(raw_q, raw_ok, raw_labels, raw_reason)``: shapes (B, M0, n),
    (B, M0) bool (all False), (B, M0, 3) int8 (all 0) and (B,) int8.
    """
    return (
        np.empty((B, M0, n)),
        np.zeros((B, M0), dtype=np.bool_),
        np.zeros((B, M0, 3), dtype=np.int8),
        np.empty(B, dtype=np.int8),
    )


@nb.njit(cache=True)
def finish_rows(start, stop, raw_offset, raw, finish, out):
    """Revolution variants, limit flags, slot order and reason codes for poses ``start..stop-1``.

    ``raw`` is :func:`empty_candidates` filled by a solver: pose ``i``'s raw
    candidates are row ``i - raw_offset`` of ``raw_q`` (B, M0, n; revolute
    values in any revolution), ``raw_ok`` (B, M0) marks those that reach the
    pose, ``raw_labels`` (B, M0, 3) holds their shoulder, elbow and wrist
    labels and ``raw_reason`` (B,) the reason code to report if none reaches
    it. ``finish`` is :func:`finish_inputs`: ``seed`` (N, n), ``has_seed``,
    ``joints`` (:func:`joint_table`) and ``all_revolutions``. ``out`` is
    :func:`empty_outputs` (N rows, M slots: M0, or M0 times the product of
    revolution variants with ``all_revolutions``); row ``i`` is written, with
    reason code 0 (solved), 3 (valid only outside the limits) or ``raw_reason``.

    One call handles a block of poses: every array argument costs a
    reference-count update per call, so nothing here is called per pose with
    arrays.
    """
    raw_q, raw_ok, raw_labels, raw_reason = raw
    seed, has_seed, joints, all_revolutions = finish
    out_q, out_valid, out_within, out_sh, out_el, out_wr, out_revolutions, codes = out
    n = raw_q.shape[2]
    M = out_q.shape[1]
    two_pi = 2.0 * np.pi
    value = np.empty((M, n))
    revolutions = np.empty((M, n), dtype=np.int16)
    labels = np.empty((M, 3), dtype=np.int8)
    group = np.empty(M, dtype=np.int8)
    key = np.empty(M)
    order = np.empty(M, dtype=np.int64)
    for i in range(start, stop):
        row = i - raw_offset
        count = 0
        for r in range(raw_q.shape[1]):
            if not raw_ok[row, r]:
                continue
            n_variants = 1
            if all_revolutions:
                for j in range(n):
                    if joints[j, 2] == 1.0:
                        kmin, kmax = _revolution_bounds(
                            _wrap_angle(raw_q[row, r, j]), joints[j, 0], joints[j, 1]
                        )
                        if kmax >= kmin:
                            n_variants *= kmax - kmin + 1
            for variant in range(n_variants):
                if count >= M:
                    break
                code = variant
                within = True
                total_revolutions = 0
                distance = 0.0
                for j in range(n):
                    v = raw_q[row, r, j]
                    lower = joints[j, 0]
                    upper = joints[j, 1]
                    mode = joints[j, 2]
                    k = 0
                    if mode == 3.0:
                        v = v if -np.pi < v <= np.pi else _wrap_angle(v)
                        if v < lower or v > upper:
                            k = _nearest_revolution(v, seed[i, j], lower, upper, mode)
                            v += two_pi * k
                    elif mode != 0.0:
                        base = v if -np.pi < v <= np.pi else _wrap_angle(v)
                        if has_seed:
                            k = int(np.floor((seed[i, j] - base) * (0.5 / np.pi) + 0.5))
                        v = base + two_pi * k
                        if mode == 1.0 and (all_revolutions or v < lower or v > upper):
                            k = _nearest_revolution(base, seed[i, j], lower, upper, mode)
                        if all_revolutions and mode == 1.0:
                            kmin, kmax = _revolution_bounds(base, lower, upper)
                            if kmax >= kmin:
                                width = kmax - kmin + 1
                                k = kmin + code % width
                                code //= width
                        v = base + two_pi * k
                    if mode != 2.0 and (v < lower - 1e-12 or v > upper + 1e-12):
                        within = False
                    if mode == 1.0:
                        # reported revolutions count from the one centred on the range,
                        # the closed window [centre - pi, centre + pi]
                        k = centred_revolution(v - 0.5 * (lower + upper))
                    elif mode == 3.0:
                        k = 0
                    value[count, j] = v
                    revolutions[count, j] = k
                    total_revolutions += abs(k)
                    if has_seed:
                        d = (v - seed[i, j]) * joints[j, 3]
                        distance += d * d
                sh = raw_labels[row, r, 0]
                el = raw_labels[row, r, 1]
                wr = raw_labels[row, r, 2]
                labels[count, 0] = sh
                labels[count, 1] = el
                labels[count, 2] = wr
                group[count] = 0 if within else 1
                if has_seed:
                    key[count] = distance
                else:
                    key[count] = (
                        1000.0 * (9 * _rank(sh) + 3 * _rank(el) + _rank(wr)) + total_revolutions
                    )
                order[count] = count
                count += 1
        # insertion sort by (group, key, index); group 0 is in limits, 1 outside
        for a in range(1, count):
            item = order[a]
            b = a - 1
            while b >= 0:
                other = order[b]
                if group[other] != group[item]:
                    after = group[other] > group[item]
                elif key[other] != key[item]:
                    after = key[other] > key[item]
                else:
                    after = other > item
                if not after:
                    break
                order[b + 1] = other
                b -= 1
            order[b + 1] = item
        codes[i] = raw_reason[row] if count == 0 else (0 if group[order[0]] == 0 else 3)
        for m in range(M):
            if m < count:
                src = order[m]
                for j in range(n):
                    out_q[i, m, j] = value[src, j]
                    out_revolutions[i, m, j] = revolutions[src, j]
                out_valid[i, m] = True
                out_within[i, m] = group[src] == 0
                out_sh[i, m] = labels[src, 0]
                out_el[i, m] = labels[src, 1]
                out_wr[i, m] = labels[src, 2]
            else:
                for j in range(n):
                    out_q[i, m, j] = np.nan
                    out_revolutions[i, m, j] = 0
                out_valid[i, m] = False
                out_within[i, m] = False
                out_sh[i, m] = 0
                out_el[i, m] = 0
                out_wr[i, m] = 0


@nb.njit(cache=True)
def _finish_block(start, stop, raw, finish, out):
    finish_rows(start, stop, 0, raw, finish, out)


@nb.njit(cache=True, parallel=True)
def _finish_parallel(raw, finish, out):
    N = raw[0].shape[0]
    for block in nb.prange(block_count(N)):
        start, stop = block_rows(block, N)
        _finish_block(start, stop, raw, finish, out)


def run_blocks(
    block_kernel: Callable[..., None], parallel_kernel: Callable[..., None], N: int, *args: object
) -> None:
    """Run a solver kernel over ``N`` poses in blocks of :data:`BLOCK_SIZE`.

    ``block_kernel(start, stop, *args)`` solves poses ``start..stop-1``;
    ``parallel_kernel(*args)`` runs it over all blocks with ``numba.prange``.
    A batch of one block runs in the calling thread; from :data:`PARALLEL_POSES`
    on the blocks are shared among numba's threads. Idle, a parallel region costs
    a few microseconds, far less than a block (about 0.1 ms); on a busy machine the
    threads wait passively (:mod:`posebridge.kernel_threads`), so a region whose second
    thread finds no free core costs about what the serial run does.
    """
    if N >= PARALLEL_POSES:
        parallel_kernel(*args)
        return
    for start in range(0, N, BLOCK_SIZE):
        block_kernel(start, min(N, start + BLOCK_SIZE), *args)


@dataclass(frozen=True, eq=False)
class BlockSolver:
    """A family's block kernels with the inputs that do not depend on the poses.

    Prepared once per robot and tool (tool transform, kernel parameters, joint
    table), it solves any number of pose batches (:meth:`solve`).

    Attributes
    ----------
    robot : Robot
    block_kernel, parallel_kernel : callable
        :func:`run_blocks`'s kernels.
    constants : tuple
        The family's problem after the poses (``problem[1:]`` of its kernels).
    candidates : int
        Raw candidates per pose (M0).
    method : str
    joints : array, shape (n, 4)
        :func:`joint_table`.
    """

    robot: Robot
    block_kernel: Callable[..., None]
    parallel_kernel: Callable[..., None]
    constants: tuple[object, ...]
    candidates: int
    method: str
    joints: FloatArray

    def solve(
        self, T: FloatArray, *, seed: npt.ArrayLike | None = None, all_revolutions: bool = False
    ) -> IkSolutions:
        """Solve poses ``T`` (N, 4, 4), already checked by :func:`~posebridge.kinematics.ik.inputs.check_target_poses`.

        The kernels (:func:`run_blocks`) get ``(T, *constants)``, the
        :func:`finish_inputs` and :func:`empty_outputs` with ``M = M0 *``
        :func:`slots_per_candidate` slots; their reason codes become the texts of
        :func:`~posebridge.kinematics.ik.solutions.reasons_from_codes`.
        """
        robot = self.robot
        N = len(T)
        out = empty_outputs(
            N, self.candidates * slots_per_candidate(robot, all_revolutions), robot.dof
        )
        seed_array, has_seed = check_seed(robot, seed, N)
        finish = (seed_array, has_seed, self.joints, bool(all_revolutions))
        run_blocks(
            self.block_kernel,
            self.parallel_kernel,
            N,
            (np.ascontiguousarray(T), *self.constants),
            finish,
            out,
        )
        return solutions_from_outputs(robot, out, reasons_from_codes(out[7]), method=self.method)


def finish_inputs(
    robot: Robot, seed: npt.ArrayLike | None, N: int, all_revolutions: bool
) -> FinishInputs:
    """Return the inputs of :func:`finish_rows` shared by every solver of ``N`` poses.

    Returns
    -------
    seed : array, shape (N, n)
        :func:`~posebridge.kinematics.ik.inputs.check_seed` (zeros without a seed).
    has_seed : bool
    joints : array, shape (n, 4)
        :func:`joint_table`.
    all_revolutions : bool
    """
    seed_array, has_seed = check_seed(robot, seed, N)
    return seed_array, has_seed, joint_table(robot), bool(all_revolutions)


def empty_outputs(N: int, M: int, n: int) -> KernelOutputs:
    """Output arrays of a solver kernel: q, valid, within, shoulder, elbow, wrist, revolutions, codes.

    Shapes (N, M, n), (N, M) x 5, (N, M, n), (N,).
    """
    return (
        np.empty((N, M, n)),
        np.empty((N, M), dtype=bool),
        np.empty((N, M), dtype=bool),
        np.empty((N, M), dtype=np.int8),
        np.empty((N, M), dtype=np.int8),
        np.empty((N, M), dtype=np.int8),
        np.empty((N, M, n), dtype=np.int16),
        np.empty(N, dtype=np.int8),
    )


def solutions_from_outputs(
    robot: Robot,
    out: KernelOutputs,
    reason: tuple[str, ...],
    *,
    ignored_components: tuple[str, ...] = (),
    method: str,
    label_scheme: str = "arm",
) -> IkSolutions:
    """Return the :class:`IkSolutions` held by the filled output arrays of :func:`empty_outputs`.

    ``reason`` (N entries) replaces the kernel's reason codes (the last array);
    the other arguments are copied into the result.
    """
    out_q, out_valid, out_within, out_sh, out_el, out_wr, out_revolutions, _ = out
    return IkSolutions(
        q=out_q,
        valid=out_valid,
        within_limits=out_within,
        shoulder=out_sh,
        elbow=out_el,
        wrist=out_wr,
        revolutions=out_revolutions,
        reason=reason,
        ignored_components=ignored_components,
        method=method,
        joint_names=robot.joint_names,
        label_scheme=label_scheme,
    )


def finish_solutions(
    robot: Robot,
    q_raw: npt.ArrayLike,
    ok: npt.ArrayLike,
    *,
    labels: tuple[npt.ArrayLike, npt.ArrayLike, npt.ArrayLike] | None = None,
    seed: npt.ArrayLike | None = None,
    all_revolutions: bool = False,
    unreachable_reason: str | Sequence[str] = REASON_OUT_OF_REACH,
    ignored_components: tuple[str, ...] = (),
    method: str,
    label_scheme: str = "arm",
) -> IkSolutions:
    """Build an :class:`IkSolutions` from raw IK candidates of any solver.

    Applies the module's revolution rule, flags joint limits, empties candidates
    that do not reach the pose and orders the slots (module docstring).

    Parameters
    ----------
    robot : Robot
    q_raw : array-like, shape (N, M0, n)
        Candidate configurations (SI); revolute values in any revolution.
    ok : array-like of bool, shape (N, M0)
        The candidate reaches its pose within tolerance; others are dropped.
    labels : (shoulder, elbow, wrist), each array-like of int8, shape (N, M0), optional
        Branch labels; computed with
        :func:`posebridge.kinematics.branches.label_branches` if omitted.
    seed : array-like, shape (n,) or (N, n), optional
    all_revolutions : bool
        One slot per in-limit revolution variant instead of one per candidate.
    unreachable_reason : str or sequence of N str
        Reason for poses without any valid candidate.
    ignored_components, method, label_scheme
        Copied into the result (see :class:`IkSolutions`).

    Returns
    -------
    IkSolutions
        ``M = M0 * slots_per_candidate(robot, all_revolutions)`` slots per pose.
    """
    q = writable_float_array(q_raw)
    if q.ndim != 3 or q.shape[2] != robot.dof:
        raise KinematicsInputError(
            f"candidates: expected shape (N, M0, {robot.dof}), got {q.shape}"
        )
    N, M0, n = q.shape
    ok_array = np.ascontiguousarray(np.broadcast_to(np.asarray(ok, dtype=bool), (N, M0)))
    ok_array = ok_array & np.all(np.isfinite(q), axis=2)
    if labels is None:
        label_array = np.zeros((N, M0, 3), dtype=np.int8)
        flat = q.reshape(N * M0, n)
        keep = ok_array.reshape(N * M0)
        if np.any(keep):
            sh, el, wr = label_branches(robot, flat[keep])
            label_array.reshape(N * M0, 3)[keep] = np.stack([sh, el, wr], axis=1)
    else:
        label_array = np.ascontiguousarray(
            np.stack(
                [np.broadcast_to(np.asarray(x, dtype=np.int8), (N, M0)) for x in labels], axis=2
            )
        )
    M = M0 * slots_per_candidate(robot, all_revolutions)
    out = empty_outputs(N, M, n)
    raw = (q, ok_array, label_array, np.ones(N, dtype=np.int8))
    run_blocks(
        _finish_block, _finish_parallel, N, raw, finish_inputs(robot, seed, N, all_revolutions), out
    )
    codes = out[7]
    unreachable = (
        [unreachable_reason] * N
        if isinstance(unreachable_reason, str)
        else list(unreachable_reason)
    )
    if len(unreachable) != N:
        raise KinematicsInputError(
            f"unreachable_reason: expected {N} entries, got {len(unreachable)}"
        )
    reason = tuple(
        "" if code == 0 else REASON_NO_WITHIN_LIMITS if code == 3 else unreachable[i]
        for i, code in enumerate(codes.tolist())
    )
    return solutions_from_outputs(
        robot,
        out,
        reason,
        ignored_components=ignored_components,
        method=method,
        label_scheme=label_scheme,
    )

"""Numba kernels of the interval-end search of :mod:`posebridge.cell.external_kinematics`.

Per (pose, branch) pair the branch's feasibility, joint-limit margin and elbow fold
(:func:`branch_state_rows`), and per step of the search the next value of every open
bracket by the ITP method (interpolate, truncate, project; Oliveira & Takahashi, ACM
TOMS 47(1), 2020, algorithm 1) with the distinct (target, value) pairs to solve
(:func:`itp_values`), then the bracket update from the solved poses
(:func:`itp_settle`, with the Illinois halving: an end kept twice in a row has its
interpolated values halved, Dowell & Jarratt, BIT 11, 1971). One search step is these
two calls around one IK batch; from :data:`PARALLEL_BRACKETS` open brackets their
per-bracket work runs on numba's threads (each bracket is its own column of
``state``, so the result does not depend on the thread count). Kept
apart from the cell layer's other modules so that the kernel cache key
(:mod:`posebridge.kernel_cache`) depends on numpy and numba only.

The brackets' state is one array ``state`` of shape (10, D), rows :data:`LOW`,
:data:`HIGH` (the bracket, axis values), :data:`MARGIN_LOW`, :data:`MARGIN_HIGH`
(the branch's limit margin at its ends, NaN where the branch does not reach the
pose), :data:`FOLD_END` (the fold at the feasible end), :data:`BEFORE_X` and
:data:`BEFORE_FOLD` (the feasible end before it and its fold, NaN for none),
:data:`REACH_LOW` and :data:`REACH_HIGH` (the IK family's reach margin of the
branch's shoulder at the ends,
:meth:`~posebridge.kinematics.ik.IkSolver.reach_margins`; NaN without one) and
:data:`MOVED` (the end the last update moved: -1 low, 1 high, 0 none yet).
"""

from __future__ import annotations

import numba as nb
import numpy as np
import numpy.typing as npt

FloatArray = npt.NDArray[np.float64]
BoolArray = npt.NDArray[np.bool_]

__all__ = [
    "BEFORE_FOLD",
    "BEFORE_X",
    "FOLD_END",
    "HIGH",
    "LOW",
    "MARGIN_HIGH",
    "MARGIN_LOW",
    "MOVED",
    "PARALLEL_BRACKETS",
    "REACH_HIGH",
    "REACH_LOW",
    "branch_state_rows",
    "itp_settle",
    "itp_values",
    "translated_poses",
]

(
    LOW,
    HIGH,
    MARGIN_LOW,
    MARGIN_HIGH,
    FOLD_END,
    BEFORE_X,
    BEFORE_FOLD,
    REACH_LOW,
    REACH_HIGH,
    MOVED,
) = range(10)
PARALLEL_BRACKETS = 256
"""Open brackets from which a search step's kernels run on numba's threads."""


@nb.njit(cache=True)
def translated_poses(T_origin, along, targets, values):
    """Pose ``T_origin[targets[i]]`` moved by ``-values[i] * along``, shape (D, 4, 4).

    The track's base-frame target at track value ``s`` is its pose at 0 translated by
    ``-s`` times the travel direction in the base frame (``along``, (3,)); ``T_origin``
    is (K, 4, 4).
    """
    out = np.empty((targets.shape[0], 4, 4))
    for i in range(targets.shape[0]):
        k = targets[i]
        for r in range(4):
            for c in range(4):
                out[i, r, c] = T_origin[k, r, c]
        for r in range(3):
            out[i, r, 3] -= values[i] * along[r]
    return out


@nb.njit(cache=True)
def _branch_state(q, valid, within, labels, r, bit, table, limits, pairing, with_fold):
    """``(feasible, margin, fold)`` of branch ``bit`` at pose ``r`` (:func:`branch_state_rows`).

    The fold is NaN unless ``with_fold``.
    """
    shoulder, elbow, wrist = labels
    lower, upper = limits
    joint, partner = pairing
    other = partner[bit]
    feasible = 0.0
    best = -np.inf
    fold = np.inf
    for m in range(q.shape[1]):
        if not valid[r, m]:
            continue
        code = 9 * shoulder[r, m] + 3 * elbow[r, m] + wrist[r, m] + 13
        if (table[code] >> bit) & 1 == 0:
            continue
        if within[r, m]:
            feasible = 1.0
        smallest = np.inf
        for j in range(q.shape[2]):
            smallest = min(smallest, q[r, m, j] - lower[j], upper[j] - q[r, m, j])
        best = max(best, smallest)
        if other < 0 or not with_fold:
            continue
        for n in range(q.shape[1]):
            if n == m or not valid[r, n]:
                continue
            code = 9 * shoulder[r, n] + 3 * elbow[r, n] + wrist[r, n] + 13
            if (table[code] >> other) & 1 == 1:
                turn = q[r, m, joint] - q[r, n, joint]
                turn -= 2.0 * np.pi * np.round(turn / (2.0 * np.pi))
                fold = min(fold, 0.25 * turn * turn)
    return (
        feasible,
        best if best > -np.inf else np.nan,
        fold if fold < np.inf else np.nan,
    )


@nb.njit(cache=True)
def branch_state_rows(q, valid, within, labels, rows, branches, table, limits, pairing, out):
    """``out[i] = (feasible, margin, fold)`` of branch ``branches[i]`` at pose ``rows[i]``.

    Slot by slot of pose ``rows[i]`` (IK solutions ``q`` (N, M, n), ``valid`` and
    ``within`` (N, M); ``labels`` is (shoulder, elbow, wrist), each (N, M)): a slot on
    the branch (its bit ``branches[i]`` set in ``table`` at the slot's label code
    ``9 (shoulder + 1) + 3 (elbow + 1) + (wrist + 1)``) that reaches the pose counts
    with its smallest joint margin (``limits`` is (lower, upper), (n,) each); one
    inside the limits makes the pair feasible. The fold is the smallest
    ``((q_e - q'_e) / 2)^2`` (difference wrapped to one turn) between such a slot and
    a slot of the elbow partner branch (``pairing`` is (elbow joint e, partner branch
    per branch, -1 for none)). ``out`` has shape (D, 3); NaN where undefined.
    """
    for i in range(rows.shape[0]):
        feasible, margin, fold = _branch_state(
            q, valid, within, labels, rows[i], branches[i], table, limits, pairing, True
        )
        out[i, 0] = feasible
        out[i, 1] = margin
        out[i, 2] = fold


@nb.njit(cache=True)
def _itp_value(state, i, low_feasible, start_width, most, step, tolerance, kappa):
    """Next value of bracket ``i`` by the ITP method (Oliveira & Takahashi 2020, algorithm 1).

    Interpolate: regula falsi on the margins where both are finite and of opposite
    sign (a joint limit ends the interval); where only the feasible end has a margin
    (the reach ends it), regula falsi on the reach margins if they are of opposite
    sign, else the secant of the fold through the feasible end and the one before
    it, extended to zero, if that root lies inside; else the middle. Truncate
    towards the middle by ``kappa width^2 / start_width`` (the method's kappa1 = kappa /
    start width, kappa2 = 2), but by at least half the tolerance, so that a value at an
    accurate estimate of the end and the bracket's end on its far side are at most
    one tolerance apart (the smallest step of Brent's zero finder, Brent 1973,
    *Algorithms for Minimization without Derivatives*, ch. 4). Project into the radius
    ``tolerance / 2 * 2^(most - step) - width / 2`` around the middle, which keeps
    every bracket within ``most`` steps (the radius is taken a hair smaller so that
    rounding cannot cost one more step).
    """
    lo = state[LOW, i]
    hi = state[HIGH, i]
    width = hi - lo
    middle = 0.5 * (lo + hi)
    m_lo = state[MARGIN_LOW, i]
    m_hi = state[MARGIN_HIGH, i]
    r_lo = state[REACH_LOW, i]
    r_hi = state[REACH_HIGH, i]
    falsi = middle
    if np.isfinite(m_lo) and np.isfinite(m_hi) and m_lo * m_hi <= 0.0 and m_lo != m_hi:
        falsi = (hi * m_lo - lo * m_hi) / (m_lo - m_hi)
    elif np.isnan(m_lo) != np.isnan(m_hi) and r_lo * r_hi <= 0.0 and r_lo != r_hi:
        falsi = (hi * r_lo - lo * r_hi) / (r_lo - r_hi)  # the comparisons are False with a NaN
    elif np.isnan(m_lo) != np.isnan(m_hi):
        fold_end, before_x, before_fold = (
            state[FOLD_END, i],
            state[BEFORE_X, i],
            state[BEFORE_FOLD, i],
        )
        end = lo if low_feasible[i] else hi
        if np.isfinite(fold_end) and np.isfinite(before_fold) and fold_end != before_fold:
            root = end - fold_end * (end - before_x) / (fold_end - before_fold)
            if lo < root < hi:
                falsi = root
    toward = np.sign(middle - falsi)
    shift = max(kappa * width * width / start_width[i], 0.5 * tolerance * (1.0 - 1e-9))
    truncated = falsi + toward * shift if shift <= abs(middle - falsi) else middle
    radius = 0.5 * tolerance * (1.0 - 1e-9) * 2.0 ** (most[i] - step) - 0.5 * width
    return truncated if abs(truncated - middle) <= radius else middle - toward * radius


@nb.njit(cache=True)
def _itp_values_serial(
    open_, state, low_feasible, start_width, most, step, tolerance, kappa, value
):
    for n in range(open_.shape[0]):
        i = open_[n]
        value[i] = _itp_value(state, i, low_feasible, start_width, most, step, tolerance, kappa)


@nb.njit(cache=True, parallel=True)
def _itp_values_parallel(
    open_, state, low_feasible, start_width, most, step, tolerance, kappa, value
):
    for n in nb.prange(open_.shape[0]):
        i = open_[n]
        value[i] = _itp_value(state, i, low_feasible, start_width, most, step, tolerance, kappa)


@nb.njit(cache=True)
def _distinct_pairs(open_, targets, value, pairs, slot):
    """Distinct (target, value) pairs of the open brackets (:func:`itp_values`); their count."""
    pair_targets, pair_values = pairs
    count = 0
    for n in range(open_.shape[0]):
        i = open_[n]
        v = value[i]
        t = targets[i]
        found = -1
        u = count - 1
        while u >= 0 and pair_targets[u] == t:
            if pair_values[u] == v:
                found = u
                break
            u -= 1
        if found < 0:
            pair_targets[count] = t
            pair_values[count] = v
            found = count
            count += 1
        slot[n] = found
    return count


def itp_values(
    open_: npt.NDArray[np.intp],
    targets: npt.NDArray[np.intp],
    state: FloatArray,
    low_feasible: BoolArray,
    start_width: FloatArray,
    most: FloatArray,
    step: int,
    tolerance: float,
    kappa: float,
    value: FloatArray,
    pairs: tuple[npt.NDArray[np.intp], FloatArray],
    slot: npt.NDArray[np.intp],
) -> int:
    """Next value of every open bracket, and the distinct (target, value) pairs to solve.

    ``value[i]`` (D,) becomes the ITP value (:func:`_itp_value`, truncation ``kappa``)
    of bracket ``i = open_[n]``; ``pairs`` (pair targets (D,) int, pair values (D,))
    gets the distinct pairs (target, value) in its first entries, ``slot[n]`` the
    entry of bracket ``open_[n]``'s pair. A pair is compared with the earlier pairs
    of the same target while ``targets[open_]`` stays equal, so brackets sorted by
    target share every equal value (unsorted ones may solve a value twice). Returns
    the number of distinct pairs. From :data:`PARALLEL_BRACKETS` open brackets the
    values are computed on numba's threads.
    """
    kernel = _itp_values_parallel if len(open_) >= PARALLEL_BRACKETS else _itp_values_serial
    kernel(open_, state, low_feasible, start_width, most, step, tolerance, kappa, value)
    return int(_distinct_pairs(open_, targets, value, pairs, slot))


@nb.njit(cache=True)
def _settle_one(
    n, open_, slot, solutions, reach, branches, table, limits, pairing, low_feasible, value, state
):
    """Move bracket ``open_[n]``'s end on the side of its value's feasibility (:func:`itp_settle`)."""
    q, valid, within, labels = solutions
    margins, column = reach
    i = open_[n]
    # the fold is kept at a new feasible end, and used while the other end has no margin
    infeasible_margin = state[MARGIN_HIGH, i] if low_feasible[i] else state[MARGIN_LOW, i]
    feasible, margin, fold = _branch_state(
        q,
        valid,
        within,
        labels,
        slot[n],
        branches[i],
        table,
        limits,
        pairing,
        np.isnan(infeasible_margin),
    )
    is_feasible = feasible == 1.0
    if is_feasible:
        state[BEFORE_X, i] = state[LOW, i] if low_feasible[i] else state[HIGH, i]
        state[BEFORE_FOLD, i] = state[FOLD_END, i]
        state[FOLD_END, i] = fold
    shoulder = column[branches[i]]
    reached = margins[slot[n], shoulder] if shoulder >= 0 else np.nan
    moved = -1.0 if is_feasible == low_feasible[i] else 1.0
    if moved == state[MOVED, i]:  # Illinois: the end kept twice has its values halved
        state[MARGIN_HIGH if moved < 0 else MARGIN_LOW, i] *= 0.5
        state[REACH_HIGH if moved < 0 else REACH_LOW, i] *= 0.5
    state[MOVED, i] = moved
    if moved < 0:
        state[LOW, i] = value[i]
        state[MARGIN_LOW, i] = margin
        state[REACH_LOW, i] = reached
    else:
        state[HIGH, i] = value[i]
        state[MARGIN_HIGH, i] = margin
        state[REACH_HIGH, i] = reached


@nb.njit(cache=True)
def _settle_serial(
    open_, slot, solutions, reach, branches, table, limits, pairing, low_feasible, value, state
):
    for n in range(open_.shape[0]):
        _settle_one(
            n,
            open_,
            slot,
            solutions,
            reach,
            branches,
            table,
            limits,
            pairing,
            low_feasible,
            value,
            state,
        )


@nb.njit(cache=True, parallel=True)
def _settle_parallel(
    open_, slot, solutions, reach, branches, table, limits, pairing, low_feasible, value, state
):
    # a parallel loop takes arrays, not tuples of them: unpacked here, packed again per bracket
    q, valid, within, (shoulder, elbow, wrist) = solutions
    margins, column = reach
    lower, upper = limits
    joint, partner = pairing
    for n in nb.prange(open_.shape[0]):
        _settle_one(
            n,
            open_,
            slot,
            (q, valid, within, (shoulder, elbow, wrist)),
            (margins, column),
            branches,
            table,
            (lower, upper),
            (joint, partner),
            low_feasible,
            value,
            state,
        )


def itp_settle(
    open_: npt.NDArray[np.intp],
    slot: npt.NDArray[np.intp],
    solutions: tuple[object, ...],
    reach: tuple[FloatArray, npt.NDArray[np.intp]],
    branches: npt.NDArray[np.intp],
    table: npt.NDArray[np.uint8],
    limits: tuple[FloatArray, FloatArray],
    pairing: tuple[int, npt.NDArray[np.intp]],
    low_feasible: BoolArray,
    value: FloatArray,
    state: FloatArray,
    tolerance: float,
) -> npt.NDArray[np.intp]:
    """Move each open bracket's end on the side of its value's feasibility; return the brackets still open.

    ``solutions`` is (q, valid, within, labels) of the solved pairs (:func:`itp_values`);
    bracket ``open_[n]``'s branch state (:func:`branch_state_rows`) is read at pose
    ``slot[n]``, its reach margin in ``reach`` = (margins (P, 2), column of each
    branch's shoulder (B,), -1 for none). A feasible value becomes the feasible end
    (the old one and its fold move to :data:`BEFORE_X`, :data:`BEFORE_FOLD`); an end
    kept for the second time in a row has its margins halved (Illinois). Returns the
    brackets of ``open_`` wider than ``tolerance`` after the update. From
    :data:`PARALLEL_BRACKETS` open brackets the brackets are updated on numba's threads
    (each writes only its own column of ``state``).
    """
    kernel = _settle_parallel if len(open_) >= PARALLEL_BRACKETS else _settle_serial
    kernel(
        open_, slot, solutions, reach, branches, table, limits, pairing, low_feasible, value, state
    )
    return _still_open(open_, state, tolerance)


@nb.njit(cache=True)
def _still_open(open_, state, tolerance):
    """Return the brackets of ``open_`` wider than ``tolerance``, in order."""
    still = np.empty(open_.shape[0], dtype=open_.dtype)
    count = 0
    for n in range(open_.shape[0]):
        i = open_[n]
        if state[HIGH, i] - state[LOW, i] > tolerance:
            still[count] = i
            count += 1
    return still[:count]

"""Numba kernels of the interval-end search of :mod:`posebridge.cell.external_kinematics`.

Per (pose, branch) pair the branch's feasibility, joint-limit margin and elbow fold
(:func:`branch_state_rows`), and per bracket the next value of the ITP method
(interpolate, truncate, project; Oliveira & Takahashi, ACM TOMS 47(1), 2020,
algorithm 1; :func:`itp_points`) and the bracket update (:func:`itp_update`). Kept
apart from the cell layer's other modules so that the kernel cache key
(:mod:`posebridge.kernel_cache`) depends on numpy and numba only.
"""

from __future__ import annotations

import numba as nb
import numpy as np

__all__ = ["branch_state_rows", "itp_points", "itp_update"]


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
    shoulder, elbow, wrist = labels
    lower, upper = limits
    joint, partner = pairing
    for i in range(rows.shape[0]):
        r = rows[i]
        bit = branches[i]
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
            if other < 0:
                continue
            for n in range(q.shape[1]):
                if n == m or not valid[r, n]:
                    continue
                code = 9 * shoulder[r, n] + 3 * elbow[r, n] + wrist[r, n] + 13
                if (table[code] >> other) & 1 == 1:
                    turn = q[r, m, joint] - q[r, n, joint]
                    turn -= 2.0 * np.pi * np.round(turn / (2.0 * np.pi))
                    fold = min(fold, 0.25 * turn * turn)
        out[i, 0] = feasible
        out[i, 1] = best if best > -np.inf else np.nan
        out[i, 2] = fold if fold < np.inf else np.nan


@nb.njit(cache=True)
def itp_points(brackets, folds, low_feasible, start_width, most, step, tolerance, out):
    """Next value of every bracket by the ITP method (Oliveira & Takahashi 2020, algorithm 1).

    ``brackets`` is (low, high, margin_low, margin_high), ``folds`` (fold at the
    feasible end, the previous feasible end and its fold), shapes (D,). Interpolate:
    regula falsi on the margins where both are finite and of opposite sign (a joint
    limit ends the interval); where only the feasible end has a margin (the reach
    ends it), the secant of the fold through the feasible end and the one before it,
    extended to zero, if that root lies inside; else the middle. Truncate towards the
    middle by ``0.5 width^2 / start_width`` (the method's kappa1 = 0.5 / start width,
    kappa2 = 2; on the bench poses 0.5 solved fewest poses of 0.05, 0.2, 0.5, 1, 2),
    and project into the radius ``tolerance / 2 * 2^(most - step) - width / 2`` around
    the middle, which keeps every bracket within ``most`` steps (the radius is taken a
    hair smaller so that rounding cannot cost one more step). Written to ``out`` (D,).
    """
    low, high, margin_low, margin_high = brackets
    for i in range(low.shape[0]):
        lo = low[i]
        hi = high[i]
        width = hi - lo
        middle = 0.5 * (lo + hi)
        m_lo = margin_low[i]
        m_hi = margin_high[i]
        falsi = middle
        if np.isfinite(m_lo) and np.isfinite(m_hi) and m_lo * m_hi <= 0.0 and m_lo != m_hi:
            falsi = (hi * m_lo - lo * m_hi) / (m_lo - m_hi)
        elif np.isnan(m_lo) != np.isnan(m_hi):
            fold_end, before_x, before_fold = folds[0][i], folds[1][i], folds[2][i]
            end = lo if low_feasible[i] else hi
            if np.isfinite(fold_end) and np.isfinite(before_fold) and fold_end != before_fold:
                root = end - fold_end * (end - before_x) / (fold_end - before_fold)
                if lo < root < hi:
                    falsi = root
        toward = np.sign(middle - falsi)
        shift = 0.5 * width * width / start_width[i]
        truncated = falsi + toward * shift if shift <= abs(middle - falsi) else middle
        radius = 0.5 * tolerance * (1.0 - 1e-9) * 2.0 ** (most[i] - step) - 0.5 * width
        out[i] = truncated if abs(truncated - middle) <= radius else middle - toward * radius


@nb.njit(cache=True)
def itp_update(open_, value, feasible, margin, fold, low_feasible, brackets, folds):
    """Move bracket ``open_[i]``'s end on the side of ``value[open_[i]]``'s feasibility there.

    ``brackets`` and ``folds`` (:func:`itp_points`) are updated in place;
    ``feasible``, ``margin`` and ``fold`` (D',) are at the values of the open brackets.
    """
    low, high, margin_low, margin_high = brackets
    fold_end, before_x, before_fold = folds
    for n in range(open_.shape[0]):
        i = open_[n]
        if feasible[n]:
            before_x[i] = low[i] if low_feasible[i] else high[i]
            before_fold[i] = fold_end[i]
            fold_end[i] = fold[n]
        if feasible[n] == low_feasible[i]:
            low[i] = value[i]
            margin_low[i] = margin[n]
        else:
            high[i] = value[i]
            margin_high[i] = margin[n]

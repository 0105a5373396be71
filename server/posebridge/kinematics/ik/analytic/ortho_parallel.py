"""Analytic IK of six-axis arms with an ortho-parallel basis and a spherical wrist.

Method: Brandstötter, Angerer, Hofbaur (2014), "An analytical solution of the
inverse kinematics problem of industrial serial manipulators with an
ortho-parallel basis and a spherical wrist", Austrian Robotics Workshop.

Canonical model (the paper's parameters ``a1, a2, b, c1, c2, c3, c4``): axis 1
is the base z axis; at zero the upper arm and the forearm stand vertical, axes
2, 3 and 5 point along y, axes 4 and 6 along z. With ``θ23 = θ2 + θ3`` the
wrist centre is

    C = Rz(θ1) [a1 + c2 sin θ2 + a2 cos θ23 + c3 sin θ23,
                b,
                c1 + c2 cos θ2 - a2 sin θ23 + c3 cos θ23]

and the end frame is ``Rz(θ1) Ry(θ23) Rz(θ4) Ry(θ5) Rz(θ6)`` with its origin
``c4`` beyond C along its z axis. The position part gives two values of θ1
(wrist centre in front of or behind axis 1) and for each two elbow solutions
(law of cosines in the arm plane; the elbow angle ``β = θ3 + atan2(a2, c3)``
is the paper's arccos, evaluated as ``atan2(sqrt(1 - cos²β), cos β)``, and θ2
the difference of two arctangents, equivalent to the paper's arccos form); the
orientation part gives two wrists each, eight solutions in all.

A robot description is rarely in canonical form. :class:`OrthoParallelGeometry`
(:mod:`~posebridge.kinematics.ik.analytic.ortho_parallel_geometry`) extracts the parameters from the joint axes at zero together with per-joint
signs and offsets, ``θ_i = s_i q_i + o_i``, and a constant flange rotation,
and accepts the robot only if its canonical forward kinematics matches
:func:`posebridge.kinematics.fk.fk_flange` on random configurations.

Degenerate cases: at the wrist singularity (``sin θ5 = 0``) only ``θ4 + θ6``
(or ``θ6 - θ4``) is defined; θ4 keeps the seed's value (0 without a seed)
and the other wrist solution (θ4 + π, -θ5, θ6 + π) is dropped. With the
wrist centre on axis 1 (``b = 0``) θ1 is free and taken from the seed (0
without); both shoulder labels are 0.
At a stretched or folded elbow the two elbow solutions coincide and only one
is kept.

Kernel layout (speed): each block of poses runs three passes, the arm geometry
(branchy, scalar), all arctangents of the block in one vectorised loop
(:func:`atan2_many`), and the assembly of joint values, followed by the
slot finishing of :func:`posebridge.kinematics.ik.finishing.finish_rows`.
"""

from __future__ import annotations

import math
from collections.abc import Callable

import numba as nb
import numpy as np
import numpy.typing as npt

from posebridge.kinematics.branches import (
    LABEL_TOLERANCE_M,
    elbow_label,
    shoulder_label,
    wrist_label,
)
from posebridge.kinematics.fk import tool_tail
from posebridge.kinematics.ik.analytic.ortho_parallel_geometry import OrthoParallelGeometry
from posebridge.kinematics.ik.finishing import (
    BlockSolver,
    block_count,
    block_rows,
    empty_candidates,
    finish_rows,
    joint_table,
)
from posebridge.kinematics.ik.inputs import check_target_poses
from posebridge.kinematics.ik.solutions import IkSolutions
from posebridge.robot.model import Robot
from posebridge.transforms import invert_transform
from posebridge.units import FloatArray

__all__ = [
    "METHOD",
    "atan2_many",
    "ortho_parallel_reach_margins",
    "ortho_parallel_solver",
    "solve_ortho_parallel",
]

METHOD = "analytic: ortho-parallel, Brandstötter et al. 2014"


_WRIST_SINGULAR_SIN = 1e-8
"""``|sin θ5|`` below which θ4 and θ6 are split by the seed. The balance point of
the rounding error of the regular formulas (about 1e-16 / |sin θ5|) and the
error of splitting by the seed (about 2 pi |sin θ5|); both stay below 1e-7 rad."""


_ATAN_COEFFICIENTS = (
    1.0,
    -0.3333333333332859,
    0.199999999989374,
    -0.14285714188970247,
    0.11111106530195895,
    -0.0909078144289922,
    0.07690072256814573,
    -0.06641261027743744,
    0.056936639230433704,
    -0.043631749610050445,
    0.021317379635111103,
)
_TAN_PI_8 = 0.41421356237309503

_ANGLES = 20
"""Arctangent pairs per pose: θ1 (2), β = acos(cos β) as atan2(sin β, cos β) (2),
θ2 (4 arm solutions), θ4, θ5, θ6 (3 per arm solution)."""


@nb.njit(cache=True, error_model="numpy")
def atan2_many(y, x, out):
    """``out = arctan2(y, x)`` for finite 1-D arrays, written to vectorise (SIMD).

    Range reduction to ``t = min(|x|, |y|) / max(|x|, |y|)``, then
    ``atan(t) = pi/4 + atan((t - 1) / (t + 1))`` above tan(pi/8) (Cody and
    Waite, *Software Manual for the Elementary Functions*, 1980, ch. 17), the
    fitted polynomial in Estrin's scheme, and the quadrant from the signs;
    signed zeros as ``numpy.arctan2``. Branch-free, so the compiler turns the
    loop into vector instructions: one arctangent costs about as much as a
    multiplication chain instead of a library call. Agrees with
    ``numpy.arctan2`` to 1e-15.
    """
    c = _ATAN_COEFFICIENTS
    for k in range(y.shape[0]):
        xv = x[k]
        yv = y[k]
        ax = abs(xv)
        ay = abs(yv)
        largest = max(ax, ay)
        t = min(ax, ay) / largest if largest > 0.0 else 0.0
        big = t > _TAN_PI_8
        u = (t - 1.0) / (t + 1.0) if big else t
        z = u * u
        z2 = z * z
        z4 = z2 * z2
        low = (c[0] + c[1] * z) + (c[2] + c[3] * z) * z2
        middle = (c[4] + c[5] * z) + (c[6] + c[7] * z) * z2
        high = (c[8] + c[9] * z) + c[10] * z2
        r = u * (low + middle * z4 + high * (z4 * z4))
        r = r + 0.25 * np.pi if big else r
        r = 0.5 * np.pi - r if ay > ax else r
        r = np.pi - r if math.copysign(1.0, xv) < 0.0 else r
        out[k] = math.copysign(r, yv)


@nb.njit(cache=True, inline="always")
def _wrist_centre(T, G, c4, i):
    """Wrist centre of pose ``i``: ``c4`` back along the z axis of the end frame ``T[i] @ G``."""
    R02 = T[i, 0, 0] * G[0, 2] + T[i, 0, 1] * G[1, 2] + T[i, 0, 2] * G[2, 2]
    R12 = T[i, 1, 0] * G[0, 2] + T[i, 1, 1] * G[1, 2] + T[i, 1, 2] * G[2, 2]
    R22 = T[i, 2, 0] * G[0, 2] + T[i, 2, 1] * G[1, 2] + T[i, 2, 2] * G[2, 2]
    px = T[i, 0, 0] * G[0, 3] + T[i, 0, 1] * G[1, 3] + T[i, 0, 2] * G[2, 3] + T[i, 0, 3]
    py = T[i, 1, 0] * G[0, 3] + T[i, 1, 1] * G[1, 3] + T[i, 1, 2] * G[2, 3] + T[i, 1, 3]
    pz = T[i, 2, 0] * G[0, 3] + T[i, 2, 1] * G[1, 3] + T[i, 2, 2] * G[2, 3] + T[i, 2, 3]
    return px - c4 * R02, py - c4 * R12, pz - c4 * R22


@nb.njit(cache=True)
def _arm_candidates(
    start, stop, problem, seed, pair_y, pair_x, arm_ok, arm_mode, arm_labels, raw_reason
):
    """Position part and wrist matrices of poses ``start..stop-1`` (rows ``i - start``).

    For each of the four arm solutions (θ1 front/back times two elbows) writes
    whether it reaches the pose and is not a duplicate (``arm_ok`` (B, 4)), its
    shoulder and elbow labels (``arm_labels`` (B, 4, 2)), the wrist case
    (``arm_mode``: 0 regular, 1 singular with θ5 = 0, 2 singular with θ5 = pi)
    and the arctangent argument pairs of every angle (``pair_y``, ``pair_x``
    (B, 20), layout in :data:`_ANGLES`). ``raw_reason`` (B,) gets the reason
    code if no arm solution reaches the pose: 1 (out of reach) when the tool
    point is farther from every shoulder position than the stretched arm plus
    the wrist-to-tool distance, else 2 (orientation not reachable). Sines and
    cosines of θ1, θ2 and θ23 follow from the arm-plane vectors algebraically
    (angle-difference identities), so no angle is needed here.
    """
    T, G, prm, signs, offsets, tol_pos = problem
    a1, b, c1, c2, c4 = prm[0], prm[2], prm[3], prm[4], prm[6]
    k, cos_psi, sin_psi = prm[7], prm[14], prm[15]
    K_sh, K_elbow = prm[9], prm[9] * prm[10]
    for i in range(start, stop):
        row = i - start
        # canonical end frame: T_end = T_tool @ G
        R00 = T[i, 0, 0] * G[0, 0] + T[i, 0, 1] * G[1, 0] + T[i, 0, 2] * G[2, 0]
        R01 = T[i, 0, 0] * G[0, 1] + T[i, 0, 1] * G[1, 1] + T[i, 0, 2] * G[2, 1]
        R02 = T[i, 0, 0] * G[0, 2] + T[i, 0, 1] * G[1, 2] + T[i, 0, 2] * G[2, 2]
        R10 = T[i, 1, 0] * G[0, 0] + T[i, 1, 1] * G[1, 0] + T[i, 1, 2] * G[2, 0]
        R11 = T[i, 1, 0] * G[0, 1] + T[i, 1, 1] * G[1, 1] + T[i, 1, 2] * G[2, 1]
        R12 = T[i, 1, 0] * G[0, 2] + T[i, 1, 1] * G[1, 2] + T[i, 1, 2] * G[2, 2]
        R20 = T[i, 2, 0] * G[0, 0] + T[i, 2, 1] * G[1, 0] + T[i, 2, 2] * G[2, 0]
        R21 = T[i, 2, 0] * G[0, 1] + T[i, 2, 1] * G[1, 1] + T[i, 2, 2] * G[2, 1]
        R22 = T[i, 2, 0] * G[0, 2] + T[i, 2, 1] * G[1, 2] + T[i, 2, 2] * G[2, 2]
        cx, cy, cz = _wrist_centre(T, G, c4, i)
        r = np.sqrt(cx * cx + cy * cy)
        X = np.sqrt(max(r * r - b * b, 0.0))
        h = np.sqrt(X * X + b * b)
        # wrist centre on axis 1: θ1 is free, taken from the seed
        free_theta1 = r < LABEL_TOLERANCE_M
        reached_any = False
        c_1 = 1.0
        s_1 = 0.0
        for branch1 in range(2):
            sigma = 1.0 if branch1 == 0 else -1.0
            if free_theta1:
                theta1 = signs[0] * seed[i, 0] + offsets[0] + (0.0 if branch1 == 0 else np.pi)
                c_1 = np.cos(theta1)
                s_1 = np.sin(theta1)
            elif branch1 == 1 and b == 0.0:
                # no lateral offset: the back solution is the front one turned by pi
                c_1 = -c_1
                s_1 = -s_1
            else:
                # Rz(θ1) (σX, b) = r/h (cx, cy)
                c_1 = (cx * sigma * X + cy * b) / (r * h)
                s_1 = (cy * sigma * X - cx * b) / (r * h)
            pair_y[row, branch1] = s_1
            pair_x[row, branch1] = c_1
            wl_x = c_1 * cx + s_1 * cy
            wl_y = -s_1 * cx + c_1 * cy
            u = wl_x - a1
            v = cz - c1
            s_sq = u * u + v * v
            s_len = np.sqrt(s_sq)
            cos_beta_raw = (s_sq - c2 * c2 - k * k) / (2.0 * c2 * k)
            cb = min(1.0, max(-1.0, cos_beta_raw))
            reached = np.sqrt(max(c2 * c2 + k * k + 2.0 * c2 * k * cb, 0.0))
            plane_gap = 0.0 if cb == cos_beta_raw else s_len - reached
            residual = np.sqrt(plane_gap * plane_gap + (b - wl_y) * (b - wl_y))
            shoulder = shoulder_label(K_sh * wl_x)
            side = 1.0 if shoulder == 0 else float(shoulder)
            sb_plus = np.sqrt(max(1.0 - cb * cb, 0.0))
            pair_y[row, 2 + branch1] = sb_plus
            pair_x[row, 2 + branch1] = cb
            P = c2 + k * cb
            # rows 0 and 1 of A = Rz(-θ1) R (row 2 is R's)
            A00 = c_1 * R00 + s_1 * R10
            A01 = c_1 * R01 + s_1 * R11
            A02 = c_1 * R02 + s_1 * R12
            A10 = -s_1 * R00 + c_1 * R10
            A12 = -s_1 * R02 + c_1 * R12
            for branch2 in range(2):
                arm = 2 * branch1 + branch2
                sb = sb_plus if branch2 == 0 else -sb_plus
                Q = k * sb
                elbow = elbow_label(side, K_elbow * c2 * Q * s_len / max(reached, 1e-300), s_len)
                duplicate = (branch1 == 1 and shoulder == 0 and not free_theta1) or (
                    branch2 == 1 and elbow == 0
                )
                arm_ok[row, arm] = not duplicate and residual <= tol_pos
                arm_labels[row, arm, 0] = shoulder
                arm_labels[row, arm, 1] = elbow
                if not arm_ok[row, arm]:
                    continue
                reached_any = True
                # θ2 = atan2(u, v) - atan2(Q, P)
                y2 = u * P - v * Q
                x2 = v * P + u * Q
                pair_y[row, 4 + arm] = y2
                pair_x[row, 4 + arm] = x2
                D = s_len * reached
                if D > 1e-12:
                    s2 = y2 / D
                    c2_ = x2 / D
                else:
                    theta2 = np.arctan2(y2, x2)
                    s2 = np.sin(theta2)
                    c2_ = np.cos(theta2)
                # θ23 = θ2 + β - ψ
                s2b = s2 * cb + c2_ * sb
                c2b = c2_ * cb - s2 * sb
                s23 = s2b * cos_psi - c2b * sin_psi
                c23 = c2b * cos_psi + s2b * sin_psi
                # M = Ry(-θ23) A
                M00 = c23 * A00 - s23 * R20
                M02 = c23 * A02 - s23 * R22
                M20 = s23 * A00 + c23 * R20
                M21 = s23 * A01 + c23 * R21
                M22 = s23 * A02 + c23 * R22
                sin5 = np.sqrt(M02 * M02 + A12 * A12)
                base = 8 + 3 * arm
                pair_y[row, base + 1] = sin5
                pair_x[row, base + 1] = M22
                if sin5 >= _WRIST_SINGULAR_SIN:
                    arm_mode[row, arm] = 0
                    pair_y[row, base] = A12
                    pair_x[row, base] = M02
                    pair_y[row, base + 2] = M21
                    pair_x[row, base + 2] = -M20
                elif M22 > 0.0:
                    # θ5 = 0: the angle of the pair is θ4 + θ6
                    arm_mode[row, arm] = 1
                    pair_y[row, base + 2] = A10
                    pair_x[row, base + 2] = M00
                else:
                    # θ5 = pi: the angle of the pair is θ6 - θ4
                    arm_mode[row, arm] = 2
                    pair_y[row, base + 2] = A10
                    pair_x[row, base + 2] = -M00
        raw_reason[row] = 0
        if not reached_any:
            d_min = np.hypot(np.hypot(T[i, 0, 3], T[i, 1, 3]) - prm[13], T[i, 2, 3] - c1)
            raw_reason[row] = 1 if d_min > c2 + k + prm[12] + tol_pos else 2


@nb.njit(cache=True)
def _assemble(start, stop, problem, seed, angles, arm_ok, arm_mode, arm_labels, raw):
    """Joint values and labels of the eight candidates from the computed angles.

    Each arm solution gives two wrists, ``(θ4, θ5, θ6)`` and
    ``(θ4 + pi, -θ5, θ6 + pi)``; at a wrist singularity only the first, with
    θ4 from the seed. ``θ3 = ±β - ψ``. Joint values ``q_i = s_i (θ_i - o_i)``,
    written to ``raw`` (:func:`~posebridge.kinematics.ik.finishing.empty_candidates`).
    """
    _, _, prm, signs, offsets, _ = problem
    raw_q, raw_ok, raw_labels, _ = raw
    psi, straight = prm[8], prm[11]
    for i in range(start, stop):
        row = i - start
        for arm in range(4):
            slot = 2 * arm
            if not arm_ok[row, arm]:
                raw_ok[row, slot] = False
                raw_ok[row, slot + 1] = False
                continue
            branch1 = arm // 2
            beta = angles[row, 2 + branch1]
            theta1 = angles[row, branch1]
            theta2 = angles[row, 4 + arm]
            theta3 = (beta if arm % 2 == 0 else -beta) - psi
            base = 8 + 3 * arm
            theta5 = angles[row, base + 1]
            mode = arm_mode[row, arm]
            if mode == 0:
                theta4 = angles[row, base]
                theta6 = angles[row, base + 2]
            else:
                theta4 = signs[3] * seed[i, 3] + offsets[3]
                if mode == 1:
                    theta6 = angles[row, base + 2] - theta4
                else:
                    theta6 = theta4 + angles[row, base + 2]
            for wrist_twin in range(2):
                s = slot + wrist_twin
                if wrist_twin == 1 and mode != 0:
                    raw_ok[row, s] = False
                    continue
                raw_ok[row, s] = True
                raw_q[row, s, 0] = signs[0] * (theta1 - offsets[0])
                raw_q[row, s, 1] = signs[1] * (theta2 - offsets[1])
                raw_q[row, s, 2] = signs[2] * (theta3 - offsets[2])
                if wrist_twin == 0:
                    raw_q[row, s, 3] = signs[3] * (theta4 - offsets[3])
                    raw_q[row, s, 4] = signs[4] * (theta5 - offsets[4])
                    raw_q[row, s, 5] = signs[5] * (theta6 - offsets[5])
                else:
                    raw_q[row, s, 3] = signs[3] * (theta4 + np.pi - offsets[3])
                    raw_q[row, s, 4] = signs[4] * (-theta5 - offsets[4])
                    raw_q[row, s, 5] = signs[5] * (theta6 + np.pi - offsets[5])
                raw_labels[row, s, 0] = arm_labels[row, arm, 0]
                raw_labels[row, s, 1] = arm_labels[row, arm, 1]
                raw_labels[row, s, 2] = wrist_label(raw_q[row, s, 4], straight)


@nb.njit(cache=True)
def _solve_block(start, stop, problem, finish, out):
    """Candidates (three passes: arm geometry, arctangents, assembly), then slot finishing.

    ``problem`` is ``(T, G, prm, signs, offsets, tol_pos)``
    (:func:`solve_ortho_parallel`), ``finish`` is
    :func:`~posebridge.kinematics.ik.finishing.finish_inputs`.
    """
    seed = finish[0]
    B = stop - start
    pair_y = np.zeros((B, _ANGLES))
    pair_x = np.zeros((B, _ANGLES))
    angles = np.empty((B, _ANGLES))
    arm_ok = np.zeros((B, 4), dtype=np.bool_)
    arm_mode = np.zeros((B, 4), dtype=np.int8)
    arm_labels = np.zeros((B, 4, 2), dtype=np.int8)
    raw = empty_candidates(B, 8, 6)
    _arm_candidates(
        start, stop, problem, seed, pair_y, pair_x, arm_ok, arm_mode, arm_labels, raw[3]
    )
    atan2_many(
        pair_y.reshape(B * _ANGLES), pair_x.reshape(B * _ANGLES), angles.reshape(B * _ANGLES)
    )
    _assemble(start, stop, problem, seed, angles, arm_ok, arm_mode, arm_labels, raw)
    finish_rows(start, stop, start, raw, finish, out)


@nb.njit(cache=True, parallel=True)
def _solve_parallel(problem, finish, out):
    N = problem[0].shape[0]
    for block in nb.prange(block_count(N)):
        start, stop = block_rows(block, N)
        _solve_block(start, stop, problem, finish, out)


@nb.njit(cache=True)
def _reach_margins(T, G, prm, out):
    """``out[i] = 1 - |cos β|`` of pose ``i``'s front and back arm, shape (N, 2).

    cos β is the law of cosines in the arm plane of :func:`_arm_candidates`
    (module docstring) before it is clipped to [-1, 1], for the θ1 whose
    shoulder label is front (column 0) and back (column 1). It is smooth in the
    pose, positive where the two elbow solutions exist, zero where they meet
    (stretched or folded elbow) and negative beyond the reach. NaN where the
    wrist centre is within the lateral offset ``b`` of axis 1 (or on it),
    where the label is undefined.
    """
    a1, b, c1, c2, c4 = prm[0], prm[2], prm[3], prm[4], prm[6]
    k, K_sh = prm[7], prm[9]
    for i in range(T.shape[0]):
        cx, cy, cz = _wrist_centre(T, G, c4, i)
        lateral = cx * cx + cy * cy - b * b
        if lateral <= LABEL_TOLERANCE_M * LABEL_TOLERANCE_M:
            out[i, 0] = np.nan
            out[i, 1] = np.nan
            continue
        X = np.sqrt(lateral)
        v = cz - c1
        for branch1 in range(2):
            sigma = 1.0 if branch1 == 0 else -1.0
            u = sigma * X - a1  # the arm-plane x of the wrist centre is sigma X
            cos_beta = (u * u + v * v - c2 * c2 - k * k) / (2.0 * c2 * k)
            # shoulder label of this θ1: the sign of K_sh sigma X (_arm_candidates)
            column = 0 if K_sh * sigma > 0.0 else 1
            out[i, column] = 1.0 - abs(cos_beta)


def _kernel_parameters(geometry: OrthoParallelGeometry, G: FloatArray) -> FloatArray:
    """Packed parameters of the kernel, shape (16,).

    ``[a1, a2, b, c1, c2, c3, c4, k, psi, shoulder_factor, up_factor,
    wrist_straight, centre_to_tcp, shoulder_radius, cos psi, sin psi]`` with
    ``k = hypot(a2, c3)`` (wrist centre to axis 3) and ``psi = atan2(a2, c3)``;
    ``centre_to_tcp`` is the distance from the wrist centre to the TCP and
    ``shoulder_radius`` that of axis 2 from axis 1.
    """
    k = float(np.hypot(geometry.a2, geometry.c3))
    G_inverse = invert_transform(G)
    centre_to_tcp = float(np.linalg.norm(G_inverse[:3, 3] + np.array([0.0, 0.0, geometry.c4])))
    return np.array(
        [
            geometry.a1,
            geometry.a2,
            geometry.b,
            geometry.c1,
            geometry.c2,
            geometry.c3,
            geometry.c4,
            k,
            np.arctan2(geometry.a2, geometry.c3),
            geometry.shoulder_factor,
            geometry.up_factor,
            geometry.wrist_straight,
            centre_to_tcp,
            np.hypot(geometry.a1, geometry.b),
            geometry.c3 / k,
            geometry.a2 / k,
        ]
    )


def _end_from_tool(
    robot: Robot, geometry: OrthoParallelGeometry, T_flange_tool: npt.ArrayLike | None
) -> FloatArray:
    """``G`` with ``T_end = T_tool @ G`` (the canonical end frame), shape (4, 4)."""
    T_flange = invert_transform(robot.T_link_flange) @ tool_tail(robot, T_flange_tool)
    F = np.eye(4)
    F[:3, :3] = geometry.R_end_flange
    return np.ascontiguousarray(invert_transform(F @ T_flange))


def ortho_parallel_reach_margins(
    robot: Robot, geometry: OrthoParallelGeometry, *, T_flange_tool: npt.ArrayLike | None = None
) -> Callable[[FloatArray], FloatArray]:
    """Return the reach margins of tool poses for one tool (:func:`_reach_margins`).

    The returned function takes poses already checked by
    :func:`~posebridge.kinematics.ik.inputs.check_target_poses`, shape (N, 4, 4), and
    returns ``1 - |cos β|`` of the front and back arm, shape (N, 2): a signed
    measure of the reach that is smooth across its edge, where the IK's solutions
    end.
    """
    G = _end_from_tool(robot, geometry, T_flange_tool)
    prm = _kernel_parameters(geometry, G)

    def margins(T: FloatArray) -> FloatArray:
        out = np.empty((len(T), 2))
        _reach_margins(np.ascontiguousarray(T), G, prm, out)
        return out

    return margins


def ortho_parallel_solver(
    robot: Robot,
    geometry: OrthoParallelGeometry,
    *,
    T_flange_tool: npt.ArrayLike | None = None,
    position_tolerance_m: float = 1e-6,
) -> BlockSolver:
    """Prepare the kernels of :func:`solve_ortho_parallel` for one tool: parameters computed once."""
    G = _end_from_tool(robot, geometry, T_flange_tool)
    constants = (
        G,
        _kernel_parameters(geometry, G),
        geometry.signs,
        geometry.offsets,
        float(position_tolerance_m),
    )
    return BlockSolver(
        robot, _solve_block, _solve_parallel, constants, 8, METHOD, joint_table(robot)
    )


def solve_ortho_parallel(
    robot: Robot,
    geometry: OrthoParallelGeometry,
    T_base_tool: npt.ArrayLike,
    *,
    T_flange_tool: npt.ArrayLike | None = None,
    seed: npt.ArrayLike | None = None,
    all_revolutions: bool = False,
    position_tolerance_m: float = 1e-6,
) -> IkSolutions:
    """Every IK solution of an ortho-parallel arm for a batch of tool poses.

    Method in the module docstring (Brandstötter et al. 2014). Orientation is
    reached exactly by the spherical wrist, so validity is decided by the
    wrist centre's position residual.

    Parameters
    ----------
    robot : Robot
    geometry : OrthoParallelGeometry
        From :meth:`OrthoParallelGeometry.from_robot` of the same robot.
    T_base_tool : array-like, shape (N, 4, 4)
        Target tool poses in the base frame, SI.
    T_flange_tool : array-like, shape (4, 4), optional
        Tool in the flange frame; the robot's default tool if omitted.
    seed : array-like, shape (6,) or (N, 6), optional
    all_revolutions : bool
        One slot per in-limit revolution variant (see :mod:`posebridge.kinematics.ik.finishing`).
    position_tolerance_m : float
        Largest accepted position error of a valid solution.

    Returns
    -------
    IkSolutions
        ``M = 8`` slots per pose (times the revolution variants with ``all_revolutions``).
    """
    T = check_target_poses(T_base_tool)
    solver = ortho_parallel_solver(
        robot, geometry, T_flange_tool=T_flange_tool, position_tolerance_m=position_tolerance_m
    )
    return solver.solve(T, seed=seed, all_revolutions=all_revolutions)

"""Analytic IK of six-axis arms whose joints 2, 3 and 4 are parallel, with an offset wrist.

The arm class: axis 1 perpendicular to axis 2; axes 2, 3 and 4 parallel;
axis 5 perpendicular to them; axis 6 perpendicular to axis 5 and meeting it
in the *wrist point*. Lateral offsets along the parallel axes (shoulder,
elbow and wrist offsets), the distance from axis 4 to the wrist point along
axis 5 and any flange placement are allowed; the wrist is not spherical.

Method: derived here from the joint geometry (each joint a rotation about its
axis; the same model as standard Denavit-Hartenberg rows, Spong, Hutchinson,
Vidyasagar, *Robot Modeling and Control*, ch. 3), with the decomposition of
the classic closed-form solutions of this arm class, and the planar
three-link solution (law of cosines) of Craig, *Introduction to Robotics*,
ch. 4. Canonical model, in a base frame with z along axis 1 and y along axis
2 at zero, origin on axis 1 where the common normal to axis 2 meets it; the
planar direction ``dir(a) = (sin a, cos a)`` in (x, z); ``φ = θ2 + θ3 + θ4``:

    wrist point  P = Rz(θ1) [ (a1, 0) + l2 dir(θ2) + l3 dir(θ2 + θ3)
                              + Ry(φ) (e, d5)  in (x, z),   b  in y ]
    end frame    R = Rz(θ1) Ry(φ) Rz(θ5) Ry(θ6)     (axis 6 = R y, origin P)

``a1`` is the distance of axis 2 from axis 1, ``l2`` and ``l3`` the distances
axis 2 to 3 and axis 3 to 4, ``d5`` the distance from axis 4 to the wrist
point along axis 5, ``e`` the distance of axis 5 from axis 4 (0 when they
meet), ``b`` the total lateral offset: the y coordinate of the wrist point
in the frame turned by θ1, which joints 2 to 5 cannot change because they
turn about y or move the point along axis 5, perpendicular to y. Hence:

1. **θ1** (two choices, *shoulder*): ``-sin θ1 Px + cos θ1 Py = b``, the
   tangent condition of the circle of radius ``|b|`` about axis 1: the wrist
   point in the turned frame is ``(X, b)`` with ``X = ±sqrt(Px² + Py² - b²)``,
   so ``cos θ1 = (Px X + Py b) / r²``, ``sin θ1 = (Py X - Px b) / r²``.
2. **θ5, θ6, φ** (two choices, *wrist*): with ``A = Rz(-θ1) R =
   Ry(φ) Rz(θ5) Ry(θ6)``, ``A11 = cos θ5``, ``(A10, A12) = sin θ5 (cos θ6,
   sin θ6)`` and ``(A21, -A01) = sin θ5 (sin φ, cos φ)``; ``sin θ5 = ±|(A10,
   A12)|``.
3. **θ2, θ3** (two choices, *elbow*): the point of axis 4
   ``W = (X, Pz) - Ry(φ) (e, d5)`` is reached by the planar two-link arm
   ``l2, l3`` from ``(a1, 0)``: ``cos θ3 = (|W - S|² - l2² - l3²) / (2 l2
   l3)``, ``θ3 = ±acos``, ``θ2 = angle(W - S) - atan2(l3 sin θ3, l2 + l3 cos
   θ3)``; then ``θ4 = φ - θ2 - θ3``.

Up to eight solutions. Branch words for this family (the definitions of
:mod:`posebridge.kinematics.branches`, which they equal exactly):

* **shoulder** ``front``/``back``: the sign of ``X``, the wrist point in front
  of or behind axis 1 in the arm plane: the two roots of step 1;
* **elbow** ``up``/``down``: the elbow (axis 3) above or below the line from
  the shoulder (axis 2) to the wrist centre, the point of axis 5 nearest axis
  4 (on axis 4 when ``e = 0``: then the two roots of step 3);
* **wrist** ``positive``/``negative``: the sign of joint 5 from the straight
  wrist (axes 4 and 6 parallel): the two roots of step 2.

A robot description is rarely canonical. :class:`OffsetWristGeometry`
extracts the parameters from the joint axes and origins at zero, per-joint
signs and offsets ``θ_i = s_i q_i + o_i``, the canonical base frame in the
robot's base and the last link frame in the canonical end frame, and accepts
the robot only if the canonical forward kinematics matches
:func:`posebridge.kinematics.fk.fk_flange` on random configurations (1e-9).

Degenerate cases. Wrist singularity (``|sin θ5| < 1e-8``, axes 2, 3, 4 and 6
parallel): only ``φ + θ6`` (or ``φ - θ6`` at θ5 = pi) is defined; θ6 keeps the
seed's value (0 without a seed) when the arm reaches the point of axis 4 with
it, otherwise the nearest value with which it does (a closed form on the
circle that point runs on); one solution per shoulder and elbow, wrist label
0. Shoulder singularity (wrist point on the tangent plane, ``X = 0``): the two
roots of θ1 coincide, one is kept, shoulder label 0; with ``b = 0`` and the
wrist point on axis 1 θ1 is free and taken from the seed (0 without), plus
pi. Stretched or folded elbow: one elbow solution. Unreachable poses return
no solution with reason "out of reach" (the tool point is farther than the
stretched arm from every shoulder position) or "orientation not reachable".

Every returned solution is verified: the canonical forward kinematics of its
sines and cosines is compared with the target end frame, and the candidate is
dropped if the TCP misses by more than the position tolerance or the
rotation difference (Frobenius norm, about sqrt(2) times the angle) exceeds
the orientation tolerance.

Kernel layout (speed), as in :mod:`~posebridge.kinematics.ik.analytic.ortho_parallel`:
per block of poses the branchy scalar geometry, all arctangents of the block
in one vectorised loop
(:func:`~posebridge.kinematics.ik.analytic.ortho_parallel.atan2_many`), the
assembly of joint values, then the slot finishing of
:func:`posebridge.kinematics.ik.finishing.finish_rows`.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import partial

import numba as nb
import numpy as np
import numpy.typing as npt

from posebridge.kinematics.branches import (
    LABEL_TOLERANCE_M,
    branch_geometry,
    elbow_label,
    shoulder_label,
    wrist_label,
)
from posebridge.kinematics.fk import tool_tail
from posebridge.kinematics.ik.analytic.extraction import (
    GEOMETRY_TOLERANCE,
    VERIFY_SAMPLES,
    agrees_with_fk,
    line_gap,
    zero_axes,
)
from posebridge.kinematics.ik.analytic.ortho_parallel import atan2_many
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
from posebridge.transforms import (
    invert_transform,
    rotation_matrix_about_y,
    rotation_matrix_about_z,
)
from posebridge.units import FloatArray

__all__ = ["METHOD", "OffsetWristGeometry", "offset_wrist_solver", "solve_offset_wrist"]

METHOD = "analytic: offset wrist, joints 2-4 parallel"

_WRIST_SINGULAR_SIN = 1e-8
"""``|sin θ5|`` below which θ6 is taken from the seed. Above it the regular
formulas lose about 1e-16 / |sin θ5| rad in θ6 and φ, below it the straight
wrist misses the orientation by at most |sin θ5|: both below 1e-8 rad."""

_ANGLES = 26
"""Arctangent pairs per pose: θ1 (2); θ5, θ6, φ, β = |θ3| for each of the four
shoulder-wrist choices (16); θ2 for each of the eight solutions (8)."""


@dataclass(frozen=True)
class OffsetWristGeometry:
    """Parameters of an offset-wrist arm in the canonical model (module docstring; SI units).

    Attributes
    ----------
    a1 : float
        Signed distance of axis 2 from axis 1 along the canonical x axis, m.
    b : float
        Lateral offset of the wrist point along the parallel axes, m.
    l2, l3 : float
        Distances axis 2 to axis 3 and axis 3 to axis 4, m.
    e : float
        Signed distance of axis 5 from axis 4 (0 when they meet), m.
    d5 : float
        Signed distance from axis 4 to the wrist point along axis 5, m.
    signs : array, shape (6,)
        ``s_i`` = +1 or -1: the robot's joint axis along or against the
        canonical axis.
    offsets : array, shape (6,)
        ``o_i``, rad: ``θ_i = s_i q_i + o_i``.
    T_base_canonical : array, shape (4, 4)
        The canonical base frame in the robot's base frame.
    T_end_link : array, shape (4, 4)
        The robot's last link frame in the canonical end frame.
    shoulder_factor, up_factor : float
        +1 or -1: canonical x and z times these are the forward and up
        directions of :mod:`posebridge.kinematics.branches`.
    wrist_straight : float
        Joint 5 value with a straight wrist
        (:class:`~posebridge.kinematics.branches.BranchGeometry`).
    """

    a1: float
    b: float
    l2: float
    l3: float
    e: float
    d5: float
    signs: FloatArray
    offsets: FloatArray
    T_base_canonical: FloatArray
    T_end_link: FloatArray
    shoulder_factor: float
    up_factor: float
    wrist_straight: float

    @classmethod
    def from_robot(cls, robot: Robot) -> OffsetWristGeometry | None:
        """Extract the canonical parameters of ``robot``, or None if it is not of this class.

        Checks at the zero configuration: axis 2 perpendicular to axis 1, axes
        3 and 4 parallel to axis 2, axis 5 perpendicular to axis 2, axis 6
        perpendicular to axis 5 and meeting it, and the planar links
        ``l2``, ``l3`` not zero. Then verifies the canonical forward
        kinematics against :func:`posebridge.kinematics.fk.fk_flange` on
        random configurations (to 1e-9).
        """
        if robot.dof != 6 or np.any(robot.prismatic):
            return None
        geometry = cls._extract(robot)
        if geometry is None:
            return None
        rng = np.random.default_rng(20240611)
        q = rng.uniform(-np.pi, np.pi, size=(VERIFY_SAMPLES, 6))
        q[0] = 0.0
        return geometry if agrees_with_fk(robot, partial(geometry.fk_flange, robot), q) else None

    @classmethod
    def _extract(cls, robot: Robot) -> OffsetWristGeometry | None:
        frames, axes, points = zero_axes(robot)
        tol = GEOMETRY_TOLERANCE
        a_1, a_2, a_3, a_4, a_5, a_6 = axes
        p_1, p_2, p_3, p_4, p_5, p_6 = points
        if abs(a_1 @ a_2) > tol or abs(a_5 @ a_2) > tol or abs(a_6 @ a_5) > tol:
            return None
        if np.linalg.norm(np.cross(a_3, a_2)) > tol or np.linalg.norm(np.cross(a_4, a_2)) > tol:
            return None
        # wrist point: the point of axis 5 nearest axis 6 (perpendicular axes), on both
        wrist = p_5 - ((p_5 - p_6) @ a_5) * a_5
        if line_gap(p_6, a_6, wrist) > tol:
            return None
        z, y = a_1, a_2
        x = np.cross(y, z)
        origin = p_1 + ((p_2 - p_1) @ z) * z

        def plane(point: FloatArray) -> FloatArray:
            d = point - origin
            return np.array([d @ x, d @ z])

        a1 = float(plane(p_2)[0])
        upper = plane(p_3) - np.array([a1, 0.0])
        fore = plane(p_4) - plane(p_3)
        l2, l3 = float(np.hypot(*upper)), float(np.hypot(*fore))
        if l2 < tol or l3 < tol:
            return None
        signs = np.ones(6)
        offsets = np.zeros(6)
        signs[2] = np.sign(a_3 @ y)
        signs[3] = np.sign(a_4 @ y)
        offsets[1] = np.arctan2(upper[0], upper[1])
        theta23 = np.arctan2(fore[0], fore[1])
        offsets[2] = theta23 - offsets[1]
        # axis 5 is Ry(φ) z: φ at zero
        phi = np.arctan2(a_5 @ x, a_5 @ z)
        offsets[3] = phi - theta23
        X4 = np.cos(phi) * x - np.sin(phi) * z
        e = float(X4 @ (wrist - p_4))
        d5 = float(a_5 @ (wrist - p_4))
        # axis 6 is Ry(φ) Rz(θ5) y = -sin θ5 X4 + cos θ5 y
        offsets[4] = np.arctan2(-(a_6 @ X4), a_6 @ y)
        H = np.eye(4)
        H[:3, :3] = np.stack([x, y, z], axis=1)
        H[:3, 3] = origin
        end = np.eye(4)
        end[:3, :3] = H[:3, :3] @ rotation_matrix_about_y(phi) @ rotation_matrix_about_z(offsets[4])
        end[:3, 3] = wrist
        labels = branch_geometry(robot)
        if labels.scheme != "arm":
            return None
        b = float((wrist - origin) @ y)
        return cls(
            a1=a1,
            b=0.0 if abs(b) < tol else b,
            l2=l2,
            l3=l3,
            e=e,
            d5=d5,
            signs=signs,
            offsets=np.arctan2(np.sin(offsets), np.cos(offsets)),
            T_base_canonical=H,
            T_end_link=invert_transform(end) @ frames[6],
            shoulder_factor=labels.forward_sign,
            up_factor=labels.up_sign,
            wrist_straight=labels.wrist_straight,
        )

    def canonical_angles(self, q: npt.ArrayLike) -> FloatArray:
        """Canonical joint angles ``θ = s q + o``, shape (N, 6)."""
        return np.asarray(q, dtype=np.float64) * self.signs + self.offsets

    def fk_flange(self, robot: Robot, q: npt.ArrayLike) -> FloatArray:
        """Flange poses in the robot's base frame by the canonical model, shape (N, 4, 4).

        Written independently of the IK kernel (module docstring's equations);
        used to verify the extraction. ``robot`` supplies the flange in the
        last link frame.
        """
        theta = self.canonical_angles(q)
        t1, t2, t3, t4, t5, t6 = theta.T
        t23 = t2 + t3
        phi = t23 + t4
        local = np.stack(
            [
                self.a1
                + self.l2 * np.sin(t2)
                + self.l3 * np.sin(t23)
                + self.e * np.cos(phi)
                + self.d5 * np.sin(phi),
                np.full_like(t1, self.b),
                self.l2 * np.cos(t2)
                + self.l3 * np.cos(t23)
                - self.e * np.sin(phi)
                + self.d5 * np.cos(phi),
            ],
            axis=-1,
        )
        R1 = rotation_matrix_about_z(t1)
        T = np.zeros((theta.shape[0], 4, 4))
        T[:, :3, :3] = (
            R1
            @ rotation_matrix_about_y(phi)
            @ rotation_matrix_about_z(t5)
            @ rotation_matrix_about_y(t6)
        )
        T[:, :3, 3] = np.einsum("kij,kj->ki", R1, local)
        T[:, 3, 3] = 1.0
        return self.T_base_canonical @ T @ self.T_end_link @ robot.T_link_flange


@nb.njit(cache=True)
def _canonical_targets(start, stop, T, Hi, G, C):
    """``C[i - start] = Hi T[i] G``: the canonical end frames of the targets, rows (3, 4)."""
    for i in range(start, stop):
        row = i - start
        for r in range(3):
            m0 = T[i, r, 0] * G[0, 0] + T[i, r, 1] * G[1, 0] + T[i, r, 2] * G[2, 0]
            m1 = T[i, r, 0] * G[0, 1] + T[i, r, 1] * G[1, 1] + T[i, r, 2] * G[2, 1]
            m2 = T[i, r, 0] * G[0, 2] + T[i, r, 1] * G[1, 2] + T[i, r, 2] * G[2, 2]
            m3 = T[i, r, 0] * G[0, 3] + T[i, r, 1] * G[1, 3] + T[i, r, 2] * G[2, 3] + T[i, r, 3]
            for c in range(3):
                C[row, c, 0] += Hi[c, r] * m0
                C[row, c, 1] += Hi[c, r] * m1
                C[row, c, 2] += Hi[c, r] * m2
                C[row, c, 3] += Hi[c, r] * m3
        C[row, 0, 3] += Hi[0, 3]
        C[row, 1, 3] += Hi[1, 3]
        C[row, 2, 3] += Hi[2, 3]


@nb.njit(cache=True)
def _reachable_phi(phi, x, z, prm):
    """``φ``, or the nearest value for which the planar arm reaches the point of axis 4.

    The point of axis 4 is ``W(φ) = (x, z) - |v| dir(φ + γ)`` with ``v = (e,
    d5)``, ``γ = atan2(e, d5)``: a circle about the wrist point. With ``Δ`` =
    wrist point minus shoulder, ``|W - S|² = |Δ|² + |v|² - 2 |Δ| |v| cos t``,
    ``t = φ + γ - angle(Δ)``; the arm reaches ``|l2 - l3| <= |W - S| <= l2 +
    l3``, a range of ``|t|``, and ``t`` is clamped into it (law of cosines).
    """
    a1, l2, l3, v_norm, gamma = prm[0], prm[2], prm[3], prm[10], prm[11]
    dx = x - a1
    delta = np.sqrt(dx * dx + z * z)
    if delta * v_norm < 1e-12:
        return phi
    denominator = 2.0 * delta * v_norm
    base = delta * delta + v_norm * v_norm
    cos_low = (base - (l2 + l3) * (l2 + l3)) / denominator
    cos_high = (base - (l2 - l3) * (l2 - l3)) / denominator
    if cos_low > 1.0 or cos_high < -1.0:
        return phi
    alpha = np.arctan2(dx, z)
    t = phi + gamma - alpha
    t -= 2.0 * np.pi * np.floor((t + np.pi) / (2.0 * np.pi))
    t_min = np.arccos(min(cos_high, 1.0))
    t_max = np.arccos(max(cos_low, -1.0))
    size = abs(t)
    if t_min <= size <= t_max:
        return phi
    size = min(max(size, t_min), t_max)
    return (size if t >= 0.0 else -size) - gamma + alpha


@nb.njit(cache=True)
def _arm_candidates(start, stop, problem, seed, C, pair_y, pair_x, arm_ok, arm_labels, raw_reason):
    """Run steps 1 to 3 of the module docstring and the check of each candidate.

    For poses ``start..stop-1`` (rows ``i - start``; ``problem`` as in
    :func:`_solve_block`, ``C`` holds their canonical end frames) writes for each of the eight candidates (index
    ``4 shoulder + 2 wrist + elbow``) whether it reaches the pose and is not
    a duplicate (``arm_ok`` (B, 8)), its shoulder and elbow labels
    (``arm_labels`` (B, 8, 2)) and the arctangent argument pairs of every
    angle (``pair_y``, ``pair_x`` (B, 26), layout in :data:`_ANGLES`).
    ``raw_reason`` (B,) gets the reason code if no candidate reaches the
    pose: 1 (out of reach) when the tool point is farther from every
    shoulder position than the stretched arm plus the wrist and tool, else 2.
    """
    T, Hi, _, prm, signs, offsets, tol_pos, tol_rot = problem
    a1, b, l2, l3, e, d5 = prm[0], prm[1], prm[2], prm[3], prm[4], prm[5]
    f, K_elbow, lever = prm[6], prm[6] * prm[7], prm[9]
    for i in range(start, stop):
        row = i - start
        R00, R01, R02 = C[row, 0, 0], C[row, 0, 1], C[row, 0, 2]
        R10, R11, R12 = C[row, 1, 0], C[row, 1, 1], C[row, 1, 2]
        R20, R21, R22 = C[row, 2, 0], C[row, 2, 1], C[row, 2, 2]
        px, py, pz = C[row, 0, 3], C[row, 1, 3], C[row, 2, 3]
        r_sq = px * px + py * py
        X_root = np.sqrt(max(r_sq - b * b, 0.0))
        free_theta1 = b == 0.0 and r_sq < LABEL_TOLERANCE_M * LABEL_TOLERANCE_M
        reached_any = False
        for branch1 in range(2):
            sigma = 1.0 if branch1 == 0 else -1.0
            if free_theta1:
                theta1 = signs[0] * seed[i, 0] + offsets[0] + (0.0 if branch1 == 0 else np.pi)
                c1 = np.cos(theta1)
                s1 = np.sin(theta1)
            elif r_sq > 0.0:
                # step 1: Rz(θ1) (X, b) = (px, py)
                c1 = (px * sigma * X_root + py * b) / r_sq
                s1 = (py * sigma * X_root - px * b) / r_sq
            else:
                c1 = 1.0
                s1 = 0.0
            pair_y[row, branch1] = s1
            pair_x[row, branch1] = c1
            X = c1 * px + s1 * py
            shoulder = shoulder_label(f * X)
            side = 1.0 if shoulder == 0 else float(shoulder)
            first = 4 * branch1
            if branch1 == 1 and shoulder == 0 and not free_theta1:
                # X = 0: both roots are the same θ1
                for arm in range(first, first + 4):
                    arm_ok[row, arm] = False
                continue
            # step 2: A = Rz(-θ1) R
            A00 = c1 * R00 + s1 * R10
            A01 = c1 * R01 + s1 * R11
            A02 = c1 * R02 + s1 * R12
            A10 = -s1 * R00 + c1 * R10
            A11 = -s1 * R01 + c1 * R11
            A12 = -s1 * R02 + c1 * R12
            n5 = np.sqrt(A10 * A10 + A12 * A12)
            n_phi = np.sqrt(A01 * A01 + R21 * R21)
            singular = n5 < _WRIST_SINGULAR_SIN
            for branch2 in range(2):
                k = 2 * branch1 + branch2
                base = 2 + 4 * k
                if singular and branch2 == 1:
                    # straight wrist: the other wrist solution is the same one
                    arm_ok[row, 2 * k] = False
                    arm_ok[row, 2 * k + 1] = False
                    continue
                w = 1.0 if branch2 == 0 else -1.0
                if not singular:
                    c5 = A11
                    s5 = w * n5
                    c6 = w * A10 / n5
                    s6 = w * A12 / n5
                    c_phi = -w * A01 / n_phi
                    s_phi = w * R21 / n_phi
                else:
                    c5 = 1.0 if A11 > 0.0 else -1.0
                    s5 = 0.0
                    # θ5 = 0: A = Ry(φ + θ6); θ5 = pi: A02 = sin(φ - θ6), A00 = -cos(φ - θ6)
                    psi = np.arctan2(A02, c5 * A00)
                    theta6 = signs[5] * seed[i, 5] + offsets[5]
                    phi = _reachable_phi(psi - c5 * theta6, X, pz, prm)
                    theta6 = c5 * (psi - phi)
                    c6 = np.cos(theta6)
                    s6 = np.sin(theta6)
                    c_phi = np.cos(phi)
                    s_phi = np.sin(phi)
                pair_y[row, base] = s5
                pair_x[row, base] = c5
                pair_y[row, base + 1] = s6
                pair_x[row, base + 1] = c6
                pair_y[row, base + 2] = s_phi
                pair_x[row, base + 2] = c_phi
                # check of the orientation: Ry(φ) Rz(θ5) Ry(θ6) against A
                d00 = c_phi * c5 * c6 - s_phi * s6 - A00
                d01 = -c_phi * s5 - A01
                d02 = c_phi * c5 * s6 + s_phi * c6 - A02
                d10 = s5 * c6 - A10
                d11 = c5 - A11
                d12 = s5 * s6 - A12
                d20 = -s_phi * c5 * c6 - c_phi * s6 - R20
                d21 = s_phi * s5 - R21
                d22 = -s_phi * c5 * s6 + c_phi * c6 - R22
                rotation_error = np.sqrt(
                    d00 * d00
                    + d01 * d01
                    + d02 * d02
                    + d10 * d10
                    + d11 * d11
                    + d12 * d12
                    + d20 * d20
                    + d21 * d21
                    + d22 * d22
                )
                # step 3: the planar arm to the point of axis 4
                offset_x = e * c_phi + d5 * s_phi
                offset_z = -e * s_phi + d5 * c_phi
                u = X - offset_x - a1
                v = pz - offset_z
                rho = np.sqrt(u * u + v * v)
                cb = (rho * rho - l2 * l2 - l3 * l3) / (2.0 * l2 * l3)
                cb = min(1.0, max(-1.0, cb))
                sb_plus = np.sqrt(max(1.0 - cb * cb, 0.0))
                pair_y[row, base + 3] = sb_plus
                pair_x[row, base + 3] = cb
                P = l2 + l3 * cb
                reached = np.sqrt(max(l2 * l2 + l3 * l3 + 2.0 * l2 * l3 * cb, 0.0))
                # label wrist centre (point of axis 5 nearest axis 4) from the shoulder
                wc_x = X - d5 * s_phi - a1
                wc_z = pz - d5 * c_phi
                wc_reach = np.sqrt(wc_x * wc_x + wc_z * wc_z)
                for branch3 in range(2):
                    arm = 2 * k + branch3
                    if branch3 == 1 and l2 * l3 * sb_plus <= LABEL_TOLERANCE_M * rho:
                        # stretched or folded: both elbows are the same
                        arm_ok[row, arm] = False
                        continue
                    sb = sb_plus if branch3 == 0 else -sb_plus
                    Q = l3 * sb
                    # θ2 = angle(u, v) - atan2(Q, P)
                    y2 = u * P - v * Q
                    x2 = v * P + u * Q
                    pair_y[row, 18 + arm] = y2
                    pair_x[row, 18 + arm] = x2
                    D = rho * reached
                    if D > 1e-12:
                        s2 = y2 / D
                        c2 = x2 / D
                    else:
                        theta2 = np.arctan2(y2, x2)
                        s2 = np.sin(theta2)
                        c2 = np.cos(theta2)
                    s23 = s2 * cb + c2 * sb
                    c23 = c2 * cb - s2 * sb
                    # check of the position: the canonical wrist point against the target's
                    x_local = a1 + l2 * s2 + l3 * s23 + offset_x
                    z_local = l2 * c2 + l3 * c23 + offset_z
                    ex = c1 * x_local - s1 * b - px
                    ey = s1 * x_local + c1 * b - py
                    ez = z_local - pz
                    position_error = np.sqrt(ex * ex + ey * ey + ez * ez) + lever * rotation_error
                    ok = position_error <= tol_pos and rotation_error <= tol_rot
                    arm_ok[row, arm] = ok
                    arm_labels[row, arm, 0] = shoulder
                    arm_labels[row, arm, 1] = elbow_label(
                        side, K_elbow * l2 * (wc_x * c2 - wc_z * s2), wc_reach
                    )
                    reached_any = reached_any or ok
        raw_reason[row] = 0
        if not reached_any:
            tx = Hi[0, 0] * T[i, 0, 3] + Hi[0, 1] * T[i, 1, 3] + Hi[0, 2] * T[i, 2, 3] + Hi[0, 3]
            ty = Hi[1, 0] * T[i, 0, 3] + Hi[1, 1] * T[i, 1, 3] + Hi[1, 2] * T[i, 2, 3] + Hi[1, 3]
            tz = Hi[2, 0] * T[i, 0, 3] + Hi[2, 1] * T[i, 1, 3] + Hi[2, 2] * T[i, 2, 3] + Hi[2, 3]
            d_min = np.hypot(np.hypot(tx, ty) - prm[12], tz)
            raw_reason[row] = 1 if d_min > l2 + l3 + prm[10] + lever + tol_pos else 2


@nb.njit(cache=True)
def _assemble(start, stop, prm, signs, offsets, angles, arm_ok, arm_labels, raw):
    """Joint values and labels of the eight candidates from the computed angles.

    ``θ3 = ±β``, ``θ4 = φ - θ2 - θ3``; joint values ``q_i = s_i (θ_i - o_i)``;
    written to ``raw`` (:func:`~posebridge.kinematics.ik.finishing.empty_candidates`).
    """
    raw_q, raw_ok, raw_labels, _ = raw
    straight = prm[8]
    for i in range(start, stop):
        row = i - start
        for arm in range(8):
            if not arm_ok[row, arm]:
                raw_ok[row, arm] = False
                continue
            k = arm // 2
            base = 2 + 4 * k
            theta1 = angles[row, arm // 4]
            theta5 = angles[row, base]
            theta6 = angles[row, base + 1]
            phi = angles[row, base + 2]
            theta3 = angles[row, base + 3] if arm % 2 == 0 else -angles[row, base + 3]
            theta2 = angles[row, 18 + arm]
            theta4 = phi - theta2 - theta3
            raw_ok[row, arm] = True
            raw_q[row, arm, 0] = signs[0] * (theta1 - offsets[0])
            raw_q[row, arm, 1] = signs[1] * (theta2 - offsets[1])
            raw_q[row, arm, 2] = signs[2] * (theta3 - offsets[2])
            raw_q[row, arm, 3] = signs[3] * (theta4 - offsets[3])
            raw_q[row, arm, 4] = signs[4] * (theta5 - offsets[4])
            raw_q[row, arm, 5] = signs[5] * (theta6 - offsets[5])
            raw_labels[row, arm, 0] = arm_labels[row, arm, 0]
            raw_labels[row, arm, 1] = arm_labels[row, arm, 1]
            raw_labels[row, arm, 2] = wrist_label(raw_q[row, arm, 4], straight)


@nb.njit(cache=True)
def _solve_block(start, stop, problem, finish, out):
    """Candidates (canonical targets, geometry, arctangents, assembly), then slot finishing.

    ``problem`` is ``(T, Hi, G, prm, signs, offsets, tol_pos, tol_rot)``
    (:func:`solve_offset_wrist`), ``finish`` is
    :func:`~posebridge.kinematics.ik.finishing.finish_inputs`.
    """
    T, Hi, G, prm, signs, offsets, _, _ = problem
    B = stop - start
    C = np.zeros((B, 3, 4))
    pair_y = np.zeros((B, _ANGLES))
    pair_x = np.zeros((B, _ANGLES))
    angles = np.empty((B, _ANGLES))
    arm_ok = np.zeros((B, 8), dtype=np.bool_)
    arm_labels = np.zeros((B, 8, 2), dtype=np.int8)
    raw = empty_candidates(B, 8, 6)
    _canonical_targets(start, stop, T, Hi, G, C)
    _arm_candidates(start, stop, problem, finish[0], C, pair_y, pair_x, arm_ok, arm_labels, raw[3])
    atan2_many(
        pair_y.reshape(B * _ANGLES), pair_x.reshape(B * _ANGLES), angles.reshape(B * _ANGLES)
    )
    _assemble(start, stop, prm, signs, offsets, angles, arm_ok, arm_labels, raw)
    finish_rows(start, stop, start, raw, finish, out)


@nb.njit(cache=True, parallel=True)
def _solve_parallel(problem, finish, out):
    N = problem[0].shape[0]
    for block in nb.prange(block_count(N)):
        start, stop = block_rows(block, N)
        _solve_block(start, stop, problem, finish, out)


def _kernel_parameters(geometry: OffsetWristGeometry, G: FloatArray) -> FloatArray:
    """Packed parameters of the kernel, shape (13,).

    ``[a1, b, l2, l3, e, d5, shoulder_factor, up_factor, wrist_straight,
    end_to_tcp, |v|, γ, shoulder_radius]`` with ``v = (e, d5)``, ``γ =
    atan2(e, d5)``; ``end_to_tcp`` is the distance from the wrist point to
    the TCP and ``shoulder_radius`` that of the wrist point's shoulder circle
    (``hypot(a1, b)``) from axis 1.
    """
    return np.array(
        [
            geometry.a1,
            geometry.b,
            geometry.l2,
            geometry.l3,
            geometry.e,
            geometry.d5,
            geometry.shoulder_factor,
            geometry.up_factor,
            geometry.wrist_straight,
            float(np.linalg.norm(invert_transform(G)[:3, 3])),
            float(np.hypot(geometry.e, geometry.d5)),
            float(np.arctan2(geometry.e, geometry.d5)),
            float(np.hypot(geometry.a1, geometry.b)),
        ]
    )


def offset_wrist_solver(
    robot: Robot,
    geometry: OffsetWristGeometry,
    *,
    T_flange_tool: npt.ArrayLike | None = None,
    position_tolerance_m: float = 1e-6,
    orientation_tolerance_rad: float = 1e-6,
) -> BlockSolver:
    """Prepare the kernels of :func:`solve_offset_wrist` for one tool: parameters computed once."""
    G = np.ascontiguousarray(
        invert_transform(geometry.T_end_link @ tool_tail(robot, T_flange_tool))
    )
    Hi = np.ascontiguousarray(invert_transform(geometry.T_base_canonical)[:3])
    constants = (
        Hi,
        G,
        _kernel_parameters(geometry, G),
        geometry.signs,
        geometry.offsets,
        float(position_tolerance_m),
        float(orientation_tolerance_rad),
    )
    return BlockSolver(
        robot, _solve_block, _solve_parallel, constants, 8, METHOD, joint_table(robot)
    )


def solve_offset_wrist(
    robot: Robot,
    geometry: OffsetWristGeometry,
    T_base_tool: npt.ArrayLike,
    *,
    T_flange_tool: npt.ArrayLike | None = None,
    seed: npt.ArrayLike | None = None,
    all_revolutions: bool = False,
    position_tolerance_m: float = 1e-6,
    orientation_tolerance_rad: float = 1e-6,
) -> IkSolutions:
    """Every IK solution of an offset-wrist arm (joints 2-4 parallel) for a batch of tool poses.

    Method, branch words and degenerate cases in the module docstring
    (closed form derived from the joint geometry; up to eight solutions).

    Parameters
    ----------
    robot : Robot
    geometry : OffsetWristGeometry
        From :meth:`OffsetWristGeometry.from_robot` of the same robot.
    T_base_tool : array-like, shape (N, 4, 4)
        Target tool poses in the base frame, SI.
    T_flange_tool : array-like, shape (4, 4), optional
        Tool in the flange frame; the robot's default tool if omitted.
    seed : array-like, shape (6,) or (N, 6), optional
        Orders the solutions; joint 1 (shoulder singularity without lateral
        offset) and joint 6 (wrist singularity) take its values.
    all_revolutions : bool
        One slot per in-limit revolution variant (see :mod:`posebridge.kinematics.ik.finishing`).
    position_tolerance_m, orientation_tolerance_rad : float
        Largest accepted TCP position error and rotation difference of a
        valid solution (module docstring).

    Returns
    -------
    IkSolutions
        ``M = 8`` slots per pose (times the revolution variants with ``all_revolutions``).
    """
    T = check_target_poses(T_base_tool)
    solver = offset_wrist_solver(
        robot,
        geometry,
        T_flange_tool=T_flange_tool,
        position_tolerance_m=position_tolerance_m,
        orientation_tolerance_rad=orientation_tolerance_rad,
    )
    return solver.solve(T, seed=seed, all_revolutions=all_revolutions)

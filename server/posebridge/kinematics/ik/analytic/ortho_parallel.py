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
extracts the parameters from the joint axes at zero together with per-joint
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
from dataclasses import dataclass

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
from posebridge.kinematics.fk import PARALLEL_THRESHOLD, fk_flange, fk_frames, tool_tail
from posebridge.kinematics.ik.finishing import (
    BLOCK_SIZE,
    empty_outputs,
    finish_rows,
    joint_table,
    slots_per_candidate,
    solutions_from_outputs,
)
from posebridge.kinematics.ik.inputs import check_seed, check_target_poses
from posebridge.kinematics.ik.solutions import IkSolutions, reasons_from_codes
from posebridge.robot.model import Robot
from posebridge.transforms import invert_transform, rotation_matrix_about_z
from posebridge.units import FloatArray

__all__ = ["METHOD", "OrthoParallelGeometry", "atan2_many", "solve_ortho_parallel"]

METHOD = "analytic: ortho-parallel, Brandstötter et al. 2014"

_GEOMETRY_TOLERANCE = 1e-9
"""Largest deviation (m, or unit-vector components) accepted by the extractor's checks."""

_VERIFY_TOLERANCE = 1e-9
"""Largest |FK difference| on random configurations for the extractor to accept a robot."""

_VERIFY_SAMPLES = 64

_WRIST_SINGULAR_SIN = 1e-8
"""``|sin θ5|`` below which θ4 and θ6 are split by the seed. The balance point of
the rounding error of the regular formulas (about 1e-16 / |sin θ5|) and the
error of splitting by the seed (about 2 pi |sin θ5|); both stay below 1e-7 rad."""


def _ry(angle: FloatArray) -> FloatArray:
    c, s = np.cos(angle), np.sin(angle)
    R = np.zeros(angle.shape + (3, 3))
    R[..., 0, 0], R[..., 0, 2], R[..., 2, 0], R[..., 2, 2], R[..., 1, 1] = c, s, -s, c, 1.0
    return R


def _line_gap(p: FloatArray, a: FloatArray, point: FloatArray) -> float:
    """Distance of ``point`` from the line through ``p`` along unit ``a``."""
    d = point - p
    return float(np.linalg.norm(d - (d @ a) * a))


@dataclass(frozen=True)
class OrthoParallelGeometry:
    """Parameters of an ortho-parallel arm in the canonical model (SI units).

    Attributes
    ----------
    a1, a2, b, c1, c2, c3, c4 : float
        Brandstötter et al. (2014) parameters, m.
    signs : array, shape (6,)
        ``s_i`` = +1 or -1: the robot's joint axis along (+1) or against (-1)
        the canonical axis.
    offsets : array, shape (6,)
        ``o_i``, rad: ``θ_i = s_i q_i + o_i``.
    R_end_flange : array, shape (3, 3)
        Constant rotation from the canonical end frame to the robot's flange.
    shoulder_factor, up_factor : float
        +1 or -1: canonical arm-plane coordinates (x along the arm, z up) times
        these give the forward and up coordinates of
        :mod:`posebridge.kinematics.branches` (``forward_sign s1 s2`` and ``up_sign s1``).
    wrist_straight : float
        Joint 5 value with a straight wrist (:class:`~posebridge.kinematics.branches.BranchGeometry`).
    """

    a1: float
    a2: float
    b: float
    c1: float
    c2: float
    c3: float
    c4: float
    signs: FloatArray
    offsets: FloatArray
    R_end_flange: FloatArray
    shoulder_factor: float
    up_factor: float
    wrist_straight: float

    @classmethod
    def from_robot(cls, robot: Robot) -> OrthoParallelGeometry | None:
        """Extract the canonical parameters of ``robot``, or None if it is not ortho-parallel.

        Checks at the zero configuration: axis 1 parallel to the base z axis
        and through the base origin, axis 2 perpendicular to axis 1, axis 3
        parallel to axis 2, axis 4 perpendicular to axis 3, axis 5 to axis 4,
        axis 6 to axis 5, axes 4, 5 and 6 through one point, the flange origin
        on axis 6. Then verifies the canonical forward kinematics against
        :func:`posebridge.kinematics.fk.fk_flange` on random configurations
        (to 1e-9).
        """
        if robot.dof != 6 or np.any(robot.prismatic):
            return None
        geometry = cls._extract(robot)
        if geometry is None:
            return None
        rng = np.random.default_rng(20140523)
        q = rng.uniform(-np.pi, np.pi, size=(_VERIFY_SAMPLES, 6))
        q[0] = 0.0
        if np.abs(geometry.fk_flange(q) - fk_flange(robot, q)).max() > _VERIFY_TOLERANCE:
            return None
        return geometry

    @classmethod
    def _extract(cls, robot: Robot) -> OrthoParallelGeometry | None:
        frames = fk_frames(robot, np.zeros((1, 6)))[0]
        axes = np.einsum("nij,nj->ni", frames[1:7, :3, :3], robot.axes)
        points = frames[1:7, :3, 3]
        tol = _GEOMETRY_TOLERANCE
        z = np.array([0.0, 0.0, 1.0])
        a_1, a_2, a_3, a_4, a_5, a_6 = axes
        p_1, p_2, p_3, p_4, p_5, p_6 = points
        signs = np.ones(6)
        offsets = np.zeros(6)
        # axis 1: the base z axis
        if np.linalg.norm(np.cross(a_1, z)) > tol or np.linalg.norm(p_1[:2]) > tol:
            return None
        signs[0] = np.sign(a_1[2])
        # axis 2 horizontal; canonical y' along it, x' = y' x z
        if abs(a_2 @ z) > tol:
            return None
        y_axis = a_2
        x_axis = np.cross(y_axis, z)
        a1 = float(p_2 @ x_axis)
        if a1 < -tol:
            signs[1], y_axis, x_axis, a1 = -1.0, -y_axis, -x_axis, -a1
        offsets[0] = np.arctan2(x_axis[1], x_axis[0])
        c1 = float(p_2 @ z)
        # axis 3 parallel to axis 2; upper arm from axis 2 to axis 3
        if np.linalg.norm(np.cross(a_3, y_axis)) > tol:
            return None
        signs[2] = np.sign(a_3 @ y_axis)
        upper = np.array([p_3 @ x_axis - a1, p_3 @ z - c1])
        c2 = float(np.hypot(*upper))
        if c2 < tol:
            return None
        offsets[1] = np.arctan2(upper[0], upper[1])
        # wrist centre: axes 4, 5, 6 through one point
        if abs(a_4 @ y_axis) > tol or abs(a_5 @ a_4) > tol or abs(a_6 @ a_5) > tol:
            return None
        normal = np.cross(a_4, a_5)
        if np.linalg.norm(normal) < 0.5:
            return None
        # point of axis 4 nearest axis 5 (the axes are perpendicular)
        w = p_4 - p_5
        t = -(w @ a_4)
        centre = p_4 + t * a_4
        if _line_gap(p_5, a_5, centre) > tol or _line_gap(p_6, a_6, centre) > tol:
            return None
        # forearm: canonical axis 4 is Ry(θ23) z in the arm plane
        theta23 = np.arctan2(a_4 @ x_axis, a_4 @ z)
        X3 = np.cos(theta23) * x_axis - np.sin(theta23) * z
        Z3 = np.sin(theta23) * x_axis + np.cos(theta23) * z
        c3 = float((centre - p_3) @ Z3)
        a2 = float((centre - p_3) @ X3)
        if c3 < -tol:
            signs[3], theta23, X3, Z3, c3, a2 = -1.0, theta23 + np.pi, -X3, -Z3, -c3, -a2
        offsets[2] = theta23 - offsets[1]
        b = float(centre @ y_axis)
        if abs(b) < tol:
            b = 0.0
        # axis 5 is Rz(θ4) y' in the forearm frame
        offsets[3] = np.arctan2(-(a_5 @ X3), a_5 @ y_axis)
        c4_, s4_ = np.cos(offsets[3]), np.sin(offsets[3])
        X4 = c4_ * X3 + s4_ * y_axis
        Y4 = -s4_ * X3 + c4_ * y_axis
        # axis 6 is Ry(θ5) z in that frame
        offsets[4] = np.arctan2(a_6 @ X4, a_6 @ Z3)
        flange = frames[7]
        axis_6 = a_6
        c4 = float((flange[:3, 3] - centre) @ axis_6)
        if _line_gap(centre, axis_6, flange[:3, 3]) > tol:
            return None
        if c4 < -tol:
            signs[5], offsets[4], axis_6, c4 = -1.0, offsets[4] + np.pi, -axis_6, -c4
        c5_, s5_ = np.cos(offsets[4]), np.sin(offsets[4])
        X5 = c5_ * X4 - s5_ * Z3
        Z5 = s5_ * X4 + c5_ * Z3
        R_end_zero = np.stack([X5, Y4, Z5], axis=1)
        labels = branch_geometry(robot)
        return cls(
            a1=a1,
            a2=a2,
            b=b,
            c1=c1,
            c2=c2,
            c3=c3,
            c4=c4,
            signs=signs,
            offsets=np.arctan2(np.sin(offsets), np.cos(offsets)),
            R_end_flange=R_end_zero.T @ flange[:3, :3],
            shoulder_factor=labels.forward_sign * signs[0] * signs[1],
            up_factor=labels.up_sign * signs[0],
            wrist_straight=labels.wrist_straight,
        )

    def canonical_angles(self, q: npt.ArrayLike) -> FloatArray:
        """Canonical joint angles ``θ = s q + o``, shape (N, 6)."""
        return np.asarray(q, dtype=np.float64) * self.signs + self.offsets

    def fk_flange(self, q: npt.ArrayLike) -> FloatArray:
        """Flange poses by the canonical model (module docstring), shape (N, 4, 4).

        Written independently of the IK kernel; used to verify the extraction.
        """
        theta = self.canonical_angles(q)
        t1, t2, t3, t4, t5, t6 = theta.T
        t23 = t2 + t3
        local = np.stack(
            [
                self.a1 + self.c2 * np.sin(t2) + self.a2 * np.cos(t23) + self.c3 * np.sin(t23),
                np.full_like(t1, self.b),
                self.c1 + self.c2 * np.cos(t2) - self.a2 * np.sin(t23) + self.c3 * np.cos(t23),
            ],
            axis=-1,
        )
        R1 = rotation_matrix_about_z(t1)
        R = R1 @ _ry(t23) @ rotation_matrix_about_z(t4) @ _ry(t5) @ rotation_matrix_about_z(t6)
        centre = np.einsum("kij,kj->ki", R1, local)
        T = np.zeros((theta.shape[0], 4, 4))
        T[:, :3, :3] = R @ self.R_end_flange
        T[:, :3, 3] = centre + self.c4 * R[:, :, 2]
        T[:, 3, 3] = 1.0
        return T


# Coefficients of atan(u) / u as a polynomial in u^2 for |u| <= tan(pi/8): a
# Chebyshev least-squares fit of degree 10 (numpy.polynomial.chebyshev.chebfit at
# 2000 Chebyshev nodes, reference values from numpy.arctan in long double),
# converted to the power basis; largest error 1.6e-16 on that interval.
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


@nb.njit(cache=True)
def _arm_candidates(
    start,
    stop,
    T,
    G,
    prm,
    signs,
    offsets,
    seed,
    tol_pos,
    pair_y,
    pair_x,
    arm_ok,
    arm_mode,
    arm_labels,
    raw_reason,
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
        px = T[i, 0, 0] * G[0, 3] + T[i, 0, 1] * G[1, 3] + T[i, 0, 2] * G[2, 3] + T[i, 0, 3]
        py = T[i, 1, 0] * G[0, 3] + T[i, 1, 1] * G[1, 3] + T[i, 1, 2] * G[2, 3] + T[i, 1, 3]
        pz = T[i, 2, 0] * G[0, 3] + T[i, 2, 1] * G[1, 3] + T[i, 2, 2] * G[2, 3] + T[i, 2, 3]
        cx = px - c4 * R02
        cy = py - c4 * R12
        cz = pz - c4 * R22
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
def _assemble(
    start,
    stop,
    prm,
    signs,
    offsets,
    seed,
    angles,
    arm_ok,
    arm_mode,
    arm_labels,
    raw_q,
    raw_ok,
    raw_labels,
):
    """Joint values and labels of the eight candidates from the computed angles.

    Each arm solution gives two wrists, ``(θ4, θ5, θ6)`` and
    ``(θ4 + pi, -θ5, θ6 + pi)``; at a wrist singularity only the first, with
    θ4 from the seed. ``θ3 = ±β - ψ``. Joint values ``q_i = s_i (θ_i - o_i)``.
    """
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
def _solve_block(
    start, stop, T, G, prm, signs, offsets, seed, has_seed, tol_pos, joints, all_revolutions, out
):
    """Candidates (three passes: arm geometry, arctangents, assembly), then slot finishing."""
    B = stop - start
    pair_y = np.zeros((B, _ANGLES))
    pair_x = np.zeros((B, _ANGLES))
    angles = np.empty((B, _ANGLES))
    arm_ok = np.zeros((B, 4), dtype=np.bool_)
    arm_mode = np.zeros((B, 4), dtype=np.int8)
    arm_labels = np.zeros((B, 4, 2), dtype=np.int8)
    raw_q = np.empty((B, 8, 6))
    raw_ok = np.zeros((B, 8), dtype=np.bool_)
    raw_labels = np.zeros((B, 8, 3), dtype=np.int8)
    raw_reason = np.empty(B, dtype=np.int8)
    _arm_candidates(
        start,
        stop,
        T,
        G,
        prm,
        signs,
        offsets,
        seed,
        tol_pos,
        pair_y,
        pair_x,
        arm_ok,
        arm_mode,
        arm_labels,
        raw_reason,
    )
    atan2_many(
        pair_y.reshape(B * _ANGLES), pair_x.reshape(B * _ANGLES), angles.reshape(B * _ANGLES)
    )
    _assemble(
        start,
        stop,
        prm,
        signs,
        offsets,
        seed,
        angles,
        arm_ok,
        arm_mode,
        arm_labels,
        raw_q,
        raw_ok,
        raw_labels,
    )
    finish_rows(
        start,
        stop,
        start,
        raw_q,
        raw_ok,
        raw_labels,
        raw_reason,
        seed,
        has_seed,
        joints,
        all_revolutions,
        out,
    )


@nb.njit(cache=True)
def _solve_serial(T, G, prm, signs, offsets, seed, has_seed, tol_pos, joints, all_revolutions, out):
    N = T.shape[0]
    for start in range(0, N, BLOCK_SIZE):
        stop = min(N, start + BLOCK_SIZE)
        _solve_block(
            start,
            stop,
            T,
            G,
            prm,
            signs,
            offsets,
            seed,
            has_seed,
            tol_pos,
            joints,
            all_revolutions,
            out,
        )


@nb.njit(cache=True, parallel=True)
def _solve_parallel(
    T, G, prm, signs, offsets, seed, has_seed, tol_pos, joints, all_revolutions, out
):
    N = T.shape[0]
    n_blocks = (N + BLOCK_SIZE - 1) // BLOCK_SIZE
    for blk in nb.prange(n_blocks):
        stop = min(N, (blk + 1) * BLOCK_SIZE)
        _solve_block(
            blk * BLOCK_SIZE,
            stop,
            T,
            G,
            prm,
            signs,
            offsets,
            seed,
            has_seed,
            tol_pos,
            joints,
            all_revolutions,
            out,
        )


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
    N = T.shape[0]
    seed_array, has_seed = check_seed(robot, seed, N)
    T_flange = invert_transform(robot.T_link_flange) @ tool_tail(robot, T_flange_tool)
    F = np.eye(4)
    F[:3, :3] = geometry.R_end_flange
    G = np.ascontiguousarray(invert_transform(F @ T_flange))
    prm = _kernel_parameters(geometry, G)
    M = 8 * slots_per_candidate(robot, all_revolutions)
    out = empty_outputs(N, M, 6)
    kernel = _solve_parallel if N >= PARALLEL_THRESHOLD else _solve_serial
    kernel(
        T,
        G,
        prm,
        geometry.signs,
        geometry.offsets,
        seed_array,
        has_seed,
        float(position_tolerance_m),
        joint_table(robot),
        all_revolutions,
        out,
    )
    return solutions_from_outputs(robot, out, reasons_from_codes(out[7]), method=METHOD)

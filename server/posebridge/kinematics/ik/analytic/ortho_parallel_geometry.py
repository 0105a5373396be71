"""Geometry extraction of the ortho-parallel family.

A robot description -> the canonical parameters of Brandstötter, Angerer, Hofbaur (2014), with
per-joint signs and offsets.

The canonical model and the method are described in
:mod:`posebridge.kinematics.ik.analytic.ortho_parallel` (the batch kernels).
:class:`OrthoParallelGeometry` accepts a robot only if its canonical forward
kinematics matches :func:`posebridge.kinematics.fk.fk_flange` on random
configurations.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

from posebridge.kinematics.branches import branch_geometry
from posebridge.kinematics.ik.analytic.extraction import (
    GEOMETRY_TOLERANCE,
    VERIFY_SAMPLES,
    agrees_with_fk,
    line_gap,
    zero_axes,
)
from posebridge.robot.model import Robot
from posebridge.transforms import rotation_matrix_about_y, rotation_matrix_about_z
from posebridge.units import FloatArray

__all__ = ["OrthoParallelGeometry"]


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
        q = rng.uniform(-np.pi, np.pi, size=(VERIFY_SAMPLES, 6))
        q[0] = 0.0
        return geometry if agrees_with_fk(robot, geometry.fk_flange, q) else None

    @classmethod
    def _extract(cls, robot: Robot) -> OrthoParallelGeometry | None:
        frames, axes, points = zero_axes(robot)
        tol = GEOMETRY_TOLERANCE
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
        if line_gap(p_5, a_5, centre) > tol or line_gap(p_6, a_6, centre) > tol:
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
        if line_gap(centre, axis_6, flange[:3, 3]) > tol:
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
        R = (
            R1
            @ rotation_matrix_about_y(t23)
            @ rotation_matrix_about_z(t4)
            @ rotation_matrix_about_y(t5)
            @ rotation_matrix_about_z(t6)
        )
        centre = np.einsum("kij,kj->ki", R1, local)
        T = np.zeros((theta.shape[0], 4, 4))
        T[:, :3, :3] = R @ self.R_end_flange
        T[:, :3, 3] = centre + self.c4 * R[:, :, 2]
        T[:, 3, 3] = 1.0
        return T


# Coefficients of atan(u) / u as a polynomial in u^2 for |u| <= tan(pi/8): a
# Chebyshev least-squares fit of degree 10 (numpy.polynomial.chebyshev.chebfit at
# 2000 Chebyshev nodes, reference values from numpy.arctan in long double),

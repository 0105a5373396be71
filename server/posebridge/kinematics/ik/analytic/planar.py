"""Analytic IK of planar arms (2R, 3R) and of the planar part of SCARA arms.

All revolute axes are parallel to the base z axis, so the arm moves in the
base x-y plane; a prismatic joint along z (SCARA quill) only sets the height.
With ``ρ_i = s_i q_i`` the rotation of joint i about +z (``s_i = ±1`` the
direction of its axis) the tool centre point is

    p = P1 + Rz(ρ1) a + Rz(ρ1 + ρ2) b + Rz(ρ1 + ρ2 + ρ_h) w

with ``a`` the first link (axis 1 to axis 2), ``b`` the second link (axis 2
to the point W where the heading joint h sits, or to the TCP for a 2R arm)
and ``w`` the TCP seen from W, all in the x-y plane at the zero
configuration. The two-link problem for W has the closed form of the law of
cosines (Craig, *Introduction to Robotics*, 3rd ed., sec. 4.7, the planar
two-link example; Lynch & Park, *Modern Robotics*, sec. 6.1):

    cos γ = (|W - P1|² - |a|² - |b|²) / (2 |a| |b|)

with the elbow angle γ between the two links taking both signs (the two
elbow branches, which coincide when the arm is stretched or folded), and the
first link's direction ``atan2(W - P1) - atan2(|b| sin γ, |a| + |b| cos γ)``.

* 2R: controls x and y of the TCP (ignores z, roll, pitch, yaw).
* 3R: x, y and the heading about z; W is axis 3, ``W = p - Rz(heading) w``
  (ignores z, roll, pitch).
* SCARA (:mod:`posebridge.kinematics.ik.analytic.scara`): as 3R plus the
  quill height (ignores roll and pitch).

The heading of a target is the rotation about z nearest to
``R_target R_tcp0^T`` (``R_tcp0`` the TCP orientation at zero):
``atan2(M10 - M01, M00 + M11)``, which maximises ``trace(Rz^T M)``.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

from posebridge.kinematics.branches import LABEL_TOLERANCE_M
from posebridge.kinematics.fk import fk_tool
from posebridge.kinematics.ik.analytic.extraction import (
    GEOMETRY_TOLERANCE,
    VERIFY_SAMPLES,
    agrees_with_fk,
    zero_axes,
)
from posebridge.kinematics.ik.finishing import finish_solutions
from posebridge.kinematics.ik.inputs import check_seed, check_target_poses
from posebridge.kinematics.ik.solutions import REASON_ORIENTATION, REASON_OUT_OF_REACH, IkSolutions
from posebridge.robot.model import Robot
from posebridge.transforms import rotation_matrix_about_z
from posebridge.units import FloatArray

__all__ = ["METHOD", "PlanarGeometry", "solve_planar"]

METHOD = "analytic: planar two-link closed form (law of cosines)"

_Z = np.array([0.0, 0.0, 1.0])


def _rz2(angle: FloatArray, v: FloatArray) -> FloatArray:
    """Rotate planar vectors ``v`` (2,) by ``angle`` (N,); result (N, 2)."""
    c, s = np.cos(angle), np.sin(angle)
    return np.stack([c * v[0] - s * v[1], s * v[0] + c * v[1]], axis=-1)


@dataclass(frozen=True)
class PlanarGeometry:
    """A serial arm whose revolute axes are all parallel to the base z axis (SI units).

    Attributes
    ----------
    kind : str
        ``"2r"``, ``"3r"`` or ``"scara"``.
    signs : array, shape (n,)
        ``a_i . z`` (+1 or -1) of each joint axis.
    points : array, shape (n, 3)
        Joint origins at the zero configuration, base frame.
    T_flange_zero : array, shape (4, 4)
        Flange pose at the zero configuration.
    heading_joint : int
        Index of the third revolute joint (3R, SCARA), -1 for 2R.
    prismatic_joint : int
        Index of the prismatic joint along z (SCARA), -1 otherwise.
    """

    kind: str
    signs: FloatArray
    points: FloatArray
    T_flange_zero: FloatArray
    heading_joint: int
    prismatic_joint: int

    @classmethod
    def from_robot(cls, robot: Robot) -> PlanarGeometry | None:
        """Geometry of a planar 2R or 3R arm in the base x-y plane, or None.

        Checks: two or three revolute joints, every axis parallel to the base
        z axis, non-zero first and second links; then the canonical forward
        kinematics must match :func:`posebridge.kinematics.fk.fk_flange` on
        random configurations (to 1e-9).
        """
        if robot.dof not in (2, 3) or np.any(robot.prismatic):
            return None
        kind = "2r" if robot.dof == 2 else "3r"
        return cls._checked(robot, kind, heading_joint=2 if robot.dof == 3 else -1, prismatic=-1)

    @classmethod
    def _checked(
        cls, robot: Robot, kind: str, heading_joint: int, prismatic: int
    ) -> PlanarGeometry | None:
        """Extract and verify (shared with the SCARA extractor)."""
        frames, axes, points = zero_axes(robot)
        if np.abs(np.cross(axes, _Z)).max() > GEOMETRY_TOLERANCE:
            return None
        first = np.linalg.norm((points[1] - points[0])[:2])
        end = frames[robot.dof + 1, :3, 3] if heading_joint < 0 else points[heading_joint]
        second = np.linalg.norm((end - points[1])[:2])
        if min(first, second) < GEOMETRY_TOLERANCE:
            return None
        geometry = cls(
            kind=kind,
            signs=np.sign(axes @ _Z),
            points=points,
            T_flange_zero=frames[robot.dof + 1],
            heading_joint=heading_joint,
            prismatic_joint=prismatic,
        )
        rng = np.random.default_rng(20140523)
        q = rng.uniform(-np.pi, np.pi, size=(VERIFY_SAMPLES, robot.dof))
        if prismatic >= 0:
            q[:, prismatic] = rng.uniform(-0.5, 0.5, size=VERIFY_SAMPLES)
        return geometry if agrees_with_fk(robot, geometry.fk_flange, q) else None

    def fk_flange(self, q: npt.ArrayLike) -> FloatArray:
        """Flange poses by the planar model (module docstring), shape (N, 4, 4).

        Written independently of the IK; used to verify the extraction.
        """
        q = np.asarray(q, dtype=np.float64)
        N, n = q.shape
        chain = np.vstack([self.points, self.T_flange_zero[None, :3, 3]])
        position = np.tile(self.points[0], (N, 1))
        rotation = np.zeros(N)
        for j in range(n):
            if j == self.prismatic_joint:
                position[:, 2] += self.signs[j] * q[:, j]
            else:
                rotation = rotation + self.signs[j] * q[:, j]
            position[:, :2] += _rz2(rotation, (chain[j + 1] - chain[j])[:2])
            position[:, 2] += chain[j + 1, 2] - chain[j, 2]
        T = np.zeros((N, 4, 4))
        T[:, :3, :3] = rotation_matrix_about_z(rotation) @ self.T_flange_zero[:3, :3]
        T[:, :3, 3] = position
        T[:, 3, 3] = 1.0
        return T

    @property
    def ignored_components(self) -> tuple[str, ...]:
        """Pose components the arm does not control."""
        return {
            "2r": ("z", "roll", "pitch", "yaw"),
            "3r": ("z", "roll", "pitch"),
            "scara": ("roll", "pitch"),
        }[self.kind]


def solve_planar(
    robot: Robot,
    geometry: PlanarGeometry,
    T_base_tool: npt.ArrayLike,
    *,
    T_flange_tool: npt.ArrayLike | None = None,
    seed: npt.ArrayLike | None = None,
    all_revolutions: bool = False,
    position_tolerance_m: float = 1e-6,
) -> IkSolutions:
    """Both elbow solutions of a planar 2R/3R arm or a SCARA arm for a batch of poses.

    Method in the module docstring; branch labels from
    :func:`posebridge.kinematics.branches.label_branches`. Only the controlled components
    (``geometry.ignored_components`` are not) are matched; a solution is
    valid when the controlled position is reached within
    ``position_tolerance_m`` (the heading and the quill height are reached
    exactly).

    Parameters
    ----------
    robot : Robot
    geometry : PlanarGeometry
        From ``PlanarGeometry.from_robot`` or ``ScaraGeometry.from_robot`` of the same robot.
    T_base_tool : array-like, shape (N, 4, 4)
    T_flange_tool : array-like, shape (4, 4), optional
        Tool in the flange frame; the robot's default tool if omitted.
    seed : array-like, shape (n,) or (N, n), optional
    all_revolutions : bool
    position_tolerance_m : float

    Returns
    -------
    IkSolutions
        ``M = 2`` slots per pose (times the revolution variants with ``all_revolutions``).
    """
    T = check_target_poses(T_base_tool)
    N, n = T.shape[0], robot.dof
    seed_array, has_seed = check_seed(robot, seed, N)
    zero = np.zeros((1, n))
    T_tcp0 = fk_tool(robot, zero, T_flange_tool)[0]
    s = geometry.signs
    P1 = geometry.points[0, :2]
    a = geometry.points[1, :2] - P1
    heading = geometry.heading_joint
    W0 = T_tcp0[:3, 3] if heading < 0 else geometry.points[heading]
    b = W0[:2] - geometry.points[1, :2]
    w = (T_tcp0[:3, 3] - W0)[:2]
    La, Lb = np.linalg.norm(a), np.linalg.norm(b)
    phi_a, phi_b = np.arctan2(a[1], a[0]), np.arctan2(b[1], b[0])

    tcp = T[:, :3, 3]
    if heading >= 0:
        M = T[:, :3, :3] @ T_tcp0[:3, :3].T
        rho = np.arctan2(M[:, 1, 0] - M[:, 0, 1], M[:, 0, 0] + M[:, 1, 1])
        W = tcp[:, :2] - _rz2(rho, w)
    else:
        rho = np.zeros(N)
        W = tcp[:, :2]
    d = W - P1
    r = np.hypot(d[:, 0], d[:, 1])
    cos_raw = (r * r - La * La - Lb * Lb) / (2.0 * La * Lb)
    cos_gamma = np.clip(cos_raw, -1.0, 1.0)
    reached = np.sqrt(np.maximum(La * La + Lb * Lb + 2.0 * La * Lb * cos_gamma, 0.0))
    residual = np.where(cos_gamma == cos_raw, 0.0, np.abs(r - reached))
    gamma_plus = np.arccos(cos_gamma)
    # target on axis 1 with equal links: the first joint is free, taken from the seed
    free = r < LABEL_TOLERANCE_M
    q_raw = np.full((N, 2, n), np.nan)
    ok = np.zeros((N, 2), dtype=bool)
    for branch, gamma in enumerate((gamma_plus, -gamma_plus)):
        alpha = np.where(
            free,
            phi_a + s[0] * seed_array[:, 0],
            np.arctan2(d[:, 1], d[:, 0]) - np.arctan2(Lb * np.sin(gamma), La + Lb * np.cos(gamma)),
        )
        rho1 = alpha - phi_a
        rho2 = gamma - (phi_b - phi_a)
        q_raw[:, branch, 0] = s[0] * rho1
        q_raw[:, branch, 1] = s[1] * rho2
        if heading >= 0:
            q_raw[:, branch, heading] = s[heading] * (rho - rho1 - rho2)
        if geometry.prismatic_joint >= 0:
            p = geometry.prismatic_joint
            q_raw[:, branch, p] = s[p] * (tcp[:, 2] - T_tcp0[2, 3])
        ok[:, branch] = residual <= position_tolerance_m
    # stretched or folded: the two elbow branches coincide, keep one
    ok[:, 1] &= np.sin(gamma_plus) * min(La, Lb) > LABEL_TOLERANCE_M
    tcp_distance = np.hypot(tcp[:, 0] - P1[0], tcp[:, 1] - P1[1])
    far = tcp_distance > La + Lb + np.linalg.norm(w) + position_tolerance_m
    unreachable = [
        REASON_OUT_OF_REACH if far_i or heading < 0 else REASON_ORIENTATION for far_i in far
    ]
    return finish_solutions(
        robot,
        q_raw,
        ok,
        seed=seed_array if has_seed else None,
        all_revolutions=all_revolutions,
        unreachable_reason=unreachable,
        ignored_components=geometry.ignored_components,
        method=METHOD,
        label_scheme="planar",
    )

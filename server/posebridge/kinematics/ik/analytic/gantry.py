"""Analytic IK of gantries: three linear axes, optionally followed by a tool rotation about z.

The three prismatic joints come first, with fixed, linearly independent
directions ``d_1, d_2, d_3`` (base frame); an optional last revolute joint
turns the tool about an axis parallel to the base z axis (``ρ = s q_4``,
``s = ±1`` the axis direction). Forward kinematics is

    p_tcp = p_tcp0 + D q_xyz + (Rz(ρ) - I) (p_tcp0 - c),   R_tcp = Rz(ρ) R_tcp0

with ``D = [d_1 d_2 d_3]`` and ``c`` a point of the rotation axis at zero.
The heading ρ is the rotation about z nearest to ``R_target R_tcp0^T``
(``atan2(M10 - M01, M00 + M11)``, see
:mod:`posebridge.kinematics.ik.analytic.planar`); the linear axes then
solve the 3x3 linear system ``D q_xyz = p_target - p_tcp0 - (Rz(ρ) - I)(p_tcp0 - c)``.
There is one solution (plus revolution variants of the tool rotation); it reaches
every position, so only the joint limits can rule it out. Controls x, y, z
(and yaw with the tool rotation); ignores roll and pitch (and yaw without it).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

from posebridge.kinematics.fk import fk_tool
from posebridge.kinematics.ik.analytic.extraction import (
    GEOMETRY_TOLERANCE,
    VERIFY_SAMPLES,
    agrees_with_fk,
    zero_axes,
)
from posebridge.kinematics.ik.finishing import finish_solutions
from posebridge.kinematics.ik.inputs import check_seed, check_target_poses
from posebridge.kinematics.ik.solutions import IkSolutions
from posebridge.robot.model import Robot
from posebridge.transforms import rotation_matrix_about_z
from posebridge.units import FloatArray

__all__ = ["METHOD", "GantryGeometry", "solve_gantry"]

METHOD = "analytic: gantry, linear system of the three linear axes"

_SMALLEST_SINGULAR_VALUE = 1e-6
_Z = np.array([0.0, 0.0, 1.0])


@dataclass(frozen=True)
class GantryGeometry:
    """Linear-axis directions and the optional tool rotation of a gantry (SI units).

    Attributes
    ----------
    directions : array, shape (3, 3)
        Columns ``d_1, d_2, d_3``: unit motion directions of the linear axes, base frame.
    rotation_sign : float
        ``a_4 . z`` (+1 or -1) of the tool rotation axis; 0 without one.
    rotation_point : array, shape (3,)
        A point of the tool rotation axis at the zero configuration.
    T_flange_zero : array, shape (4, 4)
        Flange pose at the zero configuration.
    """

    directions: FloatArray
    rotation_sign: float
    rotation_point: FloatArray
    T_flange_zero: FloatArray

    @classmethod
    def from_robot(cls, robot: Robot) -> GantryGeometry | None:
        """Geometry of a gantry, or None.

        Checks: three prismatic joints with linearly independent directions
        (smallest singular value of ``D`` above 1e-6), optionally a fourth,
        revolute joint about an axis parallel to the base z axis; then the
        model's forward kinematics must match
        :func:`posebridge.kinematics.fk.fk_flange` on random configurations (to 1e-9).
        """
        if robot.dof not in (3, 4) or not np.all(robot.prismatic[:3]):
            return None
        if robot.dof == 4 and robot.prismatic[3]:
            return None
        frames, axes, _ = zero_axes(robot)
        directions = axes[:3].T
        if np.linalg.svd(directions, compute_uv=False)[-1] < _SMALLEST_SINGULAR_VALUE:
            return None
        rotation_sign = 0.0
        rotation_point = np.zeros(3)
        if robot.dof == 4:
            if np.linalg.norm(np.cross(axes[3], _Z)) > GEOMETRY_TOLERANCE:
                return None
            rotation_sign = float(np.sign(axes[3] @ _Z))
            rotation_point = frames[4, :3, 3]
        geometry = cls(directions, rotation_sign, rotation_point, frames[robot.dof + 1])
        rng = np.random.default_rng(20140523)
        q = rng.uniform(-1.0, 1.0, size=(VERIFY_SAMPLES, robot.dof))
        if robot.dof == 4:
            q[:, 3] *= np.pi
        return geometry if agrees_with_fk(robot, geometry.fk_flange, q) else None

    def fk_flange(self, q: npt.ArrayLike) -> FloatArray:
        """Flange poses by the gantry model (module docstring), shape (N, 4, 4)."""
        q = np.asarray(q, dtype=np.float64)
        rho = self.rotation_sign * q[:, 3] if q.shape[1] == 4 else np.zeros(q.shape[0])
        Rz = rotation_matrix_about_z(rho)
        offset = self.T_flange_zero[:3, 3] - self.rotation_point
        T = np.zeros((q.shape[0], 4, 4))
        T[:, :3, :3] = Rz @ self.T_flange_zero[:3, :3]
        T[:, :3, 3] = self.rotation_point + Rz @ offset + q[:, :3] @ self.directions.T
        T[:, 3, 3] = 1.0
        return T

    @property
    def ignored_components(self) -> tuple[str, ...]:
        """Pose components the gantry does not control."""
        return ("roll", "pitch") if self.rotation_sign != 0.0 else ("roll", "pitch", "yaw")


def solve_gantry(
    robot: Robot,
    geometry: GantryGeometry,
    T_base_tool: npt.ArrayLike,
    *,
    T_flange_tool: npt.ArrayLike | None = None,
    seed: npt.ArrayLike | None = None,
    all_revolutions: bool = False,
) -> IkSolutions:
    """Return the gantry solution (module docstring) for a batch of tool poses.

    Parameters
    ----------
    robot : Robot
    geometry : GantryGeometry
        From :meth:`GantryGeometry.from_robot` of the same robot.
    T_base_tool : array-like, shape (N, 4, 4)
    T_flange_tool : array-like, shape (4, 4), optional
        Tool in the flange frame; the robot's default tool if omitted.
    seed : array-like, shape (n,) or (N, n), optional
    all_revolutions : bool

    Returns
    -------
    IkSolutions
        ``M = 1`` slot per pose (times the revolution variants with ``all_revolutions``).
    """
    T = check_target_poses(T_base_tool)
    N, n = T.shape[0], robot.dof
    seed_array, has_seed = check_seed(robot, seed, N)
    T_tcp0 = fk_tool(robot, np.zeros((1, n)), T_flange_tool)[0]
    q_raw = np.zeros((N, 1, n))
    if n == 4:
        M = T[:, :3, :3] @ T_tcp0[:3, :3].T
        rho = np.arctan2(M[:, 1, 0] - M[:, 0, 1], M[:, 0, 0] + M[:, 1, 1])
        q_raw[:, 0, 3] = geometry.rotation_sign * rho
        swing = (rotation_matrix_about_z(rho) - np.eye(3)) @ (
            T_tcp0[:3, 3] - geometry.rotation_point
        )
    else:
        swing = np.zeros((N, 3))
    rhs = T[:, :3, 3] - T_tcp0[:3, 3] - swing
    q_raw[:, 0, :3] = np.linalg.solve(geometry.directions, rhs.T).T
    return finish_solutions(
        robot,
        q_raw,
        np.ones((N, 1), dtype=bool),
        labels=(np.zeros((N, 1)), np.zeros((N, 1)), np.zeros((N, 1))),
        seed=seed_array if has_seed else None,
        all_revolutions=all_revolutions,
        ignored_components=geometry.ignored_components,
        method=METHOD,
        label_scheme="none",
    )

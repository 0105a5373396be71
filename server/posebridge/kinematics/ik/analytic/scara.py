"""Analytic IK of SCARA arms: two parallel revolute links, a quill along z, a tool roll.

The first two joints and the tool roll turn about axes parallel to the base z
axis, the quill (a prismatic joint, third or fourth) moves along z. The arm
is a planar three-joint arm in x-y (position and heading, two elbow
branches, closed form of :mod:`posebridge.kinematics.ik.analytic.planar`)
with the quill setting the height: ``q_quill = s (z_target - z_tcp0)``.
Controls x, y, z and the heading about z; ignores roll and pitch.
"""

from __future__ import annotations

import numpy as np

from posebridge.kinematics.ik.analytic.planar import PlanarGeometry
from posebridge.robot.model import Robot

__all__ = ["ScaraGeometry"]


class ScaraGeometry(PlanarGeometry):
    """Geometry of a SCARA arm; solved by :func:`posebridge.kinematics.ik.analytic.planar.solve_planar`."""

    @classmethod
    def from_robot(cls, robot: Robot) -> PlanarGeometry | None:
        """Geometry of a SCARA arm, or None.

        Checks: four joints, revolute, revolute, then one prismatic and one
        revolute in either order, every axis parallel to the base z axis,
        non-zero links; then the model's forward kinematics must match
        :func:`posebridge.kinematics.fk.fk_flange` on random configurations (to 1e-9).
        """
        if robot.dof != 4 or robot.prismatic[0] or robot.prismatic[1]:
            return None
        if int(np.count_nonzero(robot.prismatic[2:])) != 1:
            return None
        prismatic = 2 if robot.prismatic[2] else 3
        return cls._checked(robot, "scara", heading_joint=5 - prismatic, prismatic=prismatic)

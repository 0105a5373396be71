"""Loading the kinematics kernels before the first real call (numba cache, both drivers).

:func:`warm_kinematics` is this layer's one warm-up; the layers above call it from
theirs (:func:`posebridge.geometry.warm.warm_geometry`), a worker pool runs it through
:func:`posebridge.compute.worker_initializer`.
"""

from __future__ import annotations

import numpy as np

from posebridge.kinematics.fk import PARALLEL_THRESHOLD, fk_frames, fk_tool
from posebridge.kinematics.ik import ik_solver
from posebridge.kinematics.jacobian import jacobian_base
from posebridge.robot.library import load_robot
from posebridge.robot.model import Robot

__all__ = ["WARM_ROBOT", "warm_kinematics"]

WARM_ROBOT = "pb-arm6"
"""The bundled robot warmed when none is given (six axes, closed-form IK)."""


def warm_kinematics(robot: Robot | None = None) -> None:
    """Load the kinematics kernels of ``robot`` from numba's cache.

    Runs FK (tool and frames), the Jacobian and the IK of ``robot`` once on one configuration and
    once on :data:`~posebridge.kinematics.fk.PARALLEL_THRESHOLD` configurations, so the serial and
    the parallel drivers are loaded.

    ``robot`` defaults to the bundled :data:`WARM_ROBOT`; IK kernels are per arm
    family, so pass the robot that will be used when it is known.
    """
    arm = load_robot(WARM_ROBOT) if robot is None else robot
    solver = ik_solver(arm)
    for count in (1, PARALLEL_THRESHOLD):
        q = np.tile(arm.home_configuration(), (count, 1))
        fk_frames(arm, q)
        jacobian_base(arm, q)
        solver.solve(fk_tool(arm, q))

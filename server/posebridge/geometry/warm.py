"""Loading the clearance kernels before the first real call (numba cache, both drivers).

:func:`warm_geometry` is this layer's one warm-up: the kinematics warm-up
(:func:`posebridge.kinematics.warm.warm_kinematics`), then the fused FK + collision and
FK + clearance kernels. Worker pools of placement, reach and joint-map sweeps run it
through :func:`posebridge.compute.worker_initializer`; the server runs it at start.
"""

from __future__ import annotations

import numpy as np

from posebridge.geometry.clearance import ClearanceScene, clearance_batch, collision_batch
from posebridge.geometry.self_pairs import non_adjacent_pairs
from posebridge.geometry.shapes import ArmCapsules, Floor, ObstacleSet
from posebridge.kinematics.fk import PARALLEL_THRESHOLD
from posebridge.kinematics.warm import WARM_ROBOT, warm_kinematics
from posebridge.robot.library import load_robot
from posebridge.robot.model import Robot

__all__ = ["warm_geometry"]


def warm_geometry(robot: Robot | None = None) -> None:
    """Load the geometry kernels of ``robot`` from numba's cache.

    :func:`~posebridge.kinematics.warm.warm_kinematics`, then collision and clearance of ``robot``'s
    capsules against a floor (and themselves) on one configuration and on
    :data:`~posebridge.kinematics.fk.PARALLEL_THRESHOLD` configurations.

    ``robot`` defaults to the bundled :data:`~posebridge.kinematics.warm.WARM_ROBOT`.
    """
    arm_robot = load_robot(WARM_ROBOT) if robot is None else robot
    warm_kinematics(arm_robot)
    arm = ArmCapsules.from_robot(arm_robot)
    obstacles = ObstacleSet.from_shapes([Floor(-1.0)])
    scene = ClearanceScene.build(arm, obstacles, np.eye(4), self_pairs=non_adjacent_pairs(arm))
    for count in (1, PARALLEL_THRESHOLD):
        q = np.tile(arm_robot.home_configuration(), (count, 1))
        collision_batch(scene, q)
        clearance_batch(scene, q)

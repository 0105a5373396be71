"""Fixtures of the kinematics tests: modern_robotics reference inputs built from a robot's joints."""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
import pytest

from posebridge.robot.model import Robot


def _space_screws_at_zero(robot: Robot) -> tuple[np.ndarray, np.ndarray]:
    """Home pose M of the tool and space screw axes (6, n) from the joint origins at q = 0.

    Revolute: S = (w, -w x p); prismatic: S = (0, v) (Lynch & Park, Modern Robotics,
    sec. 4.1.1), with w (or v) the axis and p the joint frame origin in the base frame.
    """
    T = np.eye(4)
    screws = []
    for joint in robot.joints:
        T = T @ joint.origin
        direction = T[:3, :3] @ joint.axis
        if joint.kind == "prismatic":
            screws.append(np.concatenate([np.zeros(3), direction]))
        else:
            screws.append(np.concatenate([direction, -np.cross(direction, T[:3, 3])]))
    return T @ robot.T_link_flange @ robot.T_flange_tool, np.array(screws).T


@pytest.fixture(scope="session")
def space_screws_at_zero() -> Callable[[Robot], tuple[np.ndarray, np.ndarray]]:
    """``space_screws_at_zero(robot)``: the tool's home pose M and the space screw axes (6, n)."""
    return _space_screws_at_zero

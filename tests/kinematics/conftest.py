"""Fixtures of the kinematics tests: modern_robotics reference inputs built from a robot's
joints, and invented offset-wrist arms generated as URDF text."""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
import pytest
from scipy.spatial.transform import Rotation

from posebridge.robot.model import Robot
from posebridge.robot.urdf_import import parse_robot_urdf


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


# ------------------------------------------------------------ invented offset-wrist arms


def _direction(angle: float) -> np.ndarray:
    """Unit vector at ``angle`` from z toward x in the x-z plane."""
    return np.array([np.sin(angle), 0.0, np.cos(angle)])


def _origin_element(T: np.ndarray) -> str:
    # URDF rpy: R = Rz(yaw) Ry(pitch) Rx(roll), scipy's extrinsic "xyz" (URDF specification)
    rpy = Rotation.from_matrix(T[:3, :3]).as_euler("xyz")
    xyz = " ".join(repr(float(v)) for v in T[:3, 3])
    return f'<origin xyz="{xyz}" rpy="{" ".join(repr(float(v)) for v in rpy)}"/>'


@dataclass(frozen=True, eq=False)
class OffsetWristArm:
    """An invented six-axis arm with joints 2, 3, 4 parallel and an offset wrist, as URDF.

    Geometry at zero in the arm's own frame (``mount`` places it in the URDF base
    link): axis 1 along z through the origin; axes 2, 3 and 4 along y, through the
    points (a1, shoulder_height), that plus l2 dir(angle2), that plus l3 dir(angle3)
    of the x-z plane; axis 5 along dir(phi), ``e`` beside axis 4 and ``d5`` from it
    to the wrist point, whose y coordinate is ``b``; axis 6 through the wrist point,
    perpendicular to axis 5; the flange ``d6`` along axis 6. Joint frames are turned
    and slid along their axes at random and axes flipped (``axis_signs``), as a
    description file may do.
    """

    urdf: str
    robot: Robot
    a1: float
    b: float
    l2: float
    l3: float
    e: float
    d5: float
    d6: float
    shoulder_height: float
    angle2: float
    angle3: float
    axis_signs: np.ndarray
    mount: np.ndarray
    axis6_in_flange: np.ndarray

    def flange_pose(self, wrist_point: np.ndarray, R_flange: np.ndarray) -> np.ndarray:
        """Flange pose in the base link frame, shape (4, 4), for a wrist point and flange
        rotation given in the arm's own frame (the flange lies ``d6`` along axis 6)."""
        T = np.eye(4)
        T[:3, :3] = R_flange
        T[:3, 3] = np.asarray(wrist_point) + self.d6 * R_flange @ self.axis6_in_flange
        return self.mount @ T


def _offset_wrist_arm(
    rng: np.random.Generator,
    *,
    a1: float | None = None,
    b: float | None = None,
    l2: float | None = None,
    l3: float | None = None,
    e: float = 0.0,
    d5: float | None = None,
    lateral: bool = True,
    mounted: bool = False,
    random_frames: bool = True,
    limit: float = 2.0 * np.pi,
) -> OffsetWristArm:
    """Random link lengths and offsets (keywords fix them); URDF text and its Robot."""
    height = rng.uniform(0.1, 0.3)
    shoulder = height + rng.uniform(0.05, 0.2)
    a1 = rng.uniform(-0.1, 0.15) if a1 is None else a1
    l2 = rng.uniform(0.2, 0.6) if l2 is None else l2
    l3 = rng.uniform(0.2, 0.6) if l3 is None else l3
    d5 = rng.uniform(0.05, 0.15) * rng.choice([-1.0, 1.0]) if d5 is None else d5
    d6 = rng.uniform(0.03, 0.12)
    angle2, angle3, phi, bend = rng.uniform(-np.pi, np.pi, 4)
    lateral_y = rng.uniform(-0.2, 0.2, 4) if lateral else np.zeros(4)
    if b is not None:
        lateral_y[3] = b
    y = np.array([0.0, 1.0, 0.0])
    S = np.array([a1, lateral_y[0], shoulder])
    E = S + l2 * _direction(angle2)
    E[1] = lateral_y[1]
    W = E + l3 * _direction(angle3)
    W[1] = lateral_y[2]
    X4 = np.array([np.cos(phi), 0.0, -np.sin(phi)])
    P = W + e * X4 + d5 * _direction(phi)
    P[1] = lateral_y[3]
    a6 = -np.sin(bend) * X4 + np.cos(bend) * y
    lines = [
        (np.array([0.0, 0.0, height]), np.array([0.0, 0.0, 1.0])),
        (S, y),
        (E, y),
        (W, y),
        (P, _direction(phi)),
        (P, a6),
    ]
    mount = np.eye(4)
    if mounted:
        mount[:3, :3] = Rotation.random(random_state=rng).as_matrix()
        mount[:3, 3] = rng.uniform(-0.3, 0.3, 3)
    flange = np.eye(4)
    flange[:3, :3] = Rotation.random(random_state=rng).as_matrix()
    flange[:3, 3] = P + d6 * a6
    signs = rng.choice([-1.0, 1.0], size=6) if random_frames else np.ones(6)
    parts = ['<?xml version="1.0"?>\n<robot name="test-offset-wrist">\n<link name="base"/>\n']
    parent, previous = "base", np.eye(4)
    for index, (point, axis) in enumerate(lines, start=1):
        F = np.eye(4)
        if random_frames:
            F[:3, :3] = Rotation.random(random_state=rng).as_matrix()
        F[:3, 3] = point + (rng.uniform(-0.1, 0.1) if random_frames else 0.0) * axis
        F = mount @ F
        local_axis = signs[index - 1] * F[:3, :3].T @ mount[:3, :3] @ axis
        parts.append(
            f'<link name="link{index}"/>\n<joint name="j{index}" type="revolute">'
            f'<parent link="{parent}"/><child link="link{index}"/>'
            f"{_origin_element(np.linalg.inv(previous) @ F)}"
            f'<axis xyz="{" ".join(repr(float(v)) for v in local_axis)}"/>'
            f'<limit lower="{-limit!r}" upper="{limit!r}" effort="0" velocity="3"/></joint>\n'
        )
        parent, previous = f"link{index}", F
    parts.append(
        '<link name="flange"/>\n<joint name="flange_mount" type="fixed">'
        f'<parent link="link6"/><child link="flange"/>'
        f"{_origin_element(np.linalg.inv(previous) @ mount @ flange)}</joint>\n</robot>\n"
    )
    urdf = "".join(parts)
    return OffsetWristArm(
        urdf=urdf,
        robot=parse_robot_urdf(urdf, "test-offset-wrist.urdf"),
        a1=float(a1),
        b=float(lateral_y[3]),
        l2=float(l2),
        l3=float(l3),
        e=float(e),
        d5=float(d5),
        d6=float(d6),
        shoulder_height=float(shoulder),
        angle2=float(angle2),
        angle3=float(angle3),
        axis_signs=signs,
        mount=mount,
        axis6_in_flange=flange[:3, :3].T @ a6,
    )


@pytest.fixture(scope="session")
def offset_wrist_arm() -> Callable[..., OffsetWristArm]:
    """``offset_wrist_arm(rng, **fixed)``: an invented offset-wrist arm (see OffsetWristArm)."""
    return _offset_wrist_arm

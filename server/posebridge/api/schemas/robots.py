"""Robot library listing and robot model description for the page and the command line."""

from __future__ import annotations

from typing import Literal

import numpy as np
from pydantic import BaseModel, ConfigDict, Field

from posebridge.kinematics.fk import fk_frames
from posebridge.robot.library import BundledRobot
from posebridge.robot.model import Robot
from posebridge.transforms import rpy_from_rotation_matrix
from posebridge.units import joint_unit_labels, joints_user_from_si, mm_from_m

__all__ = [
    "JointDescription",
    "RobotDescriptionResult",
    "RobotList",
    "RobotSummary",
    "ToolDescription",
    "robot_description_result",
    "robot_summary_from_bundled",
]

_BOUNDS_SAMPLES = 2048
_BOUNDS_SEED = 0


# One entry of the bundled robot library.
class RobotSummary(BaseModel):
    model_config = ConfigDict(extra="forbid")

    name: str
    kind: str
    description: str


# The bundled robot library and the robot the server opens with.
class RobotList(BaseModel):
    model_config = ConfigDict(extra="forbid")

    robots: list[RobotSummary]
    default_robot: str = Field(description="Bundled name or file path the page opens with.")


# One joint: type, limits and the unit of its values (deg for revolute, mm for prismatic).
class JointDescription(BaseModel):
    model_config = ConfigDict(extra="forbid")

    name: str
    type: Literal["revolute", "prismatic"]
    unit: Literal["deg", "mm"]
    lower: float = Field(description="Lower position limit, in `unit`.")
    upper: float = Field(description="Upper position limit, in `unit`.")
    continuous: bool = Field(
        description="Revolute joint without limits; lower/upper span one revolution."
    )
    velocity_max: float = Field(description="Velocity limit, in `unit` per second.")


# A tool (TCP) pose in the flange frame.
class ToolDescription(BaseModel):
    model_config = ConfigDict(extra="forbid")

    position_mm: list[float] = Field(min_length=3, max_length=3)
    rpy_deg: list[float] = Field(
        min_length=3,
        max_length=3,
        description="Roll, pitch, yaw about fixed X, Y, Z: R = Rz(yaw) Ry(pitch) Rx(roll).",
    )


# Everything the page needs to draw a robot and edit its joints.
class RobotDescriptionResult(BaseModel):
    model_config = ConfigDict(extra="forbid")

    robot: str = Field(description="The robot as requested: bundled name or file path.")
    name: str
    kind: str
    description: str
    dof: int
    joints: list[JointDescription]
    tool: ToolDescription = Field(description="Default tool in the flange frame.")
    home_joints: list[float] = Field(
        description="The description's home configuration, else the centre of the joint "
        "ranges, per joint in its `unit`."
    )
    bounds_mm: list[list[float]] = Field(
        description="Axis-aligned box [[x, y, z] min, [x, y, z] max] in the base frame, mm, "
        "holding every link frame and the tool over a seeded sample of the joint ranges."
    )
    notes: list[str] = Field(description="Non-fatal remarks from loading the description.")
    robot_geometry_missing: str | None = Field(
        default=None,
        description="Set (a warning text) when the robot has no collision geometry: every "
        "clearance computed for it is then meaningless.",
    )


def robot_summary_from_bundled(bundled: BundledRobot) -> RobotSummary:
    """Library entry of a bundled robot."""
    return RobotSummary(name=bundled.name, kind=bundled.kind, description=bundled.description)


def _bounds_m(robot: Robot) -> np.ndarray:
    """Box of the link frames and the tool over a seeded uniform sample of the joint box, shape (2, 3)."""
    rng = np.random.default_rng(_BOUNDS_SEED)
    q = rng.uniform(robot.lower, robot.upper, size=(_BOUNDS_SAMPLES, robot.dof))
    points = fk_frames(robot, q)[:, :, :3, 3].reshape(-1, 3)
    return np.stack([points.min(axis=0), points.max(axis=0)])


def robot_description_result(robot: Robot, spec: str) -> RobotDescriptionResult:
    """Description of ``robot`` (loaded from ``spec``) in boundary units (mm, deg)."""
    units = joint_unit_labels(robot.prismatic)
    lower = joints_user_from_si(robot.lower, robot.prismatic)
    upper = joints_user_from_si(robot.upper, robot.prismatic)
    velocity = joints_user_from_si(robot.velocity_max, robot.prismatic)
    joints = [
        JointDescription(
            name=joint.name,
            type=joint.kind,
            unit="mm" if unit == "mm" else "deg",
            lower=float(lower[i]),
            upper=float(upper[i]),
            continuous=joint.continuous,
            velocity_max=float(velocity[i]),
        )
        for i, (joint, unit) in enumerate(zip(robot.joints, units, strict=True))
    ]
    tool = ToolDescription(
        position_mm=mm_from_m(robot.T_flange_tool[:3, 3]).tolist(),
        rpy_deg=rpy_from_rotation_matrix(robot.T_flange_tool[:3, :3], degrees=True).tolist(),
    )
    return RobotDescriptionResult(
        robot=spec,
        name=robot.name,
        kind=robot.kind,
        description=robot.description,
        dof=robot.dof,
        joints=joints,
        tool=tool,
        home_joints=joints_user_from_si(robot.home_configuration(), robot.prismatic).tolist(),
        bounds_mm=mm_from_m(_bounds_m(robot)).tolist(),
        notes=list(robot.notes),
        robot_geometry_missing=robot.geometry_missing,
    )

"""Forward and inverse kinematics requests and results, in boundary units (mm, deg).

The ``*_result`` functions turn kinematics results into these models; the
HTTP routes and the command line's ``--json`` output both use them, so the
two print the same fields. Dump with ``model_dump(mode="json")``.
"""

from __future__ import annotations

from typing import Annotated

import numpy as np
from pydantic import BaseModel, BeforeValidator, ConfigDict, Field, model_validator
from pydantic_core import PydanticCustomError

from posebridge.kinematics.fk import KinematicsInputError
from posebridge.robot.model import Robot
from posebridge.transforms import (
    invert_transform,
    transform_from_position_rpy,
)
from posebridge.units import (
    FloatArray,
    joints_si_from_user,
    m_from_mm,
)

__all__ = [
    "MAX_CONFIGURATIONS",
    "FkRequest",
    "IkRequest",
    "Pose",
    "ToolOffset",
    "WholeNumber",
    "base_transform",
    "joints_si_from_request",
    "pose_transform",
    "tool_transform",
]

MAX_CONFIGURATIONS = 10_000
"""Most joint configurations or poses in one request."""

MAX_JOINTS = 64
"""Most joints per configuration accepted before the robot is known."""

_RPY_DESCRIPTION = (
    "Roll, pitch, yaw in degrees about fixed X, Y, Z: R = Rz(yaw) Ry(pitch) Rx(roll)."
)
_JOINTS_DESCRIPTION = (
    "Joint values, revolute joints in degrees and prismatic joints in millimetres, "
    "in the robot's joint order."
)
_BASE_DESCRIPTION = (
    "Robot base frame in the world (a placed robot in a cell). Given, every pose and drawing "
    "position in the request and the answer is in the world frame; omitted, in the robot base "
    "frame."
)


def _whole_float_as_int(value: object) -> object:
    """Read numbers with a zero fractional part (``65.0``) as ints.

    JSON Schema's ``integer`` includes them; everything else is left to the strict int check.
    """
    if isinstance(value, float) and value.is_integer():
        return int(value)
    return value


WholeNumber = Annotated[int, BeforeValidator(_whole_float_as_int)]
"""An integer field of a request: ``65`` and ``65.0`` are accepted, ``"65"``, ``65.5`` and
``true`` are refused (JSON Schema 2020-12 validation, sec. 6.1.1 ``integer``)."""

# A finite number within +-1e6 (mm or deg).
Finite = Annotated[float, Field(allow_inf_nan=False, ge=-1e6, le=1e6)]
Vector3 = Annotated[list[Finite], Field(min_length=3, max_length=3)]
JointVector = Annotated[list[Finite], Field(min_length=1, max_length=MAX_JOINTS)]
RobotSpec = Annotated[
    str,
    Field(
        min_length=1,
        max_length=1000,
        description="A robot the server serves: a bundled name, the cell's robot (the robot "
        "field of GET /api/cell) or, for the owner of a server that is not shared, a "
        ".toml/.urdf path.",
    ),
]


def _batch_from_single(value: object) -> object:
    """Wrap a flat list of numbers (one configuration) into a batch of one."""
    if isinstance(value, list) and value and not any(isinstance(v, list) for v in value):
        return [value]
    return value


class ToolOffset(BaseModel):
    """A tool (TCP) pose in the flange frame; replaces the robot's default tool."""

    model_config = ConfigDict(extra="forbid", strict=True)

    position_mm: Vector3
    rpy_deg: Vector3 = Field(description=_RPY_DESCRIPTION)


class Pose(BaseModel):
    """A pose: a tool pose in the robot base frame, or (as ``base``) the robot base in the world."""

    model_config = ConfigDict(extra="forbid", strict=True)

    position_mm: Vector3
    rpy_deg: Vector3 = Field(description=_RPY_DESCRIPTION)


class FkRequest(BaseModel):
    """Forward kinematics of one or more joint configurations."""

    model_config = ConfigDict(extra="forbid", strict=True)

    robot: RobotSpec
    joints_deg: Annotated[
        list[JointVector],
        BeforeValidator(
            _batch_from_single,
            json_schema_input_type=Annotated[
                list[JointVector], Field(min_length=1, max_length=MAX_CONFIGURATIONS)
            ]
            | JointVector,
        ),
        Field(min_length=1, max_length=MAX_CONFIGURATIONS),
    ] = Field(
        description=_JOINTS_DESCRIPTION
        + " A list of configurations, or one configuration (read as a list of one)."
    )
    tool: ToolOffset | None = Field(default=None, description="Tool in the flange frame.")
    base: Pose | None = Field(default=None, description=_BASE_DESCRIPTION)


class IkRequest(BaseModel):
    """Inverse kinematics of one tool pose: every solution, on every arm branch."""

    model_config = ConfigDict(extra="forbid", strict=True)

    robot: RobotSpec
    pose: Pose = Field(description="Tool (TCP) pose in the robot base frame (world if base).")
    tool: ToolOffset | None = Field(default=None, description="Tool in the flange frame.")
    base: Pose | None = Field(default=None, description=_BASE_DESCRIPTION)
    seed_deg: JointVector | None = Field(
        default=None,
        description="Joint values to sort solutions by nearness (and to pick revolutions); "
        + _JOINTS_DESCRIPTION,
    )
    all_revolutions: bool = Field(
        default=False,
        description="List every whole-revolution variant within limits of joints whose range "
        "exceeds one revolution, not only the nearest.",
    )

    @model_validator(mode="before")
    @classmethod
    def _name_renamed_fields(cls, data: object) -> object:
        """Refuse the 0.1.0 name of all_revolutions with a message naming the new one."""
        if isinstance(data, dict) and "all_turns" in data:
            raise PydanticCustomError(
                "renamed_field", "all_turns was renamed all_revolutions; send all_revolutions"
            )
        return data


def joints_si_from_request(
    robot: Robot, joints_deg: list[list[float]], *, field: str = "joints_deg"
) -> FloatArray:
    """Joint values of a request (deg, mm) as an SI batch, shape (N, n).

    Raises
    ------
    KinematicsInputError
        A configuration does not have one value per joint; the message names
        ``field``.
    """
    for index, row in enumerate(joints_deg):
        if len(row) != robot.dof:
            raise KinematicsInputError(
                f"{field}[{index}]: expected {robot.dof} values for robot {robot.name!r} "
                f"({', '.join(robot.joint_names)}), got {len(row)}"
            )
    return joints_si_from_user(np.asarray(joints_deg, dtype=np.float64), robot.prismatic)


def tool_transform(tool: ToolOffset | None) -> FloatArray | None:
    """``T_flange_tool`` of a requested tool, shape (4, 4), or None for the robot's default."""
    if tool is None:
        return None
    return transform_from_position_rpy(
        m_from_mm(tool.position_mm), np.asarray(tool.rpy_deg), degrees=True
    )


def pose_transform(pose: Pose, base: Pose | None = None) -> FloatArray:
    """``T_base_tool`` of a requested pose, shape (1, 4, 4).

    With ``base`` (the robot base in the world) the pose is a world pose:
    ``T_base_tool = inv(T_world_base) @ T_world_tool``.
    """
    T = transform_from_position_rpy(
        m_from_mm(pose.position_mm), np.asarray(pose.rpy_deg), degrees=True
    )[None]
    T_world_base = base_transform(base)
    if T_world_base is None:
        return T
    return invert_transform(T_world_base) @ T


def base_transform(base: Pose | None) -> FloatArray | None:
    """``T_world_base`` of a requested robot base pose, shape (4, 4), or None (base = world)."""
    if base is None:
        return None
    return transform_from_position_rpy(
        m_from_mm(base.position_mm), np.asarray(base.rpy_deg), degrees=True
    )

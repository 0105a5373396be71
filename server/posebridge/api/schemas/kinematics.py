"""Forward and inverse kinematics requests and results, in boundary units (mm, deg).

The ``*_result`` functions turn kinematics results into these models; the
HTTP routes and the command line's ``--json`` output both use them, so the
two print the same fields. Dump with ``model_dump(mode="json")``.
"""

from __future__ import annotations

from typing import Annotated

import numpy as np
import numpy.typing as npt
from pydantic import BaseModel, BeforeValidator, ConfigDict, Field, model_validator
from pydantic_core import PydanticCustomError

from posebridge.kinematics.branches import branch_part_words
from posebridge.kinematics.fk import KinematicsInputError, check_configurations, fk_frames
from posebridge.kinematics.ik.solutions import IkSolutions
from posebridge.kinematics.metrics import limit_margins, manipulability
from posebridge.robot.model import Robot
from posebridge.transforms import (
    invert_transform,
    quaternion_from_rotation_matrix,
    rpy_from_rotation_matrix,
    transform_from_position_rpy,
    transform_points,
)
from posebridge.units import (
    FloatArray,
    joint_unit_labels,
    joints_si_from_user,
    joints_user_from_si,
    m_from_mm,
    mm_from_m,
)

__all__ = [
    "MAX_CONFIGURATIONS",
    "CapsuleShape",
    "FkConfiguration",
    "FkRequest",
    "FkResult",
    "IkRequest",
    "IkResult",
    "IkSolution",
    "Pose",
    "ToolOffset",
    "WholeNumber",
    "base_transform",
    "fk_result",
    "ik_result",
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
_MANIPULABILITY_DESCRIPTION = (
    "Yoshikawa manipulability sqrt(det(Jv Jv^T)) of the TCP's translational Jacobian in SI "
    "units (m^k per rad^k, k = min(3, joints)); 0 at a singularity."
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


class IkSolution(BaseModel):
    """One inverse kinematics solution with its branch and quality."""

    model_config = ConfigDict(extra="forbid")

    joints_deg: list[float] = Field(description=_JOINTS_DESCRIPTION)
    branch: str = Field(
        description="Arm branch in plain words: shoulder front/back, elbow up/down, "
        "wrist positive/negative (planar arms: left/right), then any extra joint revolutions."
    )
    branch_parts: dict[str, str] = Field(
        description="The branch's word per part the arm has, the fields to read instead of "
        "the `branch` text: shoulder front/back, elbow up/down (planar arms and SCARA: "
        "left/right), wrist positive/negative (a sign 0 reads 'shoulder on axis 1', 'elbow in "
        "line', 'wrist straight'); empty for an arm without branches. Extra revolutions are in "
        "`revolutions`."
    )
    shoulder: int = Field(ge=-1, le=1, description="+1 front, -1 back, 0 undefined or n/a.")
    elbow: int = Field(
        ge=-1, le=1, description="+1 up (left), -1 down (right), 0 undefined or n/a."
    )
    wrist: int = Field(ge=-1, le=1, description="+1 positive, -1 negative, 0 straight or n/a.")
    revolutions: list[int] = Field(description="Whole extra revolutions per joint.")
    within_limits: bool
    min_margin_deg: float | None = Field(
        description="Distance to the nearer limit of the joint closest to a limit (as a "
        "fraction of its range): degrees for a revolute joint, millimetres for a prismatic "
        "joint (the convention of joints_deg; see min_margin_unit); null if every joint is "
        "continuous."
    )
    min_margin_joint: str | None = Field(description="That joint's name.")
    min_margin_unit: str | None = Field(description="That joint's unit, deg or mm.")
    manipulability: float = Field(description=_MANIPULABILITY_DESCRIPTION)


class IkResult(BaseModel):
    """Inverse kinematics answer: the solutions, or why there are none."""

    model_config = ConfigDict(extra="forbid")

    robot: str
    joint_names: list[str]
    joint_units: list[str] = Field(description="Unit of each joint value.")
    solutions: list[IkSolution] = Field(
        description="Solutions reaching the pose, within limits first, then outside limits."
    )
    reason: str = Field(description="Empty if a solution within limits exists, else why not.")
    ignored_components: list[str] = Field(
        description="Pose components the arm cannot control (x, y, z, roll, pitch, yaw)."
    )
    method: str = Field(description="Solver and published method.")


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


class CapsuleShape(BaseModel):
    """A collision capsule of the arm: name, link it rides on and radius."""

    model_config = ConfigDict(extra="forbid")

    name: str
    link: int = Field(description="0 for the base, i for the link moved by joint i.")
    radius_mm: float


class FkConfiguration(BaseModel):
    """Pose, quality and drawing geometry of one joint configuration."""

    model_config = ConfigDict(extra="forbid")

    position_mm: list[float] = Field(
        description="TCP position in the base frame (world frame if the request gave base)."
    )
    quaternion_wxyz: list[float] = Field(description="TCP orientation, [w, x, y, z], w >= 0.")
    rpy_deg: list[float] = Field(description="TCP orientation. " + _RPY_DESCRIPTION)
    manipulability: float = Field(description=_MANIPULABILITY_DESCRIPTION)
    limit_margins_deg: list[float | None] = Field(
        description="Per joint, distance to the nearer position limit: degrees for revolute "
        "joints, millimetres for prismatic joints (the convention of joints_deg; see "
        "joint_units); negative outside the range, null for a continuous joint."
    )
    frames_position_mm: list[list[float]] = Field(
        description="Origins of the frames named in frame_names, base frame."
    )
    frames_rpy_deg: list[list[float]] = Field(
        default_factory=list,
        description="Orientations of the frames named in frame_names (where robot meshes are "
        "drawn). " + _RPY_DESCRIPTION,
    )
    capsule_segments_mm: list[list[list[float]]] = Field(
        description="Per capsule (see capsules), its segment [start, end] in the base frame."
    )


class FkResult(BaseModel):
    """Forward kinematics answer: one entry per requested configuration."""

    model_config = ConfigDict(extra="forbid")

    robot: str
    joint_names: list[str]
    joint_units: list[str] = Field(description="Unit of each joint value and margin.")
    frame_names: list[str]
    capsules: list[CapsuleShape]
    configurations: list[FkConfiguration]


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


def _margins_user(robot: Robot, q: FloatArray) -> list[list[float | None]]:
    """Per-joint limit margins in boundary units, None for continuous joints, shape (N, n)."""
    margin = joints_user_from_si(limit_margins(robot, q).margin, robot.prismatic)
    return [[float(v) if np.isfinite(v) else None for v in row] for row in margin]


def _capsule_segments_mm(robot: Robot, frames: FloatArray) -> FloatArray:
    """Capsule segment end points in the base frame, mm, shape (N, C, 2, 3)."""
    if not robot.capsules:
        return np.zeros((frames.shape[0], 0, 2, 3))
    links = [capsule.link for capsule in robot.capsules]
    ends = np.stack([np.stack([capsule.start, capsule.end]) for capsule in robot.capsules])
    return mm_from_m(transform_points(frames[:, links, None], ends[None]))


def fk_result(
    robot: Robot,
    q: npt.ArrayLike,
    *,
    T_flange_tool: npt.ArrayLike | None = None,
    spec: str = "",
    T_world_base: npt.ArrayLike | None = None,
) -> FkResult:
    """Forward kinematics result of joint configurations, for the API and the command line.

    Parameters
    ----------
    robot : Robot
    q : array-like, shape (N, n)
        Joint values, rad or m.
    T_flange_tool : array-like, shape (4, 4), optional
        Tool in the flange frame; the robot's default tool if omitted.
    spec : str
        How the robot was named (bundled name or path); ``robot.name`` if empty.
    T_world_base : array-like, shape (4, 4), optional
        Robot base in the world; poses and drawing geometry are then world
        values (``T_world_x = T_world_base @ T_base_x``).

    Returns
    -------
    FkResult
        TCP pose (mm, quaternion, rpy deg), manipulability, limit margins,
        frame origins and capsule segments per configuration.
    """
    q_checked = check_configurations(robot, q)
    frames = fk_frames(robot, q_checked, T_flange_tool)
    if T_world_base is not None:
        frames = np.asarray(T_world_base, dtype=np.float64) @ frames
    T_tool = frames[:, -1]
    position_mm = mm_from_m(T_tool[:, :3, 3])
    quaternion = quaternion_from_rotation_matrix(T_tool[:, :3, :3])
    rpy_deg = rpy_from_rotation_matrix(T_tool[:, :3, :3], degrees=True)
    w = manipulability(robot, q_checked, T_flange_tool)
    margins = _margins_user(robot, q_checked)
    frames_mm = mm_from_m(frames[:, :, :3, 3])
    frames_rpy = rpy_from_rotation_matrix(frames[:, :, :3, :3], degrees=True)
    segments_mm = _capsule_segments_mm(robot, frames)
    configurations = [
        FkConfiguration(
            position_mm=position_mm[k].tolist(),
            quaternion_wxyz=quaternion[k].tolist(),
            rpy_deg=rpy_deg[k].tolist(),
            manipulability=float(w[k]),
            limit_margins_deg=margins[k],
            frames_position_mm=frames_mm[k].tolist(),
            frames_rpy_deg=frames_rpy[k].tolist(),
            capsule_segments_mm=segments_mm[k].tolist(),
        )
        for k in range(frames.shape[0])
    ]
    return FkResult(
        robot=spec or robot.name,
        joint_names=list(robot.joint_names),
        joint_units=joint_unit_labels(robot.prismatic),
        frame_names=["base", *robot.joint_names, "flange", "tool"],
        capsules=[
            CapsuleShape(name=c.name, link=c.link, radius_mm=float(mm_from_m(c.radius)))
            for c in robot.capsules
        ],
        configurations=configurations,
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


def ik_result(
    robot: Robot,
    solutions: IkSolutions,
    index: int = 0,
    *,
    T_flange_tool: npt.ArrayLike | None = None,
    spec: str = "",
) -> IkResult:
    """Inverse kinematics result of pose ``index`` of ``solutions``, for the API and the command line.

    Parameters
    ----------
    robot : Robot
    solutions : IkSolutions
        From :func:`posebridge.kinematics.ik.solve_ik_all`.
    index : int
        Which pose of the batch.
    T_flange_tool : array-like, shape (4, 4), optional
        The tool the solutions were computed for; the robot's default if omitted.
    spec : str
        How the robot was named (bundled name or path); ``robot.name`` if empty.

    Returns
    -------
    IkResult
        Valid solutions in the solver's order with branch words, limit
        margins and manipulability.
    """
    slots = solutions.valid_solutions(index)
    q = solutions.q[index, slots]
    entries: list[IkSolution] = []
    if slots:
        margins = limit_margins(robot, q)
        w = manipulability(robot, q, T_flange_tool)
        joints_user = joints_user_from_si(q, robot.prismatic)
        margin_user = joints_user_from_si(margins.margin, robot.prismatic)
        units = joint_unit_labels(robot.prismatic)
        for row, m in enumerate(slots):
            joint = int(margins.min_joint[row])
            has_limits = joint >= 0
            entries.append(
                IkSolution(
                    joints_deg=joints_user[row].tolist(),
                    branch=solutions.branch_label(index, m),
                    branch_parts=branch_part_words(
                        solutions.label_scheme,
                        solutions.shoulder[index, m],
                        solutions.elbow[index, m],
                        solutions.wrist[index, m],
                    ),
                    shoulder=int(solutions.shoulder[index, m]),
                    elbow=int(solutions.elbow[index, m]),
                    wrist=int(solutions.wrist[index, m]),
                    revolutions=[int(t) for t in solutions.revolutions[index, m]],
                    within_limits=bool(solutions.within_limits[index, m]),
                    min_margin_deg=float(margin_user[row, joint]) if has_limits else None,
                    min_margin_joint=robot.joint_names[joint] if has_limits else None,
                    min_margin_unit=units[joint] if has_limits else None,
                    manipulability=float(w[row]),
                )
            )
    return IkResult(
        robot=spec or robot.name,
        joint_names=list(robot.joint_names),
        joint_units=joint_unit_labels(robot.prismatic),
        solutions=entries,
        reason=solutions.reason[index],
        ignored_components=list(solutions.ignored_components),
        method=solutions.method,
    )

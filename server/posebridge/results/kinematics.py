"""Forward and inverse kinematics results, in boundary units (mm, deg), and their builders.

:func:`fk_result` and :func:`ik_result` turn SI kinematics results into these
models; the HTTP routes and the command line's ``--json`` output both use
them, so the two print the same fields. Dump with ``model_dump(mode="json")``.
"""

from __future__ import annotations

import numpy as np
import numpy.typing as npt
from pydantic import BaseModel, ConfigDict, Field

from posebridge.kinematics.branches import branch_part_words
from posebridge.kinematics.fk import check_configurations, fk_frames
from posebridge.kinematics.ik.solutions import IkSolutions
from posebridge.kinematics.metrics import limit_margins, manipulability
from posebridge.robot.model import Robot
from posebridge.transforms import (
    quaternion_from_rotation_matrix,
    rpy_from_rotation_matrix,
    transform_points,
)
from posebridge.units import (
    FloatArray,
    joint_unit_labels,
    joints_user_from_si,
    mm_from_m,
)

__all__ = [
    "CapsuleShape",
    "FkConfiguration",
    "FkResult",
    "IkResult",
    "IkSolution",
    "fk_result",
    "ik_result",
]

_RPY_DESCRIPTION = (
    "Roll, pitch, yaw in degrees about fixed X, Y, Z: R = Rz(yaw) Ry(pitch) Rx(roll)."
)
_JOINTS_DESCRIPTION = (
    "Joint values, revolute joints in degrees and prismatic joints in millimetres, "
    "in the robot's joint order."
)
_MANIPULABILITY_DESCRIPTION = (
    "Yoshikawa manipulability sqrt(det(Jv Jv^T)) of the TCP's translational Jacobian in SI "
    "units (m^k per rad^k, k = min(3, joints)); 0 at a singularity."
)


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

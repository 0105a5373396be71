"""Joint-map and reach-section results, in boundary units (mm, deg), and their builders.

The builders turn the SI results of :mod:`posebridge.spaces` into the answers the
HTTP API and the command line's ``--json`` output print.
"""

from __future__ import annotations

from typing import Literal

import numpy as np
from pydantic import BaseModel, ConfigDict, Field

from posebridge.cell.external_axes import NO_EXTERNAL_AXES, ExternalAxes
from posebridge.kinematics.branches import branch_geometry, branch_words
from posebridge.results.external_axes import external_user_from_si
from posebridge.robot.model import Robot
from posebridge.spaces.joint_map import JointMap
from posebridge.spaces.workspace import ReachSection
from posebridge.units import FloatArray, joint_unit_labels, joints_user_from_si, mm_from_m

__all__ = [
    "AxisSolutionCurve",
    "JointMapResult",
    "ReachSectionResult",
    "joint_map_axes_user",
    "joint_map_limits_user",
    "joint_map_result",
    "reach_section_result",
]

_JOINTS = "Revolute joints in degrees, prismatic joints in millimetres, in the robot's joint order."


class AxisSolutionCurve(BaseModel):
    """One cell target's inverse kinematics solutions along the external axis of a joint map."""

    model_config = ConfigDict(extra="forbid")

    target: str
    branches: list[str] = Field(description="Shoulder/elbow/wrist words of each branch.")
    joints_deg: list[list[list[float] | None]] = Field(
        description="Per branch, per cell-centre value of the external map axis (its axes_deg), "
        "the branch's values of the map's robot joints in map order; null where the branch does "
        "not reach the target within the joint limits there. " + _JOINTS
    )


class JointMapResult(BaseModel):
    """A joint-space obstacle map.

    Per cell: the nearest colliding obstacle, self collision and clearance.
    """

    model_config = ConfigDict(extra="forbid")

    cell_etag: str = Field(description="Content version of the cell the map was computed for.")
    joints: list[int] = Field(
        description="Chosen joint indices into the cell's joint vector: the robot's joints, "
        "then its external axes (track, turntables)."
    )
    joint_names: list[str]
    joint_units: list[str]
    shape: list[int] = Field(description="Cells along each chosen joint.")
    axes_deg: list[list[float]] = Field(description="Cell-centre values per chosen joint.")
    lower_deg: list[float] = Field(description="Limit box lower corner of the chosen joints.")
    upper_deg: list[float] = Field(description="Limit box upper corner of the chosen joints.")
    hold_deg: list[float] = Field(
        description="The configuration the map slices through. " + _JOINTS
    )
    external_hold_deg: list[float] = Field(
        default_factory=list,
        description="The external axes' values the map slices through (track in mm, "
        "turntables in deg), in the order of the cell's external axes; a mapped axis is swept.",
    )
    threshold_mm: float
    obstacle_names: list[str] = Field(
        description="Obstacles of the cell; obstacle values index this."
    )
    obstacle: list[int] = Field(
        description="Per cell (flat, C order): the colliding obstacle nearest the arm, -1 if none."
    )
    self_collision: list[bool] = Field(description="Per cell: the arm touches itself.")
    clearance_mm: list[float] | None = Field(
        description="Per cell: the smallest clearance to any obstacle or to the arm itself, mm "
        "(negative: penetration; capped at 1e6); two-joint maps only, null for three."
    )
    colliding_obstacles: list[str] = Field(
        description="Obstacles in collision somewhere on the map."
    )
    robot_geometry_missing: str | None = Field(
        default=None,
        description="Set (a warning text) when the robot has no collision geometry: every "
        "clearance in this result is then meaningless.",
    )
    ik_along_axis: list[AxisSolutionCurve] = Field(
        default_factory=list,
        description="With an external axis on the map: every cell target's solutions along it "
        "(the map's IK markers), the other external axes at external_hold_deg; empty otherwise.",
    )


def _solution_curves(joint_map: JointMap, robot: Robot) -> list[AxisSolutionCurve]:
    """Return the map's IK markers along its external axis in boundary units (none without one)."""
    along = joint_map.along
    if along is None:
        return []
    scheme = branch_geometry(robot).scheme
    columns = [j for j in joint_map.joints if j < robot.dof]
    q = joints_user_from_si(along.q[..., columns], robot.prismatic[columns])  # (K, R, B, c)
    reached = ~np.any(np.isnan(q), axis=-1)
    return [
        AxisSolutionCurve(
            target=name,
            branches=[branch_words(scheme, *triple) for triple in along.branches],
            joints_deg=[
                [
                    np.round(q[k, r, b], 6).tolist() if reached[k, r, b] else None
                    for r in range(q.shape[1])
                ]
                for b in range(q.shape[2])
            ],
        )
        for k, name in enumerate(along.targets)
    ]


def joint_map_axes_user(joint_map: JointMap) -> tuple[FloatArray, ...]:
    """Cell-centre values of each map axis in boundary units: deg (revolute) or mm (prismatic)."""
    return tuple(
        joints_user_from_si(axis, np.array([p]))
        for axis, p in zip(joint_map.axes, joint_map.prismatic, strict=True)
    )


def joint_map_limits_user(joint_map: JointMap) -> tuple[FloatArray, FloatArray]:
    """Limit box of the map axes (lower, upper corner) in deg or mm, shapes (d,)."""
    return (
        joints_user_from_si(joint_map.lower, joint_map.prismatic),
        joints_user_from_si(joint_map.upper, joint_map.prismatic),
    )


def joint_map_result(
    joint_map: JointMap,
    robot: Robot,
    cell_etag: str,
    external: ExternalAxes = NO_EXTERNAL_AXES,
) -> JointMapResult:
    """Return the answer for a computed :class:`~posebridge.spaces.joint_map.JointMap`.

    ``external``: the cell's external axes (their units), when the map holds or sweeps them.
    """
    prismatic = joint_map.prismatic
    lower, upper = joint_map_limits_user(joint_map)
    clearance = None
    if len(joint_map.joints) == 2:
        values = np.round(mm_from_m(np.minimum(joint_map.clearance, 1e3)), 1)
        clearance = values.ravel().tolist()
    return JointMapResult(
        cell_etag=cell_etag,
        joints=list(joint_map.joints),
        joint_names=list(joint_map.joint_names),
        joint_units=joint_unit_labels(prismatic),
        shape=list(joint_map.shape),
        axes_deg=[axis.tolist() for axis in joint_map_axes_user(joint_map)],
        lower_deg=lower.tolist(),
        upper_deg=upper.tolist(),
        hold_deg=joints_user_from_si(joint_map.q_hold, robot.prismatic).tolist(),
        external_hold_deg=external_user_from_si(external, joint_map.external_hold).tolist()
        if joint_map.external_hold.size
        else [],
        threshold_mm=float(mm_from_m(joint_map.threshold_m)),
        obstacle_names=list(joint_map.obstacle_names),
        obstacle=joint_map.obstacle.ravel().astype(int).tolist(),
        self_collision=joint_map.self_collision.ravel().tolist(),
        clearance_mm=clearance,
        colliding_obstacles=[joint_map.obstacle_names[k] for k in joint_map.colliding_obstacles],
        robot_geometry_missing=robot.geometry_missing,
        ik_along_axis=_solution_curves(joint_map, robot),
    )


class ReachSectionResult(BaseModel):
    """How many tool directions reach each cell of a slice through the cell, world frame."""

    model_config = ConfigDict(extra="forbid")

    cell_etag: str
    axis: Literal["z", "y"]
    value_mm: float = Field(description="World coordinate of the slice (a voxel-centre layer).")
    u_axis: str = Field(description="World axis along the columns.")
    v_axis: str = Field(description="World axis along the rows.")
    u_mm: list[float]
    v_mm: list[float]
    directions: int = Field(description="Tool directions tried per cell.")
    count: list[list[int]] = Field(description="Reached directions per cell, rows v, columns u.")


def reach_section_result(
    section: ReachSection, directions: int, cell_etag: str
) -> ReachSectionResult:
    """Return the answer for a computed :class:`~posebridge.spaces.workspace.ReachSection`."""
    return ReachSectionResult(
        cell_etag=cell_etag,
        axis="z" if section.axis == "z" else "y",
        value_mm=float(mm_from_m(section.value_m)),
        u_axis=section.u_axis,
        v_axis=section.v_axis,
        u_mm=mm_from_m(section.u_m).tolist(),
        v_mm=mm_from_m(section.v_m).tolist(),
        directions=directions,
        count=section.count.astype(int).tolist(),
    )

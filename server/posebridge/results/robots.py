"""Robot library listing and robot model description for the page and the command line."""

from __future__ import annotations

from typing import Literal

import numpy as np
from pydantic import BaseModel, ConfigDict, Field

from posebridge.geometry.robot_meshes import LinkDisplayMesh
from posebridge.kinematics.fk import fk_frames
from posebridge.robot.library import BundledRobot
from posebridge.robot.model import Robot
from posebridge.transforms import rpy_from_rotation_matrix
from posebridge.units import joint_unit_labels, joints_user_from_si, mm_from_m

__all__ = [
    "JointDescription",
    "RobotDescriptionResult",
    "RobotImportReport",
    "RobotList",
    "RobotMeshesResult",
    "RobotSummary",
    "ToolDescription",
    "render_robot_import",
    "robot_description_result",
    "robot_import_report",
    "robot_meshes_result",
    "robot_summary_from_bundled",
]

_BOUNDS_SAMPLES = 2048
_BOUNDS_SEED = 0


class RobotSummary(BaseModel):
    """One entry of the bundled robot library."""

    model_config = ConfigDict(extra="forbid")

    name: str
    kind: str
    description: str


class RobotList(BaseModel):
    """The bundled robot library and the robot the server opens with."""

    model_config = ConfigDict(extra="forbid")

    robots: list[RobotSummary]
    default_robot: str = Field(description="Bundled name or file path the page opens with.")


class JointDescription(BaseModel):
    """One joint: type, limits and the unit of its values (deg for revolute, mm for prismatic)."""

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


class ToolDescription(BaseModel):
    """A tool (TCP) pose in the flange frame."""

    model_config = ConfigDict(extra="forbid")

    position_mm: list[float] = Field(min_length=3, max_length=3)
    rpy_deg: list[float] = Field(
        min_length=3,
        max_length=3,
        description="Roll, pitch, yaw about fixed X, Y, Z: R = Rz(yaw) Ry(pitch) Rx(roll).",
    )


class RobotDescriptionResult(BaseModel):
    """Everything the page needs to draw a robot and edit its joints."""

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
    from_link: str | None = Field(default=None, description="URDF: the chain's first link.")
    to_link: str | None = Field(default=None, description="URDF: the chain's last link.")
    chain_ends: list[str] = Field(
        default_factory=list,
        description="URDF: to_link choices (the leaf links below from_link, and the current "
        "to_link).",
    )
    chain_starts: list[str] = Field(
        default_factory=list,
        description="URDF: from_link choices (the links above to_link, from the root down).",
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
    """Return the description of ``robot`` (loaded from ``spec``) in boundary units (mm, deg)."""
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
        from_link=robot.from_link or None,
        to_link=robot.to_link or None,
        chain_ends=sorted({*robot.leaf_links, robot.to_link}) if robot.to_link else [],
        chain_starts=list(robot.chain_starts),
    )


# One mesh reference of a description and whether its file was found.
class MeshReport(BaseModel):
    model_config = ConfigDict(extra="forbid")

    link: str = Field(description="The description's link.")
    role: Literal["visual", "collision"]
    filename: str = Field(description="As written in the description.")
    found: bool
    path: str | None = Field(description="The file it resolved to.")


# One collision capsule of the robot.
class CapsuleReport(BaseModel):
    model_config = ConfigDict(extra="forbid")

    name: str
    link: str = Field(description="The description's link, else the joint moving it (or base).")
    radius_mm: float
    length_mm: float = Field(description="Length of the segment (0 for a sphere).")


# Capsules fitted to one link's meshes.
class LinkFitReport(BaseModel):
    model_config = ConfigDict(extra="forbid")

    link: str
    role: Literal["visual", "collision"] = Field(description="Which meshes were fitted.")
    meshes: list[str]
    capsules: list[str]
    capsule_volume_mm3: float
    hull_volume_mm3: float
    excess: float | None = Field(
        description="Capsule volume over the meshes' convex-hull volume (null for a flat link)."
    )


class RobotImportReport(BaseModel):
    """What an import made of a robot file: chain, joints, assumed values, meshes, capsules, notes."""

    model_config = ConfigDict(extra="forbid")

    robot: str = Field(description="The robot as requested: bundled name or file path.")
    name: str
    kind: str
    description: str
    source: str = Field(description="The file it was loaded from.")
    from_link: str | None = Field(description="Chain start (URDF), the robot base frame.")
    to_link: str | None = Field(description="Chain end (URDF), the flange.")
    joints: list[JointDescription]
    acceleration_max: list[float] = Field(description="Per joint, in `unit` per second squared.")
    jerk_max: list[float | None] = Field(description="Per joint where given, `unit` per s^3.")
    held_joints: list[str] = Field(description="Joints off the chain (or mimic) held at zero.")
    tool: ToolDescription
    meshes: list[MeshReport]
    capsules: list[CapsuleReport]
    link_fits: list[LinkFitReport]
    robot_geometry_missing: str | None
    notes: list[str]


def robot_import_report(robot: Robot, spec: str) -> RobotImportReport:
    """Return the describe answer for ``robot`` (loaded from ``spec``), mm and deg."""
    description = robot_description_result(robot, spec)
    prismatic = robot.prismatic
    jerk = np.array([np.nan if j.jerk_max is None else j.jerk_max for j in robot.joints])
    jerk_user = joints_user_from_si(jerk, prismatic)
    link_names = ["base", *robot.joint_names]
    mm3 = 1e9
    return RobotImportReport(
        robot=spec,
        name=robot.name,
        kind=robot.kind,
        description=robot.description,
        source=robot.source,
        from_link=robot.from_link or None,
        to_link=robot.to_link or None,
        joints=description.joints,
        acceleration_max=joints_user_from_si(robot.acceleration_max, prismatic).tolist(),
        jerk_max=[None if np.isnan(v) else float(v) for v in jerk_user],
        held_joints=list(robot.held_joints),
        tool=description.tool,
        meshes=[
            MeshReport(
                link=m.source_link,
                role=m.role,
                filename=m.filename,
                found=m.path is not None,
                path=None if m.path is None else str(m.path),
            )
            for m in robot.meshes
        ],
        capsules=[
            CapsuleReport(
                name=c.name,
                link=c.source_link or link_names[c.link],
                radius_mm=float(mm_from_m(c.radius)),
                length_mm=float(mm_from_m(np.linalg.norm(c.end - c.start))),
            )
            for c in robot.capsules
        ],
        link_fits=[
            LinkFitReport(
                link=f.source_link,
                role=f.role,
                meshes=list(f.meshes),
                capsules=list(f.capsule_names),
                capsule_volume_mm3=f.capsule_volume_m3 * mm3,
                hull_volume_mm3=f.hull_volume_m3 * mm3,
                excess=f.excess,
            )
            for f in robot.link_fits
        ],
        robot_geometry_missing=robot.geometry_missing,
        notes=list(robot.notes),
    )


def render_robot_import(report: RobotImportReport) -> str:
    """Plain text of :class:`RobotImportReport` (``posebridge describe``)."""
    lines = [f"{report.name} ({report.kind}): {report.description}", f"source: {report.source}"]
    if report.robot_geometry_missing:
        lines.insert(0, f"WARNING: {report.robot_geometry_missing}")
    if report.from_link:
        lines.append(f"chain: {report.from_link} -> {report.to_link}")
    lines.append("joints:")
    for joint, acceleration, jerk in zip(
        report.joints, report.acceleration_max, report.jerk_max, strict=True
    ):
        limits = "continuous" if joint.continuous else f"{joint.lower:.2f} .. {joint.upper:.2f}"
        jerk_text = "" if jerk is None else f", jerk {jerk:.4g} {joint.unit}/s^3"
        lines.append(
            f"  {joint.name:<16} {joint.type:<9} {limits} {joint.unit}, velocity "
            f"{joint.velocity_max:.4g} {joint.unit}/s, acceleration {acceleration:.4g} "
            f"{joint.unit}/s^2{jerk_text}"
        )
    if report.held_joints:
        lines.append(f"held at zero: {', '.join(report.held_joints)}")
    found = sum(m.found for m in report.meshes)
    lines.append(f"meshes: {found} found, {len(report.meshes) - found} missing")
    lines += [
        f"  MISSING {m.filename} ({m.role} of {m.link})" for m in report.meshes if not m.found
    ]
    lines.append(f"capsules: {len(report.capsules)}")
    for fit in report.link_fits:
        excess = "flat" if fit.excess is None else f"excess {fit.excess:.2f}x hull"
        lines.append(
            f"  fitted {', '.join(fit.capsules)} on {fit.link} to {len(fit.meshes)} {fit.role} "
            f"mesh(es): {excess}"
        )
    fitted = {name for fit in report.link_fits for name in fit.capsules}
    for capsule in report.capsules:
        if capsule.name not in fitted:
            lines.append(
                f"  {capsule.name} on {capsule.link}: radius {capsule.radius_mm:.1f} mm, "
                f"length {capsule.length_mm:.1f} mm"
            )
    lines.append("notes:")
    lines += [f"  - {note}" for note in report.notes]
    return "\n".join(lines)


# One decimated mesh drawn on a link (vertices in the link frame).
class LinkMeshDrawing(BaseModel):
    model_config = ConfigDict(extra="forbid")

    link: int = Field(description="Index into the FK answer's frames (0 base, i after joint i).")
    source_link: str = Field(description="The description's link.")
    vertices_mm: list[list[float]] = Field(description="In the link frame, mm.")
    faces: list[list[int]]


class RobotMeshesResult(BaseModel):
    """A robot's meshes for drawing: visual meshes decimated to one budget for the whole robot."""

    model_config = ConfigDict(extra="forbid")

    robot: str
    triangles: int = Field(description="Triangles in all (at most the robot budget, 60 000).")
    meshes: list[LinkMeshDrawing]


def robot_meshes_result(
    robot: Robot, spec: str, drawings: list[LinkDisplayMesh]
) -> RobotMeshesResult:
    """Return the drawing answer for ``robot`` from :func:`~posebridge.geometry.robot_meshes.robot_display_meshes`."""
    return RobotMeshesResult(
        robot=spec,
        triangles=sum(d.mesh.triangle_count for d in drawings),
        meshes=[
            LinkMeshDrawing(
                link=d.link,
                source_link=d.source_link,
                vertices_mm=np.round(mm_from_m(d.mesh.vertices_m), 2).tolist(),
                faces=d.mesh.faces.tolist(),
            )
            for d in drawings
        ],
    )

"""The cell as the page reads and edits it: the file content, its version and a drawing of it.

The drawing (:class:`SceneDrawing`) is the resolved scene in world
millimetres and degrees: every shape's centre pose and size, every fixture's
frame, targets as tool poses, path waypoints as tool poses. Orientations are
roll, pitch, yaw in degrees about fixed X, Y, Z: R = Rz(yaw) Ry(pitch) Rx(roll).
"""

from __future__ import annotations

from typing import Annotated, Any, Literal

import numpy as np
from pydantic import BaseModel, ConfigDict, Field

from posebridge.api.cell_store import CellSnapshot
from posebridge.cell.model import MAX_COORDINATE_MM, MAX_JOINTS, MAX_WAYPOINTS, Branch, Cell
from posebridge.cell.scene import BoxSet, CylinderSet, MeshSet, Scene
from posebridge.kinematics.branches import BRANCH_LABELS
from posebridge.results.external_axes import external_user_from_si
from posebridge.transforms import rpy_from_rotation_matrix
from posebridge.units import FloatArray, joints_user_from_si, m_from_mm, mm_from_m

__all__ = [
    "BaseDrawing",
    "BaseEdit",
    "CellDocument",
    "ChainChoice",
    "ChainEndEdit",
    "FixtureDrawing",
    "FixtureEdit",
    "PathDrawing",
    "SceneDrawing",
    "ShapeDrawing",
    "TargetDrawing",
    "TargetEdit",
    "ToolDrawing",
    "TrackEdit",
    "TurntableEdit",
    "WaypointDrawing",
    "WaypointEdit",
    "WaypointJointsEdit",
    "WaypointJointsItem",
    "cell_document",
]

_RPY = "Roll, pitch, yaw in degrees about fixed X, Y, Z: R = Rz(yaw) Ry(pitch) Rx(roll)."
Coordinate = Annotated[
    float, Field(allow_inf_nan=False, ge=-MAX_COORDINATE_MM, le=MAX_COORDINATE_MM)
]
Angle = Annotated[float, Field(allow_inf_nan=False, ge=-360.0, le=360.0)]
Position = Annotated[list[Coordinate], Field(min_length=3, max_length=3)]
Rpy = Annotated[list[Angle], Field(min_length=3, max_length=3, description=_RPY)]
Travel = Annotated[list[Coordinate], Field(min_length=2, max_length=2)]


class ShapeDrawing(BaseModel):
    """One solid of the cell, centred on its world pose.

    A fixture, keep-out zone, or the robot's mounting (pedestal, track rail and carriage); a
    mesh is placed at its fixture frame, its triangles come from GET /api/cell/meshes/{name}.
    """

    model_config = ConfigDict(extra="forbid")

    name: str
    role: Literal["fixture", "keep_out", "pedestal"]
    shape: Literal["box", "cylinder", "mesh"]
    position_mm: list[float] = Field(description="Centre (a mesh: fixture frame) in the world.")
    rpy_deg: list[float] = Field(description="Orientation in the world. " + _RPY)
    size_mm: list[float] | None = Field(
        description="Box side lengths along its x, y, z; null for a cylinder or a mesh."
    )
    radius_mm: float | None = Field(description="Cylinder radius; null for a box or a mesh.")
    height_mm: float | None = Field(
        description="Cylinder length along its z; null for a box or a mesh."
    )
    mesh_version: str | None = Field(
        default=None,
        description="Mesh: content version of its triangles (changes with the file and unit); "
        "null for the other shapes.",
    )
    bounds_mm: list[list[float]] | None = Field(
        default=None,
        description="Mesh: axis-aligned bounds in the fixture frame, [min xyz, max xyz]; null "
        "for the other shapes.",
    )
    triangles: int | None = Field(
        default=None, description="Mesh: triangles in the file after clean-up; null otherwise."
    )
    closed: bool | None = Field(
        default=None,
        description="Mesh: closed surface (signed clearance; open meshes are unsigned); null "
        "otherwise.",
    )
    colour: str | None = Field(
        default=None, description="Mesh: drawing colour #rrggbb, null: the fixture colour."
    )


class FixtureDrawing(BaseModel):
    """A fixture's frame in the world (frames without geometry included)."""

    model_config = ConfigDict(extra="forbid")

    name: str
    parent: str | None = Field(
        description="Parent fixture; null for a fixture placed in the world."
    )
    shape: Literal["box", "cylinder", "mesh", "frame"]
    position_mm: list[float] = Field(description="Frame origin in the world.")
    rpy_deg: list[float] = Field(description="Frame orientation in the world. " + _RPY)


class BranchSigns(BaseModel):
    """A required branch as signs: +1/-1 per part of the vocabulary, 0 where either will do."""

    model_config = ConfigDict(extra="forbid")

    shoulder: int = Field(ge=-1, le=1, description="+1 front, -1 back, 0 either.")
    elbow: int = Field(ge=-1, le=1, description="+1 up, -1 down, 0 either.")
    wrist: int = Field(ge=-1, le=1, description="+1 positive, -1 negative, 0 either.")


def branch_signs(branch: Branch | None) -> BranchSigns | None:
    """Return the signs of a required branch (:data:`posebridge.kinematics.branches.BRANCH_LABELS`)."""
    if branch is None:
        return None
    return BranchSigns(
        **{
            part: BRANCH_LABELS[part][word] if word is not None else 0
            for part, word in branch.model_dump().items()
        }
    )


class TargetDrawing(BaseModel):
    """A target as a world tool pose, with its approach position."""

    model_config = ConfigDict(extra="forbid")

    name: str
    fixture: str = Field(description="Fixture the target is attached to, or world.")
    position_mm: list[float] = Field(description="Tool (TCP) position in the world.")
    rpy_deg: list[float] = Field(description="Tool orientation in the world. " + _RPY)
    approach_position_mm: list[float] = Field(
        description="Approach position (backed off along the tool z axis), world."
    )
    branch: Branch | None = Field(description="Required arm branch; null where any will do.")
    branch_signs: BranchSigns | None = Field(
        description="The required branch as the signs IK solutions carry (`shoulder`, "
        "`elbow`, `wrist` of an IK solution; 0 where either will do); null where any will do."
    )


class WaypointDrawing(BaseModel):
    """One path waypoint as a world tool pose."""

    model_config = ConfigDict(extra="forbid")

    source: Literal["target", "pose", "joints"]
    target: str | None = Field(description="Target name for a target waypoint.")
    approach: bool
    position_mm: list[float] = Field(description="Tool position in the world.")
    rpy_deg: list[float] = Field(description="Tool orientation in the world. " + _RPY)
    joints_deg: list[float] | None = Field(
        description="Given joint values (deg; mm for prismatic joints), null otherwise."
    )
    motion: Literal["joint", "linear"] = Field(description="Move into this waypoint.")


class PathDrawing(BaseModel):
    """A path: its waypoints in order."""

    model_config = ConfigDict(extra="forbid")

    name: str
    waypoints: list[WaypointDrawing]


class BaseDrawing(BaseModel):
    """The robot's placement: pedestal foot and base frame in the world."""

    model_config = ConfigDict(extra="forbid")

    position_mm: list[float] = Field(description="Robot base frame origin in the world.")
    rpy_deg: list[float] = Field(description="Robot base frame orientation. " + _RPY)
    foot_position_mm: list[float] = Field(description="Pedestal foot in the world.")


# A tool collision capsule in the flange frame.
class ToolCapsuleDrawing(BaseModel):
    model_config = ConfigDict(extra="forbid")

    name: str
    start_mm: list[float]
    end_mm: list[float]
    radius_mm: float


class ToolDrawing(BaseModel):
    """The mounted tool: TCP in the flange frame and its capsules."""

    model_config = ConfigDict(extra="forbid")

    name: str
    position_mm: list[float] = Field(description="TCP position in the flange frame.")
    rpy_deg: list[float] = Field(description="TCP orientation in the flange frame. " + _RPY)
    capsules: list[ToolCapsuleDrawing]


# One external axis of the cell: range and the value the drawing is at.
class ExternalAxisDrawing(BaseModel):
    model_config = ConfigDict(extra="forbid")

    name: str
    kind: Literal["track", "turntable"]
    unit: Literal["mm", "deg"]
    lower: float
    upper: float
    value: float
    position_mm: list[float] = Field(
        default_factory=lambda: [0.0, 0.0, 0.0],
        description="Track: the carriage-top centre at the value; turntable: the plate's top "
        "centre (world).",
    )
    direction: list[float] = Field(
        default_factory=lambda: [1.0, 0.0, 0.0],
        description="Track: the unit direction of travel; turntable: the unit turning axis.",
    )


class SceneDrawing(BaseModel):
    """The resolved cell, in world millimetres and degrees, for drawing."""

    model_config = ConfigDict(extra="forbid")

    base: BaseDrawing
    tool: ToolDrawing
    floor_height_mm: float
    shapes: list[ShapeDrawing]
    fixtures: list[FixtureDrawing]
    targets: list[TargetDrawing]
    paths: list[PathDrawing]
    external_axes: list[ExternalAxisDrawing] = Field(
        default_factory=list, description="Track and turntables, after the robot's joints."
    )


class CellDocument(BaseModel):
    """The server's cell: file content, content version and drawing."""

    model_config = ConfigDict(extra="forbid")

    etag: str = Field(description="Content version; send it as If-Match with every change.")
    path: str | None = Field(
        description="The cell file's full path, for the owner only; null for reviewers and for "
        "the in-memory demo cell."
    )
    file_name: str | None = Field(
        description="The cell file's name without its folder; null for the in-memory demo cell."
    )
    saved_to_file: bool = Field(description="Changes are saved to the file (else kept in memory).")
    robot: str = Field(description="Robot name to use with /api/fk, /api/ik and /api/robots/model.")
    cell: Cell
    scene: SceneDrawing


class TargetEdit(BaseModel):
    """Move a target: new tool pose in the world (or in its fixture's frame)."""

    model_config = ConfigDict(extra="forbid", strict=True)

    position_mm: Position | None = None
    rpy_deg: Rpy | None = None
    frame: Literal["world", "fixture"] = Field(
        default="world", description="Frame of the given pose: the world or the target's fixture."
    )


class FixtureEdit(BaseModel):
    """Move a fixture: new pose in its parent's frame (the world without a parent), or in the world."""

    model_config = ConfigDict(extra="forbid", strict=True)

    position_mm: Position | None = None
    rpy_deg: Rpy | None = None
    frame: Literal["parent", "world"] = Field(
        default="parent",
        description="Frame of the given pose: the fixture's parent (the world without one) "
        "or the world.",
    )


class TrackEdit(BaseModel):
    """Move the track's rail, widen its travel or move its carriage; a field left out keeps its value.

    Applying a rail placement candidate sends its rail's ``origin_mm``, ``direction`` and
    ``travel_needed_mm``; dragging the carriage sends ``home_mm``. The server widens the travel:
    ``range_mm`` becomes the smallest range of whole millimetres holding both the configured
    travel and ``travel_needed_mm`` (never shorter than before). The robot on the carriage moves
    with the rail; fixtures and targets stay. Refused (422): a zero or vertical direction, a
    home outside the travel after widening, a needed travel with its ends swapped; a cell
    without a track is 404.
    """

    model_config = ConfigDict(extra="forbid", strict=True)

    origin_mm: Position | None = Field(
        default=None,
        description="Rail frame at track position 0 (rail top) in the world, e.g. a rail "
        "placement candidate's rail.origin_mm.",
    )
    direction: Position | None = Field(
        default=None,
        description="Direction of travel in the world (any length but zero, not vertical), "
        "e.g. a rail placement candidate's rail.direction.",
    )
    travel_needed_mm: Travel | None = Field(
        default=None,
        description="[lower, upper] track positions the targets need, e.g. a rail placement "
        "candidate's rail.travel_needed_mm; the travel is widened to hold them.",
    )
    home_mm: Coordinate | None = Field(
        default=None,
        description="The track position the cell is shown at (the carriage's place); it must "
        "lie in the travel.",
    )


class TurntableEdit(BaseModel):
    """Move a turntable: its new axis point in the world; what it carries moves by the same step."""

    model_config = ConfigDict(extra="forbid", strict=True)

    position_mm: Position = Field(
        description="Top centre of the plate (on the axis) in the world, e.g. a table placement "
        "candidate's table.position_mm."
    )


class WaypointEdit(BaseModel):
    """Move a pose waypoint of a path: its new tool pose in the world."""

    model_config = ConfigDict(extra="forbid", strict=True)

    position_mm: Position = Field(description="Tool position in the world.")
    rpy_deg: Rpy


class WaypointJointsItem(BaseModel):
    """Give waypoints of a path as joint values (e.g. the optimiser's sequence, its ``edits``)."""

    model_config = ConfigDict(extra="forbid", strict=True)

    index: int = Field(ge=0, lt=MAX_WAYPOINTS, description="Waypoint position, from 0.")
    joints_deg: list[Coordinate] = Field(
        min_length=1, max_length=MAX_JOINTS, description="Prismatic joints in mm."
    )


class WaypointJointsEdit(BaseModel):
    """Joint values for waypoints of one path, each waypoint becoming a joint-values waypoint."""

    model_config = ConfigDict(extra="forbid", strict=True)

    edits: list[WaypointJointsItem] = Field(min_length=1, max_length=MAX_WAYPOINTS)


class BaseEdit(BaseModel):
    """Move the robot: new pedestal foot pose in the world, and optionally a new pedestal height."""

    model_config = ConfigDict(extra="forbid", strict=True)

    position_mm: Position | None = None
    rpy_deg: Rpy | None = None
    pedestal_height_mm: float | None = Field(
        default=None, ge=0.0, le=MAX_COORDINATE_MM, allow_inf_nan=False
    )


def _pose_mm_deg(T: FloatArray) -> tuple[list[Any], list[Any]]:
    """Position (mm) and rpy (deg) of transforms, shape (..., 4, 4) -> lists."""
    return (
        mm_from_m(T[..., :3, 3]).tolist(),
        rpy_from_rotation_matrix(T[..., :3, :3], degrees=True).tolist(),
    )


def _boxes(boxes: BoxSet, role: Literal["fixture", "keep_out", "pedestal"]) -> list[ShapeDrawing]:
    positions, rpys = _pose_mm_deg(boxes.T_world)
    sizes = mm_from_m(2.0 * boxes.half_extents).tolist()
    return [
        ShapeDrawing(
            name=name,
            role=role,
            shape="box",
            position_mm=positions[k],
            rpy_deg=rpys[k],
            size_mm=sizes[k],
            radius_mm=None,
            height_mm=None,
        )
        for k, name in enumerate(boxes.names)
    ]


def _cylinders(cylinders: CylinderSet, role: Literal["fixture", "pedestal"]) -> list[ShapeDrawing]:
    positions, rpys = _pose_mm_deg(cylinders.T_world)
    radius = mm_from_m(cylinders.radius).tolist()
    height = mm_from_m(2.0 * cylinders.half_length).tolist()
    return [
        ShapeDrawing(
            name=name,
            role=role,
            shape="cylinder",
            position_mm=positions[k],
            rpy_deg=rpys[k],
            size_mm=None,
            radius_mm=radius[k],
            height_mm=height[k],
        )
        for k, name in enumerate(cylinders.names)
    ]


def _meshes(meshes: MeshSet) -> list[ShapeDrawing]:
    positions, rpys = _pose_mm_deg(meshes.T_world)
    return [
        ShapeDrawing(
            name=name,
            role="fixture",
            shape="mesh",
            position_mm=positions[k],
            rpy_deg=rpys[k],
            size_mm=None,
            radius_mm=None,
            height_mm=None,
            mesh_version=meshes.meshes[k].content_key[:32],
            bounds_mm=mm_from_m(meshes.meshes[k].bounds).tolist(),
            triangles=meshes.meshes[k].triangle_count,
            closed=meshes.meshes[k].is_closed,
            colour=meshes.colours[k],
        )
        for k, name in enumerate(meshes.names)
    ]


def _subset(boxes: BoxSet, names: set[str], *, keep: bool) -> BoxSet:
    """Return the boxes whose name is (``keep``) or is not in ``names``."""
    rows = [k for k, name in enumerate(boxes.names) if (name in names) == keep]
    return BoxSet(
        names=tuple(boxes.names[k] for k in rows),
        T_world=boxes.T_world[rows],
        half_extents=boxes.half_extents[rows],
    )


RAIL_HEIGHT_M = 0.04
"""Drawn height of a track's rail below the rail frame (drawing only, not an obstacle)."""


def _rail(scene: Scene) -> BoxSet:
    """Return the track's rail for drawing: its travel plus a carriage length, under the rail frame."""
    external = scene.external
    track = external.track
    if track is None:
        return BoxSet((), np.zeros((0, 4, 4)), np.zeros((0, 3)))
    lower, upper = float(external.lower[0]), float(external.upper[0])
    centre = np.eye(4)
    centre[:3, 3] = [0.5 * (lower + upper), 0.0, -0.5 * RAIL_HEIGHT_M]
    length = upper - lower + float(track.carriage_size[0])
    half = 0.5 * np.array([length, 0.6 * float(track.carriage_size[1]), RAIL_HEIGHT_M])
    return BoxSet((f"{external.names[0]} rail",), (track.T_world_rail @ centre)[None], half[None])


def _axis_point_mm(scene: Scene, axis: int) -> list[float]:
    """Give the carriage-top centre of the track, or a turntable's plate centre, world mm."""
    external = scene.external
    if external.track is not None and axis == 0:
        point = external.track.T_world_carriage(external.values[0])[0][:3, 3]
    else:
        point = external.turntables[axis - external.table_offset].point
    return [float(v) for v in mm_from_m(point)]


def _axis_direction(scene: Scene, axis: int) -> list[float]:
    """Give the track's direction of travel, or a turntable's axis (unit vectors)."""
    external = scene.external
    if external.track is not None and axis == 0:
        return [float(v) for v in external.track.direction]
    return [float(v) for v in external.turntables[axis - external.table_offset].axis]


def scene_drawing(scene: Scene) -> SceneDrawing:
    """Return the drawing of a resolved scene in world mm and deg."""
    base_position, base_rpy = _pose_mm_deg(scene.T_world_base)
    down = np.eye(4)
    down[2, 3] = -float(m_from_mm(scene.cell.base.pedestal_height_mm))
    foot = mm_from_m((scene.T_world_base @ down)[:3, 3]).tolist()
    tool_position, tool_rpy = _pose_mm_deg(scene.T_flange_tool)
    capsules = scene.tool_capsules
    external = scene.external
    lower, upper = (
        external_user_from_si(external, external.lower),
        external_user_from_si(external, external.upper),
    )
    values = external_user_from_si(external, external.values)
    carriage = {f"{external.names[0]} carriage"} if external.track is not None else set()
    targets = scene.targets
    positions, rpys = _pose_mm_deg(targets.T_world_target)
    approach = mm_from_m(targets.T_world_approach[:, :3, 3]).tolist()
    fixture_positions, fixture_rpys = _pose_mm_deg(scene.T_world_fixture)
    fixtures = [
        FixtureDrawing(
            name=fixture.name,
            parent=fixture.parent,
            shape=fixture.shape,
            position_mm=fixture_positions[k],
            rpy_deg=fixture_rpys[k],
        )
        for k, fixture in enumerate(scene.cell.fixtures)
    ]
    paths = []
    for path in scene.paths:
        wp_positions, wp_rpys = _pose_mm_deg(path.T_world_tool)
        q_user = joints_user_from_si(path.q, scene.robot.prismatic)
        waypoints = [
            WaypointDrawing(
                source=source,
                target=None if path.target_index[w] < 0 else targets.names[path.target_index[w]],
                approach=bool(path.approach[w]),
                position_mm=wp_positions[w],
                rpy_deg=wp_rpys[w],
                joints_deg=q_user[w].tolist() if path.joints_given[w] else None,
                motion="linear" if path.linear[w] else "joint",
            )
            for w, source in enumerate(path.sources)
        ]
        paths.append(PathDrawing(name=path.name, waypoints=waypoints))
    return SceneDrawing(
        base=BaseDrawing(
            position_mm=base_position, rpy_deg=base_rpy, foot_position_mm=[float(v) for v in foot]
        ),
        tool=ToolDrawing(
            name=scene.tool_name,
            position_mm=tool_position,
            rpy_deg=tool_rpy,
            capsules=[
                ToolCapsuleDrawing(
                    name=name,
                    start_mm=mm_from_m(capsules.start[k]).tolist(),
                    end_mm=mm_from_m(capsules.end[k]).tolist(),
                    radius_mm=float(mm_from_m(capsules.radius[k])),
                )
                for k, name in enumerate(capsules.names)
            ],
        ),
        floor_height_mm=float(mm_from_m(scene.floor_height)),
        shapes=[
            *_boxes(_subset(scene.boxes, carriage, keep=False), "fixture"),
            *_cylinders(scene.cylinders, "fixture"),
            *_meshes(scene.meshes),
            *_boxes(scene.keep_outs, "keep_out"),
            *_cylinders(scene.pedestal, "pedestal"),
            *_boxes(_rail(scene), "pedestal"),
            *_boxes(_subset(scene.boxes, carriage, keep=True), "pedestal"),
        ],
        external_axes=[
            ExternalAxisDrawing(
                name=name,
                kind="track" if external.prismatic[i] else "turntable",
                unit="mm" if external.prismatic[i] else "deg",
                lower=float(lower[i]),
                upper=float(upper[i]),
                value=float(values[i]),
                position_mm=_axis_point_mm(scene, i),
                direction=_axis_direction(scene, i),
            )
            for i, name in enumerate(external.names)
        ],
        fixtures=fixtures,
        targets=[
            TargetDrawing(
                name=name,
                fixture=targets.fixtures[k],
                position_mm=positions[k],
                rpy_deg=rpys[k],
                approach_position_mm=approach[k],
                branch=targets.branches[k],
                branch_signs=branch_signs(targets.branches[k]),
            )
            for k, name in enumerate(targets.names)
        ],
        paths=paths,
    )


def cell_document(snapshot: CellSnapshot, robot_spec: str, *, owner: bool) -> CellDocument:
    """Return the answer of the cell routes for one content version.

    The file's full path only for the ``owner`` (reviewers see its name).
    """
    return CellDocument(
        etag=snapshot.etag,
        path=None if snapshot.path is None or not owner else str(snapshot.path),
        file_name=None if snapshot.path is None else snapshot.path.name,
        saved_to_file=snapshot.path is not None,
        robot=robot_spec,
        cell=snapshot.cell,
        scene=scene_drawing(snapshot.scene),
    )


class ChainChoice(BaseModel):
    """A cell whose URDF robot needs its chain end chosen before it can be loaded."""

    model_config = ConfigDict(extra="forbid")

    etag: str = Field(description="Content version of the cell file as written (for If-Match).")
    robot_file: str = Field(description="The robot file as the cell names it.")
    from_link: str | None = Field(description="The chain's start as the cell gives it.")
    leaves: list[str] = Field(description="The leaf links below from_link: the to_link choices.")
    detail: str = Field(description="Why the robot cannot be loaded as it is.")


class ChainEndEdit(BaseModel):
    """The chosen end of the cell robot's chain."""

    model_config = ConfigDict(extra="forbid")

    to_link: str = Field(min_length=1, max_length=200, description="One of the leaf links.")

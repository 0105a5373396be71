"""A cell resolved into world-frame SI arrays for computation.

:func:`resolve_scene` loads the robot, composes every frame into the world
(fixture parent chains, targets on fixtures, approach poses, waypoints) and
packs the shapes into plain arrays:

* boxes and keep-out zones: ``T_world`` (B, 4, 4) of the box centre frame and
  ``half_extents`` (B, 3), m;
* cylinders and the pedestal: ``T_world`` (C, 4, 4) of the centre frame, axis
  along local z, ``radius`` (C,) and ``half_length`` (C,), m;
* mesh fixtures: ``T_world`` (M, 4, 4) of the fixture frame and the
  :class:`~posebridge.geometry.meshes.TriangleMesh` read from each file
  (:mod:`posebridge.cell.mesh_fixtures`), vertices in the fixture frame, m;
* tool capsules in the flange frame: ``start``/``end`` (T, 3) and ``radius`` (T,), m.

Poses compose as ``T_world_child = T_world_parent @ T_parent_child``
(homogeneous transforms, Lynch & Park, Modern Robotics, sec. 3.3.1).
All values are SI (m, rad); conversions go through :mod:`posebridge.units`
and :mod:`posebridge.transforms`. Every array of a scene is read-only
(:func:`posebridge.arrays.freeze_array_fields`): a posed scene is a new scene
(:func:`posed_scene`), never an edited one.
"""

from __future__ import annotations

from collections.abc import Collection, Mapping
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Literal

import numpy as np
import numpy.typing as npt

from posebridge.arrays import freeze_array_fields
from posebridge.cell.external_axes import (
    NO_EXTERNAL_AXES,
    ExternalAxes,
    TrackAxis,
    TurntableAxis,
    rail_frame,
)
from posebridge.cell.mesh_fixtures import MeshFixtureLoader
from posebridge.cell.model import (
    BoxFixture,
    Branch,
    Cell,
    CellFileError,
    CylinderFixture,
    MeshFixture,
    MotionPath,
    Target,
)
from posebridge.geometry.mesh_cache import MeshCache
from posebridge.geometry.meshes import TriangleMesh
from posebridge.geometry.robot_meshes import load_robot_with_meshes
from posebridge.kinematics.fk import fk_tool
from posebridge.robot.errors import RobotDescriptionError
from posebridge.robot.model import Robot
from posebridge.robot.toml_format import parse_robot_toml
from posebridge.transforms import transform_from_position_rpy
from posebridge.units import (
    BoolArray,
    FloatArray,
    joints_si_from_user,
    m_from_mm,
    rad_from_deg,
)

__all__ = [
    "BoxSet",
    "CapsuleSet",
    "CylinderSet",
    "MeshSet",
    "ResolvedPath",
    "Scene",
    "TargetSet",
    "WaypointSource",
    "pinned_values",
    "posed_scene",
    "resolve_scene",
]

IntArray = npt.NDArray[np.int64]
WaypointSource = Literal["target", "pose", "joints"]


@dataclass(frozen=True, eq=False)
class BoxSet:
    """Oriented boxes, centred on their frames.

    Attributes
    ----------
    names : tuple of str, length B
    T_world : array, shape (B, 4, 4)
        Pose of each box's centre frame in the world.
    half_extents : array, shape (B, 3)
        Half side lengths along the box's x, y, z, m.
    """

    names: tuple[str, ...]
    T_world: FloatArray
    half_extents: FloatArray

    def __post_init__(self) -> None:
        """Make the array fields read-only."""
        freeze_array_fields(self)


@dataclass(frozen=True, eq=False)
class CylinderSet:
    """Solid cylinders, centred on their frames, axis along local z.

    Attributes
    ----------
    names : tuple of str, length C
    T_world : array, shape (C, 4, 4)
    radius : array, shape (C,)
        m.
    half_length : array, shape (C,)
        Half the length along local z, m.
    """

    names: tuple[str, ...]
    T_world: FloatArray
    radius: FloatArray
    half_length: FloatArray

    def __post_init__(self) -> None:
        """Make the array fields read-only."""
        freeze_array_fields(self)


@dataclass(frozen=True, eq=False)
class MeshSet:
    """Mesh fixtures: triangle meshes in their fixture frames.

    Attributes
    ----------
    names : tuple of str, length M
    T_world : array, shape (M, 4, 4)
        Pose of each fixture frame in the world.
    meshes : tuple of TriangleMesh, length M
        Vertices in the fixture frame, m.
    files : tuple of str, length M
        The files as the cell names them.
    colours : tuple of (str or None), length M
        ``#rrggbb`` drawing colours; ``None``: the fixture colour.
    """

    names: tuple[str, ...]
    T_world: FloatArray
    meshes: tuple[TriangleMesh, ...]
    files: tuple[str, ...]
    colours: tuple[str | None, ...]

    def __post_init__(self) -> None:
        """Make the array fields read-only."""
        freeze_array_fields(self)


@dataclass(frozen=True, eq=False)
class CapsuleSet:
    """Capsules (points within ``radius`` of a segment) in one frame.

    Attributes
    ----------
    names : tuple of str, length T
    start, end : array, shape (T, 3)
        Segment end points, m.
    radius : array, shape (T,)
        m.
    """

    names: tuple[str, ...]
    start: FloatArray
    end: FloatArray
    radius: FloatArray

    def __post_init__(self) -> None:
        """Make the array fields read-only."""
        freeze_array_fields(self)


@dataclass(frozen=True, eq=False)
class TargetSet:
    """Targets as world-frame tool poses.

    Attributes
    ----------
    names : tuple of str, length K
    fixtures : tuple of str, length K
        Fixture each target is attached to (``"world"`` for none).
    T_world_target : array, shape (K, 4, 4)
        Required tool (TCP) pose in the world.
    approach_offset : array, shape (K,)
        Back-off distance along the target's tool z axis, m (0: none).
    T_world_approach : array, shape (K, 4, 4)
        ``T_world_target @ Trans(0, 0, -approach_offset)``.
    branches : tuple of (Branch or None), length K
        Required arm branch in plain words; ``None`` where any branch will do.
    """

    names: tuple[str, ...]
    fixtures: tuple[str, ...]
    T_world_target: FloatArray
    approach_offset: FloatArray
    T_world_approach: FloatArray
    branches: tuple[Branch | None, ...]

    def __post_init__(self) -> None:
        """Make the array fields read-only."""
        freeze_array_fields(self)

    def index(self, name: str) -> int:
        """Position of the target called ``name`` (``KeyError`` if absent)."""
        try:
            return self.names.index(name)
        except ValueError:
            raise KeyError(name) from None

    def moved_on(self, fixtures: Collection[str], D: FloatArray) -> TargetSet:
        """Return the targets with those on ``fixtures`` moved by the rigid motion ``D``.

        A target on one of the named fixtures gets ``D @ T_world_target`` and
        ``D @ T_world_approach`` (``D``: (4, 4), world frame); the others stay.
        Returns ``self`` when no target is on them.
        """
        rows = [i for i, fixture in enumerate(self.fixtures) if fixture in fixtures]
        if not rows:
            return self
        T_target = self.T_world_target.copy()
        T_approach = self.T_world_approach.copy()
        T_target[rows] = D @ T_target[rows]
        T_approach[rows] = D @ T_approach[rows]
        return replace(self, T_world_target=T_target, T_world_approach=T_approach)


@dataclass(frozen=True, eq=False)
class ResolvedPath:
    """One path with every waypoint resolved to a world-frame tool pose.

    Attributes
    ----------
    name : str
    sources : tuple of {"target", "pose", "joints"}, length W
        How each waypoint was given.
    target_index : array of int64, shape (W,)
        Index into :attr:`Scene.targets`, -1 for pose and joint waypoints.
    approach : array of bool, shape (W,)
        The waypoint is its target's approach pose.
    T_world_tool : array, shape (W, 4, 4)
        Tool pose of every waypoint in the world; for joint waypoints the
        forward kinematics of their joint values with the cell's tool.
    q : array, shape (W, n)
        Joint values (rad, m) where given, NaN elsewhere.
    joints_given : array of bool, shape (W,)
    linear : array of bool, shape (W,)
        Linear move (else joint move) into the waypoint.
    linear_speed : array, shape (W,)
        m/s for linear moves, NaN for joint moves.
    speed_percent : array, shape (W,)
        Percent of the joints' velocity limits for joint moves, NaN for linear moves.
    blend_radius : array, shape (W,)
        m.
    external : array, shape (W, m)
        External axis values (m, rad) of every waypoint: given with the joint
        values or pinned on the waypoint's target, else the value the scene is
        posed at. ``T_world_tool`` of a target waypoint is at the scene's values.
    """

    name: str
    sources: tuple[WaypointSource, ...]
    target_index: IntArray
    approach: BoolArray
    T_world_tool: FloatArray
    q: FloatArray
    joints_given: BoolArray
    linear: BoolArray
    linear_speed: FloatArray
    speed_percent: FloatArray
    blend_radius: FloatArray
    external: FloatArray = field(default_factory=lambda: np.zeros((0, 0)))

    def __post_init__(self) -> None:
        """Make the array fields read-only."""
        freeze_array_fields(self)


@dataclass(frozen=True, eq=False)
class Scene:
    """A cell resolved for computation (SI units, world frame).

    Attributes
    ----------
    cell : Cell
        The source cell.
    robot : Robot
    T_world_base : array, shape (4, 4)
        Robot base frame in the world (on top of the pedestal).
    tool_name : str
    T_flange_tool : array, shape (4, 4)
        Tool (TCP) pose in the flange frame.
    tool_capsules : CapsuleSet
        Tool collision capsules in the flange frame.
    fixture_names : tuple of str, length F
        Every fixture in file order, frames included.
    T_world_fixture : array, shape (F, 4, 4)
    boxes : BoxSet
        Box fixtures.
    cylinders : CylinderSet
        Cylinder fixtures.
    meshes : MeshSet
        Mesh fixtures.
    keep_outs : BoxSet
        Keep-out zones.
    pedestal : CylinderSet
        The pedestal under the robot (empty without one). Kept apart from the
        fixtures because the robot's base links sit on it.
    floor_height : float
        World z of the floor, m.
    targets : TargetSet
    paths : tuple of ResolvedPath
    external : ExternalAxes
        Track and turntables, and the values this scene is posed at (their
        home values from :func:`resolve_scene`; others from :func:`posed_scene`).
        The track's carriage is the last box (``"<track> carriage"``), each
        table's plate a cylinder after the fixtures (``"<table> plate"``).
    """

    cell: Cell
    robot: Robot
    T_world_base: FloatArray
    tool_name: str
    T_flange_tool: FloatArray
    tool_capsules: CapsuleSet
    fixture_names: tuple[str, ...]
    T_world_fixture: FloatArray
    boxes: BoxSet
    cylinders: CylinderSet
    meshes: MeshSet
    keep_outs: BoxSet
    pedestal: CylinderSet
    floor_height: float
    targets: TargetSet
    paths: tuple[ResolvedPath, ...]
    external: ExternalAxes = NO_EXTERNAL_AXES

    def __post_init__(self) -> None:
        """Make the array fields read-only."""
        freeze_array_fields(self)

    @property
    def joint_names(self) -> tuple[str, ...]:
        """The cell's joint vector: robot joints, then external axes, length n + m."""
        return self.robot.joint_names + self.external.names

    @property
    def joint_prismatic(self) -> BoolArray:
        """Whether each entry of the cell's joint vector is a length (mm), shape (n + m,)."""
        return np.concatenate([self.robot.prismatic, self.external.prismatic])

    def split_joints(
        self, values_user: npt.ArrayLike, *, where: str = "joints"
    ) -> tuple[FloatArray, FloatArray]:
        """Robot joints and external values (SI) from user joint vectors.

        Parameters
        ----------
        values_user : array-like, shape (N, n) or (N, n + m)
            Degrees / millimetres; without the external columns the axes take
            the values the scene is posed at.
        where : str
            Name used in the error message.

        Returns
        -------
        q : array, shape (N, n)
            rad, m.
        external : array, shape (N, m)
            m, rad.

        Raises
        ------
        CellFileError
            Wrong number of values.
        """
        values = np.asarray(values_user, dtype=np.float64)
        values = values.reshape(-1, values.shape[-1]) if values.ndim else values.reshape(1, 1)
        n, m = self.robot.dof, self.external.count
        if values.shape[1] not in (n, n + m):
            expected = f"{n}" if m == 0 else f"{n} or {n + m}"
            raise CellFileError(
                [
                    f"{where}: expected {expected} values ({', '.join(self.joint_names)}), "
                    f"got {values.shape[1]}"
                ]
            )
        q = joints_si_from_user(values[:, :n], self.robot.prismatic)
        if values.shape[1] == n:
            external = np.broadcast_to(self.external.values, (len(values), m)).copy()
        else:
            external = self.external.si_from_user(values[:, n:])
        return q, external


def _pose_si(position_mm: npt.ArrayLike, rpy_deg: npt.ArrayLike) -> FloatArray:
    """Return transforms from positions (mm) and fixed-axis X-Y-Z rpy (deg), shape (..., 4, 4)."""
    return transform_from_position_rpy(m_from_mm(position_mm), rad_from_deg(rpy_deg))


def _translation_z(distance: npt.ArrayLike) -> FloatArray:
    """Pure translations along z by ``distance`` (m), shape (..., 4, 4)."""
    distance = np.asarray(distance, dtype=np.float64)
    offset = np.zeros((*distance.shape, 3))
    offset[..., 2] = distance
    return transform_from_position_rpy(offset, np.zeros_like(offset))


def _optional_path(path: str | Path | None) -> Path | None:
    return None if path is None else Path(path)


def _load_cell_robot(cell: Cell, cell_path: Path | None) -> Robot:
    """Return the cell's robot: bundled name, file relative to the cell file, or embedded TOML.

    A robot file comes with its chain choice and mesh folders, meshes fitted.
    """
    source = cell.robot
    try:
        if source.name is not None:
            return load_robot_with_meshes(source.name)
        if source.toml is not None:
            return parse_robot_toml(source.toml, "robot.toml")
        assert source.file is not None
        file = Path(source.file)
        if not file.is_absolute():
            if cell_path is None:
                raise CellFileError(
                    [
                        f"robot.file: relative path {source.file!r} needs the cell file's folder; "
                        "give cell_path or an absolute path"
                    ]
                )
            file = Path(cell_path).parent / file
        folder = file.parent if cell_path is None else Path(cell_path).parent
        return load_robot_with_meshes(
            file,
            from_link=source.from_link,
            to_link=source.to_link,
            mesh_folders=[folder / f for f in source.mesh_folders or []],
        )
    except RobotDescriptionError as error:
        if source.toml is not None:  # problems already start with "robot.toml:<line>"
            raise CellFileError(error.problems) from error
        field = "name" if source.name is not None else "file"
        raise CellFileError([f"robot.{field}: {problem}" for problem in error.problems]) from error


def _fixture_frames(cell: Cell) -> FloatArray:
    """World poses of all fixtures through their parent chains, shape (F, 4, 4).

    Level by level: fixtures without a parent first, then their children.
    """
    count = len(cell.fixtures)
    if count == 0:
        return np.zeros((0, 4, 4))
    local = _pose_si(
        [fixture.position_mm for fixture in cell.fixtures],
        [fixture.rpy_deg for fixture in cell.fixtures],
    )
    index_of = {fixture.name: i for i, fixture in enumerate(cell.fixtures)}
    parent = np.array(
        [-1 if f.parent is None else index_of[f.parent] for f in cell.fixtures], dtype=np.int64
    )
    world = np.empty_like(local)
    done = parent < 0
    world[done] = local[done]
    while not np.all(done):
        ready = ~done & (parent >= 0) & done[np.maximum(parent, 0)]
        if not np.any(ready):
            raise CellFileError(["fixtures: parent chains form a cycle"])
        world[ready] = world[parent[ready]] @ local[ready]
        done = done | ready
    return world


def _box_set(names: list[str], T_world: FloatArray, size_mm: list[tuple[float, ...]]) -> BoxSet:
    return BoxSet(
        names=tuple(names),
        T_world=T_world.reshape(-1, 4, 4),
        half_extents=0.5 * m_from_mm(np.reshape(size_mm, (-1, 3))),
    )


def _resolve_targets(
    cell: Cell, fixture_index: dict[str, int], T_world_fixture: FloatArray
) -> TargetSet:
    targets = cell.targets
    frames = np.concatenate([T_world_fixture, np.eye(4)[None]])
    world = len(T_world_fixture)
    frame_index = [fixture_index.get(target.fixture, world) for target in targets]
    T_frame_target = _pose_si(
        np.reshape([target.position_mm for target in targets], (-1, 3)),
        np.reshape([target.rpy_deg for target in targets], (-1, 3)),
    )
    T_world_target = frames[frame_index].reshape(-1, 4, 4) @ T_frame_target
    offset = m_from_mm([target.approach_offset_mm for target in targets])
    return TargetSet(
        names=tuple(target.name for target in targets),
        fixtures=tuple(target.fixture for target in targets),
        T_world_target=T_world_target,
        approach_offset=offset,
        T_world_approach=T_world_target @ _translation_z(-offset),
        branches=tuple(target.branch for target in targets),
    )


def _joint_count_problems(cell: Cell, robot: Robot) -> list[str]:
    """Joint waypoints whose number of values is neither the robot's joints nor the cell's."""
    m = (cell.track is not None) + len(cell.turntables)
    expected = f"{robot.dof}" if m == 0 else f"{robot.dof} or {robot.dof + m} (with external axes)"
    return [
        f"paths[{p}].waypoints[{w}].joints_deg: expected {expected} values for robot "
        f"{robot.name!r}, got {len(waypoint.joints_deg)}"
        for p, path in enumerate(cell.paths)
        for w, waypoint in enumerate(path.waypoints)
        if waypoint.joints_deg is not None
        and len(waypoint.joints_deg) not in (robot.dof, robot.dof + m)
    ]


def _external_axes(cell: Cell, T_foot_base: FloatArray) -> ExternalAxes:
    """Return the cell's track and turntables in SI, posed at their home values."""
    names: list[str] = []
    prismatic: list[bool] = []
    rows: list[list[float]] = []  # lower, upper, home, v, a
    track = None
    if cell.track is not None:
        t = cell.track
        names.append(t.name)
        prismatic.append(True)
        rows.append(m_from_mm([*t.range_mm, t.home_mm, t.speed_mm_s, t.accel_mm_s2]).tolist())
        track = TrackAxis(
            T_world_rail=rail_frame(m_from_mm(t.origin_mm), t.direction),
            carriage_height=float(m_from_mm(t.carriage_height_mm)),
            carriage_size=m_from_mm(t.carriage_size_mm),
            T_carriage_base=_pose_si(cell.base.position_mm, cell.base.rpy_deg) @ T_foot_base,
        )
    index_of = {fixture.name: i for i, fixture in enumerate(cell.fixtures)}
    tables = []
    for table in cell.turntables:
        names.append(table.name)
        prismatic.append(False)
        rows.append(
            rad_from_deg(
                [*table.range_deg, table.home_deg, table.speed_deg_s, table.accel_deg_s2]
            ).tolist()
        )
        carried = {index_of[name] for name in table.fixtures}
        changed = True
        while changed:  # children of carried fixtures are carried
            grown = carried | {
                i
                for i, f in enumerate(cell.fixtures)
                if f.parent is not None and index_of[f.parent] in carried
            }
            changed = grown != carried
            carried = grown
        axis = np.asarray(table.axis, dtype=np.float64)
        tables.append(
            TurntableAxis(
                point=m_from_mm(table.position_mm),
                axis=axis / np.linalg.norm(axis),
                plate_radius=float(m_from_mm(table.plate_radius_mm)),
                plate_thickness=float(m_from_mm(table.plate_thickness_mm)),
                fixtures=tuple(sorted(carried)),
            )
        )
    table_rows = np.array(rows, dtype=np.float64).reshape(-1, 5)
    return ExternalAxes(
        names=tuple(names),
        prismatic=np.array(prismatic, dtype=bool),
        lower=table_rows[:, 0].copy(),
        upper=table_rows[:, 1].copy(),
        home=table_rows[:, 2].copy(),
        velocity_max=table_rows[:, 3].copy(),
        acceleration_max=table_rows[:, 4].copy(),
        values=table_rows[:, 2].copy(),
        track=track,
        turntables=tuple(tables),
    )


def _carriage_box(external: ExternalAxes, name: str) -> tuple[str, FloatArray, FloatArray] | None:
    """Return the carriage as a box (name, centre frame, half extents) at the posed track value."""
    track = external.track
    if track is None or track.carriage_height <= 0.0:
        return None
    T_top = track.T_world_carriage(external.values[0])[0]
    T_centre = T_top @ _translation_z(-0.5 * track.carriage_height)
    half = 0.5 * np.array([*track.carriage_size, track.carriage_height])
    return f"{name} carriage", T_centre, half


def _plate_cylinders(external: ExternalAxes, names: tuple[str, ...]) -> CylinderSet:
    """Each turntable's plate as a cylinder below its top centre along its axis."""
    tables = external.turntables
    if not tables:
        return CylinderSet((), np.zeros((0, 4, 4)), np.zeros(0), np.zeros(0))
    offset = external.table_offset
    T = np.stack(
        [
            table.T_world_plate(external.values[offset + k])[0]
            @ _translation_z(-0.5 * table.plate_thickness)
            for k, table in enumerate(tables)
        ]
    )
    return CylinderSet(
        names=tuple(f"{name} plate" for name in names),
        T_world=T,
        radius=np.array([table.plate_radius for table in tables]),
        half_length=np.array([0.5 * table.plate_thickness for table in tables]),
    )


def pinned_values(external: ExternalAxes, pins: Mapping[str, float]) -> FloatArray:
    """External values of a target waypoint: the cell's values with the target's pins, shape (m,).

    ``pins`` maps axis names to user values (mm for the track, deg for a turntable, the
    target's ``external_axes``); every other axis stays at the cell's value, m or rad.
    """
    values = external.values.copy()
    for axis, value in pins.items():
        i = external.index(axis)
        values[i] = external.si_from_user(np.where(np.arange(external.count) == i, value, 0.0))[i]
    return values


def _resolve_path(
    path: MotionPath,
    robot: Robot,
    T_world_base: FloatArray,
    T_flange_tool: FloatArray,
    targets: TargetSet,
    external: ExternalAxes,
    cell_targets: list[Target],
) -> ResolvedPath:
    waypoints = path.waypoints
    count = len(waypoints)
    n = robot.dof
    sources: list[WaypointSource] = []
    target_index = np.full(count, -1, dtype=np.int64)
    approach = np.array([wp.approach for wp in waypoints], dtype=bool)
    T_world_tool = np.empty((count, 4, 4))
    q = np.full((count, n), np.nan)
    values = np.broadcast_to(external.values, (count, external.count)).copy()
    pins = [target.external_axes for target in cell_targets]
    for w, waypoint in enumerate(waypoints):
        if waypoint.target is not None:
            sources.append("target")
            k = targets.index(waypoint.target)
            target_index[w] = k
            table = targets.T_world_approach if waypoint.approach else targets.T_world_target
            T_world_tool[w] = table[k]
            values[w] = pinned_values(external, pins[k])
        elif waypoint.pose is not None:
            sources.append("pose")
            T_world_tool[w] = _pose_si(waypoint.pose.position_mm, waypoint.pose.rpy_deg)
        else:
            assert waypoint.joints_deg is not None  # exactly one kind, see Waypoint
            sources.append("joints")
            q[w] = joints_si_from_user(waypoint.joints_deg[:n], robot.prismatic)
            if len(waypoint.joints_deg) > n:
                values[w] = external.si_from_user(waypoint.joints_deg[n:])
    joints_given = np.array([source == "joints" for source in sources], dtype=bool)
    if np.any(joints_given):
        T_bases = external.T_world_base(values[joints_given], T_world_base)
        T_world_tool[joints_given] = T_bases @ fk_tool(robot, q[joints_given], T_flange_tool)
    linear = np.array([wp.motion == "linear" for wp in waypoints], dtype=bool)
    return ResolvedPath(
        name=path.name,
        sources=tuple(sources),
        target_index=target_index,
        approach=approach,
        T_world_tool=T_world_tool,
        q=q,
        joints_given=joints_given,
        linear=linear,
        linear_speed=m_from_mm(
            [np.nan if wp.speed_mm_s is None else wp.speed_mm_s for wp in waypoints]
        ),
        speed_percent=np.array(
            [np.nan if wp.speed_percent is None else wp.speed_percent for wp in waypoints],
            dtype=np.float64,
        ),
        blend_radius=m_from_mm([wp.blend_mm for wp in waypoints]),
        external=values,
    )


def resolve_scene(
    cell: Cell,
    cell_path: str | Path | None = None,
    *,
    robot: Robot | None = None,
    mesh_loader: MeshFixtureLoader | None = None,
) -> Scene:
    """Resolve a validated cell into world-frame SI arrays.

    Parameters
    ----------
    cell : Cell
    cell_path : str or Path, optional
        The cell file; a relative ``robot.file`` or mesh fixture ``file`` is
        resolved against its folder.
    robot : Robot, optional, keyword-only
        The robot of ``cell.robot`` when the caller has it loaded already (an
        edit that left the robot entry unchanged); loaded here otherwise.
    mesh_loader : MeshFixtureLoader, optional, keyword-only
        Reads the mesh fixtures' files and keeps them for the next call; a
        new one with the user data folder's mesh cache if omitted (only made
        when the cell has mesh fixtures).

    Returns
    -------
    Scene

    Raises
    ------
    CellFileError
        The robot cannot be loaded, a mesh fixture's file cannot be read or
        is refused, or a waypoint's joint values do not match the robot's
        number of joints.
    """
    if robot is None:
        robot = _load_cell_robot(cell, None if cell_path is None else Path(cell_path))
    problems = _joint_count_problems(cell, robot)
    if problems:
        raise CellFileError(problems)
    base = cell.base
    pedestal_height = float(m_from_mm(base.pedestal_height_mm))
    external = _external_axes(cell, _translation_z(pedestal_height))
    T_world_foot = _pose_si(base.position_mm, base.rpy_deg)
    if external.track is not None:  # the foot stands on the carriage
        T_world_foot = external.track.T_world_carriage(external.values[0])[0] @ T_world_foot
    T_world_base = T_world_foot @ _translation_z(pedestal_height)
    if pedestal_height > 0.0 and base.pedestal_radius_mm is not None:
        pedestal = CylinderSet(
            names=("pedestal",),
            T_world=(T_world_foot @ _translation_z(0.5 * pedestal_height))[None],
            radius=m_from_mm([base.pedestal_radius_mm]),
            half_length=np.array([0.5 * pedestal_height]),
        )
    else:
        pedestal = CylinderSet((), np.zeros((0, 4, 4)), np.zeros(0), np.zeros(0))

    tool = cell.tool
    if tool is None:
        tool_name = "robot default tool"
        T_flange_tool = robot.T_flange_tool.copy()
        capsules = CapsuleSet((), np.zeros((0, 3)), np.zeros((0, 3)), np.zeros(0))
    else:
        tool_name = tool.name
        T_flange_tool = _pose_si(tool.tcp.position_mm, tool.tcp.rpy_deg)
        capsules = CapsuleSet(
            names=tuple(c.name for c in tool.capsules),
            start=m_from_mm(np.reshape([c.start_mm for c in tool.capsules], (-1, 3))),
            end=m_from_mm(np.reshape([c.end_mm for c in tool.capsules], (-1, 3))),
            radius=m_from_mm([c.radius_mm for c in tool.capsules]),
        )

    T_world_fixture = _fixture_frames(cell)
    for k, table in enumerate(external.turntables):
        if table.fixtures:
            turn = table.motion(external.values[external.table_offset + k])[0]
            T_world_fixture[list(table.fixtures)] = turn @ T_world_fixture[list(table.fixtures)]
    fixture_index = {fixture.name: i for i, fixture in enumerate(cell.fixtures)}
    boxes = [(i, f) for i, f in enumerate(cell.fixtures) if isinstance(f, BoxFixture)]
    cylinders = [(i, f) for i, f in enumerate(cell.fixtures) if isinstance(f, CylinderFixture)]
    box_set = _box_set(
        [f.name for _, f in boxes],
        T_world_fixture[[i for i, _ in boxes]],
        [f.size_mm for _, f in boxes],
    )
    carriage = None if cell.track is None else _carriage_box(external, cell.track.name)
    if carriage is not None:
        box_set = BoxSet(
            names=(*box_set.names, carriage[0]),
            T_world=np.concatenate([box_set.T_world, carriage[1][None]]),
            half_extents=np.concatenate([box_set.half_extents, carriage[2][None]]),
        )
    cylinder_set = CylinderSet(
        names=tuple(f.name for _, f in cylinders),
        T_world=T_world_fixture[[i for i, _ in cylinders]].reshape(-1, 4, 4),
        radius=m_from_mm([f.radius_mm for _, f in cylinders]),
        half_length=0.5 * m_from_mm([f.height_mm for _, f in cylinders]),
    )
    mesh_fixtures = [(i, f) for i, f in enumerate(cell.fixtures) if isinstance(f, MeshFixture)]
    if mesh_fixtures and mesh_loader is None:
        mesh_loader = MeshFixtureLoader(MeshCache.default())
    loaded = {} if mesh_loader is None else mesh_loader.load_cell(cell, _optional_path(cell_path))
    mesh_set = MeshSet(
        names=tuple(f.name for _, f in mesh_fixtures),
        T_world=T_world_fixture[[i for i, _ in mesh_fixtures]].reshape(-1, 4, 4),
        meshes=tuple(loaded[i] for i, _ in mesh_fixtures),
        files=tuple(f.file for _, f in mesh_fixtures),
        colours=tuple(f.colour for _, f in mesh_fixtures),
    )
    plates = _plate_cylinders(external, tuple(table.name for table in cell.turntables))
    cylinder_set = CylinderSet(
        names=(*cylinder_set.names, *plates.names),
        T_world=np.concatenate([cylinder_set.T_world, plates.T_world]),
        radius=np.concatenate([cylinder_set.radius, plates.radius]),
        half_length=np.concatenate([cylinder_set.half_length, plates.half_length]),
    )
    zones = cell.keep_outs
    keep_outs = _box_set(
        [zone.name for zone in zones],
        _pose_si(
            np.reshape([z.position_mm for z in zones], (-1, 3)),
            np.reshape([z.rpy_deg for z in zones], (-1, 3)),
        ),
        [zone.size_mm for zone in zones],
    )
    targets = _resolve_targets(cell, fixture_index, T_world_fixture)
    paths = tuple(
        _resolve_path(path, robot, T_world_base, T_flange_tool, targets, external, cell.targets)
        for path in cell.paths
    )
    return Scene(
        cell=cell,
        robot=robot,
        T_world_base=T_world_base,
        tool_name=tool_name,
        T_flange_tool=T_flange_tool,
        tool_capsules=capsules,
        fixture_names=tuple(fixture.name for fixture in cell.fixtures),
        T_world_fixture=T_world_fixture,
        boxes=box_set,
        cylinders=cylinder_set,
        meshes=mesh_set,
        keep_outs=keep_outs,
        pedestal=pedestal,
        floor_height=float(m_from_mm(cell.floor_height_mm)),
        targets=targets,
        paths=paths,
        external=external,
    )


def _moved(
    names: tuple[str, ...], T_world: FloatArray, moving: set[str], D: FloatArray
) -> FloatArray:
    rows = [i for i, name in enumerate(names) if name in moving]
    if not rows:
        return T_world
    T = T_world.copy()
    T[rows] = D @ T[rows]
    return T


def posed_scene(scene: Scene, values: npt.ArrayLike) -> Scene:
    """Return the scene with its external axes at ``values`` (m, rad; shape (m,)).

    The track moves the robot base, the pedestal and the carriage by the change
    of position along the rail; each turntable turns its fixtures and their
    targets by the change of angle (:func:`~posebridge.cell.external_axes.turntable_motion`).
    Paths keep their own waypoint values (:attr:`ResolvedPath.external`).
    A scene without external axes is returned as it is.
    """
    external = scene.external
    new = np.asarray(values, dtype=np.float64).reshape(external.count)
    if external.count == 0 or np.array_equal(new, external.values):
        return scene
    T_world_base = scene.T_world_base
    pedestal = scene.pedestal
    boxes = scene.boxes
    cylinders = scene.cylinders
    meshes = scene.meshes
    targets = scene.targets
    T_world_fixture = scene.T_world_fixture
    if external.track is not None and new[0] != external.values[0]:
        D = np.eye(4)
        D[:3, 3] = (new[0] - external.values[0]) * external.track.direction
        T_world_base = D @ T_world_base
        pedestal = replace(pedestal, T_world=D @ pedestal.T_world)
        carriage = {name for name in boxes.names if name == f"{external.names[0]} carriage"}
        boxes = replace(boxes, T_world=_moved(boxes.names, boxes.T_world, carriage, D))
    for k, table in enumerate(external.turntables):
        axis = external.table_offset + k
        if new[axis] == external.values[axis] or not table.fixtures:
            continue
        D = table.motion(new[axis] - external.values[axis])[0]
        carried = {scene.fixture_names[i] for i in table.fixtures}
        T_world_fixture = _moved(scene.fixture_names, T_world_fixture, carried, D)
        boxes = replace(boxes, T_world=_moved(boxes.names, boxes.T_world, carried, D))
        cylinders = replace(
            cylinders, T_world=_moved(cylinders.names, cylinders.T_world, carried, D)
        )
        meshes = replace(meshes, T_world=_moved(meshes.names, meshes.T_world, carried, D))
        targets = targets.moved_on(carried, D)
    return replace(
        scene,
        T_world_base=T_world_base,
        pedestal=pedestal,
        boxes=boxes,
        cylinders=cylinders,
        meshes=meshes,
        targets=targets,
        T_world_fixture=T_world_fixture,
        external=replace(external, values=new),
    )

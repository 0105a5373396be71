"""The cell file model: a robot placed among fixtures, with targets and paths.

A cell is stored as JSON (cell schema version :data:`CELL_SCHEMA_VERSION`) in user
units: millimetres and degrees, with the unit in every field name. Orientations
are roll-pitch-yaw about fixed X, then Y, then Z (``R = Rz(yaw) Ry(pitch) Rx(roll)``).

Frames
------
* ``base``: the pedestal foot is placed in the world at ``position_mm`` /
  ``rpy_deg``; the robot base frame sits ``pedestal_height_mm`` above it along
  the foot's z axis.
* Fixtures: ``position_mm`` / ``rpy_deg`` place the fixture frame in its
  parent fixture's frame (or the world when ``parent`` is omitted). A box is
  centred on its frame with ``size_mm`` along the frame's x, y, z; a cylinder
  is centred on its frame with its axis along z; a ``mesh`` fixture is a
  triangle mesh file (relative to the cell file) whose own coordinates are
  taken in the fixture frame, in the file's length ``unit``; a ``frame``
  fixture has no geometry and only groups children and targets.
* Keep-out zones: boxes placed in the world, centred on their frame.
* Targets: tool (TCP) poses in the frame of their ``fixture`` (``"world"`` for
  the world frame), so moving a fixture moves its targets. The approach pose
  backs off ``approach_offset_mm`` along the target's tool z axis.
* Path waypoints: a target (or its approach pose), an explicit tool pose in the
  world, or joint values (degrees; millimetres for prismatic joints).
* External axes (optional): a ``track`` carries the robot. Its rail frame at
  position 0 sits at ``origin_mm`` with x along ``direction`` and z up (world z
  made normal to the rail); the carriage top is ``carriage_height_mm`` above
  it, and with a track ``base`` places the pedestal foot on the carriage top,
  not in the world. At position ``s`` (mm) everything on the carriage has
  moved ``s`` along ``direction``. ``turntables`` turn their ``fixtures``
  (with the fixtures' children and targets) about the line through
  ``position_mm`` (the plate's top centre) along ``axis``; fixture poses in
  the file are at table angle 0.
* The cell's joint vector is the robot's joints, then the track, then the
  turntables in file order, named by their ``name`` (mm for the track, deg for
  a table). Values left out (a joint waypoint, a log or ``--joints`` with only
  the robot's joints) are each axis's ``home_mm`` / ``home_deg``.

Validation reports every problem with its JSON path (our own contract):
``fixtures[2].size_mm[1]: must be > 0``. Field checks come first; name and
reference checks (duplicates, unknown fixtures/targets, parent cycles) run once
every field is valid.
"""

from __future__ import annotations

import difflib
import json
from typing import Annotated, Any, Final, Literal

from pydantic import (
    BaseModel,
    BeforeValidator,
    ConfigDict,
    Field,
    ValidationError,
    model_validator,
)
from pydantic_core import PydanticCustomError

from posebridge.cell.thresholds import QualityThresholds
from posebridge.errors import InputError

__all__ = [
    "CELL_SCHEMA_VERSION",
    "EXTERNAL_AXES_KEY",
    "MAX_ANGLE_DEG",
    "MAX_COORDINATE_MM",
    "MAX_FILE_PATH_CHARS",
    "MAX_FIXTURES",
    "MAX_JOINTS",
    "MAX_KEEP_OUTS",
    "MAX_LENGTH_MM",
    "MAX_NAME_CHARS",
    "MAX_NOTES_CHARS",
    "MAX_PATHS",
    "MAX_SPEED_MM_S",
    "MAX_TARGETS",
    "MAX_TOML_CHARS",
    "MAX_TOOL_CAPSULES",
    "MAX_TURNTABLES",
    "MAX_WAYPOINTS",
    "MESH_FILE_SUFFIXES",
    "UNITS_NOTE",
    "WORLD",
    "BoxFixture",
    "Branch",
    "Cell",
    "CellBase",
    "CellFileError",
    "CellRobot",
    "CylinderFixture",
    "Fixture",
    "FrameFixture",
    "KeepOutZone",
    "MeshFixture",
    "MotionPath",
    "Pose",
    "Target",
    "Tool",
    "ToolCapsule",
    "Track",
    "Turntable",
    "Waypoint",
    "json_path",
    "json_type_name",
    "problems_from_validation_error",
    "reference_problems",
    "validate_cell",
]

CELL_SCHEMA_VERSION: Final = 1
"""The cell schema version this posebridge writes."""

UNITS_NOTE = (
    "Lengths in millimetres, angles in degrees (unit in every field name). "
    "rpy_deg is roll-pitch-yaw about fixed X, then Y, then Z: R = Rz(yaw) Ry(pitch) Rx(roll)."
)

MAX_COORDINATE_MM = 100_000.0
"""Largest absolute coordinate, offset or joint value (100 m)."""
MAX_ANGLE_DEG = 360.0
MAX_LENGTH_MM = 100_000.0
MAX_SPEED_MM_S = 10_000.0
MAX_JOINTS = 32
MAX_FIXTURES = 500
MAX_KEEP_OUTS = 500
MAX_TARGETS = 500
MAX_PATHS = 200
MAX_WAYPOINTS = 5000
MAX_TOOL_CAPSULES = 50
MAX_NAME_CHARS = 100
MAX_NOTES_CHARS = 100_000
MAX_TOML_CHARS = 1_000_000
MAX_FILE_PATH_CHARS = 4096
MAX_TURNTABLES = 8
EXTERNAL_AXES_KEY = "external_axes"
"""Target field pinning external axis values by axis name (mm for the track, deg for a table)."""

WORLD = "world"
"""Reserved fixture name of the world frame."""

_NAME_PATTERN = r"^[^\s\x00-\x1f\x7f](?:[^\x00-\x1f\x7f]*[^\s\x00-\x1f\x7f])?$"
_NAME_RULE = (
    f"must be 1 to {MAX_NAME_CHARS} characters, "
    "without control characters or leading/trailing spaces"
)
_FIXTURE_SHAPES = ("box", "cylinder", "mesh", "frame")
MESH_FILE_SUFFIXES = ("stl", "obj", "ply", "glb", "gltf", "dae", "step", "stp")
"""File name endings of mesh fixture files (any case): the formats the mesh layer reads."""
_MESH_FILE_PATTERN = r"(?i)\.(" + "|".join(MESH_FILE_SUFFIXES) + r")$"
_COLOUR_PATTERN = r"^#[0-9a-fA-F]{6}$"


class CellFileError(InputError):
    """A cell is invalid, or a cell file cannot be read.

    Attributes
    ----------
    problems : list of str
        Every finding as ``"<json path>: <message>"`` (for example
        ``"fixtures[2].size_mm[1]: must be > 0"``), or a message about the
        file as a whole.
    source : str
        File name the problems refer to, or ``""``.
    """

    def __init__(self, problems: list[str], *, source: str = "") -> None:
        self.problems = list(problems)
        self.source = source
        prefix = f"{source}: " if source else ""
        super().__init__("\n".join(prefix + problem for problem in self.problems))

    @property
    def detail(self) -> str:
        """The file name once, then the findings joined by ``"; "`` (the HTTP API's message)."""
        prefix = f"{self.source}: " if self.source else ""
        return prefix + "; ".join(self.problems)


def _problems_error(problems: list[tuple[str, str]]) -> PydanticCustomError:
    """One validation error carrying several ``(relative path, message)`` findings."""
    summary = "; ".join(f"{where}: {message}" if where else message for where, message in problems)
    return PydanticCustomError(
        "cell_problems",
        "{summary}",
        {"summary": summary, "problems": [[where, message] for where, message in problems]},
    )


def _three_values(value: Any) -> Any:
    """Refuse arrays that do not hold exactly three numbers, with one clear message."""
    if isinstance(value, list | tuple) and len(value) != 3:
        raise PydanticCustomError(
            "vector_length",
            "expected 3 numbers [x, y, z], got {count}",
            {"count": len(value)},
        )
    return value


def _finite(*, gt: float | None = None, ge: float | None = None, le: float | None = None) -> Any:
    """Return a strict, finite float field with bounds (NaN, infinities and booleans refused)."""
    return Field(strict=True, allow_inf_nan=False, gt=gt, ge=ge, le=le)


Coordinate = Annotated[float, _finite(ge=-MAX_COORDINATE_MM, le=MAX_COORDINATE_MM)]
Angle = Annotated[float, _finite(ge=-MAX_ANGLE_DEG, le=MAX_ANGLE_DEG)]
Length = Annotated[float, _finite(gt=0.0, le=MAX_LENGTH_MM)]
Distance = Annotated[float, _finite(ge=0.0, le=MAX_LENGTH_MM)]
PositionMm = Annotated[tuple[Coordinate, Coordinate, Coordinate], BeforeValidator(_three_values)]
RpyDeg = Annotated[tuple[Angle, Angle, Angle], BeforeValidator(_three_values)]
SizeMm = Annotated[tuple[Length, Length, Length], BeforeValidator(_three_values)]
Name = Annotated[
    str,
    Field(strict=True, min_length=1, max_length=MAX_NAME_CHARS, pattern=_NAME_PATTERN),
]


class _Model(BaseModel):
    model_config = ConfigDict(extra="forbid")


class Pose(_Model):
    """A pose: position in mm and fixed-axis X-Y-Z roll-pitch-yaw in degrees."""

    position_mm: PositionMm
    rpy_deg: RpyDeg = (0.0, 0.0, 0.0)


_LinkName = Annotated[str, Field(strict=True, min_length=1, max_length=MAX_NAME_CHARS)]
_FolderPath = Annotated[str, Field(strict=True, min_length=1, max_length=MAX_FILE_PATH_CHARS)]


class CellRobot(_Model):
    """Which robot: exactly one of a bundled ``name``, a ``file`` or an embedded ``toml``."""

    model_config = ConfigDict(
        extra="forbid",
        json_schema_extra={
            "oneOf": [
                {"required": [key], "properties": {key: {"not": {"type": "null"}}}}
                for key in ("name", "file", "toml")
            ]
        },
    )

    name: Name | None = Field(default=None, description="Bundled robot name, e.g. pb-arm6.")
    file: (
        Annotated[
            str,
            Field(
                strict=True,
                min_length=1,
                max_length=MAX_FILE_PATH_CHARS,
                pattern=r"(?i)\.(toml|urdf)$",
            ),
        ]
        | None
    ) = Field(default=None, description="Robot .toml or .urdf file, relative to the cell file.")
    toml: Annotated[str, Field(strict=True, min_length=1, max_length=MAX_TOML_CHARS)] | None = (
        Field(default=None, description="An embedded robot description in posebridge TOML.")
    )
    from_link: _LinkName | None = Field(
        default=None,
        description="URDF or robot overlay file: the link the chain starts at (the robot base "
        "frame); default the overlay's choice, else the root link.",
    )
    to_link: _LinkName | None = Field(
        default=None,
        description="URDF or robot overlay file: the link the chain ends at (the flange), e.g. a "
        "tool0 frame; needed when the URDF has several leaf links.",
    )
    mesh_folders: list[_FolderPath] | None = Field(
        default=None,
        max_length=16,
        description="Folders to look for mesh files in (package:// packages), relative to the "
        "cell file.",
    )

    @model_validator(mode="after")
    def _exactly_one_source(self) -> CellRobot:
        given = [key for key in ("name", "file", "toml") if getattr(self, key) is not None]
        if len(given) != 1:
            found = " and ".join(given) if given else "none"
            raise _problems_error([("", f"needs exactly one of name, file or toml, got {found}")])
        chain = [key for key in ("from_link", "to_link") if getattr(self, key) is not None]
        if chain and self.file is None:
            raise _problems_error(
                [(chain[0], "chooses the chain of a URDF or robot overlay given as robot.file")]
            )
        return self


class CellBase(_Model):
    """Robot mounting: pedestal foot pose in the world, pedestal height and radius."""

    model_config = ConfigDict(
        extra="forbid",
        json_schema_extra={
            "if": {
                "required": ["pedestal_height_mm"],
                "properties": {"pedestal_height_mm": {"exclusiveMinimum": 0}},
            },
            "then": {
                "required": ["pedestal_radius_mm"],
                "properties": {"pedestal_radius_mm": {"type": "number"}},
            },
        },
    )

    position_mm: PositionMm = (0.0, 0.0, 0.0)
    rpy_deg: RpyDeg = (0.0, 0.0, 0.0)
    pedestal_height_mm: Distance = 0.0
    pedestal_radius_mm: Length | None = None

    @model_validator(mode="after")
    def _pedestal_radius_given(self) -> CellBase:
        if self.pedestal_height_mm > 0.0 and self.pedestal_radius_mm is None:
            raise _problems_error([("pedestal_radius_mm", "required when pedestal_height_mm > 0")])
        return self


class ToolCapsule(_Model):
    """A tool collision capsule in the flange frame: points within radius of a segment."""

    name: Name
    start_mm: PositionMm
    end_mm: PositionMm
    radius_mm: Length


class Tool(_Model):
    """The mounted tool: TCP pose in the flange frame and its collision capsules."""

    name: Name
    tcp: Pose
    capsules: Annotated[list[ToolCapsule], Field(max_length=MAX_TOOL_CAPSULES)] = []


class _FixtureCommon(_Model):
    name: Name
    shape: str
    parent: Name | None = Field(
        default=None, description="Parent fixture; the pose is then relative to it."
    )
    position_mm: PositionMm
    rpy_deg: RpyDeg = (0.0, 0.0, 0.0)


class BoxFixture(_FixtureCommon):
    """A box centred on its frame, ``size_mm`` along the frame's x, y, z."""

    shape: Literal["box"]
    size_mm: SizeMm


class CylinderFixture(_FixtureCommon):
    """A cylinder centred on its frame, its axis along the frame's z."""

    shape: Literal["cylinder"]
    radius_mm: Length
    height_mm: Length


class MeshFixture(_FixtureCommon):
    """A triangle mesh from a file, its coordinates taken in the fixture frame.

    ``unit`` is the file's length unit. STL, OBJ and PLY state none: omitted,
    millimetres are assumed, and a file whose size only makes sense in another
    unit is refused with the unit to give. glTF/GLB, COLLADA and STEP state
    their own, used when ``unit`` is omitted (STEP takes no ``unit``).
    """

    shape: Literal["mesh"]
    file: Annotated[
        str,
        Field(
            strict=True, min_length=1, max_length=MAX_FILE_PATH_CHARS, pattern=_MESH_FILE_PATTERN
        ),
    ] = Field(
        description="Mesh file (STL, OBJ, PLY, glTF/GLB, COLLADA, STEP), relative to the cell file."
    )
    unit: Literal["mm", "m", "inch"] | None = Field(
        default=None,
        description="The file's length unit; omitted: the unit the file states, else mm.",
    )
    colour: Annotated[str, Field(strict=True, pattern=_COLOUR_PATTERN)] | None = Field(
        default=None, description="Drawing colour, #rrggbb; omitted: the fixture colour."
    )


class FrameFixture(_FixtureCommon):
    """A frame without geometry, for grouping fixtures and targets."""

    shape: Literal["frame"]


Fixture = Annotated[
    BoxFixture | CylinderFixture | MeshFixture | FrameFixture, Field(discriminator="shape")
]


class KeepOutZone(_Model):
    """A box in the world that tool and arm must stay out of, centred on its frame."""

    name: Name
    position_mm: PositionMm
    rpy_deg: RpyDeg = (0.0, 0.0, 0.0)
    size_mm: SizeMm


def _range_rule(name: str, low: float, high: float, home: float) -> list[tuple[str, str]]:
    problems: list[tuple[str, str]] = []
    if not low < high:
        problems.append((name, f"lower end must be below the upper end, got [{low:g}, {high:g}]"))
    elif not low <= home <= high:
        problems.append(
            ("home" + name.removeprefix("range"), f"must lie in {name} [{low:g}, {high:g}]")
        )
    return problems


def _nonzero_vector(name: str, vector: tuple[float, float, float]) -> list[tuple[str, str]]:
    if sum(v * v for v in vector) < 1e-12:
        return [(name, "must not be the zero vector")]
    return []


class Track(_Model):
    """A linear track carrying the robot: rail line, travel, limits and carriage."""

    name: Name = "track"
    origin_mm: PositionMm = Field(description="Rail frame at track position 0 (rail top).")
    direction: PositionMm = Field(
        default=(1.0, 0.0, 0.0), description="Direction of travel (normalised; not vertical)."
    )
    range_mm: Annotated[
        tuple[Coordinate, Coordinate], Field(description="Travel [lower, upper] along direction.")
    ]
    home_mm: Coordinate = Field(
        default=0.0, description="Position used where a joint vector leaves the track out."
    )
    speed_mm_s: Annotated[float, _finite(gt=0.0, le=MAX_SPEED_MM_S)]
    accel_mm_s2: Annotated[float, _finite(gt=0.0, le=100.0 * MAX_SPEED_MM_S)]
    carriage_height_mm: Distance = Field(
        default=0.0,
        description="Carriage top above the rail frame; the pedestal foot stands on it.",
    )
    carriage_size_mm: Annotated[
        tuple[Length, Length], Field(description="Carriage length along the rail and width.")
    ] = (600.0, 600.0)

    @model_validator(mode="after")
    def _consistent(self) -> Track:
        problems = _range_rule("range_mm", *self.range_mm, self.home_mm)
        problems += _nonzero_vector("direction", self.direction)
        x, y, z = self.direction
        if not problems and x * x + y * y < 1e-6 * (x * x + y * y + z * z):
            problems.append(("direction", "must not be vertical"))
        if problems:
            raise _problems_error(problems)
        return self


class Turntable(_Model):
    """A one-axis turntable turning fixtures (and their targets) about an axis."""

    name: Name
    position_mm: PositionMm = Field(description="Top centre of the plate, on the axis.")
    axis: PositionMm = Field(default=(0.0, 0.0, 1.0), description="Turning axis (normalised).")
    range_deg: tuple[Angle, Angle]
    home_deg: Angle = 0.0
    speed_deg_s: Annotated[float, _finite(gt=0.0, le=10_000.0)]
    accel_deg_s2: Annotated[float, _finite(gt=0.0, le=1_000_000.0)]
    plate_radius_mm: Length
    plate_thickness_mm: Length = 20.0
    fixtures: Annotated[list[Name], Field(max_length=MAX_FIXTURES)] = Field(
        default=[], description="Fixtures on the plate; their children and targets turn too."
    )

    @model_validator(mode="after")
    def _consistent(self) -> Turntable:
        problems = _range_rule("range_deg", *self.range_deg, self.home_deg)
        problems += _nonzero_vector("axis", self.axis)
        if problems:
            raise _problems_error(problems)
        return self


class Branch(_Model):
    """A required arm branch in plain words; an omitted part means either."""

    shoulder: Literal["front", "back"] | None = None
    elbow: Literal["up", "down"] | None = None
    wrist: Literal["positive", "negative"] | None = None


class Target(_Model):
    """A named tool pose in the frame of a fixture (or ``"world"``)."""

    name: Name
    fixture: Name = WORLD
    position_mm: PositionMm
    rpy_deg: RpyDeg = (0.0, 0.0, 0.0)
    branch: Branch | None = None
    approach_offset_mm: Distance = Field(
        default=0.0, description="Back-off distance along the target's tool z axis."
    )
    external_axes: Annotated[
        dict[Name, Annotated[float, _finite(ge=-MAX_COORDINATE_MM, le=MAX_COORDINATE_MM)]],
        Field(max_length=MAX_TURNTABLES + 1),
    ] = Field(
        default={},
        exclude_if=lambda pins: not pins,  # files without external axes stay as they were
        description="Pinned external axis values by axis name (mm track, deg table); "
        "an axis left out is chosen by the rule in the README.",
    )


def _not_null(key: str) -> dict[str, Any]:
    return {"required": [key], "properties": {key: {"not": {"type": "null"}}}}


def _speed_rule(motion: str, needed: str, refused: str) -> dict[str, Any]:
    return {
        "if": {"required": ["motion"], "properties": {"motion": {"const": motion}}},
        "then": {
            "required": [needed],
            "properties": {needed: {"type": "number"}, refused: {"type": "null"}},
        },
    }


class Waypoint(_Model):
    """One path waypoint: exactly one of ``target``, ``pose`` or ``joints_deg``.

    ``joints_deg`` holds degrees for revolute joints and millimetres for
    prismatic joints. A linear move needs ``speed_mm_s``, a joint move
    ``speed_percent`` (of the joints' velocity limits).
    """

    model_config = ConfigDict(
        extra="forbid",
        json_schema_extra={
            "oneOf": [_not_null("target"), _not_null("pose"), _not_null("joints_deg")],
            "allOf": [
                _speed_rule("linear", "speed_mm_s", "speed_percent"),
                _speed_rule("joint", "speed_percent", "speed_mm_s"),
            ],
        },
    )

    target: Name | None = None
    approach: bool = Field(
        default=False, strict=True, description="Go to the target's approach pose."
    )
    pose: Pose | None = None
    joints_deg: (
        Annotated[
            list[Annotated[float, _finite(ge=-MAX_COORDINATE_MM, le=MAX_COORDINATE_MM)]],
            Field(min_length=1, max_length=MAX_JOINTS + MAX_TURNTABLES + 1),
        ]
        | None
    ) = None
    motion: Literal["joint", "linear"]
    speed_mm_s: Annotated[float, _finite(gt=0.0, le=MAX_SPEED_MM_S)] | None = None
    speed_percent: Annotated[float, _finite(gt=0.0, le=100.0)] | None = None
    blend_mm: Distance = 0.0

    @model_validator(mode="after")
    def _consistent(self) -> Waypoint:
        problems: list[tuple[str, str]] = []
        given = [key for key in ("target", "pose", "joints_deg") if getattr(self, key) is not None]
        if len(given) != 1:
            found = " and ".join(given) if given else "none"
            problems.append(("", f"needs exactly one of target, pose or joints_deg, got {found}"))
        if self.approach and self.target is None:
            problems.append(("approach", "only allowed on a target waypoint"))
        if self.motion == "linear":
            if self.speed_mm_s is None:
                problems.append(("speed_mm_s", "required for a linear move"))
            if self.speed_percent is not None:
                problems.append(("speed_percent", "not allowed for a linear move (use speed_mm_s)"))
        else:
            if self.speed_percent is None:
                problems.append(("speed_percent", "required for a joint move"))
            if self.speed_mm_s is not None:
                problems.append(("speed_mm_s", "not allowed for a joint move (use speed_percent)"))
        if problems:
            raise _problems_error(problems)
        return self


class MotionPath(_Model):
    """A named, ordered list of waypoints."""

    name: Name
    waypoints: Annotated[list[Waypoint], Field(max_length=MAX_WAYPOINTS)] = []


class Cell(_Model):
    """A work cell: robot, mounting, tool, fixtures, keep-out zones, targets, paths."""

    model_config = ConfigDict(extra="forbid", title="posebridge cell")

    schema_version: Literal[1] = CELL_SCHEMA_VERSION
    units: Annotated[str, Field(strict=True, max_length=1000)] = UNITS_NOTE
    title: Annotated[str, Field(strict=True, max_length=200)] = ""
    robot: CellRobot
    base: CellBase = Field(default_factory=CellBase)
    tool: Tool | None = Field(default=None, description="Omitted: the robot's default tool.")
    floor_height_mm: Coordinate = 0.0
    track: Track | None = Field(default=None, description="Linear track under the robot.")
    turntables: Annotated[list[Turntable], Field(max_length=MAX_TURNTABLES)] = Field(
        default=[], exclude_if=lambda tables: not tables
    )
    fixtures: Annotated[list[Fixture], Field(max_length=MAX_FIXTURES)] = []
    keep_outs: Annotated[list[KeepOutZone], Field(max_length=MAX_KEEP_OUTS)] = []
    targets: Annotated[list[Target], Field(max_length=MAX_TARGETS)] = []
    paths: Annotated[list[MotionPath], Field(max_length=MAX_PATHS)] = []
    thresholds: QualityThresholds = Field(
        default_factory=QualityThresholds,
        description="Warning thresholds of every check of this cell (target check, diagnosis, "
        "path check, plan, report, page); omitted fields take the documented defaults.",
    )
    notes: Annotated[str, Field(strict=True, max_length=MAX_NOTES_CHARS)] = ""

    @model_validator(mode="after")
    def _names_and_references(self) -> Cell:
        problems = reference_problems(self)
        if problems:
            raise _problems_error(problems)
        return self


def _unknown(kind: str, name: str, known: list[str]) -> str:
    close = difflib.get_close_matches(name, known, n=1)
    hint = f" (did you mean {close[0]!r}?)" if close else ""
    return f"unknown {kind} {name!r}{hint}"


def _duplicates(where: str, names: list[str]) -> list[tuple[str, str]]:
    """Second and later uses of a name in the list at JSON path ``where``."""
    first: dict[str, int] = {}
    found = []
    for index, name in enumerate(names):
        if name in first:
            found.append(
                (f"{where}[{index}].name", f"duplicate name {name!r} (also {where}[{first[name]}])")
            )
        else:
            first[name] = index
    return found


def _parent_cycles(cell: Cell) -> list[tuple[str, str]]:
    """Cycles in the fixtures' parent chains, each reported once at its first fixture."""
    index_of = {fixture.name: i for i, fixture in enumerate(cell.fixtures)}
    reported: set[int] = set()
    found = []
    for start in range(len(cell.fixtures)):
        chain = [start]
        current = start
        while True:
            parent = cell.fixtures[current].parent
            if parent is None or parent not in index_of:
                break
            current = index_of[parent]
            if current in chain:
                cycle = chain[chain.index(current) :]
                if not reported.intersection(cycle):
                    reported.update(cycle)
                    first = min(cycle)
                    rotated = cycle[cycle.index(first) :] + cycle[: cycle.index(first)]
                    names = [cell.fixtures[i].name for i in [*rotated, first]]
                    found.append(
                        (
                            f"fixtures[{first}].parent",
                            "parent chain is a cycle: " + " -> ".join(names),
                        )
                    )
                break
            chain.append(current)
    return found


def _tables_crossed(cell: Cell, listed: dict[str, int]) -> list[tuple[str, str]]:
    """Fixtures listed on a turntable whose parent chain reaches one listed on another.

    A table turns its listed fixtures and their children, so such a fixture would turn with
    both tables; ``listed`` maps each listed fixture to the first table listing it. Reported
    at the lower fixture's listing.
    """
    parent_of = {fixture.name: fixture.parent for fixture in cell.fixtures}
    found = []
    for t, table in enumerate(cell.turntables):
        for f, name in enumerate(table.fixtures):
            if listed.get(name) != t:
                continue  # unknown, or listed twice (reported as such)
            seen = {name}
            above = parent_of.get(name)
            while above is not None and above not in seen:  # a cycle is reported elsewhere
                other = listed.get(above)
                if other is not None and other != t:
                    found.append(
                        (
                            f"turntables[{t}].fixtures[{f}]",
                            f"fixture {name!r} is already on turntable {other}: its parent "
                            f"chain reaches {above!r}, listed there (a fixture turns with one "
                            "table only)",
                        )
                    )
                    break
                seen.add(above)
                above = parent_of.get(above)
    return found


def reference_problems(cell: Cell) -> list[tuple[str, str]]:
    """Name and reference findings of a field-valid cell, as ``(json path, message)``.

    Names are unique within their kind; ``"world"`` is reserved; fixture
    parents, target fixtures and waypoint targets must exist; parent chains
    must not form cycles; a fixture rides one turntable at most (listed once,
    and no parent chain from one table's fixture to another's); an
    ``approach`` waypoint needs a target with an approach offset.
    """
    problems: list[tuple[str, str]] = []
    fixture_names = [fixture.name for fixture in cell.fixtures]
    target_names = [target.name for target in cell.targets]
    problems += _duplicates("fixtures", fixture_names)
    problems += _duplicates("keep_outs", [zone.name for zone in cell.keep_outs])
    problems += _duplicates("targets", target_names)
    problems += _duplicates("paths", [path.name for path in cell.paths])
    if cell.tool is not None:
        problems += _duplicates("tool.capsules", [c.name for c in cell.tool.capsules])
    known_fixtures = set(fixture_names)
    axis_names = ([cell.track.name] if cell.track is not None else []) + [
        table.name for table in cell.turntables
    ]
    problems += _duplicates("turntables", [table.name for table in cell.turntables])
    if cell.track is not None and cell.track.name in axis_names[1:]:
        problems.append(("track.name", f"{cell.track.name!r} is also a turntable's name"))
    carried: dict[str, int] = {}
    for t, table in enumerate(cell.turntables):
        for f, name in enumerate(table.fixtures):
            where = f"turntables[{t}].fixtures[{f}]"
            if name not in known_fixtures:
                problems.append((where, _unknown("fixture", name, fixture_names)))
            elif name in carried:
                problems.append(
                    (where, f"fixture {name!r} is already on turntable {carried[name]}")
                )
            else:
                carried[name] = t
    problems += _tables_crossed(cell, carried)
    for i, fixture in enumerate(cell.fixtures):
        if fixture.name == WORLD:
            problems.append((f"fixtures[{i}].name", f"{WORLD!r} is reserved for the world frame"))
        if fixture.parent is not None and fixture.parent not in known_fixtures:
            problems.append(
                (f"fixtures[{i}].parent", _unknown("fixture", fixture.parent, fixture_names))
            )
    problems += _parent_cycles(cell)
    for i, target in enumerate(cell.targets):
        if target.fixture != WORLD and target.fixture not in known_fixtures:
            problems.append(
                (f"targets[{i}].fixture", _unknown("fixture", target.fixture, fixture_names))
            )
        for axis, value in target.external_axes.items():
            where = f"targets[{i}].external_axes.{axis}"
            if axis not in axis_names:
                problems.append((where, _unknown("external axis", axis, axis_names)))
                continue
            low, high = (
                cell.track.range_mm
                if cell.track is not None and axis == cell.track.name
                else next(t.range_deg for t in cell.turntables if t.name == axis)
            )
            if not low <= value <= high:
                problems.append((where, f"must lie in the axis range [{low:g}, {high:g}]"))
    targets = {target.name: target for target in cell.targets}
    for p, path in enumerate(cell.paths):
        for w, waypoint in enumerate(path.waypoints):
            where = f"paths[{p}].waypoints[{w}]"
            if waypoint.target is None:
                continue
            referenced = targets.get(waypoint.target)
            if referenced is None:
                problems.append(
                    (f"{where}.target", _unknown("target", waypoint.target, target_names))
                )
            elif waypoint.approach and referenced.approach_offset_mm == 0.0:
                problems.append(
                    (
                        f"{where}.approach",
                        f"target {referenced.name!r} has no approach_offset_mm to back off by",
                    )
                )
    return problems


def json_path(loc: tuple[int | str, ...]) -> str:
    """Return the JSON path of a pydantic error location.

    ``("fixtures", 2, "size_mm", 1)`` -> ``fixtures[2].size_mm[1]``; the top level is ``"cell"``.

    The tag segments pydantic inserts for the fixture shapes are dropped, so
    paths match the file.
    """
    parts: list[str] = []
    previous: int | str | None = None
    for item in loc:
        if isinstance(item, int):
            parts.append(f"[{item}]")
        elif not (isinstance(previous, int) and item in _FIXTURE_SHAPES):
            parts.append(("." if parts else "") + item)
        previous = item
    return "".join(parts) or "cell"


def json_type_name(value: Any) -> str:
    """JSON type name of a Python value parsed from JSON."""
    if value is None:
        return "null"
    if isinstance(value, bool):
        return "boolean"
    if isinstance(value, int | float):
        return "number"
    if isinstance(value, str):
        return "string"
    if isinstance(value, list | tuple):
        return "array"
    if isinstance(value, dict):
        return "object"
    return type(value).__name__


def _show(value: Any) -> str:
    """Show a JSON value as written in messages: strings quoted like names, else JSON."""
    return repr(value) if isinstance(value, str) else json.dumps(value)


def _number(value: Any) -> str:
    return f"{float(value):g}"


def _message(error: Any) -> tuple[str, str]:
    """Our wording of one pydantic error: ``(extra path suffix, message)``."""
    kind = error["type"]
    ctx = error.get("ctx") or {}
    value = error.get("input")
    if kind == "missing":
        return "", "required field missing"
    if kind == "extra_forbidden":
        return "", "unknown field"
    if kind in ("greater_than", "greater_than_equal", "less_than", "less_than_equal"):
        symbol, key = {
            "greater_than": (">", "gt"),
            "greater_than_equal": (">=", "ge"),
            "less_than": ("<", "lt"),
            "less_than_equal": ("<=", "le"),
        }[kind]
        return "", f"must be {symbol} {_number(ctx[key])}"
    if kind == "finite_number":
        return "", f"must be a finite number, got {value}"
    if kind in ("float_type", "float_parsing", "int_type", "int_parsing"):
        return "", f"expected a number, got {json_type_name(value)}"
    if kind in ("string_type", "bool_type"):
        wanted = "a string" if kind == "string_type" else "true or false"
        return "", f"expected {wanted}, got {json_type_name(value)}"
    if kind in ("list_type", "tuple_type"):
        return "", f"expected an array, got {json_type_name(value)}"
    if kind in ("model_type", "model_attributes_type", "dict_type"):
        return "", f"expected an object, got {json_type_name(value)}"
    if kind == "string_pattern_mismatch" and ctx.get("pattern") == _NAME_PATTERN:
        return "", _NAME_RULE
    if kind == "string_pattern_mismatch" and ctx.get("pattern") == _MESH_FILE_PATTERN:
        return "", "must end in " + ", ".join(f".{suffix}" for suffix in MESH_FILE_SUFFIXES)
    if kind == "string_pattern_mismatch" and ctx.get("pattern") == _COLOUR_PATTERN:
        return "", f"expected a colour #rrggbb, got {_show(value)}"
    if kind == "string_pattern_mismatch":
        return "", "must end in .toml or .urdf"
    if kind == "string_too_short":
        return "", "must not be empty"
    if kind == "string_too_long":
        return "", f"at most {ctx['max_length']} characters allowed"
    if kind == "too_short":
        minimum = ctx["min_length"]
        plural = "" if minimum == 1 else "s"
        return "", f"expected at least {minimum} item{plural}, got {ctx['actual_length']}"
    if kind == "too_long":
        return "", f"at most {ctx['max_length']} items allowed, got {ctx['actual_length']}"
    if kind == "literal_error":
        return "", f"expected {ctx['expected']}, got {_show(value)}"
    if kind == "union_tag_invalid":
        return ".shape", f"expected {_FIXTURE_CHOICES}, got {_show(ctx['tag'])}"
    if kind == "union_tag_not_found":
        return ".shape", f"required field missing ({_FIXTURE_CHOICES})"
    return "", str(error["msg"])


_FIXTURE_CHOICES = "'box', 'cylinder', 'mesh' or 'frame'"


def problems_from_validation_error(error: ValidationError) -> list[str]:
    """Every problem of a pydantic ValidationError as ``"<json path>: <message>"``."""
    problems = []
    for item in error.errors():
        base = json_path(tuple(item["loc"]))
        if item["type"] == "cell_problems":
            for where, message in item["ctx"]["problems"]:
                if not where:
                    path = base
                elif base == "cell":
                    path = where
                else:
                    path = f"{base}.{where}"
                problems.append(f"{path}: {message}")
            continue
        suffix, message = _message(item)
        problems.append(f"{base}{suffix}: {message}")
    return problems


def validate_cell(data: Any, *, source: str = "") -> Cell:
    """Validate parsed JSON data (schema version 1) into a :class:`Cell`.

    Raises
    ------
    CellFileError
        Listing every problem with its JSON path.
    """
    try:
        return Cell.model_validate(data)
    except ValidationError as error:
        raise CellFileError(problems_from_validation_error(error), source=source) from error

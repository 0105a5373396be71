"""The server's cell: read it, replace it, move a target, fixture, pose waypoint, turntable, track or the base.

Draw a mesh fixture, upload a mesh file as a new fixture.

Every change carries the content version it was made from in the
``If-Match`` header (the ``etag`` of the last answer); a change made from an
older version gets 412 and changes nothing, so edits from two pages never
overwrite each other silently. A missing ``If-Match`` gets 428.
"""

from __future__ import annotations

import base64
import binascii
import contextlib
import hashlib
import os
import re
import tempfile
from collections.abc import Callable
from pathlib import Path as FilePath
from typing import Annotated

import numpy as np
from fastapi import APIRouter, Header, HTTPException, Path, Query, Response

from posebridge.api.auth import ReviewRoleDep, Role
from posebridge.api.cell_store import CellSnapshot
from posebridge.api.compute_context import cell_robot_spec
from posebridge.api.deps import CellsDep, RobotsDep
from posebridge.api.json_body import StrictJsonRoute
from posebridge.api.robot_cache import RobotCache
from posebridge.api.schemas.cells import (
    BaseEdit,
    CellDocument,
    ChainChoice,
    ChainEndEdit,
    FixtureEdit,
    TargetEdit,
    TrackEdit,
    TurntableEdit,
    WaypointEdit,
    WaypointJointsEdit,
    cell_document,
)
from posebridge.api.schemas.errors import error_responses
from posebridge.api.schemas.meshes import MAX_UPLOAD_BYTES, MeshDrawing, MeshUpload
from posebridge.cell.files import CellConflictError, CellSaveError, SaveFailure
from posebridge.cell.model import MAX_WAYPOINTS, Cell, Fixture, MeshFixture, Pose, Target
from posebridge.cell.scene import Scene
from posebridge.cell.track_move import cell_with_track_moved
from posebridge.cell.turntable_move import cell_with_turntable_at
from posebridge.geometry.mesh_display import decimate_for_display, split_triangle_budget
from posebridge.planning.sequence_report import with_waypoint_joints
from posebridge.results.sequence import WaypointJoints
from posebridge.transforms import (
    invert_transform,
    rotation_matrix_from_rpy,
    rpy_from_rotation_matrix,
    transform_points,
)
from posebridge.units import FloatArray, m_from_mm, mm_from_m

__all__ = ["MESH_FOLDER", "PAGE_MESH_TRIANGLES", "cell_robot_spec", "index_of_named", "router"]

PAGE_MESH_TRIANGLES = 60_000
"""Triangles the page draws for all mesh fixtures together (shared by size)."""
MESH_FOLDER = "meshes"
"""Folder next to the cell file that uploaded mesh files are stored in."""

router = APIRouter(prefix="/api/cell", tags=["cell"], route_class=StrictJsonRoute)

IfMatch = Annotated[
    str,
    Header(
        min_length=1,
        max_length=200,
        description="Required: the etag of the cell version the change was made from (quotes "
        "optional). Missing: 428; another version than the cell's current one: 412.",
    ),
]
Name = Annotated[str, Path(min_length=1, max_length=100)]
WaypointIndex = Annotated[
    int, Path(ge=0, le=MAX_WAYPOINTS, description="Waypoint position in the path, from 0.")
]

_SAVE_ERRORS = (409, 412, 422, 428, 503, 507)
_CHANGE_ERRORS = error_responses(404, *_SAVE_ERRORS)


def _answer(
    snapshot: CellSnapshot, robots: RobotCache, response: Response, role: Role
) -> CellDocument:
    response.headers["ETag"] = f'"{snapshot.etag}"'
    return cell_document(snapshot, cell_robot_spec(snapshot, robots), owner=role == "owner")


def _expected_etag(if_match: str) -> str:
    """Return the content version an ``If-Match`` value names (quotes and ``W/`` dropped).

    A missing header is 428 before this (posebridge.api.errors), a blank one names no version and
    gets 412.
    """
    value = if_match.strip()
    if value.startswith("W/"):
        value = value[2:]
    return value.strip('"')


def _conflict(error: CellConflictError) -> HTTPException:
    now = (
        "it can no longer be read"
        if error.actual_etag is None
        else f"it is now at version {error.actual_etag}"
    )
    return HTTPException(
        status_code=412,
        detail=f"If-Match: the cell was changed elsewhere since version {error.expected_etag} "
        f"was read ({now}); reload the cell and apply the edit again",
    )


_SAVE_STATUS: dict[SaveFailure, int] = {
    "no-space": 507,
    "read-only-file-system": 503,
    "folder-not-writable": 409,
    "file-read-only": 409,
    "io": 503,
}
"""HTTP status of each kind of failed save: 507 Insufficient Storage (RFC 4918 sec. 11.5),
409 where the user must change a permission, 503 where the storage cannot take writes."""


def _saved(
    save: Callable[[], CellSnapshot], robots: RobotCache, response: Response
) -> CellDocument:
    """Run ``save`` (a version-checked change of the cell store) and answer with the saved cell.

    412 when the cell has another content version now; 409, 503 or 507 naming the file when it
    cannot be written (:data:`_SAVE_STATUS`), nothing changed.
    """
    try:
        snapshot = save()
    except CellConflictError as error:
        raise _conflict(error) from error
    except CellSaveError as error:
        raise HTTPException(status_code=_SAVE_STATUS[error.failure], detail=str(error)) from error
    return _answer(snapshot, robots, response, "owner")  # only the owner changes the cell


@router.get("", summary="Read the cell", responses=error_responses(422))
def read_cell(
    cells: CellsDep, robots: RobotsDep, response: Response, role: ReviewRoleDep
) -> CellDocument:
    """Return the cell file content, its content version (also the ETag header) and its drawing."""
    return _answer(cells.read(), robots, response, role)


@router.get(
    "/chain-choice",
    summary="The chain ends to choose from when the cell's URDF robot needs one",
    responses=error_responses(404, 422),
)
def read_chain_choice(cells: CellsDep) -> ChainChoice:
    """List the leaf links to choose from when the cell's robot cannot load without one.

    When the cell's URDF robot has several leaf links and no ``to_link``: the leaf links and
    the file's content version; 404 when the cell loads (choose the chain in the cell panel).
    """
    found = cells.chain_choice()
    if found is None:
        raise HTTPException(status_code=404, detail="chain-choice: the cell's robot loads as it is")
    written, etag, error = found
    return ChainChoice(
        etag=etag,
        robot_file=written.robot.file or "",
        from_link=written.robot.from_link,
        leaves=list(error.leaves),
        detail=error.detail,
    )


@router.put(
    "/chain-choice",
    summary="Choose the end of the cell robot's chain",
    responses=error_responses(*_SAVE_ERRORS),
)
def choose_chain_end(
    body: ChainEndEdit, cells: CellsDep, robots: RobotsDep, response: Response, if_match: IfMatch
) -> CellDocument:
    """Save ``to_link`` into the cell file's robot entry and answer with the loaded cell.

    If-Match: the etag of ``GET /api/cell/chain-choice``.
    """
    expected = _expected_etag(if_match)
    return _saved(lambda: cells.choose_chain_end(body.to_link, expected), robots, response)


@router.put("", summary="Replace the cell", responses=error_responses(*_SAVE_ERRORS))
def replace_cell(
    cell: Cell, cells: CellsDep, robots: RobotsDep, response: Response, if_match: IfMatch
) -> CellDocument:
    """Replace the whole cell; saved atomically with a .bak of the previous file."""
    expected = _expected_etag(if_match)
    return _saved(lambda: cells.replace(cell, expected), robots, response)


def _moved(position_mm: list[float] | None, rpy_deg: list[float] | None) -> dict[str, object]:
    """Return the pose fields an edit changes, as the cell model stores them."""
    update: dict[str, object] = {}
    if position_mm is not None:
        update["position_mm"] = tuple(position_mm)
    if rpy_deg is not None:
        update["rpy_deg"] = tuple(rpy_deg)
    return update


def _pose_in_frame(
    T_world_frame: FloatArray, position_mm: list[float] | None, rpy_deg: list[float] | None
) -> dict[str, object]:
    """Return a pose edit given in the world as the fields stored in frame ``T_world_frame``.

    ``T_world_frame`` has shape (4, 4): ``T_frame_pose = inv(T_world_frame) T_world_pose`` (Lynch &
    Park, Modern Robotics, sec. 3.3.1). Position and orientation convert separately, so a field not
    given keeps its stored value (the frame itself does not move).
    """
    T_frame_world = invert_transform(T_world_frame)
    update: dict[str, object] = {}
    if position_mm is not None:
        local = transform_points(T_frame_world, m_from_mm(position_mm))
        update["position_mm"] = tuple(float(v) for v in mm_from_m(local))
    if rpy_deg is not None:
        R_local = T_frame_world[:3, :3] @ rotation_matrix_from_rpy(rpy_deg, degrees=True)
        update["rpy_deg"] = tuple(float(v) for v in rpy_from_rotation_matrix(R_local, degrees=True))
    return update


def _target_in_fixture(scene: Scene, target: Target, edit: TargetEdit) -> dict[str, object]:
    """Return the edited target pose as stored: in its fixture's frame."""
    if edit.frame == "fixture" or target.fixture == "world":
        return _moved(edit.position_mm, edit.rpy_deg)
    T_world_fixture = scene.T_world_fixture[scene.fixture_names.index(target.fixture)]
    return _pose_in_frame(T_world_fixture, edit.position_mm, edit.rpy_deg)


def _fixture_in_parent(scene: Scene, fixture: Fixture, edit: FixtureEdit) -> dict[str, object]:
    """Return the edited fixture pose as stored: in its parent's frame (the world without one)."""
    if edit.frame == "parent" or fixture.parent is None:
        return _moved(edit.position_mm, edit.rpy_deg)
    T_world_parent = scene.T_world_fixture[scene.fixture_names.index(fixture.parent)]
    return _pose_in_frame(T_world_parent, edit.position_mm, edit.rpy_deg)


def index_of_named(kind: str, names: list[str], name: str) -> int:
    """Return the index of ``name`` in ``names``; 404 when the cell has none of that name.

    ``names`` are the names of the cell's items of one ``kind`` (target, fixture, path).
    """
    if name not in names:
        raise HTTPException(status_code=404, detail=f"{kind}: no {kind} named {name!r} in the cell")
    return names.index(name)


@router.patch("/targets/{name}", summary="Move a target", responses=_CHANGE_ERRORS)
def move_target(
    name: Name,
    edit: TargetEdit,
    cells: CellsDep,
    robots: RobotsDep,
    response: Response,
    if_match: IfMatch,
) -> CellDocument:
    """Set a new tool pose of one target, given in the world (default) or in its fixture's frame."""
    expected = _expected_etag(if_match)
    current = cells.read()
    index = index_of_named("target", [target.name for target in current.cell.targets], name)
    update = _target_in_fixture(current.scene, current.cell.targets[index], edit)

    def change(cell: Cell) -> Cell:
        targets = list(cell.targets)
        targets[index] = targets[index].model_copy(update=update)
        return cell.model_copy(update={"targets": targets})

    return _saved(lambda: cells.edit(change, expected), robots, response)


@router.patch("/fixtures/{name}", summary="Move a fixture", responses=_CHANGE_ERRORS)
def move_fixture(
    name: Name,
    edit: FixtureEdit,
    cells: CellsDep,
    robots: RobotsDep,
    response: Response,
    if_match: IfMatch,
) -> CellDocument:
    """Set a new pose of one fixture in its parent's frame or in the world.

    Without a parent the parent's frame is the world; its children and targets move with it.
    """
    expected = _expected_etag(if_match)
    current = cells.read()
    index = index_of_named("fixture", [fixture.name for fixture in current.cell.fixtures], name)
    update = _fixture_in_parent(current.scene, current.cell.fixtures[index], edit)

    def change(cell: Cell) -> Cell:
        fixtures = list(cell.fixtures)
        fixtures[index] = fixtures[index].model_copy(update=update)
        return cell.model_copy(update={"fixtures": fixtures})

    return _saved(lambda: cells.edit(change, expected), robots, response)


@router.patch("/turntables/{name}", summary="Move a turntable", responses=_CHANGE_ERRORS)
def move_turntable(
    name: Name,
    edit: TurntableEdit,
    cells: CellsDep,
    robots: RobotsDep,
    response: Response,
    if_match: IfMatch,
) -> CellDocument:
    """Set a new axis point of one turntable; what it carries moves by the same step.

    Its fixtures (the listed ones and their children) and their targets move rigidly with it,
    a fixture whose parent stays behind by the step in that parent's frame: the edit a table
    placement candidate (``table.position_mm``) was scored at.
    """
    expected = _expected_etag(if_match)
    current = cells.read()
    index_of_named("turntable", [table.name for table in current.cell.turntables], name)
    # made from the version read; another version than If-Match's is 412 before it is kept
    edited = cell_with_turntable_at(current.scene, name, edit.position_mm)
    return _saved(lambda: cells.edit(lambda _: edited, expected), robots, response)


@router.patch("/track", summary="Move the track's rail or carriage", responses=_CHANGE_ERRORS)
def move_track(
    edit: TrackEdit, cells: CellsDep, robots: RobotsDep, response: Response, if_match: IfMatch
) -> CellDocument:
    """Set the rail frame, widen the travel or set the home position of the cell's track.

    A rail placement candidate sends ``origin_mm``, ``direction`` and ``travel_needed_mm`` (the
    server widens ``range_mm`` to hold the configured travel and the needed one, in whole
    millimetres); a carriage drag sends ``home_mm``. The robot on the carriage rides with the
    rail. 404 when the cell has no track.
    """
    expected = _expected_etag(if_match)

    def change(cell: Cell) -> Cell:
        # looked up in the version the edit was made from (a stale version is 412 first)
        if cell.track is None:
            raise HTTPException(status_code=404, detail="track: the cell has no track")
        return cell_with_track_moved(
            cell,
            origin_mm=edit.origin_mm,
            direction=edit.direction,
            travel_needed_mm=edit.travel_needed_mm,
            home_mm=edit.home_mm,
        )

    return _saved(lambda: cells.edit(change, expected), robots, response)


def _pose_waypoint_index(cell: Cell, name: str, index: int) -> tuple[int, int]:
    """Return the indices of path ``name`` and of its pose waypoint ``index``.

    404 for an unknown path or index, 422 for a target or joint-values waypoint.
    """
    p = index_of_named("path", [path.name for path in cell.paths], name)
    waypoints = cell.paths[p].waypoints
    if index >= len(waypoints):
        raise HTTPException(
            status_code=404,
            detail=f"waypoint: path {name!r} has no waypoint {index} "
            f"(it has {len(waypoints)}, numbered from 0)",
        )
    waypoint = waypoints[index]
    where = f"waypoint {index} of path {name!r}"
    if waypoint.target is not None:
        kind = "the approach pose of target" if waypoint.approach else "target"
        raise HTTPException(
            status_code=422,
            detail=f"waypoint: {where} is {kind} {waypoint.target!r}, not a pose; move the "
            f"target instead (PATCH /api/cell/targets/{waypoint.target})",
        )
    if waypoint.joints_deg is not None:
        raise HTTPException(
            status_code=422,
            detail=f"waypoint: {where} is given as joint values, not a pose; edit its "
            "joints_deg instead (PUT /api/cell)",
        )
    return p, index


@router.patch(
    "/paths/{name}/waypoints/{index}", summary="Move a pose waypoint", responses=_CHANGE_ERRORS
)
def move_waypoint(
    name: Name,
    index: WaypointIndex,
    edit: WaypointEdit,
    cells: CellsDep,
    robots: RobotsDep,
    response: Response,
    if_match: IfMatch,
) -> CellDocument:
    """Set a new tool pose in the world of a path waypoint given as a pose.

    Target waypoints move with their target, joint-values waypoints are edited in the cell file.
    """
    expected = _expected_etag(if_match)
    pose = Pose.model_validate(edit.model_dump())

    def change(cell: Cell) -> Cell:
        # looked up in the version the edit was made from (a stale version is 412 first)
        p, w = _pose_waypoint_index(cell, name, index)
        waypoints = list(cell.paths[p].waypoints)
        waypoints[w] = waypoints[w].model_copy(update={"pose": pose})
        paths = list(cell.paths)
        paths[p] = paths[p].model_copy(update={"waypoints": waypoints})
        return cell.model_copy(update={"paths": paths})

    return _saved(lambda: cells.edit(change, expected), robots, response)


@router.patch(
    "/paths/{name}/waypoints",
    summary="Give waypoints as joint values",
    responses=_CHANGE_ERRORS,
)
def set_waypoint_joints(
    name: Name,
    edit: WaypointJointsEdit,
    cells: CellsDep,
    robots: RobotsDep,
    response: Response,
    if_match: IfMatch,
) -> CellDocument:
    """Write joint values into waypoints of a path (e.g. the ``edits`` of the fastest sequence).

    Each keeps its motion, speed and blend and becomes a joint-values waypoint.
    """
    expected = _expected_etag(if_match)
    edits = [WaypointJoints(index=e.index, joints_deg=e.joints_deg) for e in edit.edits]
    # read before the edit (which holds the store's lock); a robot changed since is a new
    # content version, refused by the edit (412)
    dof = cells.read().scene.robot.dof

    def change(cell: Cell) -> Cell:
        p = index_of_named("path", [path.name for path in cell.paths], name)
        count = len(cell.paths[p].waypoints)
        for e in edits:
            if e.index >= count:
                raise HTTPException(
                    status_code=404,
                    detail=f"waypoint: path {name!r} has no waypoint {e.index} "
                    f"(it has {count}, numbered from 0)",
                )
            if len(e.joints_deg) != dof:
                raise HTTPException(
                    status_code=422,
                    detail=f"edits: waypoint {e.index}: expected {dof} joint values, "
                    f"got {len(e.joints_deg)}",
                )
        return with_waypoint_joints(cell, p, edits)

    return _saved(lambda: cells.edit(change, expected), robots, response)


@router.patch("/base", summary="Move the robot base", responses=error_responses(*_SAVE_ERRORS))
def move_base(
    edit: BaseEdit, cells: CellsDep, robots: RobotsDep, response: Response, if_match: IfMatch
) -> CellDocument:
    """Set a new pedestal foot pose in the world (and pedestal height); the robot moves with it."""
    expected = _expected_etag(if_match)
    update = _moved(edit.position_mm, edit.rpy_deg)
    if edit.pedestal_height_mm is not None:
        update["pedestal_height_mm"] = edit.pedestal_height_mm

    def change(cell: Cell) -> Cell:
        return cell.model_copy(update={"base": cell.base.model_copy(update=update)})

    return _saved(lambda: cells.edit(change, expected), robots, response)


@router.get(
    "/meshes/{name}", summary="Triangles of a mesh fixture", responses=error_responses(404, 422)
)
def mesh_drawing(
    name: Name,
    cells: CellsDep,
    max_triangles: Annotated[
        int | None,
        Query(
            ge=100,
            le=500_000,
            description="Triangle budget; omitted: this mesh's share of "
            f"{PAGE_MESH_TRIANGLES:,} among the cell's meshes.",
        ),
    ] = None,
) -> MeshDrawing:
    """Return the mesh of one mesh fixture, decimated for drawing, in its own frame (mm)."""
    snapshot = cells.read()
    meshes = snapshot.scene.meshes
    index = index_of_named("mesh fixture", list(meshes.names), name)
    mesh = meshes.meshes[index]
    if max_triangles is None:
        counts = [m.triangle_count for m in meshes.meshes]
        max_triangles = split_triangle_budget(counts, PAGE_MESH_TRIANGLES)[index]
    display = decimate_for_display(mesh, max_triangles=max_triangles, cache=cells.mesh_loader.cache)
    return MeshDrawing(
        name=name,
        mesh_version=mesh.content_key[:32],
        source_triangles=mesh.triangle_count,
        vertices_mm=np.round(mm_from_m(display.vertices_m), 3).tolist(),
        faces=display.faces.tolist(),
    )


def _safe_stem(file_name: str) -> str:
    """Return the file name's stem reduced to letters, digits, ``-`` and ``_`` (at most 60)."""
    stem = re.sub(r"[^A-Za-z0-9_-]+", "-", FilePath(file_name).stem).strip("-_")
    return stem[:60] or "mesh"


def _store_mesh_file(folder: FilePath, name: str, data: bytes) -> bool:
    """Write ``data`` to ``folder/name`` atomically unless that file exists already.

    Temporary file, fsync, rename, folder fsync; returns whether this call wrote it.
    """
    target = folder / name
    folder.mkdir(parents=True, exist_ok=True)
    if target.exists():
        return False
    handle, temporary = tempfile.mkstemp(dir=folder, prefix=".upload-", suffix=".tmp")
    try:
        with os.fdopen(handle, "wb") as stream:
            stream.write(data)
            stream.flush()
            os.fsync(stream.fileno())
        os.replace(temporary, target)
    finally:
        FilePath(temporary).unlink(missing_ok=True)
    with contextlib.suppress(OSError):
        descriptor = os.open(folder, os.O_RDONLY)
        try:
            os.fsync(descriptor)
        finally:
            os.close(descriptor)
    return True


def _unique_name(stem: str, taken: set[str]) -> str:
    if stem not in taken and stem != "world":
        return stem
    count = 2
    while f"{stem}-{count}" in taken:
        count += 1
    return f"{stem}-{count}"


@router.post(
    "/meshes",
    summary="Upload a mesh file as a new fixture",
    status_code=201,
    responses=error_responses(409, 412, 413, 422, 428, 503, 507),
)
def upload_mesh(
    upload: MeshUpload,
    cells: CellsDep,
    robots: RobotsDep,
    response: Response,
    if_match: IfMatch,
) -> CellDocument:
    """Upload a mesh file and add it to the cell as a mesh fixture.

    The file is stored next to the cell file (``meshes/<name>-<content hash>.<ending>``, written
    atomically, never overwritten) and checked (format, caps, unit); the fixture's bounding box's
    bottom centre is at ``position_mm``, saved like every edit (If-Match). Reviewers cannot upload
    (403).
    """
    expected = _expected_etag(if_match)
    if cells.path is None:
        raise HTTPException(
            status_code=409, detail="cell: the in-memory demo cell has no folder for mesh files"
        )
    try:
        data = base64.b64decode(upload.data_base64, validate=True)
    except (binascii.Error, ValueError) as error:
        raise HTTPException(
            status_code=422, detail=f"data_base64: not valid base64 ({error})"
        ) from error
    if len(data) > MAX_UPLOAD_BYTES:
        raise HTTPException(
            status_code=413,
            detail=f"data_base64: the file has {len(data):,} bytes, more than the limit of "
            f"{MAX_UPLOAD_BYTES:,}",
        )
    suffix = FilePath(upload.file_name).suffix.lower()
    stem = _safe_stem(upload.file_name)
    stored = f"{stem}-{hashlib.sha256(data).hexdigest()[:12]}{suffix}"
    folder = cells.path.parent / MESH_FOLDER
    try:
        written = _store_mesh_file(folder, stored, data)
    except OSError as error:
        raise HTTPException(
            status_code=507 if error.errno == 28 else 409,
            detail=f"{folder}: the mesh file cannot be stored ({error.strerror or error})",
        ) from error

    def forget() -> None:
        if written:
            (folder / stored).unlink(missing_ok=True)

    current = cells.read()
    name = _unique_name(stem, {fixture.name for fixture in current.cell.fixtures})
    draft = MeshFixture(
        name=name,
        shape="mesh",
        file=f"{MESH_FOLDER}/{stored}",
        unit=upload.unit,
        position_mm=(0.0, 0.0, 0.0),
        rpy_deg=(upload.rpy_deg[0], upload.rpy_deg[1], upload.rpy_deg[2]),
    )
    try:
        mesh = cells.mesh_loader.load(draft, cells.path, "upload")
    except Exception:
        forget()
        raise
    lo, hi = mm_from_m(mesh.bounds)
    anchor = np.array([0.5 * (lo[0] + hi[0]), 0.5 * (lo[1] + hi[1]), lo[2]])
    R = rotation_matrix_from_rpy(upload.rpy_deg, degrees=True)
    position = np.asarray(upload.position_mm) - R @ anchor
    fixture = draft.model_copy(
        update={"position_mm": tuple(float(v) for v in np.round(position, 3))}
    )

    def change(cell: Cell) -> Cell:
        taken = {f.name for f in cell.fixtures}
        added = fixture.model_copy(update={"name": _unique_name(stem, taken)})
        return cell.model_copy(update={"fixtures": [*cell.fixtures, added]})

    try:
        return _saved(lambda: cells.edit(change, expected), robots, response)
    except Exception:
        forget()
        raise

"""The scene with one thing of the cell moved: the robot's base, the track's rail, the foot on the carriage, a turntable.

Each returns a new :class:`~posebridge.cell.scene.Scene` (SI) as the cell so edited would
resolve, with the paths' Cartesian poses that ride the moved thing moved along; the
placement searches time their candidates' paths on these scenes
(:mod:`posebridge.planning.placement`).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import replace

import numpy as np

from posebridge.cell.scene import CylinderSet, Scene
from posebridge.kinematics.fk import fk_tool
from posebridge.planning.errors import PlanningInputError
from posebridge.transforms import invert_transform
from posebridge.units import FloatArray, m_from_mm

__all__ = ["scene_on_carriage", "scene_on_rail", "scene_with_base", "scene_with_table_at"]


def scene_with_base(scene: Scene, T_world_base: FloatArray) -> Scene:
    """Return the scene with the robot base at ``T_world_base`` (shape (4, 4)).

    The TCP poses of joint-value waypoints move with the base; every other pose stays.
    """
    paths = []
    for path in scene.paths:
        given = path.joints_given
        if not np.any(given):
            paths.append(path)
            continue
        T_world_tool = path.T_world_tool.copy()
        T_bases = scene.external.T_world_base(path.external[given], T_world_base)
        T_world_tool[given] = T_bases @ fk_tool(scene.robot, path.q[given], scene.T_flange_tool)
        paths.append(replace(path, T_world_tool=T_world_tool))
    return replace(scene, T_world_base=T_world_base, paths=tuple(paths))


def scene_on_rail(
    scene: Scene, T_world_rail: FloatArray, track_position: Sequence[FloatArray]
) -> Scene:
    """Return the scene with its track's rail at ``T_world_rail`` and the paths' track positions.

    Everything the carriage carries (robot base, pedestal, carriage) moves with the
    rail, at the scene's own track value; the TCP poses of joint-value waypoints move
    with the base at their own external values; every other pose stays.

    Parameters
    ----------
    scene : Scene
        A cell with a track.
    T_world_rail : array, shape (4, 4)
        The new rail frame (track position 0, x along the travel).
    track_position : sequence of arrays, shape (W_i,) each
        Per path, the track position of each waypoint, m; NaN keeps the path's value.

    Returns
    -------
    Scene
    """
    external = scene.external
    track = external.track
    if track is None:
        raise PlanningInputError("rail placement: the cell has no track")
    moved = replace(external, track=replace(track, T_world_rail=T_world_rail))
    at = external.values[None]
    T_world_base = moved.T_world_base(at, scene.T_world_base)[0]
    D = T_world_base @ invert_transform(external.T_world_base(at, scene.T_world_base)[0])
    carriage = f"{external.names[0]} carriage"
    boxes = scene.boxes
    rows = [i for i, name in enumerate(boxes.names) if name == carriage]
    if rows:
        T_box = boxes.T_world.copy()
        T_box[rows] = D @ T_box[rows]
        boxes = replace(boxes, T_world=T_box)
    paths = []
    for path, positions in zip(scene.paths, track_position, strict=True):
        values = path.external.copy()
        values[:, 0] = np.where(np.isnan(positions), values[:, 0], positions)
        T_world_tool = path.T_world_tool.copy()
        given = path.joints_given
        if np.any(given):
            T_bases = moved.T_world_base(values[given], T_world_base)
            T_world_tool[given] = T_bases @ fk_tool(scene.robot, path.q[given], scene.T_flange_tool)
        paths.append(replace(path, T_world_tool=T_world_tool, external=values))
    return replace(
        scene,
        T_world_base=T_world_base,
        pedestal=replace(scene.pedestal, T_world=D @ scene.pedestal.T_world),
        boxes=boxes,
        paths=tuple(paths),
        external=moved,
    )


def scene_on_carriage(scene: Scene, T_carriage_foot: FloatArray, pedestal_height: float) -> Scene:
    """Return a track cell's scene with the robot's foot moved on the carriage.

    The foot (the pedestal's floor point) at ``T_carriage_foot`` (shape (4, 4)) in the
    carriage-top frame, the robot on a pedestal of ``pedestal_height`` (m, >= 0; the
    cell's pedestal radius) as the cell's ``base`` puts it on a track cell; the rail,
    the carriage and the paths stay (joint-value waypoints' TCP poses move with the base).

    Raises
    ------
    PlanningInputError
        The scene has no track.
    """
    external = scene.external
    track = external.track
    if track is None:
        raise PlanningInputError("placement on the carriage: the cell has no track")
    lift = np.eye(4)
    lift[2, 3] = pedestal_height
    mounted = replace(external, track=replace(track, T_carriage_base=T_carriage_foot @ lift))
    T_world_foot = track.T_world_carriage(external.values[0])[0] @ T_carriage_foot
    radius_mm = scene.cell.base.pedestal_radius_mm
    if pedestal_height > 0.0 and radius_mm is not None:  # as resolve_scene builds it
        half = np.eye(4)
        half[2, 3] = 0.5 * pedestal_height
        pedestal = CylinderSet(
            names=("pedestal",),
            T_world=(T_world_foot @ half)[None],
            radius=m_from_mm([radius_mm]),
            half_length=np.array([0.5 * pedestal_height]),
        )
    else:
        pedestal = CylinderSet((), np.zeros((0, 4, 4)), np.zeros(0), np.zeros(0))
    return scene_with_base(replace(scene, external=mounted, pedestal=pedestal), T_world_foot @ lift)


def scene_with_table_at(
    scene: Scene, axis: int, xy: FloatArray, table_angle: Sequence[FloatArray]
) -> Scene:
    """Return the scene with one turntable's axis point at world ``(x, y)`` and the paths' table angles.

    The table moves by ``Trans(d)``, ``d = (x - p_x, y - p_y, 0)`` (its height and axis
    direction kept), carrying its plate, the fixtures it turns (children included), their
    targets and the paths' target waypoints on them, as the cell file edit
    :func:`posebridge.cell.turntable_move.cell_with_turntable_at` moves them; turning about
    the moved line is ``D_(p+d) = Trans(d) D_p Trans(-d)``, so a carried pose at any table
    angle is ``Trans(d)`` times its pose before the move. World poses, other fixtures and
    joint-value waypoints (the robot does not move) stay.

    Parameters
    ----------
    scene : Scene
        A cell with a turntable.
    axis : int
        External-vector index of the turntable.
    xy : array, shape (2,)
        The axis point's new world x and y, m.
    table_angle : sequence of arrays, shape (W_i,) each
        Per path, the table angle of each waypoint, rad; NaN keeps the path's value.

    Returns
    -------
    Scene

    Raises
    ------
    PlanningInputError
        ``axis`` is not a turntable of the scene.
    """
    external = scene.external
    k = axis - external.table_offset
    if not 0 <= k < len(external.turntables):
        raise PlanningInputError(f"table placement: external axis {axis} is not a turntable")
    table = external.turntables[k]
    D = np.eye(4)
    D[:2, 3] = np.asarray(xy, dtype=np.float64) - table.point[:2]
    turntables = list(external.turntables)
    turntables[k] = replace(table, point=table.point + D[:3, 3])
    carried = {scene.fixture_names[i] for i in table.fixtures}
    moving = carried | {f"{external.names[axis]} plate"}
    T_world_fixture = scene.T_world_fixture.copy()
    T_world_fixture[list(table.fixtures)] = D @ T_world_fixture[list(table.fixtures)]
    targets = scene.targets.moved_on(carried, D)
    on_table = {i for i, fixture in enumerate(targets.fixtures) if fixture in carried}
    paths = []
    for path, angles in zip(scene.paths, table_angle, strict=True):
        values = path.external.copy()
        values[:, axis] = np.where(np.isnan(angles), values[:, axis], angles)
        T_world_tool = path.T_world_tool.copy()
        on = [w for w, t in enumerate(path.target_index.tolist()) if t in on_table]
        T_world_tool[on] = D @ T_world_tool[on]
        paths.append(replace(path, T_world_tool=T_world_tool, external=values))
    return replace(
        scene,
        T_world_fixture=T_world_fixture,
        boxes=replace(
            scene.boxes, T_world=_moved(scene.boxes.names, scene.boxes.T_world, moving, D)
        ),
        cylinders=replace(
            scene.cylinders,
            T_world=_moved(scene.cylinders.names, scene.cylinders.T_world, moving, D),
        ),
        meshes=replace(
            scene.meshes, T_world=_moved(scene.meshes.names, scene.meshes.T_world, moving, D)
        ),
        targets=targets,
        paths=tuple(paths),
        external=replace(external, turntables=tuple(turntables)),
    )


def _moved(
    names: tuple[str, ...], T_world: FloatArray, moving: set[str], D: FloatArray
) -> FloatArray:
    """Return ``T_world`` (N, 4, 4) with the rows named in ``moving`` moved by ``D`` (4, 4)."""
    T = T_world.copy()
    rows = [i for i, name in enumerate(names) if name in moving]
    T[rows] = D @ T[rows]
    return T

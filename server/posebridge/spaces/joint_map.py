"""Joint-space (configuration-space) obstacle maps over two or three chosen joints.

The chosen joints sweep a regular grid over their limit box; every other
joint is held at a given value. The joint space of a serial arm with
independent limits is the box (product) of the joint ranges (common
practice), so the grid covers exactly that box: axis ``k`` has ``R_k``
cells of width ``(upper_k - lower_k) / R_k`` and the values at the cell
centres, ``lower_k + (i + 1/2) width``.

Each cell's configuration is classified with the geometry engine's batched
per-obstacle clearance (:func:`posebridge.geometry.clearance.clearance_per_obstacle_batch`,
exact capsule distances): the signed distance of the arm to every obstacle
and to itself. A cell is in collision with an obstacle (or with the arm
itself) where that distance is below ``threshold_m``; its label is the
obstacle with the smallest distance, its clearance the smallest distance
of all.

**External axes** (:func:`cell_joint_map`): the axes of a cell map index the
cell's joint vector, the robot's ``n`` joints then its external axes (track,
turntables). One map axis may be an external axis: each of its cell-centre
values poses the scene there (:func:`posebridge.cell.clearance.posed_clearance_scene`:
the track carries the base, pedestal and carriage, a turntable its fixtures),
and the cells at that value are classified in that posed scene. The other
external axes stay at their held values.

The configurations are cut into fixed chunks of :data:`CHUNK_CONFIGURATIONS`
(fixed by the grid alone) and run by an executor
(:mod:`posebridge.compute`); every chunk is computed the same way whichever
executor runs it, so the map is identical for all executors.
"""

from __future__ import annotations

import threading
from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np
import numpy.typing as npt

from posebridge.cell.clearance import posed_clearance_scene
from posebridge.cell.external_kinematics import solutions_along_axis
from posebridge.cell.scene import Scene, posed_scene
from posebridge.compute import Executor, ProgressCallback, run_chunks, split_range
from posebridge.geometry.clearance import ClearanceScene, clearance_per_obstacle_batch
from posebridge.spaces.errors import SpacesInputError
from posebridge.units import BoolArray, FloatArray

__all__ = [
    "CHUNK_CONFIGURATIONS",
    "MAX_RESOLUTION_2",
    "MAX_RESOLUTION_3",
    "AxisSolutions",
    "JointMap",
    "cell_joint_map",
    "grid_axis",
    "joint_map",
]

MAX_RESOLUTION_2 = 512
"""Largest number of cells along an axis of a two-joint map."""
MAX_RESOLUTION_3 = 128
"""Largest number of cells along an axis of a three-joint map."""
CHUNK_CONFIGURATIONS = 32_768
"""Configurations per executor chunk (about 0.1 s of clearance queries on one core)."""

Int16Array = npt.NDArray[np.int16]
Int64Array = npt.NDArray[np.int64]


@dataclass(frozen=True, eq=False)
class AxisSolutions:
    """IK solutions of the cell's targets along the external axis of a map (its IK markers).

    Attributes
    ----------
    targets : tuple of str, length K
    branches : list of (int, int, int), length B
        Shoulder, elbow, wrist labels.
    q : array, shape (K, R, B, n)
        Robot joints of each target at each cell-centre value of the external map axis, per
        branch (rad or m); NaN where the branch does not reach the target within limits
        (:func:`posebridge.cell.external_kinematics.solutions_along_axis`).
    """

    targets: tuple[str, ...]
    branches: list[tuple[int, int, int]]
    q: FloatArray


@dataclass(frozen=True, eq=False)
class JointMap:
    """Obstacle map over two or three chosen joints (SI).

    Grid arrays have shape ``G = (R_1, ..., R_d)``, ``d`` = 2 or 3, axis ``k``
    along chosen joint ``k``.

    Attributes
    ----------
    joints : tuple of int, length d
        Chosen joint indices (0-based) into the cell's joint vector: the robot's
        ``n`` joints, then the external axes (:func:`cell_joint_map`).
    joint_names : tuple of str, length d
    prismatic : array of bool, shape (d,)
    axes : tuple of d arrays, shapes (R_k,)
        Joint values at the cell centres, rad or m.
    lower, upper : array, shape (d,)
        The limit box of the chosen joints, rad or m.
    q_hold : array, shape (n,)
        Configuration of the other robot joints (the chosen ones are swept).
    obstacle_names : tuple of str, length k
        The clearance scene's obstacles; labels index this tuple.
    obstacle : array of int16, shape G
        ``-1`` where no obstacle is closer than ``threshold_m``, else the
        index of the obstacle with the smallest signed distance.
    self_collision : array of bool, shape G
        The arm is closer than ``threshold_m`` to itself.
    clearance : array, shape G
        Smallest signed distance to any obstacle or to the arm itself, m
        (negative: penetration depth).
    colliding_obstacles : array of int64, shape (c,)
        Obstacles in collision somewhere on the map, ascending.
    colliding : array of bool, shape G + (c,)
        ``colliding[..., j]``: the cell collides with obstacle
        ``colliding_obstacles[j]`` (several obstacles may overlap).
    threshold_m : float
    external_hold : array, shape (m,)
        Values of the cell's external axes, m or rad (a chosen one is swept);
        empty for a map of the robot alone.
    along : AxisSolutions or None
        With an external map axis: the targets' IK solutions at its values.
    """

    joints: tuple[int, ...]
    joint_names: tuple[str, ...]
    prismatic: BoolArray
    axes: tuple[FloatArray, ...]
    lower: FloatArray
    upper: FloatArray
    q_hold: FloatArray
    obstacle_names: tuple[str, ...]
    obstacle: Int16Array
    self_collision: BoolArray
    clearance: FloatArray
    colliding_obstacles: Int64Array
    colliding: BoolArray
    threshold_m: float
    external_hold: FloatArray = field(default_factory=lambda: np.zeros(0))
    along: AxisSolutions | None = None

    @property
    def shape(self) -> tuple[int, ...]:
        """Grid shape ``G``."""
        return tuple(axis.shape[0] for axis in self.axes)

    @property
    def free(self) -> BoolArray:
        """Cells with neither an obstacle nor a self collision, shape G."""
        return (self.obstacle < 0) & ~self.self_collision

    def cell_configurations(self) -> FloatArray:
        """Cell joint vector of every cell (robot joints, then external axes), shape G + (n + m,)."""
        hold = np.concatenate([self.q_hold, self.external_hold])
        return _grid_values(hold, self.joints, self.axes, 0, int(np.prod(self.shape))).reshape(
            (*self.shape, hold.shape[0])
        )

    def configurations(self) -> FloatArray:
        """Robot joint configuration of every cell, shape G + (n,), rad or m."""
        return self.cell_configurations()[..., : self.q_hold.shape[0]]


def grid_axis(lower: float, upper: float, cells: int) -> FloatArray:
    """Cell-centre values of ``cells`` equal cells over ``[lower, upper]``.

    Returns
    -------
    values : array, shape (cells,)
        ``lower + (i + 1/2) (upper - lower) / cells``.
    """
    width = (upper - lower) / cells
    return np.asarray(lower + (np.arange(cells) + 0.5) * width, dtype=np.float64)


def _grid_values(
    hold: FloatArray, joints: tuple[int, ...], axes: tuple[FloatArray, ...], start: int, stop: int
) -> FloatArray:
    """Return joint vectors of the flat (C-order) cells ``start..stop``, shape (stop - start, len(hold))."""
    shape = tuple(axis.shape[0] for axis in axes)
    index = np.unravel_index(np.arange(start, stop), shape)
    q = np.repeat(hold[None, :], stop - start, axis=0)
    for k, joint in enumerate(joints):
        q[:, joint] = axes[k][index[k]]
    return q


def _joint_map_chunk(
    scenes: tuple[tuple[int, ClearanceScene], ...],
    swept: int,
    hold: FloatArray,
    joints: tuple[int, ...],
    axes: tuple[FloatArray, ...],
    threshold_m: float,
    start: int,
    stop: int,
) -> tuple[Int16Array, BoolArray, FloatArray, Int64Array, Int64Array]:
    """Classify the cells ``start..stop`` (one executor chunk).

    ``scenes`` pairs a grid index along map axis ``swept`` with the clearance scene posed
    there; with ``swept`` = -1 it is one scene for every cell. ``hold`` is the cell's joint
    vector, the robot's joints first (as many as the scenes' robot has).

    Returns
    -------
    obstacle : array of int16, shape (C,)
    self_collision : array of bool, shape (C,)
    clearance : array, shape (C,)
    hit_cell, hit_obstacle : arrays of int64, shape (H,)
        Every (cell, obstacle) pair in collision, cell index counted from ``start``.
    """
    dof = scenes[0][1].arm.robot.dof
    q = _grid_values(hold, joints, axes, start, stop)[:, :dof]
    if swept < 0:
        groups = [(np.arange(stop - start), scenes[0][1])]
    else:
        along = np.unravel_index(np.arange(start, stop), tuple(a.shape[0] for a in axes))[swept]
        groups = [(np.flatnonzero(along == value), scene) for value, scene in scenes]
    distance = np.empty((stop - start, scenes[0][1].obstacles.count))
    self_distance = np.empty(stop - start)
    for rows, scene in groups:
        part = clearance_per_obstacle_batch(scene, q[rows], threshold_m=threshold_m)
        distance[rows] = part.distance
        self_distance[rows] = part.self_distance
    if distance.shape[1] > 0:
        nearest = np.argmin(distance, axis=1)
        nearest_distance = distance[np.arange(distance.shape[0]), nearest]
    else:
        nearest = np.zeros(distance.shape[0], dtype=np.int64)
        nearest_distance = np.full(distance.shape[0], np.inf)
    obstacle = np.where(nearest_distance < threshold_m, nearest, -1).astype(np.int16)
    clearance = np.minimum(nearest_distance, self_distance)
    hit_cell, hit_obstacle = np.nonzero(distance < threshold_m)
    return (
        obstacle,
        self_distance < threshold_m,
        clearance,
        hit_cell.astype(np.int64),
        hit_obstacle.astype(np.int64),
    )


def _check_request(
    dof: int,
    names: Sequence[str],
    joints: Sequence[int],
    hold: npt.ArrayLike,
    resolution: int | Sequence[int],
    threshold_m: float,
) -> tuple[tuple[int, ...], FloatArray, tuple[int, ...]]:
    """Check a request over a joint vector of ``len(names)`` values (the first ``dof`` the robot's)."""
    chosen = tuple(int(j) for j in joints)
    count = len(names)
    if len(chosen) not in (2, 3):
        raise SpacesInputError(f"joints: expected 2 or 3 joint indices, got {len(chosen)}")
    if len(set(chosen)) != len(chosen) or not all(0 <= j < count for j in chosen):
        raise SpacesInputError(
            f"joints: expected distinct indices in 0..{count - 1} ({', '.join(names)}), "
            f"got {list(chosen)}"
        )
    if sum(j >= dof for j in chosen) > 1:
        raise SpacesInputError(
            f"joints: at most one external axis per map, got {[names[j] for j in chosen]}"
        )
    values = np.asarray(hold, dtype=np.float64)
    if values.shape != (count,) or not np.all(np.isfinite(values)):
        raise SpacesInputError(
            f"q_hold: expected {count} finite joint values, got shape {values.shape}"
        )
    cells = (resolution,) * len(chosen) if isinstance(resolution, int) else tuple(resolution)
    largest = MAX_RESOLUTION_2 if len(chosen) == 2 else MAX_RESOLUTION_3
    if len(cells) != len(chosen) or not all(
        isinstance(c, int | np.integer) and 2 <= c <= largest for c in cells
    ):
        raise SpacesInputError(
            f"resolution: expected {len(chosen)} cell counts in 2..{largest} "
            f"for a {len(chosen)}-joint map, got {resolution!r}"
        )
    if not np.isfinite(threshold_m):
        raise SpacesInputError(f"threshold_m: expected a finite value, got {threshold_m!r}")
    return chosen, values, tuple(int(c) for c in cells)


def _run_map(
    scenes: list[tuple[int, ClearanceScene]],
    swept: int,
    hold: FloatArray,
    chosen: tuple[int, ...],
    axes: tuple[FloatArray, ...],
    threshold_m: float,
    executor: Executor | None,
    progress: ProgressCallback | None,
    cancel: threading.Event | None,
) -> tuple[Int16Array, BoolArray, FloatArray, Int64Array, BoolArray]:
    """Classify every cell in chunks; return obstacle, self collision, clearance, colliding."""
    cells = tuple(axis.shape[0] for axis in axes)
    total = int(np.prod(cells))
    chunks = []
    for start, stop in split_range(total, CHUNK_CONFIGURATIONS):
        if swept < 0:
            needed = tuple(scenes)
        else:  # only the posed scenes this chunk's cells use
            along = set(np.unravel_index(np.arange(start, stop), cells)[swept].tolist())
            needed = tuple(item for item in scenes if item[0] in along)
        chunks.append((needed, swept, hold, chosen, axes, threshold_m, start, stop))
    if executor is None:
        results = run_chunks(_joint_map_chunk, chunks, progress=progress, cancel=cancel)
    else:
        results = executor.map_chunks(_joint_map_chunk, chunks, progress=progress, cancel=cancel)
    starts = np.array([chunk[6] for chunk in chunks], dtype=np.int64)
    obstacle = np.concatenate([r[0] for r in results]).reshape(cells)
    self_collision = np.concatenate([r[1] for r in results]).reshape(cells)
    clearance = np.concatenate([r[2] for r in results]).reshape(cells)
    hit_cell = np.concatenate([r[3] + s for r, s in zip(results, starts, strict=True)])
    hit_obstacle = np.concatenate([r[4] for r in results])
    present = np.unique(hit_obstacle).astype(np.int64)
    colliding = np.zeros((total, present.shape[0]), dtype=bool)
    colliding[hit_cell, np.searchsorted(present, hit_obstacle)] = True
    return (
        obstacle,
        self_collision,
        clearance,
        present,
        colliding.reshape((*cells, present.shape[0])),
    )


def joint_map(
    scene: ClearanceScene,
    joints: Sequence[int],
    q_hold: npt.ArrayLike,
    *,
    resolution: int | Sequence[int] = 256,
    threshold_m: float = 0.0,
    executor: Executor | None = None,
    progress: ProgressCallback | None = None,
    cancel: threading.Event | None = None,
) -> JointMap:
    """Obstacle map over two or three chosen joints (method in the module docstring).

    Parameters
    ----------
    scene : ClearanceScene
        Arm, obstacles and pairs, e.g. from
        :func:`posebridge.cell.clearance.clearance_scene`.
    joints : sequence of int, length 2 or 3
        Chosen joint indices (0-based).
    q_hold : array-like, shape (n,)
        Values of the other joints, rad or m (the chosen entries are ignored).
    resolution : int or sequence of int, keyword-only
        Cells per axis: 2..512 for two joints, 2..128 for three.
    threshold_m : float, keyword-only
        A distance below this is a collision, m (0: contact or penetration).
    executor : Executor, optional, keyword-only
        Runs the chunks; without one they run in this process (numba threads
        inside each chunk).
    progress : callable, optional, keyword-only
        ``progress(done, total)`` in chunks.
    cancel : threading.Event, optional, keyword-only

    Returns
    -------
    JointMap

    Raises
    ------
    SpacesInputError
        Bad joints, held values, resolution or threshold.
    posebridge.compute.ComputationCancelled
        ``cancel`` was set.
    """
    robot = scene.arm.robot
    chosen, hold, cells = _check_request(
        robot.dof, robot.joint_names, joints, q_hold, resolution, threshold_m
    )
    lower = robot.lower[list(chosen)]
    upper = robot.upper[list(chosen)]
    axes = tuple(grid_axis(lo, hi, c) for lo, hi, c in zip(lower, upper, cells, strict=True))
    obstacle, self_collision, clearance, present, colliding = _run_map(
        [(0, scene)], -1, hold, chosen, axes, float(threshold_m), executor, progress, cancel
    )
    return JointMap(
        joints=chosen,
        joint_names=tuple(robot.joint_names[j] for j in chosen),
        prismatic=robot.prismatic[list(chosen)],
        axes=axes,
        lower=lower,
        upper=upper,
        q_hold=hold,
        obstacle_names=scene.obstacles.names,
        obstacle=obstacle,
        self_collision=self_collision,
        clearance=clearance,
        colliding_obstacles=present,
        colliding=colliding,
        threshold_m=float(threshold_m),
    )


def cell_joint_map(
    scene: Scene,
    joints: Sequence[int],
    q_hold: npt.ArrayLike,
    external_hold: npt.ArrayLike | None = None,
    *,
    resolution: int | Sequence[int] = 256,
    threshold_m: float = 0.0,
    executor: Executor | None = None,
    progress: ProgressCallback | None = None,
    cancel: threading.Event | None = None,
) -> JointMap:
    """Obstacle map of a cell over two or three entries of its joint vector, one may be an external axis.

    Method in the module docstring: an external axis poses the scene at each of its
    cell-centre values; robot joints sweep as in :func:`joint_map`.

    Parameters
    ----------
    scene : Scene
    joints : sequence of int, length 2 or 3
        Indices into the cell's joint vector: ``0..n-1`` the robot's joints, ``n..n+m-1``
        its external axes (at most one of them).
    q_hold : array-like, shape (n,)
        Robot joint values, rad or m (chosen entries ignored).
    external_hold : array-like, shape (m,), optional
        External axis values, m or rad (a chosen one is ignored); the scene's own values
        if omitted.
    resolution, threshold_m, executor, progress, cancel
        As in :func:`joint_map`.

    Returns
    -------
    JointMap

    Raises
    ------
    SpacesInputError
        Bad joints (more than one external axis included), held values, resolution or threshold.
    posebridge.compute.ComputationCancelled
        ``cancel`` was set.
    """
    robot, external = scene.robot, scene.external
    n = robot.dof
    outside = external.values if external_hold is None else external_hold
    names = (*robot.joint_names, *external.names)
    robot_hold = np.asarray(q_hold, dtype=np.float64)
    if robot_hold.shape != (n,):
        raise SpacesInputError(
            f"q_hold: expected {n} finite joint values, got shape {robot_hold.shape}"
        )
    external_values = np.asarray(outside, dtype=np.float64)
    if external_values.shape != (external.count,):
        raise SpacesInputError(
            f"external_hold: expected {external.count} values ({', '.join(external.names)}), "
            f"got shape {external_values.shape}"
        )
    chosen, hold, cells = _check_request(
        n, names, joints, np.concatenate([robot_hold, external_values]), resolution, threshold_m
    )
    lower = np.concatenate([robot.lower, external.lower])[list(chosen)]
    upper = np.concatenate([robot.upper, external.upper])[list(chosen)]
    axes = tuple(grid_axis(lo, hi, c) for lo, hi, c in zip(lower, upper, cells, strict=True))
    swept = next((k for k, j in enumerate(chosen) if j >= n), -1)
    if swept < 0:
        scenes = [(0, posed_clearance_scene(scene, hold[n:]))]
    else:
        scenes = []
        for g, value in enumerate(axes[swept]):
            values = hold[n:].copy()
            values[chosen[swept] - n] = value
            scenes.append((g, posed_clearance_scene(scene, values)))
    obstacle, self_collision, clearance, present, colliding = _run_map(
        scenes, swept, hold, chosen, axes, float(threshold_m), executor, progress, cancel
    )
    along = None
    if swept >= 0:  # the IK markers: every target's solutions along the axis
        held = posed_scene(scene, hold[n:])
        branches, q = solutions_along_axis(held, chosen[swept] - n, axes[swept])
        along = AxisSolutions(held.targets.names, branches, q)
    return JointMap(
        joints=chosen,
        joint_names=tuple(names[j] for j in chosen),
        prismatic=np.concatenate([robot.prismatic, external.prismatic])[list(chosen)],
        axes=axes,
        lower=lower,
        upper=upper,
        q_hold=hold[:n],
        obstacle_names=scenes[0][1].obstacles.names,
        obstacle=obstacle,
        self_collision=self_collision,
        clearance=clearance,
        colliding_obstacles=present,
        colliding=colliding,
        threshold_m=float(threshold_m),
        external_hold=hold[n:],
        along=along,
    )

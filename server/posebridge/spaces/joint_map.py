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

The configurations are cut into fixed chunks of :data:`CHUNK_CONFIGURATIONS`
(fixed by the grid alone) and run by an executor
(:mod:`posebridge.compute`); every chunk is computed the same way whichever
executor runs it, so the map is identical for all executors.
"""

from __future__ import annotations

import threading
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

from posebridge.compute import Executor, ProgressCallback, run_chunks, split_range
from posebridge.geometry.clearance import ClearanceScene, clearance_per_obstacle_batch
from posebridge.spaces.errors import SpacesInputError
from posebridge.units import BoolArray, FloatArray, joints_user_from_si

__all__ = [
    "CHUNK_CONFIGURATIONS",
    "MAX_RESOLUTION_2",
    "MAX_RESOLUTION_3",
    "JointMap",
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
class JointMap:
    """Obstacle map over two or three chosen joints (SI inside; ``*_user`` in deg or mm).

    Grid arrays have shape ``G = (R_1, ..., R_d)``, ``d`` = 2 or 3, axis ``k``
    along chosen joint ``k``.

    Attributes
    ----------
    joints : tuple of int, length d
        Chosen joint indices (0-based).
    joint_names : tuple of str, length d
    prismatic : array of bool, shape (d,)
    axes : tuple of d arrays, shapes (R_k,)
        Joint values at the cell centres, rad or m.
    lower, upper : array, shape (d,)
        The limit box of the chosen joints, rad or m.
    q_hold : array, shape (n,)
        Configuration of the other joints (the chosen ones are swept).
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

    @property
    def shape(self) -> tuple[int, ...]:
        """Grid shape ``G``."""
        return tuple(axis.shape[0] for axis in self.axes)

    @property
    def free(self) -> BoolArray:
        """Cells with neither an obstacle nor a self collision, shape G."""
        return (self.obstacle < 0) & ~self.self_collision

    @property
    def axes_user(self) -> tuple[FloatArray, ...]:
        """Cell-centre values in boundary units: deg (revolute) or mm (prismatic)."""
        return tuple(
            joints_user_from_si(axis, np.array([p]))
            for axis, p in zip(self.axes, self.prismatic, strict=True)
        )

    @property
    def lower_user(self) -> FloatArray:
        """Limit box lower corner in deg or mm, shape (d,)."""
        return joints_user_from_si(self.lower, self.prismatic)

    @property
    def upper_user(self) -> FloatArray:
        """Limit box upper corner in deg or mm, shape (d,)."""
        return joints_user_from_si(self.upper, self.prismatic)

    def configurations(self) -> FloatArray:
        """Full joint configuration of every cell, shape G + (n,), rad or m."""
        return _grid_configurations(
            self.q_hold, self.joints, self.axes, 0, int(np.prod(self.shape))
        ).reshape((*self.shape, self.q_hold.shape[0]))


def grid_axis(lower: float, upper: float, cells: int) -> FloatArray:
    """Cell-centre values of ``cells`` equal cells over ``[lower, upper]``.

    Returns
    -------
    values : array, shape (cells,)
        ``lower + (i + 1/2) (upper - lower) / cells``.
    """
    width = (upper - lower) / cells
    return np.asarray(lower + (np.arange(cells) + 0.5) * width, dtype=np.float64)


def _grid_configurations(
    q_hold: FloatArray, joints: tuple[int, ...], axes: tuple[FloatArray, ...], start: int, stop: int
) -> FloatArray:
    """Return configurations of the flat (C-order) cells ``start..stop``, shape (stop - start, n)."""
    shape = tuple(axis.shape[0] for axis in axes)
    index = np.unravel_index(np.arange(start, stop), shape)
    q = np.repeat(q_hold[None, :], stop - start, axis=0)
    for k, joint in enumerate(joints):
        q[:, joint] = axes[k][index[k]]
    return q


def _joint_map_chunk(
    scene: ClearanceScene,
    q_hold: FloatArray,
    joints: tuple[int, ...],
    axes: tuple[FloatArray, ...],
    threshold_m: float,
    start: int,
    stop: int,
) -> tuple[Int16Array, BoolArray, FloatArray, Int64Array, Int64Array]:
    """Classify the cells ``start..stop`` (one executor chunk).

    Returns
    -------
    obstacle : array of int16, shape (C,)
    self_collision : array of bool, shape (C,)
    clearance : array, shape (C,)
    hit_cell, hit_obstacle : arrays of int64, shape (H,)
        Every (cell, obstacle) pair in collision, cell index counted from ``start``.
    """
    q = _grid_configurations(q_hold, joints, axes, start, stop)
    result = clearance_per_obstacle_batch(scene, q, threshold_m=threshold_m)
    distance = result.distance
    if distance.shape[1] > 0:
        nearest = np.argmin(distance, axis=1)
        nearest_distance = distance[np.arange(distance.shape[0]), nearest]
    else:
        nearest = np.zeros(distance.shape[0], dtype=np.int64)
        nearest_distance = np.full(distance.shape[0], np.inf)
    obstacle = np.where(nearest_distance < threshold_m, nearest, -1).astype(np.int16)
    clearance = np.minimum(nearest_distance, result.self_distance)
    hit_cell, hit_obstacle = np.nonzero(result.in_collision)
    return (
        obstacle,
        result.self_collision,
        clearance,
        hit_cell.astype(np.int64),
        hit_obstacle.astype(np.int64),
    )


def _check_request(
    scene: ClearanceScene,
    joints: Sequence[int],
    q_hold: npt.ArrayLike,
    resolution: int | Sequence[int],
    threshold_m: float,
) -> tuple[tuple[int, ...], FloatArray, tuple[int, ...]]:
    robot = scene.arm.robot
    chosen = tuple(int(j) for j in joints)
    if len(chosen) not in (2, 3):
        raise SpacesInputError(f"joints: expected 2 or 3 joint indices, got {len(chosen)}")
    if len(set(chosen)) != len(chosen) or not all(0 <= j < robot.dof for j in chosen):
        raise SpacesInputError(
            f"joints: expected distinct indices in 0..{robot.dof - 1} for robot {robot.name!r}, got {list(chosen)}"
        )
    hold = np.asarray(q_hold, dtype=np.float64)
    if hold.shape != (robot.dof,) or not np.all(np.isfinite(hold)):
        raise SpacesInputError(
            f"q_hold: expected {robot.dof} finite joint values, got shape {hold.shape}"
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
    return chosen, hold, tuple(int(c) for c in cells)


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
    chosen, hold, cells = _check_request(scene, joints, q_hold, resolution, threshold_m)
    robot = scene.arm.robot
    lower = robot.lower[list(chosen)]
    upper = robot.upper[list(chosen)]
    axes = tuple(grid_axis(lo, hi, c) for lo, hi, c in zip(lower, upper, cells, strict=True))
    total = int(np.prod(cells))
    chunks = [
        (scene, hold, chosen, axes, float(threshold_m), start, stop)
        for start, stop in split_range(total, CHUNK_CONFIGURATIONS)
    ]
    if executor is None:
        results = run_chunks(_joint_map_chunk, chunks, progress=progress, cancel=cancel)
    else:
        results = executor.map_chunks(_joint_map_chunk, chunks, progress=progress, cancel=cancel)
    starts = np.array([chunk[5] for chunk in chunks], dtype=np.int64)
    obstacle = np.concatenate([r[0] for r in results]).reshape(cells)
    self_collision = np.concatenate([r[1] for r in results]).reshape(cells)
    clearance = np.concatenate([r[2] for r in results]).reshape(cells)
    hit_cell = np.concatenate([r[3] + s for r, s in zip(results, starts, strict=True)])
    hit_obstacle = np.concatenate([r[4] for r in results])
    present = np.unique(hit_obstacle)
    colliding = np.zeros((total, present.shape[0]), dtype=bool)
    colliding[hit_cell, np.searchsorted(present, hit_obstacle)] = True
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
        colliding_obstacles=present.astype(np.int64),
        colliding=colliding.reshape((*cells, present.shape[0])),
        threshold_m=float(threshold_m),
    )

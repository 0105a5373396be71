"""Base placement for a turntable cell: search where the table stands.

The robot stays where it is; a candidate moves one turntable (:func:`table_axis`: the one the user names, else the first
that carries a target) so that its axis point is at world ``(x, y)``, its height
and axis direction kept. The fixtures it carries, their children, their targets
and the table's plate move with it; every other fixture (a stand under the table
included) stays (the cell file edit that applies a candidate:
:func:`posebridge.cell.turntable_move.cell_with_turntable_at`). With ``delta``
the move, a carried pose at table angle ``theta`` is

    T_world_pose(theta) = Trans(delta) D_p0(theta - theta_0) T_world_pose

with ``D_p0`` the table's turn about its current axis line
(:func:`posebridge.cell.external_axes.turntable_motion`; a turn about the moved
line is ``Trans(delta) D_p0 Trans(-delta)``) and ``theta_0`` its current angle.

**Pinned axes** (one rule, as the path check resolves a target waypoint:
:func:`posebridge.cell.scene.pinned_values`): a value a target pins (its
``external_axes``) is used as given, never chosen. A carried pose whose target pins
the searched table is solved at the pinned angle alone (reachable there or not); a
target on another turntable that pins it is solved with that table turned to the pin
(:func:`posebridge.cell.external_kinematics.target_poses_at`, in
:func:`posebridge.planning.placement._problem`); the track is below.

**Where the robot stands** (a cell with a track too): every pose is solved with the
robot's base where the track puts it for that pose as the path check does, so the
estimate and the blended time below agree: a target and its approach pose at the
target's pinned track value, else at the track's current value, and a path's world
pose at the current value (a target waypoint's external values,
:func:`posebridge.cell.scene.pinned_values`; the track is not searched here, so the
choice rule of :func:`posebridge.cell.external_kinematics.choose_external_value`,
which keeps pinned values too, is not run). The poses that share a base share one
interval call and one clearance span; a cell without a track has one base.

Each carried pose whose target pins no table angle is reached from its own table
angle: per pose and branch, the middle of the longest feasible interval of the table angle
(:func:`posebridge.cell.external_kinematics.feasible_intervals` over the
configured range, swept every :data:`TABLE_SWEEP_SPACING_RAD` and refined to
0.01 deg; reach and joint limits), with the robot's base (the pose's) moved by
``-delta`` (the same relative placement as the table moved by ``+delta``); a
target and its approach pose share one angle in the intersection of their
intervals, as the rail search does (:mod:`posebridge.planning.placement`).
Poses the table does not carry are solved where they are (another table at
its pin), the table at its current angle.
The poses are then solved there and counted and scored exactly as the base and
rail searches do (:func:`posebridge.planning.placement._chunk_scores`: score,
ties, score noise). Clearance: the arm against the fixed obstacles with the base
where it is, and against the moved table's plate and carried fixtures at their
turned poses, checked as the arm moved by the inverse of the table's motion
against them unmoved (distances do not change under a rigid motion of both).

**Cycle time estimate** (rest to rest, as the other searches): a joint move
runs the robot joints, the other external axes (a track, other tables) and the
table angle on one synchronised trapezoid over ``n + m`` values
(:func:`posebridge.planning.cycle_time.joint_move_durations` with the axes'
speed and acceleration limits); a linear move lasts the longer of its TCP
trapezoid and the axes' own move between its ends. The other axes' values at a
waypoint are the path's (a target's pin, a joint waypoint's given value, else
the current value: where the pose is solved). A target waypoint pinning the
table takes the pin, a waypoint on the table its pose's chosen angle, a joint waypoint its given table value,
any other waypoint holds the angle of the waypoint before it in its path (the
first ones that of the first waypoint with an angle; the current angle when no
waypoint has one).

**Blended cycle time** (the :data:`~posebridge.planning.placement.BLENDED_TOP`
best, as the other searches): the path check's blended timing of every path on
the scene with the table moved to the candidate's position and each waypoint at
the table angle the estimate gives it
(:func:`posebridge.planning.scene_moves.scene_with_table_at`; a waypoint on the
table at its pose's chosen angle on the candidate's branch, other columns of the
external vector as the path states them); None where a waypoint on the table
has no angle there or a path cannot be sampled or timed.

:func:`search_mode` names the search a front door runs for ``auto``: a cell
with a track searches its rail (a cell with a track and a turntable too), a cell
without a track whose targets ride a turntable searches the table's position,
any other cell its base pose.
"""

from __future__ import annotations

import math
import threading
from dataclasses import dataclass, replace
from itertools import pairwise
from typing import Any, Literal

import numpy as np
import numpy.typing as npt

from posebridge.cell.external_axes import turntable_motion
from posebridge.cell.external_kinematics import carrier_axis, feasible_intervals
from posebridge.cell.scene import ResolvedPath, Scene
from posebridge.compute import Executor, ProgressCallback, run_chunks
from posebridge.geometry.clearance import ClearanceScene, clearance_batch, collision_batch
from posebridge.geometry.shapes import ObstacleSet, default_pair_mask
from posebridge.kinematics.branches import labels_match
from posebridge.planning.errors import PlanningInputError
from posebridge.planning.placement import (
    BLENDED_TOP,
    BRANCHES,
    PlacementGrid,
    PlacementResult,
    RankedCandidate,
    _AxisMoves,
    _branch_rows,
    _check_search_arguments,
    _chosen_axis_values,
    _chunk_scores,
    _free_and_clear,
    _grid_scores,
    _GridScores,
    _own_scenes,
    _paths_blended_cycle_time,
    _pose_pins,
    _pose_values,
    _Problem,
    _problem,
    _ranked_rows,
)
from posebridge.planning.scene_moves import scene_with_table_at
from posebridge.transforms import invert_transform
from posebridge.units import BoolArray, FloatArray, rad_from_deg

__all__ = [
    "TABLE_CHUNK_CANDIDATES",
    "TABLE_SWEEP_SPACING_RAD",
    "SearchMode",
    "search_mode",
    "search_table_placement",
    "table_axis",
    "table_grid",
]

TABLE_CHUNK_CANDIDATES = 20
"""Candidate table positions per executor chunk (each sweeps the table angle for every carried pose)."""
TABLE_SWEEP_SPACING_RAD = float(rad_from_deg(5.0))
"""Sweep spacing of the table angle (intervals narrower than this may be missed)."""

SearchMode = Literal["base", "rail", "table"]


def carried_targets(scene: Scene, axis: int) -> BoolArray:
    """Whether the turntable at external index ``axis`` carries each target, shape (K,)."""
    return np.array(
        [carrier_axis(scene, k) == axis for k in range(len(scene.targets.names))], dtype=bool
    )


def search_mode(scene: Scene, requested: str) -> SearchMode:
    """Return the search a request runs: ``requested``, or for ``"auto"`` the module docstring's rule."""
    if requested in ("base", "rail", "table"):
        return requested  # type: ignore[return-value]
    if requested != "auto":
        raise PlanningInputError(f"search: expected auto, base, rail or table, got {requested!r}")
    external = scene.external
    if external.track is not None:
        return "rail"
    offset = external.table_offset
    for k in range(len(external.turntables)):
        if np.any(carried_targets(scene, offset + k)):
            return "table"
    return "base"


def table_axis(scene: Scene, name: str | None = None) -> int:
    """External-vector index of the turntable a table search moves.

    ``name`` picks one; by default the first turntable that carries a target, else the first.
    """
    external = scene.external
    tables = external.turntables
    if not tables:
        raise PlanningInputError("table placement: the cell has no turntable")
    offset = external.table_offset
    names = list(external.names[offset:])
    if name is not None:
        if name not in names:
            raise PlanningInputError(
                f"table: no turntable called {name!r} (the cell has {', '.join(names)})"
            )
        return offset + names.index(name)
    for k in range(len(tables)):
        if np.any(carried_targets(scene, offset + k)):
            return offset + k
    return offset


def table_grid(
    scene: Scene,
    *,
    table: str | None = None,
    x_mm: npt.ArrayLike | None = None,
    y_mm: npt.ArrayLike | None = None,
    half_width_mm: float = 1000.0,
    count: int = 21,
) -> PlacementGrid:
    """Return a table grid: world positions of the table's axis point (see ``PlacementGrid``).

    ``yaw`` and ``height`` hold the robot's current yaw and pedestal (unchanged);
    ``x_mm`` and ``y_mm`` default to ``count`` values within ``half_width_mm`` of the
    table's current position.
    """
    if count < 1:
        raise PlanningInputError("count: expected an integer >= 1")
    axis = table_axis(scene, table)
    position_mm = scene.cell.turntables[axis - scene.external.table_offset].position_mm
    offsets = np.linspace(-half_width_mm, half_width_mm, count) if count > 1 else np.zeros(1)
    grid = PlacementGrid.from_user(
        position_mm[0] + offsets if x_mm is None else x_mm,
        position_mm[1] + offsets if y_mm is None else y_mm,
        [scene.cell.base.rpy_deg[2]],
        [scene.cell.base.pedestal_height_mm],
    )
    return replace(grid, table_axis=axis)


@dataclass(frozen=True, eq=False)
class _Table:
    """The fixed parts of a table search (SI; module docstring).

    scene : the cell
    axis : external index of the table
    point, direction : its current axis point (3,) and unit axis (3,)
    angle0 : its current angle, rad
    carried : (P,) the pose rides the table
    pose_values : (P, m) the cell's external values at each pose as the path check takes a
        target waypoint's (:func:`posebridge.cell.scene.pinned_values`), m or rad
    pinned : (P,) the table angle a pose's target pins, rad, NaN where it pins none
    T_world_base : (P, 4, 4) the robot's base at each pose (where the track puts it there)
    base_group : (P,) index of each pose's base among the distinct ones
    fixed, fixed_mask : obstacles that stay and the arm's pairs with them
    moving, moving_mask : the plate and the carried fixtures
    triple : (8,) row of the intervals' branch list for each row of BRANCHES
    samples : table angles of the interval sweep
    """

    scene: Scene
    axis: int
    point: FloatArray
    direction: FloatArray
    angle0: float
    carried: BoolArray
    pose_values: FloatArray
    pinned: FloatArray
    T_world_base: FloatArray
    base_group: npt.NDArray[np.int64]
    fixed: ObstacleSet
    fixed_mask: BoolArray
    moving: ObstacleSet
    moving_mask: BoolArray
    triple: npt.NDArray[np.int64]
    samples: int


def _waypoint_angle_sources(
    scene: Scene, problem: _Problem, axis: int, carried: BoolArray, path: ResolvedPath
) -> list[tuple[int, float]]:
    """Where each waypoint's table angle comes from: (pose, NaN) or (-1, angle), rad (module docstring).

    A target waypoint whose target pins the table takes the pin, a waypoint on the table
    its pose's angle, a joint waypoint its given table value, any other waypoint holds the angle of the waypoint before it in its path (the first
    ones that of the first waypoint with an angle, the current angle when none has one).
    Pose indices of target waypoints follow :func:`posebridge.planning.placement._problem`.
    """
    angle0 = float(scene.external.values[axis])
    axis_name = scene.external.names[axis]
    specs: list[tuple[int, float] | None] = []
    for w, source in enumerate(path.sources):
        if source == "joints":
            given = path.external[w, axis] if path.external.shape[1] > axis else angle0
            specs.append((-1, float(given)))
        elif source == "pose":
            specs.append(None)  # a world pose: the table holds its angle
        else:
            k = int(path.target_index[w])
            approach = bool(path.approach[w]) and problem.approach_pose[k] >= 0
            p = int(problem.approach_pose[k] if approach else problem.target_pose[k])
            if axis_name in scene.cell.targets[k].external_axes:  # pinned: as the path check
                specs.append((-1, float(path.external[w, axis])))
            else:
                specs.append((p, math.nan) if carried[p] else None)
    known = [spec for spec in specs if spec is not None]
    held = known[0] if known else (-1, angle0)
    filled = []
    for spec in specs:
        held = held if spec is None else spec
        filled.append(held)
    return filled


def _estimate_axes(scene: Scene, axis: int) -> list[int]:
    """External axes the cycle estimate times: every other axis (a track, other tables), then the table."""
    return [a for a in range(scene.external.count) if a != axis] + [axis]


def _table_moves(scene: Scene, problem: _Problem, axis: int, carried: BoolArray) -> _AxisMoves:
    """Where the axes' values at both ends of every move of the cell's paths come from (module docstring).

    Per axis of :func:`_estimate_axes`: another axis's value (a track, another table) is
    the path's (a target's pin, a joint waypoint's given value, else the cell's); for the
    table a target waypoint pinning it takes the pin, a waypoint on it its pose's angle, a
    joint waypoint its given table value, any other waypoint holds the angle of the
    waypoint before it in its path. Pose indices of target waypoints
    follow :func:`posebridge.planning.placement._problem`.
    """
    axes = _estimate_axes(scene, axis)
    ends: dict[bool, tuple[list[list[list[int]]], list[list[list[float]]]]] = {
        False: ([], []),
        True: ([], []),
    }
    for path in scene.paths:
        filled = _waypoint_angle_sources(scene, problem, axis, carried, path)
        for w in range(1, len(path.sources)):
            sources, values = ends[bool(path.linear[w])]
            end_sources, end_values = [], []
            for v in (w - 1, w):
                pose, angle = filled[v]
                track = [float(path.external[v, a]) for a in axes[:-1]]
                end_sources.append([-1] * len(track) + [pose])
                end_values.append([*track, angle])
            sources.append(end_sources)
            values.append(end_values)
    m = len(axes)
    joint, linear = (
        (
            np.array(ends[kind][0], dtype=np.int64).reshape(-1, 2, m),
            np.array(ends[kind][1], dtype=np.float64).reshape(-1, 2, m),
        )
        for kind in (False, True)
    )
    external = scene.external
    return _AxisMoves(
        joint_source=joint[0],
        joint_value=joint[1],
        linear_source=linear[0],
        linear_value=linear[1],
        limits=np.stack([external.velocity_max[axes], external.acceleration_max[axes]]),
    )


def _table(scene: Scene, grid: PlacementGrid, problem: _Problem) -> _Table:
    """Return the table search's fixed parts for a table grid."""
    axis = grid.table_axis
    if axis is None:
        raise PlanningInputError("table placement: expected a table grid (table_grid)")
    external = scene.external
    turntable = external.turntables[axis - external.table_offset]
    carried_target = carried_targets(scene, axis)
    carried = np.zeros(problem.T_world_pose.shape[0], dtype=bool)
    carried[problem.target_pose[carried_target]] = True
    with_approach = carried_target & (problem.approach_pose >= 0)
    carried[problem.approach_pose[with_approach]] = True
    names = {scene.fixture_names[i] for i in turntable.fixtures}
    names.add(f"{external.names[axis]} plate")
    environment = problem.environment
    moves = np.array([name in names for name in environment.names], dtype=bool)
    fixed = environment.subset(np.flatnonzero(~moves))
    moving = environment.subset(np.flatnonzero(moves))
    span = float(external.upper[axis] - external.lower[axis])
    pose_values = _pose_values(scene, problem)
    T_world_base = external.T_world_base(pose_values, scene.T_world_base)
    _, base_group = np.unique(T_world_base.reshape(-1, 16), axis=0, return_inverse=True)
    return _Table(
        scene=scene,
        axis=axis,
        point=turntable.point,
        direction=turntable.axis,
        angle0=float(external.values[axis]),
        carried=carried,
        pose_values=pose_values,
        pinned=np.where(_pose_pins(scene, problem)[:, axis], pose_values[:, axis], np.nan),
        T_world_base=T_world_base,
        base_group=base_group.reshape(-1).astype(np.int64),
        fixed=fixed,
        fixed_mask=default_pair_mask(problem.arm, fixed),
        moving=moving,
        moving_mask=default_pair_mask(problem.arm, moving),
        triple=_branch_rows(scene),
        samples=max(2, int(np.ceil(span / TABLE_SWEEP_SPACING_RAD)) + 1),
    )


def _shifts(table: _Table, grid: PlacementGrid, start: int, stop: int) -> FloatArray:
    """Move of the table's axis point for flat candidates ``start..stop``, m, shape (C, 3)."""
    iy, ix = np.unravel_index(np.arange(start, stop), grid.shape[:2])
    shift = np.zeros((ix.shape[0], 3))
    shift[:, 0] = grid.x[ix] - table.point[0]
    shift[:, 1] = grid.y[iy] - table.point[1]
    return shift


def _table_angles(problem: _Problem, table: _Table, shift: FloatArray) -> FloatArray:
    """Table angle of every pose on every branch at each candidate position, rad, shape (C, P, 8).

    Carried poses: the angle their target pins (on every branch, reachable there or not),
    else the middle of the longest feasible interval (module docstring), NaN where the
    branch reaches the pose at no angle; other poses: the current angle.
    """
    C, P = shift.shape[0], problem.T_world_pose.shape[0]
    theta = np.full((C, P, BRANCHES.shape[0]), np.nan)
    theta[:, ~table.carried] = table.angle0
    pinned = table.carried & np.isfinite(table.pinned)
    theta[:, pinned] = table.pinned[pinned, None]
    carried = np.flatnonzero(table.carried & ~pinned)
    groups = [carried[table.base_group[carried] == g] for g in np.unique(table.base_group[carried])]
    for c in range(C):
        T_move = np.eye(4)
        T_move[:3, 3] = -shift[c]
        for rows in groups:  # one interval call per base the carried poses are solved from
            moved = replace(table.scene, T_world_base=T_move @ table.T_world_base[rows[0]])
            found = feasible_intervals(
                moved, problem.T_world_pose[rows], table.axis, samples=table.samples
            )
            theta[c, rows] = _chosen_axis_values(problem, rows, found, table.triple)
    return theta


def _motions(table: _Table, shift: FloatArray, theta: FloatArray) -> FloatArray:
    """Return the table's motion from where it is: ``Trans(shift) D_p0(theta - theta_0)``, shape (C, P, B, 4, 4).

    ``shift`` (C, 3), ``theta`` (C, P, B) (NaN: no turn).
    """
    turn = np.where(np.isfinite(theta), theta - table.angle0, 0.0)
    M = turntable_motion(table.point, table.direction, turn.ravel()).reshape((*turn.shape, 4, 4))
    M[..., :3, 3] += shift[:, None, None, :]
    return M


@dataclass(frozen=True, eq=False)
class _Solved:
    """Every pose of some candidates solved on every branch at its table angle (shapes (C, P, B, ...)).

    theta : angle, rad; placed : reached at some angle (or not carried)
    motion : (C, P, B, 4, 4) the table's motion; valid, within : IK slot flags (C, P, B, M)
    allowed : within limits, on the required branch and on branch b; free, clear : flags
    q : (C, P, B, M, n)
    """

    theta: FloatArray
    placed: BoolArray
    motion: FloatArray
    valid: BoolArray
    within: BoolArray
    allowed: BoolArray
    free: BoolArray
    clear: BoolArray
    q: FloatArray


def _solve(problem: _Problem, table: _Table, grid: PlacementGrid, start: int, stop: int) -> _Solved:
    """Solve, classify and check every pose of flat candidates ``start..stop`` (module docstring)."""
    shift = _shifts(table, grid, start, stop)
    C, P, B = shift.shape[0], problem.T_world_pose.shape[0], BRANCHES.shape[0]
    n = problem.arm.robot.dof
    theta = _table_angles(problem, table, shift)
    placed = np.isfinite(theta)
    motion = _motions(table, shift, theta)
    T_world_pose = np.where(
        table.carried[None, :, None, None, None],
        motion @ problem.T_world_pose[None, :, None],
        problem.T_world_pose[None, :, None],
    )
    T_base_pose = invert_transform(table.T_world_base)[None, :, None] @ T_world_pose
    ik = problem.solver.solve(T_base_pose.reshape(-1, 4, 4), T_flange_tool=problem.T_flange_tool)
    M = ik.n_slots
    labels = np.stack([ik.shoulder, ik.elbow, ik.wrist], axis=2).reshape(C, P, B, M, 3)
    valid = ik.valid.reshape(C, P, B, M)
    within = valid & ik.within_limits.reshape(C, P, B, M)
    allowed = (
        within
        & labels_match(labels, problem.requirement[None, :, None, None, :])
        & labels_match(labels, BRANCHES[None, None, :, None, :])
        & placed[..., None]
    )
    q = ik.q.reshape(C, P, B, M, n)
    free = np.zeros((C, P, B, M), dtype=bool)
    clear = np.zeros((C, P, B, M), dtype=bool)
    index = np.nonzero(allowed)
    S = index[0].size
    if S:
        own = _own_scenes(problem, float(grid.height[0]))
        fixed = _arm_scene(problem, table, moving=False)
        q_s = q[index]
        # the fixed obstacles once per base: solutions ordered by their pose's base
        base = table.base_group[index[1]]
        order = np.argsort(base, kind="stable")
        bounds = np.flatnonzero(np.r_[True, base[order][1:] != base[order][:-1], True])
        spans = [
            (int(a), int(b), fixed.with_base(table.T_world_base[index[1][order[a]]]))
            for a, b in pairwise(bounds.tolist())
        ]
        free_s, clear_s = np.empty(S, dtype=bool), np.empty(S, dtype=bool)
        free_s[order], clear_s[order] = _free_and_clear(problem, own, q_s[order], spans)
        moving = _arm_scene(problem, table, moving=True)
        group = np.ravel_multi_index(index[:3], (C, P, B))
        starts = np.flatnonzero(np.r_[True, group[1:] != group[:-1]])
        for first, last in zip(starts.tolist(), [*starts[1:].tolist(), S], strict=True):
            rows = np.flatnonzero(free_s[first:last]) + first
            if not rows.size or table.moving.count == 0:
                continue
            c, p, b = (int(i[first]) for i in index[:3])
            scene = _moved_table(moving, motion[c, p, b], table.T_world_base[p])
            hit = collision_batch(scene, q_s[rows], threshold_m=problem.margin)
            free_s[rows[hit]] = False
            clear_s[rows[hit]] = False
            fine = rows[~hit]
            fine = fine[clear_s[fine]]
            if fine.size:
                near = collision_batch(scene, q_s[fine], threshold_m=problem.clearance_goal)
                clear_s[fine[near]] = False
        free[index], clear[index] = free_s, clear_s
    return _Solved(theta, placed, motion, valid, within, allowed, free, clear, q)


def _arm_scene(problem: _Problem, table: _Table, moving: bool) -> ClearanceScene:
    """Return the arm against some of the table search's obstacles (its base: moved with ``with_base``).

    Those that stay (``moving`` false) or the table's plate and carried fixtures (``moving``
    true); no self pairs.
    """
    obstacles, mask = (
        (table.moving, table.moving_mask) if moving else (table.fixed, table.fixed_mask)
    )
    return ClearanceScene(
        problem.arm, obstacles, table.scene.T_world_base, np.empty((0, 2), dtype=np.int64), mask
    )


def _moved_table(
    moving: ClearanceScene, motion: FloatArray, T_world_base: FloatArray
) -> ClearanceScene:
    """Return the arm, base at ``T_world_base`` (4, 4), against the table's obstacles after ``motion`` (4, 4).

    Checked as the arm with its base moved back by the inverse motion.
    """
    return moving.with_base(invert_transform(motion) @ T_world_base)


def _table_chunk(
    problem: _Problem, table: _Table, grid: PlacementGrid, start: int, stop: int
) -> tuple[FloatArray, ...]:
    """Score the table candidates ``start..stop`` (one executor chunk; module docstring).

    Returns the arrays of :func:`posebridge.planning.placement._chunk_scores` (the cycle
    time with the table's turns: ``problem.axis_moves`` is the table's) and the table angle
    of each reached carried target (C, K), rad (NaN elsewhere).
    """
    solved = _solve(problem, table, grid, start, stop)
    C, P, B, M, n = solved.q.shape
    diagonal = np.zeros((C, P, B, M, B), dtype=bool)
    for b in range(B):
        diagonal[:, :, b, :, b] = solved.free[:, :, b]
    counting = diagonal.reshape(C, P, B * M, B)
    q = solved.q.reshape(C, P, B * M, n)
    theta = np.broadcast_to(solved.theta[..., None, None], (C, P, B, M, 1))
    others = _estimate_axes(table.scene, table.axis)[:-1]
    if others:  # the other axes where the path check puts each pose (a track, other tables)
        values = table.pose_values[:, others][:, None, None]
        values = np.broadcast_to(values, (C, P, B, M, len(others)))
        theta = np.concatenate([values, theta], axis=4)
    scores = _chunk_scores(
        problem,
        counting,
        q,
        solved.clear.reshape(C, P, B * M),
        theta.reshape(C, P, B * M, theta.shape[4]),
    )
    branch = scores[1].astype(np.int64)
    reached = scores[7].astype(bool)
    carried = table.carried[problem.target_pose]
    theta_target = solved.theta[np.arange(C)[:, None], problem.target_pose, branch[:, None]]
    angle = np.where(reached & carried, theta_target, np.nan)
    return (*scores, angle)


def search_table_placement(
    scene: Scene,
    grid: PlacementGrid | None = None,
    *,
    executor: Executor | None = None,
    progress: ProgressCallback | None = None,
    cancel: threading.Event | None = None,
    top: int = 10,
    collision_margin_m: float = 0.0,
    clearance_goal_m: float = 0.05,
) -> PlacementResult:
    """Score every table position of ``grid`` and rank them (module docstring).

    Parameters and result as :func:`posebridge.planning.placement.search_base_placement`;
    ``grid`` is a table grid (:func:`table_grid`; by default its default one).
    """
    _check_search_arguments(top, collision_margin_m, clearance_goal_m)
    grid = table_grid(scene) if grid is None else grid
    # rail=True: on a track the foot stands on the carriage, which rides with the robot; the
    # searched table's carried poses are posed by the search, other tables' at their pins
    problem = _problem(
        scene,
        float(collision_margin_m),
        float(clearance_goal_m),
        rail=True,
        searched_table=-1 if grid.table_axis is None else grid.table_axis,
    )
    table = _table(scene, grid, problem)
    problem = replace(problem, axis_moves=_table_moves(scene, problem, table.axis, table.carried))
    size = grid.size
    chunks = [
        (problem, table, grid, start, min(start + TABLE_CHUNK_CANDIDATES, size))
        for start in range(0, size, TABLE_CHUNK_CANDIDATES)
    ]
    if executor is None:
        results = run_chunks(_table_chunk, chunks, progress=progress, cancel=cancel)
    else:
        results = executor.map_chunks(_table_chunk, chunks, progress=progress, cancel=cancel)
    K = len(scene.targets.names)
    n = scene.robot.dof

    def gather(field: int, tail: tuple[int, ...] = ()) -> npt.NDArray[Any]:
        return np.concatenate([r[field] for r in results]).reshape((*grid.shape, *tail))

    scores = _grid_scores(gather, K, n)
    angle = gather(9, (K,))
    external = scene.external
    return PlacementResult(
        robot=scene.robot,
        grid=grid,
        target_names=scene.targets.names,
        **scores.result_fields(),
        best=_ranked(problem, table, grid, scores, angle, top),
        current=_current_index(table, grid),
        table_angle=angle,
        table_range=(float(external.lower[table.axis]), float(external.upper[table.axis])),
        table_name=external.names[table.axis],
        table_point=table.point.copy(),
    )


def _current_index(table: _Table, grid: PlacementGrid) -> tuple[int, ...] | None:
    """Grid index of the table's current position, if the grid holds it."""
    ix = np.flatnonzero(np.abs(grid.x - table.point[0]) < 1e-9)
    iy = np.flatnonzero(np.abs(grid.y - table.point[1]) < 1e-9)
    if ix.size == 0 or iy.size == 0:
        return None
    return (int(iy[0]), int(ix[0]), 0, 0)


def _ranked(
    problem: _Problem,
    table: _Table,
    grid: PlacementGrid,
    scores: _GridScores,
    angle: FloatArray,
    top: int,
) -> tuple[RankedCandidate, ...]:
    """Return the ``top`` best candidates, best first, with exact per-target details."""
    best: list[RankedCandidate] = []
    for flat, idx, shared in _ranked_rows(
        problem.arm.robot, problem.T_flange_tool, grid, scores, top
    ):
        reasons, clearance, pose_angle = _details(
            problem, table, grid, flat, int(scores.branch[idx]), scores.q[idx]
        )
        at = angle[idx]
        iy, ix = idx[0], idx[1]
        used = at[np.isfinite(at)]
        best.append(
            RankedCandidate(
                **shared,
                reasons=tuple(reasons),
                clearance=clearance,
                blended_cycle_time=(
                    _table_blended_cycle_time(
                        problem, table, np.array([grid.x[ix], grid.y[iy]]), pose_angle
                    )
                    if shared["rank"] <= BLENDED_TOP
                    else None
                ),
                table_angle=at,
                table_span=(float(used.min()), float(used.max())) if used.size else None,
            )
        )
    return tuple(best)


def _table_blended_cycle_time(
    problem: _Problem, table: _Table, xy: FloatArray, pose_angle: FloatArray
) -> float | None:
    """Return the blended cycle time, s, of every path of one table candidate (module docstring).

    The table's axis point at ``xy`` ((2,), m; :func:`scene_with_table_at`), every waypoint's
    table angle from :func:`_waypoint_angle_sources` with each pose at ``pose_angle``
    ((P,), rad, the candidate's branch); None where a waypoint on the table has no angle or
    a path cannot be sampled or timed there.
    """
    scene = table.scene
    angles = []
    for path in scene.paths:
        sources = _waypoint_angle_sources(scene, problem, table.axis, table.carried, path)
        values = np.array([pose_angle[p] if p >= 0 else v for p, v in sources])
        if np.any(np.isnan(values)):
            return None
        angles.append(values)
    return _paths_blended_cycle_time(scene_with_table_at(scene, table.axis, xy, angles))


def _pose_reason(solved: _Solved, carried: bool, pinned: bool, p: int, branch: int) -> str:
    """Why pose ``p`` of a one-candidate solve is not reached on ``branch`` (``""`` if it is).

    A carried pose whose target pins the table is tested at the pinned angle alone.
    """
    chosen = carried and not pinned
    at = " at the pinned table angle" if carried and pinned else ""
    if chosen and not np.any(solved.placed[0, p]):
        return "out of reach within the joint limits at every table angle"
    if not chosen and not np.any(solved.valid[0, p]):
        return f"out of reach{at}"
    if not chosen and not np.any(solved.within[0, p]):
        return f"outside the joint limits on every branch{at}"
    if not np.any(solved.allowed[0, p]):
        return "not reachable on the required branch" + (" at any table angle" if chosen else at)
    if not np.any(solved.allowed[0, p, branch]):
        return "reachable only on another branch than the candidate's"
    if not np.any(solved.free[0, p, branch]):
        where = " at the chosen table angle" if chosen else at
        return f"in collision{where} on the candidate's branch"
    return ""


def _details(
    problem: _Problem, table: _Table, grid: PlacementGrid, flat: int, branch: int, q: FloatArray
) -> tuple[list[str], FloatArray, FloatArray]:
    """Reasons, exact clearance per target and table angles per pose of one table candidate.

    Why each target is not reached (``""`` where it is; its pose, then its approach pose,
    the first failing test: reach at some table angle, joint limits, the required branch,
    the candidate's branch, collision there) and the clearance of each reached target's
    configuration to fixtures, keep-outs, pedestal and floor, the table where it puts it, m
    (NaN elsewhere), and every pose's table angle on ``branch``, rad, shape (P,) (NaN where
    the branch reaches a carried pose at no angle).
    """
    solved = _solve(problem, table, grid, flat, flat + 1)
    support, _ = _own_scenes(problem, float(grid.height[0]))
    fixed = _arm_scene(problem, table, moving=False)
    clearance = np.full(problem.target_pose.shape[0], np.nan)
    reasons = []
    for k, p in enumerate(problem.target_pose.tolist()):
        if np.all(np.isfinite(q[k])):
            config = q[k][None]
            distances = [
                float(clearance_batch(support, config).distance[0]),
                float(clearance_batch(fixed.with_base(table.T_world_base[p]), config).distance[0]),
            ]
            if table.moving.count:
                scene = _moved_table(
                    _arm_scene(problem, table, moving=True),
                    solved.motion[0, p, branch],
                    table.T_world_base[p],
                )
                distances.append(float(clearance_batch(scene, config).distance[0]))
            clearance[k] = min(distances)
            reasons.append("")
            continue
        pinned = bool(np.isfinite(table.pinned[p]))
        reason = _pose_reason(solved, bool(table.carried[p]), pinned, p, branch)
        a = int(problem.approach_pose[k])
        if not reason and a >= 0:
            reason = _pose_reason(solved, bool(table.carried[a]), pinned, a, branch)
            reason = f"approach pose {reason}" if reason else ""
        reasons.append(reason or "reachable only on another branch than the candidate's")
    return reasons, clearance, solved.theta[0, :, branch]

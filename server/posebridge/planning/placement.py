"""Base placement: score candidate robot base poses over a grid and rank them.

A candidate moves the robot's foot (the pedestal's floor point) to world
``(x, y)`` at the cell's current foot height, turns it to ``yaw`` about the
world z axis (keeping the current roll and pitch) and puts the robot on a
pedestal of the given height: ``T_world_base = Trans(x, y, z) Rz(yaw)
Ry(pitch) Rx(roll) Trans(0, 0, h)``. The pedestal moves with the robot.

For every candidate and every target (its pose and, with an approach offset,
its approach pose) the analytic IK (:func:`posebridge.kinematics.ik.ik_solver`,
all candidates of a chunk in one call) gives up to eight solutions, one per
branch. A solution **counts** when it reaches the pose, is inside the joint
limits, matches the target's required branch and is collision-free
(clearance at least ``collision_margin_m`` to fixtures, keep-outs, pedestal
and floor, and no self contact; :func:`posebridge.geometry.clearance.collision_batch`).
A target is **reached on a branch** (shoulder x elbow x wrist, 8 branches)
when its pose and its approach pose both have a counting solution on that
branch (a singular label 0 matches either side). The candidate's branch is
the one reaching the most targets (ties: the stable order front before
back, up before down, positive before negative); the **reach fraction** is
that count over the number of targets.

Quality of the reached targets on that branch, each term in [0, 1]:

* margin: twice the smallest joint-limit margin fraction (1 at mid-range, 0
  at a limit; :func:`posebridge.kinematics.metrics.limit_margins`);
* dexterity: the smallest inverse condition number of the TCP position
  Jacobian (scale-free; the Yoshikawa manipulability is reported beside it);
* clearance: the share of reached targets whose configuration keeps at least
  ``clearance_goal_m`` from every obstacle (one early-exit check at that
  threshold; the exact clearance is computed for the ranked candidates only).

``score = reach_fraction + quality / (2 K)`` with ``quality`` the mean of
the three terms and ``K`` the number of targets: quality orders candidates
that reach the same number of targets, and never outweighs one more target.
In words (the report's ``score_words``): the share of the targets reached on
one branch, plus at most half a target's worth for how comfortably they are
reached.

**Score noise and ties.** The grid samples the base position; a score
difference smaller than what one grid step changes is not a real
preference. :func:`score_noise` is the median absolute score change between
neighbouring grid points (one step in x or y, same yaw and height) that reach
the same number of targets, i.e. the typical change of the quality part over
one grid step. Ranked candidates whose score is within that noise of a better
one's are ties (``tie_rank``: the rank of the best candidate of their tie
group, the group starting at its best member).

**Cycle time estimate** (for speed): the sum over the cell's paths, given
when every Cartesian waypoint of every path is reached on the candidate's
branch: joint moves as synchronised trapezoids between the chosen
configurations (:func:`posebridge.planning.cycle_time.joint_move_durations`),
linear moves as trapezoids in TCP path length at the requested speed and
:data:`~posebridge.planning.cycle_time.DEFAULT_LINEAR_ACCELERATION_M_S2`
(no joint-limit cap and no continuity check along the line, unlike
:func:`posebridge.planning.path_check.check_path`), blends ignored: the
rest-to-rest upper bound, cheap enough for every candidate. On a cell without
a track a base candidate's estimate times the robot's joints; on a cell with a
track every candidate's includes the track (below).

**Blended cycle time** (for the :data:`BLENDED_TOP` best-ranked candidates
only, after ranking): with the base moved to the candidate's pose (TCP poses
of joint-value waypoints move with it), every path is sampled and timed
through its blends exactly as the path check does
(:func:`posebridge.planning.path_sampling.sample_path`,
:func:`posebridge.planning.blended_timing.blended_cycle_time`, TOPP-RA) and
the totals summed; None where a path cannot be sampled or timed there. Its
cost is a path check per path and candidate, so it is not computed over the
whole grid.

Collision checks per candidate: the arm against the pedestal and the floor,
and against itself, depends only on the configuration and the pedestal
height, so it runs in one batch per chunk; against fixtures and keep-outs
one batch per candidate (its base pose). The pedestal's own footprint is not
checked against the fixtures (the robot's base capsules are).

**Rail search** (a cell with a track; :meth:`PlacementGrid.rail_around`).
The robot rides the carriage, so a candidate is a rail line instead of a base
pose: the current rail frame turned about world z to the candidate's yaw (the
direction of travel) and moved across the travel by its offset (along the
turned frame's y), the middle of the configured travel staying on the line's
middle. Each pose is reached from its own track position: per pose and branch,
the middle of the longest feasible interval of the track
(:func:`posebridge.cell.external_kinematics.feasible_intervals`, reach and
joint limits, the travel widened to wherever the robot can reach a pose from;
a target and its approach pose share one position in the intersection of their
intervals). The pose is then solved there and counted as above (the arm's
clearance to fixtures and keep-outs with the base at that position; the
carriage, which rides with the robot, is left out), and the candidate scored
with the same score. The answer also gives the travel the reached targets
need: their positions' span with :data:`RAIL_TRAVEL_MARGIN_M` at both ends,
beside the configured travel.

**Pinned axes** (one rule, as the path check resolves a target waypoint:
:func:`posebridge.cell.scene.pinned_values`): a value a target pins (its
``external_axes``) is used as given, never chosen. A pose whose target pins the
track is solved at the pinned value alone, on every branch (reachable there or
not); the value is along the track, so on a candidate line the base stands at the
line's origin plus the value times its direction. A target on a turntable that
pins its angle is solved with the table turned to the pin
(:func:`posebridge.cell.external_kinematics.target_poses_at`), in every search;
every other turntable stays at its current angle. The estimate and the blended
time below take the same values.

The rail candidate's **cycle time estimate** includes the track: each
Cartesian waypoint is reached at its pose's track position on the candidate's
branch (a pinned one at the pin) and its turntables where the path check puts
them, a joint-value waypoint at the track value its path states (the
cell's current value where it gives none), a joint move runs the robot joints
and the track (and any turntable) on one synchronised trapezoid over the
``n + m`` values, and a linear move lasts at least the track's own trapezoid
between its ends, as :func:`posebridge.planning.cycle_time.path_cycle_time`
times a path with ``external=``; one vectorised call per move for a whole
chunk. Its **blended cycle time** (the :data:`BLENDED_TOP` best) is the path
check's on the cell with the rail moved to the candidate's line and each
Cartesian waypoint's track position the chosen one (:func:`posebridge.planning.scene_moves.scene_on_rail`).

**Base search on a track cell** (a base grid, ``--search base``). The cell's
``base`` is then the robot's foot on the carriage (its position, roll, pitch and
yaw in the carriage-top frame, and its pedestal), so a candidate ``(x, y, yaw,
h)`` is that foot pose, as applying it writes it; the rail stays where it is and
the robot still rides the track. Every pose is reached from its own track
position and scored exactly as in the rail search (the same intervals, travel
widening, clearance with the carriage left out, and track-inclusive cycle
estimate and blended time, the blended one on
:func:`posebridge.planning.scene_moves.scene_on_carriage`), so a
base candidate equal to the cell's placement gets the rail search's answer for
the current line. Candidates of one yaw share a mount of the robot on the
carriage (one interval call per yaw in a chunk; their ``x, y`` shift the rail
frame, since translations commute), in chunks of :data:`RAIL_CHUNK_CANDIDATES`.

Chunks of :data:`CHUNK_CANDIDATES` candidates (fixed by the grid alone, one
pedestal height per chunk) run through an executor
(:mod:`posebridge.compute`) with progress and cancellation; results are the
same whichever executor runs them.

The **table search** (a turntable cell: the table's position, each target on it at
its own table angle) is :mod:`posebridge.planning.placement_table`; it reuses this
module's problem, scoring and clearance helpers.
"""

from __future__ import annotations

import math
import threading
from collections.abc import Callable, Iterable, Iterator
from dataclasses import dataclass, replace
from typing import Any

import numpy as np
import numpy.typing as npt

from posebridge.cell.clearance import cell_arm, clearance_scene, fixture_count
from posebridge.cell.external_kinematics import (
    AxisIntervals,
    branch_triples,
    carrier_axis,
    feasible_intervals,
    target_poses_at,
)
from posebridge.cell.scene import Scene, pinned_values
from posebridge.compute import Executor, ProgressCallback, run_chunks
from posebridge.geometry.clearance import ClearanceScene, clearance_batch, collision_batch
from posebridge.geometry.shapes import (
    ArmCapsules,
    Box,
    Cylinder,
    Floor,
    ObstacleSet,
    default_pair_mask,
)
from posebridge.kinematics.branches import branch_geometry, branch_words, labels_match
from posebridge.kinematics.ik import IkSolver, ik_solver
from posebridge.kinematics.jacobian import jacobian_base
from posebridge.kinematics.metrics import (
    inverse_condition_number,
    jacobian_rows,
    limit_margins,
    manipulability_yoshikawa,
)
from posebridge.planning.cycle_time import (
    DEFAULT_LINEAR_ACCELERATION_M_S2,
    joint_move_durations,
)
from posebridge.planning.errors import PlanningInputError, check_non_negative
from posebridge.planning.path_sampling import branch_requirement
from posebridge.planning.scene_moves import scene_on_carriage, scene_on_rail, scene_with_base
from posebridge.planning.time_scaling import trapezoidal_profile
from posebridge.robot.model import Robot
from posebridge.transforms import (
    invert_transform,
    rotation_matrix_about_z,
    rotation_matrix_from_rpy,
)
from posebridge.units import BoolArray, FloatArray, m_from_mm, rad_from_deg

__all__ = [
    "BLENDED_TOP",
    "BRANCHES",
    "CHUNK_CANDIDATES",
    "MAX_CANDIDATES",
    "PlacementGrid",
    "PlacementResult",
    "RankedCandidate",
    "search_base_placement",
]

BLENDED_TOP = 3
"""Best-ranked candidates whose blended cycle time is computed (module docstring)."""
CHUNK_CANDIDATES = 500
"""Candidate base poses per executor chunk (about 0.1 to 0.3 s on one core for ten targets)."""
MAX_CANDIDATES = 1_000_000
"""Largest grid accepted."""
BRANCHES = np.array([(s, e, w) for s in (1, -1) for e in (1, -1) for w in (1, -1)], dtype=np.int8)
"""The eight branches (shoulder, elbow, wrist) in the stable order, shape (8, 3)."""
RAIL_CHUNK_CANDIDATES = 40
"""Candidate rail lines per executor chunk (each solves every pose at every branch's track position)."""
RAIL_SWEEP_SPACING_M = 0.1
"""Sweep spacing of the track positions in the rail search (intervals narrower than this may be missed)."""
RAIL_TRAVEL_MARGIN_M = 0.1
"""Travel kept beyond the outermost chosen track positions in the travel needed (common practice, no source)."""


@dataclass(frozen=True)
class PlacementGrid:
    """Candidate base poses: the product of the axes (SI units).

    Attributes
    ----------
    x, y : array, shape (nx,), (ny,)
        World position of the robot's foot, m.
    yaw : array, shape (nyaw,)
        Base yaw about world z, rad.
    height : array, shape (nheights,)
        Pedestal height, m (>= 0).
    rail : bool
        A rail grid (for a cell with a track; :meth:`rail_around`): ``x`` holds the
        rail line's offsets from the current line, m (across the travel in the floor
        plane, along the rail frame's y turned to the candidate's yaw), ``y`` is
        ``[0]``, ``yaw`` the direction of travel about world z, rad, and ``height``
        the current pedestal.
    table_axis : int or None
        A table grid (:func:`posebridge.planning.placement_table.table_grid`): the
        external-axis index of the turntable moved; ``x`` and ``y`` hold world positions
        of its axis point, m, ``yaw`` and ``height`` the robot's current yaw and pedestal.
    """

    x: FloatArray
    y: FloatArray
    yaw: FloatArray
    height: FloatArray
    rail: bool = False
    table_axis: int | None = None

    @property
    def shape(self) -> tuple[int, int, int, int]:
        """``(ny, nx, nyaw, nheights)``."""
        return (self.y.shape[0], self.x.shape[0], self.yaw.shape[0], self.height.shape[0])

    @property
    def size(self) -> int:
        """Number of candidates."""
        return int(np.prod(self.shape))

    @classmethod
    def from_user(
        cls,
        x_mm: npt.ArrayLike,
        y_mm: npt.ArrayLike,
        yaw_deg: npt.ArrayLike,
        height_mm: npt.ArrayLike,
    ) -> PlacementGrid:
        """Return a grid from boundary units (mm, deg), each axis a 1-D list of values."""
        axes = {}
        for name, values in (
            ("x_mm", x_mm),
            ("y_mm", y_mm),
            ("yaw_deg", yaw_deg),
            ("height_mm", height_mm),
        ):
            array = np.atleast_1d(np.asarray(values, dtype=np.float64))
            if array.ndim != 1 or array.size == 0 or not np.all(np.isfinite(array)):
                raise PlanningInputError(f"{name}: expected a non-empty list of finite numbers")
            axes[name] = array
        if np.any(axes["height_mm"] < 0.0):
            raise PlanningInputError("height_mm: expected pedestal heights >= 0")
        grid = cls(
            x=m_from_mm(axes["x_mm"]),
            y=m_from_mm(axes["y_mm"]),
            yaw=rad_from_deg(axes["yaw_deg"]),
            height=m_from_mm(axes["height_mm"]),
        )
        if grid.size > MAX_CANDIDATES:
            raise PlanningInputError(
                f"grid: {grid.size} candidates, more than the {MAX_CANDIDATES} accepted"
            )
        return grid

    @classmethod
    def around(
        cls,
        scene: Scene,
        *,
        half_width_mm: float = 1000.0,
        count: int = 21,
        yaw_count: int = 8,
    ) -> PlacementGrid:
        """Return the default grid around the current base.

        ``count x count`` positions within ``half_width_mm`` of the current foot, ``yaw_count`` yaws
        evenly around the turn from the current yaw, the current pedestal.
        """
        if count < 1 or yaw_count < 1:
            raise PlanningInputError("count, yaw_count: expected integers >= 1")
        base = scene.cell.base
        offsets = np.linspace(-half_width_mm, half_width_mm, count) if count > 1 else np.zeros(1)
        yaw = base.rpy_deg[2] + 360.0 * np.arange(yaw_count) / yaw_count
        return cls.from_user(
            base.position_mm[0] + offsets,
            base.position_mm[1] + offsets,
            (yaw + 180.0) % 360.0 - 180.0,
            [base.pedestal_height_mm],
        )

    @classmethod
    def rail_around(
        cls,
        scene: Scene,
        *,
        offset_mm: npt.ArrayLike | None = None,
        yaw_deg: npt.ArrayLike | None = None,
        half_width_mm: float = 1000.0,
        count: int = 21,
        yaw_count: int = 8,
    ) -> PlacementGrid:
        """Return a rail grid for a cell with a track (see the ``rail`` attribute).

        ``offset_mm`` (default: ``count`` offsets within ``half_width_mm`` of the current
        line) and ``yaw_deg`` (default: ``yaw_count`` directions evenly around the turn
        from the current one).
        """
        track = scene.external.track
        if track is None:
            raise PlanningInputError("rail placement: the cell has no track")
        if count < 1 or yaw_count < 1:
            raise PlanningInputError("count, yaw_count: expected integers >= 1")
        if offset_mm is None:
            offset_mm = (
                np.linspace(-half_width_mm, half_width_mm, count) if count > 1 else np.zeros(1)
            )
        if yaw_deg is None:
            direction = track.direction
            current = float(np.arctan2(direction[1], direction[0]))
            turns = rad_from_deg(360.0 * np.arange(yaw_count) / yaw_count) + current
            yaw = np.mod(turns + np.pi, 2.0 * np.pi) - np.pi
        else:
            yaw = rad_from_deg(np.atleast_1d(np.asarray(yaw_deg, dtype=np.float64)))
        if yaw.ndim != 1 or yaw.size == 0 or not np.all(np.isfinite(yaw)):
            raise PlanningInputError("yaw_deg: expected a non-empty list of finite numbers")
        grid = cls.from_user(offset_mm, [0.0], [0.0], [scene.cell.base.pedestal_height_mm])
        grid = replace(grid, yaw=yaw, rail=True)
        if grid.size > MAX_CANDIDATES:
            raise PlanningInputError(
                f"grid: {grid.size} candidates, more than the {MAX_CANDIDATES} accepted"
            )
        return grid


@dataclass(frozen=True, eq=False)
class RankedCandidate:
    """One of the best-ranked candidates with its per-target details (SI units).

    Attributes
    ----------
    rank : int
        1 for the best.
    tie_rank : int
        Rank of the best candidate it ties with (within the score noise; module docstring),
        its own rank when it ties with no better one.
    index : tuple of int
        Grid index ``(y, x, yaw, height)``.
    branch : str
        Plain words of the candidate's branch; ``""`` when it reaches no target.
    reasons : tuple of str, length K
        Why each target is not reached (``""`` where it is).
    limit_margin : array, shape (K,)
        Smallest joint-limit margin of each target's configuration (rad; m for a
        prismatic joint), from :func:`posebridge.kinematics.metrics.limit_margins`.
    manipulability : array, shape (K,)
        Yoshikawa manipulability of the TCP position Jacobian per target.
    clearance : array, shape (K,)
        Exact clearance to fixtures, keep-outs, pedestal and floor per target, m (NaN
        where not reached).
    blended_cycle_time : float or None
        s, for the :data:`BLENDED_TOP` best only (module docstring); None where a path
        cannot be timed there.
    rail_frame : array, shape (4, 4), or None
        A rail candidate's rail frame (track position 0, x along the travel).
    track_position : array, shape (K,), or None
        A track cell's candidate (rail or base search): the track position of each
        reached target, m (NaN elsewhere).
    travel_needed : tuple of float or None
        ``(lower, upper)`` track positions covering every reached target's position with
        :data:`RAIL_TRAVEL_MARGIN_M` at both ends, m; None without a reached target.
    table_angle : array, shape (K,), or None
        A table candidate's table angle of each reached target it carries, rad (NaN
        elsewhere).
    table_span : tuple of float or None
        ``(lowest, highest)`` of those angles, rad; None when no carried target is reached.
    """

    rank: int
    tie_rank: int
    index: tuple[int, int, int, int]
    branch: str
    reasons: tuple[str, ...]
    limit_margin: FloatArray
    manipulability: FloatArray
    clearance: FloatArray
    blended_cycle_time: float | None
    rail_frame: FloatArray | None = None
    track_position: FloatArray | None = None
    travel_needed: tuple[float, float] | None = None
    table_angle: FloatArray | None = None
    table_span: tuple[float, float] | None = None


@dataclass(frozen=True, eq=False)
class PlacementResult:
    """Scores of every candidate (grid arrays of shape ``(ny, nx, nyaw, nheights)``) and the ranking.

    SI units; :func:`posebridge.results.placement.placement_result` builds the
    boundary model (mm, deg) from it.

    Attributes
    ----------
    robot : Robot
    grid : PlacementGrid
    target_names : tuple of str, length K
    score, reach_fraction : array, grid shape
    branch : array of int8, grid shape
        Index into :data:`BRANCHES` of each candidate's branch.
    min_margin_fraction, inverse_condition, manipulability, clearance_share : array, grid shape
        Quality terms over the reached targets (NaN where none is reached).
    cycle_time : array, grid shape
        s; NaN where a path is not reached on the candidate's branch (track cells: the
        track's travel included, module docstring).
    reached : array of bool, grid shape + (K,)
    q : array, grid shape + (K, n)
        Configuration of each reached target on the candidate's branch (NaN elsewhere).
    order : array of int64, shape (C,)
        Flat (C-order) candidate indices, best first (score, then index).
    best : tuple of RankedCandidate
        The ``top`` best candidates, best first.
    current : tuple of int or None
        Grid index of the cell's current base pose, if the grid holds it.
    score_noise : float
        :func:`score_noise` of the grid.
    track_position : array, grid shape + (K,), or None
        Track cells (rail or base grid): the track position of each reached target, m
        (NaN elsewhere).
    rail_travel : tuple of float or None
        Track cells: the track's configured travel ``(lower, upper)``, m.
    carriage_length : float
        Track cells: the carriage's length along the rail, m (0 otherwise).
    table_angle : array, grid shape + (K,), or None
        Table grids: the table angle of each reached target the table carries, rad (NaN
        elsewhere).
    table_range : tuple of float or None
        Table grids: the table's configured angle range ``(lower, upper)``, rad.
    table_name : str
        Table grids: the turntable moved (``""`` otherwise).
    table_point : array, shape (3,), or None
        Table grids: the table's current axis point (top centre of the plate), m.
    """

    robot: Robot
    grid: PlacementGrid
    target_names: tuple[str, ...]
    score: FloatArray
    reach_fraction: FloatArray
    branch: npt.NDArray[np.int8]
    min_margin_fraction: FloatArray
    inverse_condition: FloatArray
    manipulability: FloatArray
    clearance_share: FloatArray
    cycle_time: FloatArray
    reached: BoolArray
    q: FloatArray
    order: npt.NDArray[np.int64]
    best: tuple[RankedCandidate, ...]
    current: tuple[int, ...] | None
    score_noise: float
    track_position: FloatArray | None = None
    rail_travel: tuple[float, float] | None = None
    carriage_length: float = 0.0
    table_angle: FloatArray | None = None
    table_range: tuple[float, float] | None = None
    table_name: str = ""
    table_point: FloatArray | None = None


@dataclass(frozen=True, eq=False)
class _AxisMoves:
    """Where the external axes' values at both ends of every move come from (SI).

    joint_source : (J, 2) pose whose solved axis values an end of joint move ``j`` takes
        (the order of the problem's ``joint_ends``), -1 for ``joint_value``; or (J, 2, m),
        one source per axis
    joint_value : (J, 2, m) the end's values where its source is -1, m or rad
    linear_source, linear_value : the same for the linear moves, (L, 2) or (L, 2, m) and
        (L, 2, m) (the order of the problem's ``linear_duration``)
    limits : (2, m) velocity and acceleration limits of the m axes
    """

    joint_source: npt.NDArray[np.int64]
    joint_value: FloatArray
    linear_source: npt.NDArray[np.int64]
    linear_value: FloatArray
    limits: FloatArray


@dataclass(frozen=True, eq=False)
class _Rail:
    """The fixed parts of a rail search (SI; module docstring).

    scene : the cell with the track's travel widened to the search span
    T_world_rail : (4, 4) the current rail frame
    middle : (3,) world point of the rail line at the middle of the configured travel
    middle_s : track position of that point
    yaw0 : yaw of the current travel direction about world z, rad
    T_rail_base : (4, 4) robot base frame at track position 0 in the rail frame
    triple : (8,) row of the intervals' branch list for each row of BRANCHES
    samples : track positions of the interval sweep over the widened travel
    pose_values : (P, m) the external values the path check puts each pose at
        (:func:`_pose_values`), m or rad
    pinned : (P,) the track value a pose's target pins, m, NaN where it pins none
    foot_z : height of the robot's foot above the carriage top (a base grid's mounts)
    """

    scene: Scene
    T_world_rail: FloatArray
    middle: FloatArray
    middle_s: float
    yaw0: float
    T_rail_base: FloatArray
    triple: npt.NDArray[np.int64]
    samples: int
    pose_values: FloatArray
    pinned: FloatArray
    foot_z: float = 0.0


@dataclass(frozen=True, eq=False)
class _Problem:
    """Everything a chunk needs (picklable)."""

    solver: IkSolver
    arm: ArmCapsules
    self_pairs: npt.NDArray[np.int64]
    environment: ObstacleSet
    environment_mask: BoolArray
    T_flange_tool: FloatArray
    T_world_pose: FloatArray  # (P, 4, 4)
    target_pose: npt.NDArray[np.int64]  # (K,)
    approach_pose: npt.NDArray[np.int64]  # (K,), -1: none
    requirement: npt.NDArray[np.int8]  # (P, 3)
    foot_z: float
    R_foot: FloatArray  # roll and pitch, (3, 3) before yaw
    pedestal_radius: float  # 0: no pedestal
    floor_height: float
    margin: float
    clearance_goal: float
    joint_ends: npt.NDArray[np.int64]  # (J, 2): pose index, -1 for given joints
    joint_given: FloatArray  # (J, 2, n)
    joint_percent: FloatArray  # (J,)
    linear_duration: FloatArray  # (L,): trapezoid in TCP path length at the requested speed
    axis_moves: _AxisMoves  # each end's external values: its pose's, else the path's
    path_poses: tuple[npt.NDArray[np.int64], ...]
    waypoint_pose: tuple[npt.NDArray[np.int64], ...]  # per path (W,): pose index, -1: joints
    rail: _Rail | None = None


def _base_poses(
    problem: _Problem, grid: PlacementGrid, h: int, start: int, stop: int
) -> FloatArray:
    """``T_world_base`` of flat candidates ``start..stop`` of the (ny, nx, nyaw) grid at height ``h``."""
    iy, ix, iyaw = np.unravel_index(np.arange(start, stop), grid.shape[:3])
    yaw = grid.yaw[iyaw]
    T = np.tile(np.eye(4), (yaw.shape[0], 1, 1))
    T[:, :3, :3] = rotation_matrix_about_z(yaw) @ problem.R_foot
    T[:, :3, 3] = (
        np.stack([grid.x[ix], grid.y[iy], np.full(yaw.shape[0], problem.foot_z)], axis=1)
        + T[:, :3, 2] * grid.height[h]
    )
    return T


def _own_scenes(problem: _Problem, height: float) -> tuple[ClearanceScene, ClearanceScene]:
    """Arm against pedestal and floor (base frame), and arm against itself, for one pedestal height."""
    shapes: list[Box | Cylinder | Floor] = []
    if problem.pedestal_radius > 0.0 and height > 0.0:
        T = np.eye(4)
        T[2, 3] = -0.5 * height
        shapes.append(Cylinder("pedestal", T, problem.pedestal_radius, 0.5 * height))
    shapes.append(Floor(problem.floor_height - problem.foot_z - height))
    obstacles = ObstacleSet.from_shapes(shapes)
    mask = default_pair_mask(problem.arm, obstacles)
    mask[problem.arm.link == 0, :] = False  # the robot stands on both
    support = ClearanceScene.build(
        problem.arm, obstacles, np.eye(4), self_pairs=np.empty((0, 2)), pair_mask=mask
    )
    own = ClearanceScene.build(
        problem.arm,
        obstacles,
        np.eye(4),
        self_pairs=problem.self_pairs,
        pair_mask=np.zeros_like(mask),
    )
    return support, own


def _environment_scene(problem: _Problem, T_world_base: FloatArray) -> ClearanceScene:
    """Arm against the fixtures and keep-outs (no self pairs) for one base pose."""
    return ClearanceScene(
        problem.arm,
        problem.environment,
        T_world_base,
        np.empty((0, 2), dtype=np.int64),
        problem.environment_mask,
    )


@dataclass(frozen=True, eq=False)
class _CandidateScenes:
    """One candidate's base pose and its clearance scenes (see :func:`_own_scenes`)."""

    T_world_base: FloatArray
    support: ClearanceScene
    environment: ClearanceScene
    own: ClearanceScene


def _candidate_scenes(problem: _Problem, grid: PlacementGrid, flat: int) -> _CandidateScenes:
    """Return base pose and clearance scenes of the flat (C-order) candidate ``flat`` of the grid."""
    iy, ix, iyaw, ih = np.unravel_index(flat, grid.shape)
    local = int(np.ravel_multi_index((iy, ix, iyaw), grid.shape[:3]))
    T_world_base = _base_poses(problem, grid, int(ih), local, local + 1)[0]
    support, own = _own_scenes(problem, float(grid.height[ih]))
    return _CandidateScenes(T_world_base, support, _environment_scene(problem, T_world_base), own)


def _free_and_clear(
    problem: _Problem,
    own_scenes: tuple[ClearanceScene, ClearanceScene],
    q: FloatArray,
    spans: Iterable[tuple[int, int, ClearanceScene]],
) -> tuple[BoolArray, BoolArray]:
    """Classify allowed solutions as collision-free and as clear of the clearance goal.

    Parameters
    ----------
    problem : _Problem
        Its ``margin`` (collision threshold, m) and ``clearance_goal`` (m).
    own_scenes : (ClearanceScene, ClearanceScene)
        The support scene (pedestal and floor, checked against ``margin`` and the goal)
        and the robot's own pairs (checked for contact), as :func:`_own_scenes` returns.
    q : array, shape (S, n)
        The allowed solutions, grouped by base pose.
    spans : iterable of (first, last, scene)
        The solutions ``first..last`` share one base pose and its environment scene.

    Returns
    -------
    free, clear : bool arrays, shape (S,)
        ``free``: no collision within ``margin``; ``clear``: also farther than
        ``clearance_goal`` from the support and the environment.
    """
    support, own = own_scenes
    free = ~collision_batch(support, q, threshold_m=problem.margin)
    free &= ~collision_batch(own, q, threshold_m=0.0)
    good = ~collision_batch(support, q, threshold_m=problem.clearance_goal)
    clear = np.zeros_like(free)
    for first, last, scene in spans:
        candidates = np.flatnonzero(free[first:last]) + first
        if not candidates.size:
            continue
        hit = collision_batch(scene, q[candidates], threshold_m=problem.margin)
        free[candidates[hit]] = False
        fine = candidates[~hit]
        fine = fine[good[fine]]
        if fine.size:
            far = ~collision_batch(scene, q[fine], threshold_m=problem.clearance_goal)
            clear[fine[far]] = True
    return free, clear


def _placement_chunk(
    problem: _Problem, grid: PlacementGrid, h: int, start: int, stop: int
) -> tuple[FloatArray, ...]:
    """Score the flat candidates ``start..stop`` at pedestal height ``h`` (one executor chunk).

    Returns
    -------
    tuple of arrays
        reached count (C,), branch (C,), margin fraction, inverse condition,
        manipulability, clearance share, cycle time (C,), reached (C, K),
        q (C, K, n); on a track cell also the track position of each reached
        target (C, K), m (:func:`_rail_chunk`).
    """
    if problem.rail is not None:
        return _rail_chunk(problem, problem.rail, grid, h, start, stop)
    T_world_base = _base_poses(problem, grid, h, start, stop)
    C = T_world_base.shape[0]
    P = problem.T_world_pose.shape[0]
    n = problem.arm.robot.dof
    T_base_pose = invert_transform(T_world_base)[:, None] @ problem.T_world_pose[None]
    ik = problem.solver.solve(T_base_pose.reshape(-1, 4, 4), T_flange_tool=problem.T_flange_tool)
    M = ik.n_slots
    labels = np.stack([ik.shoulder, ik.elbow, ik.wrist], axis=2).reshape(C, P, M, 3)
    required = problem.requirement[None, :, None, :]
    allowed = (ik.valid & ik.within_limits).reshape(C, P, M) & labels_match(labels, required)
    q = ik.q.reshape(C, P, M, n)
    free = np.zeros((C, P, M), dtype=bool)
    clear = np.zeros((C, P, M), dtype=bool)
    index = np.nonzero(allowed)
    if index[0].size:
        bounds = np.searchsorted(index[0], np.arange(C + 1))
        spans = (
            (int(bounds[c]), int(bounds[c + 1]), _environment_scene(problem, T_world_base[c]))
            for c in range(C)
            if bounds[c] < bounds[c + 1]
        )
        free[index], clear[index] = _free_and_clear(
            problem, _own_scenes(problem, float(grid.height[h])), q[index], spans
        )
    on_branch = labels_match(labels[..., None, :], BRANCHES)  # (C, P, M, 8)
    return _chunk_scores(problem, free[..., None] & on_branch, q, clear)


def _chunk_scores(
    problem: _Problem,
    counting: BoolArray,
    q: FloatArray,
    clear: BoolArray,
    external: FloatArray | None = None,
) -> tuple[FloatArray, ...]:
    """Scores of a chunk from its counting solutions (the tail of :func:`_placement_chunk`).

    Parameters
    ----------
    counting : array of bool, shape (C, P, M, 8)
        Solution slot ``m`` of pose ``p`` counts for branch ``b`` at candidate ``c``.
    q : array, shape (C, P, M, n)
    clear : array of bool, shape (C, P, M)
        The solution keeps the clearance goal.
    external : array, shape (C, P, M, m), optional
        External axis values (m, rad) each solution is solved at; the cycle time
        estimate then includes the external axes (:func:`_cycle_times`).
    """
    C, P = counting.shape[:2]
    pose_ok = np.any(counting, axis=2)  # (C, P, 8)
    target_ok = pose_ok[:, problem.target_pose]
    has_approach = problem.approach_pose >= 0
    target_ok[:, has_approach] &= pose_ok[:, problem.approach_pose[has_approach]]
    counts = target_ok.sum(axis=1)  # (C, 8)
    branch = np.argmax(counts, axis=1)
    rows = np.arange(C)
    reached = target_ok[rows, :, branch]  # (C, K)
    slot = np.argmax(counting[rows, :, :, branch], axis=2)  # (C, P) first counting slot
    pose_reached = pose_ok[rows, :, branch]
    q_pose = np.where(pose_reached[..., None], q[rows[:, None], np.arange(P), slot], np.nan)
    q_target = np.where(reached[..., None], q_pose[:, problem.target_pose], np.nan)
    clear_target = clear[rows[:, None], problem.target_pose, slot[:, problem.target_pose]]
    margin = np.full((C,), np.nan)
    condition = np.full((C,), np.nan)
    manip = np.full((C,), np.nan)
    share = np.full((C,), np.nan)
    if np.any(reached):
        robot = problem.arm.robot
        flat = q_target[reached]
        fraction = limit_margins(robot, flat).min_fraction
        J = jacobian_rows(jacobian_base(robot, flat, problem.T_flange_tool), "position")
        per = np.full(reached.shape, np.inf)
        for values, out, reduce in (
            (fraction, margin, np.min),
            (inverse_condition_number(J), condition, np.min),
            (manipulability_yoshikawa(J), manip, np.min),
        ):
            per[:] = np.inf
            per[reached] = values
            some = reached.any(axis=1)
            out[some] = reduce(per[some], axis=1)
        counted = reached.sum(axis=1)
        share = np.where(
            counted > 0, (clear_target & reached).sum(axis=1) / np.maximum(counted, 1), np.nan
        )
    external_pose = None if external is None else external[rows[:, None], np.arange(P), slot]
    cycle = _cycle_times(problem, q_pose, pose_reached, external_pose)
    return (
        counts[rows, branch].astype(np.float64),
        branch.astype(np.float64),
        margin,
        condition,
        manip,
        share,
        cycle,
        reached,
        q_target,
    )


def _cycle_times(
    problem: _Problem,
    q_pose: FloatArray,
    pose_reached: BoolArray,
    external: FloatArray | None = None,
) -> FloatArray:
    """Cycle time estimate per candidate (module docstring), s; NaN where a path is not reached.

    Parameters
    ----------
    problem : _Problem
    q_pose : array, shape (C, P, n)
        Configuration of every pose on the candidate's branch (NaN where not reached).
    pose_reached : array of bool, shape (C, P)
    external : array, shape (C, P, m), optional
        External axis values (m, rad) every pose is reached at, the axes of
        ``problem.axis_moves``, which says which pose's values each move end takes. With
        them a joint move runs the robot joints and the external axes on one synchronised
        trapezoid over the ``n + m`` values and a linear move lasts at least the external
        axes' own synchronised move, as :func:`posebridge.planning.cycle_time.path_cycle_time`
        times a path with ``external=``. Without them the robot joints alone are timed.

    Returns
    -------
    array, shape (C,)
    """
    C = q_pose.shape[0]
    total = np.zeros(C)
    for poses in problem.path_poses:
        if poses.size:
            total[~np.all(pose_reached[:, poses], axis=1)] = np.nan
    robot = problem.arm.robot
    moves = problem.axis_moves
    velocity, acceleration = robot.velocity_max, robot.acceleration_max
    if external is not None:
        velocity = np.concatenate([velocity, moves.limits[0]])
        acceleration = np.concatenate([acceleration, moves.limits[1]])
    for j in range(problem.joint_ends.shape[0]):
        ends = []
        for side in range(2):
            end = _end_values(
                int(problem.joint_ends[j, side]), problem.joint_given[j, side], q_pose
            )
            if external is not None:
                axes = _axis_end_values(
                    moves.joint_source[j, side], moves.joint_value[j, side], external
                )
                end = np.concatenate([end, axes], axis=1)
            ends.append(end)
        total += _move_durations(
            ends[0], ends[1], velocity, acceleration, float(problem.joint_percent[j])
        )
    for i in range(problem.linear_duration.shape[0]):
        duration = np.full(C, problem.linear_duration[i])
        if external is not None and external.shape[2] > 0:
            start, end = (
                _axis_end_values(
                    moves.linear_source[i, side], moves.linear_value[i, side], external
                )
                for side in range(2)
            )
            own = _move_durations(start, end, moves.limits[0], moves.limits[1], 100.0)
            duration = np.maximum(duration, own)
        total += duration
    return total


def _end_values(pose: int, given: FloatArray, per_pose: FloatArray) -> FloatArray:
    """Values at one end of a move for every candidate, shape (C, k).

    ``per_pose[:, pose]`` ((C, P, k)) for a pose, ``given`` ((k,)) for joint values (``pose`` -1).
    """
    if pose < 0:
        return np.broadcast_to(given, (per_pose.shape[0], given.shape[0]))
    return per_pose[:, pose]


def _axis_end_values(
    source: npt.NDArray[np.int64], given: FloatArray, per_pose: FloatArray
) -> FloatArray:
    """External values at one end of a move for every candidate, shape (C, m).

    ``source`` is one pose index for all m axes (shape ()) or one per axis (shape (m,));
    each as :func:`_end_values` (``given`` (m,), ``per_pose`` (C, P, m)).
    """
    if source.ndim == 0:
        return _end_values(int(source), given, per_pose)
    return np.concatenate(
        [
            _end_values(int(pose), given[a : a + 1], per_pose[..., a : a + 1])
            for a, pose in enumerate(source.tolist())
        ],
        axis=1,
    )


def _move_durations(
    start: FloatArray,
    end: FloatArray,
    velocity_max: FloatArray,
    acceleration_max: FloatArray,
    speed_percent: float,
) -> FloatArray:
    """Return the synchronised trapezoid durations of moves ``start -> end`` ((C, k) each), s, (C,).

    :func:`posebridge.planning.cycle_time.joint_move_durations` (Lynch & Park, *Modern
    Robotics*, sec. 9.2.2.2) of the rows with finite ends, NaN elsewhere.
    """
    finite = np.all(np.isfinite(start) & np.isfinite(end), axis=1)
    duration = np.full(start.shape[0], np.nan)
    if np.any(finite):
        duration[finite] = joint_move_durations(
            start[finite], end[finite], velocity_max, acceleration_max, speed_percent
        )
    return duration


def _reach_bound(scene: Scene) -> float:
    """Return an upper bound of the TCP's distance from the base origin, m (the chain's lengths summed)."""
    robot = scene.robot
    reach = float(np.linalg.norm(robot.origins[:, :3, 3], axis=1).sum())
    reach += float(np.linalg.norm(robot.T_link_flange[:3, 3]))
    reach += float(np.linalg.norm(scene.T_flange_tool[:3, 3]))
    travel = np.maximum(np.abs(robot.lower), np.abs(robot.upper))[robot.prismatic]
    return reach + float(travel.sum())


def _rail_frames(rail: _Rail, grid: PlacementGrid, start: int, stop: int) -> FloatArray:
    """Rail frames of flat candidates ``start..stop`` of a rail grid, shape (C, 4, 4).

    The current rail frame turned about world z to the candidate's yaw, its line moved
    by the offset along the turned frame's y and kept through the middle of the travel.
    """
    _, ix, iyaw = np.unravel_index(np.arange(start, stop), grid.shape[:3])
    T = np.tile(rail.T_world_rail, (ix.shape[0], 1, 1))
    T[:, :3, :3] = rotation_matrix_about_z(grid.yaw[iyaw] - rail.yaw0) @ rail.T_world_rail[:3, :3]
    T[:, :3, 3] = rail.middle + grid.x[ix, None] * T[:, :3, 1] - rail.middle_s * T[:, :3, 0]
    return T


def _mounted(rail: _Rail, T_carriage_base: FloatArray) -> _Rail:
    """Return the rail search's fixed parts with the robot mounted at ``T_carriage_base`` (4, 4)."""
    external = rail.scene.external
    track = external.track
    assert track is not None  # a rail search's scene has a track
    T_rail_base = np.eye(4)
    T_rail_base[2, 3] = track.carriage_height
    mounted = replace(external, track=replace(track, T_carriage_base=T_carriage_base))
    return replace(
        rail, scene=replace(rail.scene, external=mounted), T_rail_base=T_rail_base @ T_carriage_base
    )


def _candidate_rails(
    problem: _Problem, rail: _Rail, grid: PlacementGrid, h: int, start: int, stop: int
) -> tuple[FloatArray, list[tuple[_Rail, npt.NDArray[np.int64]]]]:
    """Rail frames of flat candidates ``start..stop`` at height ``h``, and their robot mounts.

    Returns the frames, shape (C, 4, 4), and the mounts: each the rail search's fixed parts
    with the robot mounted on the carriage as some of the candidates have it
    (:attr:`_Rail.T_rail_base`, the interval scene's carriage) and the rows it serves.

    A rail grid's frames are :func:`_rail_frames` and its one mount the cell's. On a base
    grid of a cell with a track the rail stays and a candidate is the robot's foot on the
    carriage (module docstring): the foot at carriage-frame ``p = (x, y, z)`` turned by
    ``R = Rz(yaw) Ry(pitch) Rx(roll)`` on a pedestal of height ``h`` gives ``T_world_base(s)
    = T_world_rail Trans(s e_x + c e_z) Trans(p) R Trans(0, 0, h)``, and translations commute,
    so the frame is ``T_world_rail Trans(p)`` and the mount ``R Trans(0, 0, h)``, one per yaw.
    """
    if grid.rail:
        T_rail = _rail_frames(rail, grid, start, stop)
        return T_rail, [(rail, np.arange(T_rail.shape[0]))]
    iy, ix, iyaw = np.unravel_index(np.arange(start, stop), grid.shape[:3])
    p = np.stack([grid.x[ix], grid.y[iy], np.full(ix.shape[0], rail.foot_z)], axis=1)
    T_rail = np.tile(rail.T_world_rail, (ix.shape[0], 1, 1))
    T_rail[:, :3, 3] += p @ rail.T_world_rail[:3, :3].T
    lift = np.eye(4)
    lift[2, 3] = grid.height[h]
    mounts = []
    for yaw in np.unique(iyaw).tolist():
        T_carriage_base = np.eye(4)
        T_carriage_base[:3, :3] = rotation_matrix_about_z(grid.yaw[yaw]) @ problem.R_foot
        mounts.append((_mounted(rail, T_carriage_base @ lift), np.flatnonzero(iyaw == yaw)))
    return T_rail, mounts


def _longest_middles(
    ends: FloatArray,
    offsets: npt.NDArray[np.intp],
    first: npt.NDArray[np.int64],
    second: npt.NDArray[np.int64],
    tolerance: float,
) -> FloatArray:
    """Middle of the longest interval of each group, NaN for none, shape (G,).

    Group ``g`` holds the intervals ``ends[offsets[f] : offsets[f + 1]]`` of list
    ``f = first[g]`` (``ends`` (I, 2), ``offsets`` as in
    :class:`~posebridge.cell.external_kinematics.AxisIntervals`); where ``second[g] >= 0``
    they are intersected with those of list ``second[g]``: every pair
    ``[max(lo_a, lo_b), min(hi_a, hi_b)]`` with ``max <= min``, the first list's intervals
    outer. Lengths within ``2 * tolerance`` of the longest (each end is known to
    ``tolerance``) are equal and the first of them wins, so mirror-image intervals keep the
    first whatever their ends' rounding. All groups at once: the pairs are laid out group
    by group (``np.repeat``), the longest per group is ``np.maximum.at``.
    """
    G = first.shape[0]
    paired = second >= 0
    count_a = offsets[first + 1] - offsets[first]
    other = np.where(paired, second, 0)
    count_b = np.where(paired, offsets[other + 1] - offsets[other], 1)
    sizes = count_a * count_b
    group = np.repeat(np.arange(G), sizes)
    within = np.arange(group.shape[0]) - np.repeat(np.cumsum(sizes) - sizes, sizes)
    width = count_b[group]
    a = ends[offsets[first[group]] + within // width]
    lo, hi = a[:, 0].copy(), a[:, 1].copy()
    both = paired[group]
    b = ends[offsets[other[group[both]]] + within[both] % width[both]]
    lo[both] = np.maximum(lo[both], b[:, 0])
    hi[both] = np.minimum(hi[both], b[:, 1])
    keep = ~both | (hi >= lo)
    group, lo, hi = group[keep], lo[keep], hi[keep]
    length = hi - lo
    longest = np.full(G, -np.inf)
    np.maximum.at(longest, group, length)
    near = np.flatnonzero(length >= longest[group] - 2.0 * tolerance)
    chosen, at = np.unique(group[near], return_index=True)
    out = np.full(G, np.nan)
    pick = near[at]
    out[chosen] = 0.5 * (lo[pick] + hi[pick])
    return out


def _track_positions(problem: _Problem, rail: _Rail, T_rail: FloatArray) -> FloatArray:
    """Track position of every pose on every branch at each candidate rail, m, shape (C, P, 8).

    The middle of the longest feasible interval of the track (feasible intervals of
    :func:`posebridge.cell.external_kinematics.feasible_intervals`, computed in the
    current rail's coordinates with the poses moved by the rail's change); a target and
    its approach pose share one position, in the intersection of their intervals. NaN
    where the branch reaches the pose from no position. A pose whose target pins the
    track is at the pinned value on every branch (reachable there or not), as the path
    check puts it.
    """
    C, P = T_rail.shape[0], problem.T_world_pose.shape[0]
    chosen = np.full((C, P, BRANCHES.shape[0]), np.nan)
    free = np.flatnonzero(np.isnan(rail.pinned))
    if free.size:
        T_world_pose = problem.T_world_pose[free]
        moved = rail.T_world_rail @ invert_transform(T_rail)[:, None] @ T_world_pose[None]
        found = feasible_intervals(rail.scene, moved.reshape(-1, 4, 4), 0, samples=rail.samples)
        chosen[:, free] = _chosen_axis_values(problem, free, found, rail.triple).reshape(
            C, free.size, BRANCHES.shape[0]
        )
    pinned = np.flatnonzero(np.isfinite(rail.pinned))
    chosen[:, pinned] = rail.pinned[pinned, None]
    return chosen


def _chosen_axis_values(
    problem: _Problem,
    poses: npt.NDArray[np.int64],
    found: AxisIntervals,
    triple: npt.NDArray[np.int64],
) -> FloatArray:
    """External axis value of each pose of ``poses`` on every branch, shape (K, 8).

    The middle of the longest feasible interval (:func:`_longest_middles`); a target and
    its approach pose share one value, in the intersection of their intervals (module
    docstring). ``found`` holds K = R * Q targets: R blocks of the Q poses of ``poses``
    (its target ``r * Q + i`` is ``poses[i]``), its branch list that of
    :func:`posebridge.cell.external_kinematics.feasible_intervals`; ``triple`` maps each
    row of :data:`BRANCHES` to it. NaN where the branch reaches the pose at no value.
    """
    Q, B = poses.shape[0], len(found.branches)
    R = (found.offsets.shape[0] - 1) // (B * Q) if Q else 0
    P = problem.T_world_pose.shape[0]
    local = np.full(P, -1, dtype=np.int64)
    local[poses] = np.arange(Q)
    has = problem.approach_pose >= 0
    partner = np.full(P, -1, dtype=np.int64)
    partner[problem.target_pose[has]] = problem.approach_pose[has]
    follower = np.zeros(P, dtype=bool)
    follower[problem.approach_pose[has]] = True
    leads = np.flatnonzero(~follower[poses])
    mate = np.where(partner[poses[leads]] >= 0, local[partner[poses[leads]]], -1)
    block = np.arange(R)[:, None] * Q
    lead_rows = (block + leads).ravel()
    mate_rows = np.where(mate >= 0, block + mate, -1).ravel()
    first = (lead_rows[:, None] * B + triple).ravel()
    second = np.where(mate_rows[:, None] >= 0, mate_rows[:, None] * B + triple, -1).ravel()
    chosen = _longest_middles(found.ends, found.offsets, first, second, found.tolerance)
    chosen = chosen.reshape(lead_rows.shape[0], BRANCHES.shape[0])
    out = np.full((R * Q, BRANCHES.shape[0]), np.nan)
    out[lead_rows] = chosen
    shared = mate_rows >= 0
    out[mate_rows[shared]] = chosen[shared]
    return out


def _rail_chunk(
    problem: _Problem, rail: _Rail, grid: PlacementGrid, h: int, start: int, stop: int
) -> tuple[FloatArray, ...]:
    """Score the candidates ``start..stop`` at height ``h`` of a track cell (one executor chunk).

    Rail lines of a rail grid, or the robot's foot on the carriage of a base grid
    (:func:`_candidate_rails`; module docstring). Every pose is solved on every branch with
    the base where the track puts it for that branch (:func:`_track_positions`); the scores
    follow as for a fixed base, the slots of the eight branches side by side.
    """
    T_rail, mounts = _candidate_rails(problem, rail, grid, h, start, stop)
    C, P, B = T_rail.shape[0], problem.T_world_pose.shape[0], BRANCHES.shape[0]
    n = problem.arm.robot.dof
    s = np.empty((C, P, B))
    T_rail_base = np.empty((C, 1, 1, 4, 4))
    for mount, rows in mounts:
        s[rows] = _track_positions(problem, mount, T_rail[rows])
        T_rail_base[rows] = mount.T_rail_base
    placed = np.isfinite(s)
    T_world_base = np.broadcast_to(T_rail[:, None, None], (C, P, B, 4, 4)).copy()
    T_world_base[..., :3, 3] += np.where(placed, s, 0.0)[..., None] * T_world_base[..., :3, 0]
    T_world_base = T_world_base @ T_rail_base
    T_base_pose = invert_transform(T_world_base) @ problem.T_world_pose[None, :, None]
    ik = problem.solver.solve(T_base_pose.reshape(-1, 4, 4), T_flange_tool=problem.T_flange_tool)
    M = ik.n_slots
    labels = np.stack([ik.shoulder, ik.elbow, ik.wrist], axis=2).reshape(C, P, B, M, 3)
    allowed = (
        (ik.valid & ik.within_limits).reshape(C, P, B, M)
        & labels_match(labels, problem.requirement[None, :, None, None, :])
        & labels_match(labels, BRANCHES[None, None, :, None, :])
        & placed[..., None]
    )
    q = ik.q.reshape(C, P, B, M, n)
    free = np.zeros((C, P, B, M), dtype=bool)
    clear = np.zeros((C, P, B, M), dtype=bool)
    index = np.nonzero(allowed)
    if index[0].size:
        group = np.ravel_multi_index(index[:3], (C, P, B))
        starts = np.flatnonzero(np.r_[True, group[1:] != group[:-1]])
        # one prepared scene moved per base pose: the obstacles stay, only the base rides the rail
        environment = _environment_scene(problem, T_world_base[0, 0, 0])
        spans = (
            (
                int(first),
                int(last),
                environment.with_base(T_world_base[tuple(i[first] for i in index[:3])]),
            )
            for first, last in zip(starts, [*starts[1:], group.size], strict=True)
        )
        free[index], clear[index] = _free_and_clear(
            problem, _own_scenes(problem, float(grid.height[h])), q[index], spans
        )
    counting = np.zeros((C, P, B, M, B), dtype=bool)
    for b in range(B):
        counting[:, :, b, :, b] = free[:, :, b]
    external = rail.scene.external
    values = np.broadcast_to(
        rail.pose_values[None, :, None, None], (C, P, B, M, external.count)
    ).copy()
    values[..., 0] = s[..., None]  # the track; turntables where the path check puts them
    scores = _chunk_scores(
        problem,
        counting.reshape(C, P, B * M, B),
        q.reshape(C, P, B * M, n),
        clear.reshape(C, P, B * M),
        values.reshape(C, P, B * M, external.count),
    )
    branch = scores[1].astype(np.int64)
    rows = np.arange(C)
    reached = scores[7]
    position = np.where(reached, s[rows[:, None], problem.target_pose, branch[:, None]], np.nan)
    return (*scores, position)


def _rail(scene: Scene, grid: PlacementGrid, problem: _Problem) -> _Rail:
    """Return the rail search's fixed parts, its track travel widened to every candidate's needs.

    Also the fixed parts of a base grid's search on a track cell (:func:`_candidate_rails`).
    """
    external = scene.external
    track = external.track
    if track is None:
        raise PlanningInputError("rail placement: the cell has no track")
    lower, upper = float(external.lower[0]), float(external.upper[0])
    middle_s = 0.5 * (lower + upper)
    T_rail_base = np.eye(4)
    T_rail_base[2, 3] = track.carriage_height
    T_rail_base = T_rail_base @ track.T_carriage_base
    direction = track.direction
    pose_values = _pose_values(scene, problem)
    rail = _Rail(
        scene=scene,
        T_world_rail=track.T_world_rail,
        middle=track.T_world_rail[:3, 3] + middle_s * direction,
        middle_s=middle_s,
        yaw0=float(np.arctan2(direction[1], direction[0])),
        T_rail_base=T_rail_base,
        triple=_branch_rows(scene),
        samples=2,
        pose_values=pose_values,
        pinned=np.where(_pose_pins(scene, problem)[:, 0], pose_values[:, 0], np.nan),
        foot_z=float(m_from_mm(scene.cell.base.position_mm[2])),
    )
    # every pose's track coordinate on every candidate line, then the base's reach around it
    if grid.rail:
        T_rail = _rail_frames(rail, grid, 0, grid.size)
        lift = float(np.linalg.norm(T_rail_base[:3, 3]))
    else:  # the frames hold the foot's place on the carriage (_candidate_rails)
        T_rail = _candidate_rails(problem, rail, grid, 0, 0, grid.size // grid.shape[3])[0]
        lift = track.carriage_height + float(grid.height.max())
    along = np.einsum(
        "ci,cpi->cp",
        T_rail[:, :3, 0],
        problem.T_world_pose[None, :, :3, 3] - T_rail[:, None, :3, 3],
    )
    reach = _reach_bound(scene) + lift
    low = min(lower, float(along.min()) - reach)
    high = max(upper, float(along.max()) + reach)
    widened = replace(
        external,
        lower=np.r_[low, external.lower[1:]],
        upper=np.r_[high, external.upper[1:]],
    )
    samples = int(np.ceil((high - low) / RAIL_SWEEP_SPACING_M)) + 1
    return replace(rail, scene=replace(scene, external=widened), samples=samples)


def _branch_rows(scene: Scene) -> npt.NDArray[np.int64]:
    """Return, for each row of :data:`BRANCHES`, the first branch of the robot's scheme it matches."""
    triples = np.array(branch_triples(scene), dtype=np.int8)
    return np.array(
        [int(np.argmax(labels_match(triples, row))) for row in BRANCHES], dtype=np.int64
    )


def _rail_details(
    problem: _Problem,
    rail: _Rail,
    grid: PlacementGrid,
    flat: int,
    branch: int,
    q: FloatArray,
    position: FloatArray,
) -> tuple[FloatArray, list[str], FloatArray, FloatArray]:
    """Rail frame, reasons, exact clearance per target and track positions of one rail candidate.

    A base candidate on a track cell alike, its frame and mount from :func:`_candidate_rails`.
    Returns the candidate's rail frame (4, 4), why each target is not reached (``""``
    where it is; the first failing test: a track position at all, the required branch,
    the candidate's branch, collision there), the clearance of each reached target's
    configuration to fixtures, keep-outs, pedestal and floor with the base at its track
    position, m (NaN elsewhere), and every pose's track position on the candidate's
    branch, m, shape (P,) (NaN where the branch reaches it from no position).
    """
    iy, ix, iyaw, ih = np.unravel_index(flat, grid.shape)
    local = int(np.ravel_multi_index((iy, ix, iyaw), grid.shape[:3]))
    T_rail, ((rail, _),) = _candidate_rails(problem, rail, grid, int(ih), local, local + 1)
    s = _track_positions(problem, rail, T_rail)[0]  # (P, 8)
    support, _ = _own_scenes(problem, float(grid.height[ih]))
    environment = _environment_scene(problem, T_rail[0] @ rail.T_rail_base)
    clearance = np.full(problem.target_pose.shape[0], np.nan)
    reasons = []
    for k, p in enumerate(problem.target_pose.tolist()):
        placed = np.isfinite(s[p])
        required = labels_match(BRANCHES, problem.requirement[p])
        if np.isfinite(position[k]):
            T_world_base = T_rail[0].copy()
            T_world_base[:3, 3] += position[k] * T_world_base[:3, 0]
            scene = environment.with_base(T_world_base @ rail.T_rail_base)
            clearance[k] = min(
                float(clearance_batch(scene, q[k][None]).distance[0]),
                float(clearance_batch(support, q[k][None]).distance[0]),
            )
            reasons.append("")
        elif np.isfinite(rail.pinned[p]):
            reasons.append(_pinned_track_reason(problem, rail, T_rail[0], k, branch))
        elif not np.any(placed):
            reasons.append("out of reach within the joint limits from every track position")
        elif not np.any(placed & required):
            reasons.append("not reachable on the required branch from any track position")
        elif not placed[branch]:
            reasons.append("reachable only on another branch than the candidate's")
        else:
            reasons.append("in collision at the chosen track position on the candidate's branch")
    return T_rail[0], reasons, clearance, s[:, branch]


def _pose_pins(scene: Scene, problem: _Problem | None = None) -> BoolArray:
    """Whether each pose's target pins each external axis, shape (P, m) (False for a path's world pose).

    The rows follow ``problem``'s poses (a target's pose, then its approach pose); without
    ``problem`` one row per target, shape (K, m).
    """
    external = scene.external
    names = list(external.names)
    pins = np.zeros((len(scene.cell.targets), external.count), dtype=bool)
    for k, target in enumerate(scene.cell.targets):
        pins[k] = [name in target.external_axes for name in names]
    if problem is None:
        return pins
    out = np.zeros((problem.T_world_pose.shape[0], external.count), dtype=bool)
    out[problem.target_pose] = pins
    has = problem.approach_pose >= 0
    out[problem.approach_pose[has]] = pins[has]
    return out


def _pose_values(scene: Scene, problem: _Problem) -> FloatArray:
    """External values the path check puts each pose at, m or rad, shape (P, m).

    A target's pose and its approach pose: the cell's values with the target's pins
    (:func:`posebridge.cell.scene.pinned_values`, as a target waypoint resolves); a path's
    world pose: the cell's values.
    """
    external = scene.external
    values = np.broadcast_to(
        external.values, (problem.T_world_pose.shape[0], external.count)
    ).copy()
    for k, target in enumerate(scene.cell.targets):
        pinned = pinned_values(external, target.external_axes)
        values[problem.target_pose[k]] = pinned
        if problem.approach_pose[k] >= 0:
            values[problem.approach_pose[k]] = pinned
    return values


def _pinned_track_reason(
    problem: _Problem, rail: _Rail, T_world_rail: FloatArray, k: int, branch: int
) -> str:
    """Why target ``k``, pinned on the track, is not reached on ``branch`` from its pinned value.

    Its pose, then its approach pose, solved with the base at the pinned track value on the
    rail ``T_world_rail`` (4, 4); the first failing test: reach, joint limits, the required
    branch, the candidate's branch, else collision there.
    """
    for p, prefix in (
        (int(problem.target_pose[k]), ""),
        (int(problem.approach_pose[k]), "approach pose "),
    ):
        if p < 0:
            continue
        T_world_base = T_world_rail.copy()
        T_world_base[:3, 3] += rail.pinned[p] * T_world_base[:3, 0]
        T_base_pose = invert_transform(T_world_base @ rail.T_rail_base) @ problem.T_world_pose[p]
        ik = problem.solver.solve(T_base_pose[None], T_flange_tool=problem.T_flange_tool)
        labels = np.stack([ik.shoulder, ik.elbow, ik.wrist], axis=2)[0]
        within = (ik.valid & ik.within_limits)[0]
        required = within & labels_match(labels, problem.requirement[p])
        if not np.any(ik.valid):
            return f"{prefix}out of reach at the pinned track position"
        if not np.any(within):
            return f"{prefix}outside the joint limits at the pinned track position"
        if not np.any(required):
            return f"{prefix}not reachable on the required branch at the pinned track position"
        if not np.any(required & labels_match(labels, BRANCHES[branch])):
            return "reachable only on another branch than the candidate's"
    return "in collision at the pinned track position on the candidate's branch"


def _problem(
    scene: Scene,
    margin_m: float,
    clearance_goal_m: float,
    *,
    rail: bool = False,
    searched_table: int = -1,
) -> _Problem:
    """Poses, requirements, path structure and obstacles of the search (module docstring).

    On a cell with a track (``rail``: every search there, :func:`search_base_placement`)
    the track's carriage, which rides with the robot, is left out of the obstacles and
    the foot stands on the carriage at the track's height. A target on a turntable whose
    angle it pins is posed where the path check puts it, the table turned to the pin
    (:func:`posebridge.cell.external_kinematics.target_poses_at`), except on the table a
    table search moves (``searched_table``, external index), which poses it itself.
    """
    targets = scene.targets
    if len(targets.names) == 0:
        raise PlanningInputError("targets: the cell has no targets to place the robot for")
    poses: list[FloatArray] = []
    requirement: list[npt.NDArray[np.int8]] = []
    target_pose, approach_pose = [], []
    key: dict[tuple[int, bool], int] = {}
    pins = _pose_pins(scene)
    for k in range(len(targets.names)):
        required = branch_requirement(targets.branches[k])
        carrier = carrier_axis(scene, k)
        T_target, T_approach = targets.T_world_target[k], targets.T_world_approach[k]
        if carrier >= 0 and carrier != searched_table and pins[k, carrier]:
            at = pinned_values(scene.external, scene.cell.targets[k].external_axes)[None]
            T_target = target_poses_at(scene, k, at)[0]
            T_approach = target_poses_at(scene, k, at, approach=True)[0]
        key[(k, False)] = len(poses)
        target_pose.append(len(poses))
        poses.append(T_target)
        requirement.append(required)
        if targets.approach_offset[k] > 0.0:
            key[(k, True)] = len(poses)
            approach_pose.append(len(poses))
            poses.append(T_approach)
            requirement.append(required)
        else:
            key[(k, True)] = len(poses) - 1
            approach_pose.append(-1)
    n, m = scene.robot.dof, scene.external.count
    joint_ends: list[tuple[int, int]] = []
    joint_given: list[FloatArray] = []
    joint_external: list[FloatArray] = []
    joint_percent: list[float] = []
    linear_ends: list[tuple[int, int]] = []
    linear_duration: list[float] = []
    linear_external: list[FloatArray] = []
    path_poses: list[npt.NDArray[np.int64]] = []
    waypoint_pose: list[npt.NDArray[np.int64]] = []
    for path in scene.paths:
        pose_of: list[int] = []
        used: list[int] = []
        for w, source in enumerate(path.sources):
            if source == "joints":
                pose_of.append(-1)
            elif source == "target":
                pose_of.append(key[(int(path.target_index[w]), bool(path.approach[w]))])
            else:
                pose_of.append(len(poses))
                poses.append(path.T_world_tool[w])
                requirement.append(np.zeros(3, dtype=np.int8))
            if pose_of[-1] >= 0:
                used.append(pose_of[-1])
        path_poses.append(np.array(sorted(set(used)), dtype=np.int64))
        waypoint_pose.append(np.array(pose_of, dtype=np.int64))
        external = np.broadcast_to(scene.external.values, (len(path.sources), m))
        if path.external.shape == external.shape:
            external = path.external
        for w in range(1, len(path.sources)):
            if path.linear[w]:
                length = float(
                    np.linalg.norm(path.T_world_tool[w, :3, 3] - path.T_world_tool[w - 1, :3, 3])
                )
                linear_ends.append((pose_of[w - 1], pose_of[w]))
                linear_duration.append(
                    trapezoidal_profile(
                        length, float(path.linear_speed[w]), DEFAULT_LINEAR_ACCELERATION_M_S2
                    ).duration
                )
                linear_external.append(external[w - 1 : w + 1])
            else:
                joint_ends.append((pose_of[w - 1], pose_of[w]))
                joint_given.append(np.stack([path.q[w - 1], path.q[w]]))
                joint_external.append(external[w - 1 : w + 1])
                joint_percent.append(float(path.speed_percent[w]))
    full = clearance_scene(scene)
    environment_count = fixture_count(scene) + len(scene.keep_outs.names)
    kept = np.arange(environment_count)
    base = scene.cell.base
    foot_z = float(m_from_mm(base.position_mm[2]))
    track = scene.external.track
    if rail and track is not None:
        carriage = f"{scene.external.names[0]} carriage"
        boxes = scene.boxes.names
        kept = kept[np.array([i >= len(boxes) or boxes[i] != carriage for i in kept], dtype=bool)]
        foot_z = float(scene.T_world_base[2, 3]) - float(m_from_mm(base.pedestal_height_mm))
    environment = full.obstacles.subset(kept)
    roll, pitch, _ = base.rpy_deg
    arm = cell_arm(scene)
    return _Problem(
        solver=ik_solver(scene.robot),
        arm=arm,
        self_pairs=full.self_pairs,
        environment=environment,
        environment_mask=default_pair_mask(arm, environment),
        T_flange_tool=scene.T_flange_tool,
        T_world_pose=np.ascontiguousarray(poses),
        target_pose=np.array(target_pose, dtype=np.int64),
        approach_pose=np.array(approach_pose, dtype=np.int64),
        requirement=np.array(requirement, dtype=np.int8),
        foot_z=foot_z,
        R_foot=rotation_matrix_from_rpy(rad_from_deg([roll, pitch, 0.0])),
        pedestal_radius=(
            0.0 if base.pedestal_radius_mm is None else float(m_from_mm(base.pedestal_radius_mm))
        ),
        floor_height=scene.floor_height,
        margin=margin_m,
        clearance_goal=clearance_goal_m,
        joint_ends=np.array(joint_ends, dtype=np.int64).reshape(-1, 2),
        joint_given=np.array(joint_given).reshape(-1, 2, n),
        joint_percent=np.array(joint_percent),
        linear_duration=np.array(linear_duration),
        axis_moves=_AxisMoves(
            joint_source=np.array(joint_ends, dtype=np.int64).reshape(-1, 2),
            joint_value=np.array(joint_external).reshape(len(joint_external), 2, m),
            linear_source=np.array(linear_ends, dtype=np.int64).reshape(-1, 2),
            linear_value=np.array(linear_external).reshape(len(linear_external), 2, m),
            limits=np.stack([scene.external.velocity_max, scene.external.acceleration_max]),
        ),
        path_poses=tuple(path_poses),
        waypoint_pose=tuple(waypoint_pose),
    )


def _branch_words(index: int, scheme: str) -> str:
    """Plain words of branch ``index`` of :data:`BRANCHES` for a label scheme."""
    shoulder, elbow, wrist = (int(v) for v in BRANCHES[index])
    return branch_words(scheme, shoulder, elbow, wrist)


def search_base_placement(
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
    """Score every candidate base pose of ``grid`` and rank them (module docstring).

    Parameters
    ----------
    scene : Scene
        The cell; its targets, paths, fixtures, keep-outs, pedestal radius and tool.
    grid : PlacementGrid, optional
        Candidates; if omitted, :meth:`PlacementGrid.rail_around` for a cell with a
        track (21 offsets within ±1 m, 8 yaws), else :meth:`PlacementGrid.around`
        (±1 m, 21 x 21 positions, 8 yaws, the current pedestal).
    executor : Executor, optional, keyword-only
        Runs the chunks; without one they run in this process.
    progress : callable, optional, keyword-only
        ``progress(done, total)`` in chunks.
    cancel : threading.Event, optional, keyword-only
    top : int, keyword-only
        Candidates reported with per-target details (1..1000): :attr:`PlacementResult.best`.
    collision_margin_m : float, keyword-only
        Clearance to obstacles a counting solution keeps, m (>= 0).
    clearance_goal_m : float, keyword-only
        Clearance that counts as comfortable in the quality term, m (>= the margin).

    Returns
    -------
    PlacementResult

    Raises
    ------
    PlanningInputError
        No targets, or bad arguments.
    posebridge.compute.ComputationCancelled
        ``cancel`` was set.
    """
    _check_search_arguments(top, collision_margin_m, clearance_goal_m)
    if grid is None:
        has_track = scene.external.track is not None
        grid = PlacementGrid.rail_around(scene) if has_track else PlacementGrid.around(scene)
    track = scene.external.track
    # on a track the robot rides the carriage whichever search: each pose from its own position
    problem = _problem(
        scene, float(collision_margin_m), float(clearance_goal_m), rail=track is not None
    )
    if track is not None:
        problem = replace(problem, rail=_rail(scene, grid, problem))
    ny, nx, nyaw, nh = grid.shape
    per_height = ny * nx * nyaw
    size = RAIL_CHUNK_CANDIDATES if track is not None else CHUNK_CANDIDATES
    chunks = [
        (problem, grid, h, start, min(start + size, per_height))
        for h in range(nh)
        for start in range(0, per_height, size)
    ]
    if executor is None:
        results = run_chunks(_placement_chunk, chunks, progress=progress, cancel=cancel)
    else:
        results = executor.map_chunks(_placement_chunk, chunks, progress=progress, cancel=cancel)
    K = len(scene.targets.names)
    n = scene.robot.dof
    by_height: list[list[tuple[FloatArray, ...]]] = [[] for _ in range(nh)]
    for chunk, result in zip(chunks, results, strict=True):
        by_height[chunk[2]].append(result)

    def gather(field: int, tail: tuple[int, ...] = ()) -> npt.NDArray[Any]:
        layers = [np.concatenate([r[field] for r in rows]) for rows in by_height]
        return np.stack(layers, axis=1).reshape((ny, nx, nyaw, nh, *tail))

    scores = _grid_scores(gather, K, n)
    position = gather(9, (K,)) if track is not None else None
    rail_travel = None
    if track is not None:
        rail_travel = (float(scene.external.lower[0]), float(scene.external.upper[0]))
    return PlacementResult(
        robot=scene.robot,
        grid=grid,
        target_names=scene.targets.names,
        **scores.result_fields(),
        best=_ranked(scene, grid, problem, scores, position, top),
        current=_current_index(scene, grid),
        track_position=position,
        rail_travel=rail_travel,
        carriage_length=0.0 if track is None else float(track.carriage_size[0]),
    )


def _check_search_arguments(top: int, collision_margin_m: float, clearance_goal_m: float) -> None:
    """Raise :class:`PlanningInputError` for a bad ``top``, margin or clearance goal of a search."""
    if isinstance(top, bool) or not isinstance(top, int) or not 1 <= top <= 1000:
        raise PlanningInputError(f"top: expected an integer from 1 to 1000, got {top!r}")
    check_non_negative("collision_margin_m", collision_margin_m)
    if not math.isfinite(clearance_goal_m) or clearance_goal_m < collision_margin_m:
        raise PlanningInputError(
            "clearance_goal_m: expected a finite number not below collision_margin_m, "
            f"got {clearance_goal_m!r}"
        )


@dataclass(frozen=True, eq=False)
class _GridScores:
    """A search's per-candidate arrays over its grid (the grid's shape, then (K,) or (K, n)).

    The fields of :class:`PlacementResult` of the same meaning; ``fraction`` is its
    ``reach_fraction``, ``noise`` its ``score_noise``.
    """

    score: FloatArray
    fraction: FloatArray
    branch: npt.NDArray[np.int8]
    margin: FloatArray
    condition: FloatArray
    manipulability: FloatArray
    share: FloatArray
    cycle: FloatArray
    reached: BoolArray
    q: FloatArray
    order: npt.NDArray[np.int64]
    noise: float

    def result_fields(self) -> dict[str, Any]:
        """Keyword arguments of :class:`PlacementResult` that these arrays fill."""
        return {
            "score": self.score,
            "reach_fraction": self.fraction,
            "branch": self.branch,
            "min_margin_fraction": self.margin,
            "inverse_condition": self.condition,
            "manipulability": self.manipulability,
            "clearance_share": self.share,
            "cycle_time": self.cycle,
            "reached": self.reached,
            "q": self.q,
            "order": self.order,
            "score_noise": self.noise,
        }


def _grid_scores(
    gather: Callable[[int, tuple[int, ...]], npt.NDArray[Any]], K: int, n: int
) -> _GridScores:
    """Gather the chunks' fields 0..8 (:func:`_chunk_scores`) over the grid and score it.

    ``gather(field, tail)`` returns one field over the grid, shape (*grid, *tail).
    ``score = reach_fraction + quality / (2 K)``, ``quality`` the mean of the terms
    ``2 margin``, ``condition`` and ``share`` (each in [0, 1]) where a target is reached
    (module docstring); ``order`` the flat indices best first (ties by index).
    """
    count = gather(0, ())
    margin, condition, manipulability, share, cycle = (gather(i, ()) for i in range(2, 7))
    fraction = count / K
    terms = np.stack([2.0 * margin, condition, share], axis=-1)
    quality = np.where(
        count > 0, np.nanmean(np.where(count[..., None] > 0, terms, 0.0), axis=-1), 0.0
    )
    score = fraction + np.clip(quality, 0.0, 1.0) / (2.0 * K)
    flat_score = score.reshape(-1)
    order = np.lexsort((np.arange(flat_score.size), -flat_score)).astype(np.int64)
    return _GridScores(
        score=score,
        fraction=fraction,
        branch=gather(1, ()).astype(np.int8),
        margin=margin,
        condition=condition,
        manipulability=manipulability,
        share=share,
        cycle=cycle,
        reached=gather(7, (K,)).astype(bool),
        q=gather(8, (K, n)),
        order=order,
        noise=score_noise(score, fraction),
    )


def _ranked_rows(
    robot: Robot,
    T_flange_tool: FloatArray,
    grid: PlacementGrid,
    scores: _GridScores,
    top: int,
) -> Iterator[tuple[int, tuple[int, ...], dict[str, Any]]]:
    """Yield the ``top`` best candidates, best first, with the fields every search reports.

    Yields the flat index, the grid index and the :class:`RankedCandidate` fields
    ``rank``, ``tie_rank`` (module docstring, score noise), ``index``, ``branch`` (words;
    ``""`` where no target is reached), ``limit_margin`` and ``manipulability`` per target.
    """
    scheme = branch_geometry(robot).scheme
    tie_score = math.nan
    tie_rank = 1
    for rank, flat in enumerate(scores.order[:top].tolist(), start=1):
        idx = tuple(int(i) for i in np.unravel_index(flat, grid.shape))
        if rank == 1 or tie_score - scores.score[idx] > scores.noise:
            tie_rank, tie_score = rank, float(scores.score[idx])
        q_c = np.nan_to_num(scores.q[idx])
        jac = jacobian_rows(jacobian_base(robot, q_c, T_flange_tool), "position")
        branch = int(scores.branch[idx])
        yield (
            flat,
            idx,
            {
                "rank": rank,
                "tie_rank": tie_rank,
                "index": (idx[0], idx[1], idx[2], idx[3]),
                "branch": _branch_words(branch, scheme) if scores.reached[idx].any() else "",
                "limit_margin": limit_margins(robot, q_c).margin.min(axis=1),
                "manipulability": manipulability_yoshikawa(jac),
            },
        )


def _ranked(
    scene: Scene,
    grid: PlacementGrid,
    problem: _Problem,
    scores: _GridScores,
    position: FloatArray | None,
    top: int,
) -> tuple[RankedCandidate, ...]:
    """Return the ``top`` best candidates, best first, with exact per-target details."""
    best: list[RankedCandidate] = []
    for flat, idx, shared in _ranked_rows(scene.robot, problem.T_flange_tool, grid, scores, top):
        branch, q = int(scores.branch[idx]), scores.q[idx]
        blended = shared["rank"] <= BLENDED_TOP
        if problem.rail is not None and position is not None:
            at = position[idx]
            frame, reasons, clearance, pose_track = _rail_details(
                problem, problem.rail, grid, flat, branch, q, at
            )
            placed = at[np.isfinite(at)]
            best.append(
                RankedCandidate(
                    **shared,
                    reasons=tuple(reasons),
                    clearance=clearance,
                    blended_cycle_time=(
                        _rail_blended_cycle_time(problem, grid, idx, frame, pose_track)
                        if blended
                        else None
                    ),
                    rail_frame=frame if grid.rail else None,
                    track_position=at,
                    travel_needed=(
                        (
                            float(placed.min()) - RAIL_TRAVEL_MARGIN_M,
                            float(placed.max()) + RAIL_TRAVEL_MARGIN_M,
                        )
                        if placed.size
                        else None
                    ),
                )
            )
            continue
        scenes = _candidate_scenes(problem, grid, flat)
        best.append(
            RankedCandidate(
                **shared,
                reasons=tuple(_target_reasons(problem, scenes, branch)),
                clearance=_candidate_clearance(scenes, q),
                blended_cycle_time=(
                    _blended_cycle_time(scene, scenes.T_world_base) if blended else None
                ),
            )
        )
    return tuple(best)


def score_noise(score: FloatArray, fraction: FloatArray) -> float:
    """Median absolute score change over one grid step at equal reach (module docstring).

    Parameters
    ----------
    score, fraction : array, shape (ny, nx, nyaw, nh)
        Scores and reach fractions of the grid.

    Returns
    -------
    float
        0 when no two neighbouring points reach the same number of targets.
    """
    steps = []
    for axis in (0, 1):
        if score.shape[axis] < 2:
            continue
        change = np.abs(np.diff(score, axis=axis))
        same = np.diff(fraction, axis=axis) == 0.0
        steps.append(change[same])
    values = np.concatenate(steps) if steps else np.zeros(0)
    return float(np.median(values)) if values.size else 0.0


def _rail_blended_cycle_time(
    problem: _Problem,
    grid: PlacementGrid,
    index: tuple[int, ...],
    T_world_rail: FloatArray,
    pose_track: FloatArray,
) -> float | None:
    """Return the blended cycle time, s, of every path of one candidate of a track cell.

    A rail candidate: the rail at ``T_world_rail``; a base candidate (grid index ``index``):
    the rail where it is and the robot's foot on the carriage where the candidate puts it
    (:func:`~posebridge.planning.scene_moves.scene_on_carriage`). Every Cartesian waypoint at its pose's track position
    ``pose_track`` ((P,), m) on the candidate's branch (:func:`posebridge.planning.scene_moves.scene_on_rail`); None where
    a waypoint has no position or a path cannot be sampled or timed there (module docstring).
    """
    rail = problem.rail
    assert rail is not None  # a track cell's search
    positions = []
    for poses in problem.waypoint_pose:
        track = np.where(poses >= 0, pose_track[poses], np.nan)
        if np.any(np.isnan(track[poses >= 0])):
            return None
        positions.append(track)
    if grid.rail:
        return _paths_blended_cycle_time(scene_on_rail(rail.scene, T_world_rail, positions))
    iy, ix, iyaw, ih = index
    T_carriage_foot = np.eye(4)
    T_carriage_foot[:3, :3] = rotation_matrix_about_z(grid.yaw[iyaw]) @ problem.R_foot
    T_carriage_foot[:3, 3] = (grid.x[ix], grid.y[iy], rail.foot_z)
    mounted = scene_on_carriage(rail.scene, T_carriage_foot, float(grid.height[ih]))
    return _paths_blended_cycle_time(scene_on_rail(mounted, rail.T_world_rail, positions))


def _blended_cycle_time(scene: Scene, T_world_base: FloatArray) -> float | None:
    """Return the blended cycle time, s, of every path with the base at ``T_world_base``.

    See the module docstring; None if a path cannot be sampled or timed there.
    """
    return _paths_blended_cycle_time(scene_with_base(scene, T_world_base))


def _paths_blended_cycle_time(moved: Scene) -> float | None:
    """Return the sum of the blended cycle times of the scene's paths, s, as the path check times them.

    None if a path cannot be sampled or timed, or the scene has no path.
    """
    from posebridge.planning.blended_timing import blended_cycle_time
    from posebridge.planning.path_sampling import sample_path

    total = 0.0
    for index in range(len(moved.paths)):
        try:
            timing = blended_cycle_time(moved, sample_path(moved, index))
        except PlanningInputError:
            return None
        if not math.isfinite(timing.total):
            return None
        total += timing.total
    return total if moved.paths else None


def _candidate_clearance(scenes: _CandidateScenes, q: FloatArray) -> FloatArray:
    """Exact clearance to fixtures, keep-outs, pedestal and floor of one candidate's target configurations, shape (K,)."""
    out = np.full(q.shape[0], np.nan)
    rows = np.all(np.isfinite(q), axis=1)
    if not np.any(rows):
        return out
    out[rows] = np.minimum(
        clearance_batch(scenes.environment, q[rows]).distance,
        clearance_batch(scenes.support, q[rows]).distance,
    )
    return out


def _target_reasons(problem: _Problem, scenes: _CandidateScenes, branch: int) -> list[str]:
    """Why each target of one candidate is not reached (``""`` where it is), shape (K,).

    The first failing test of its pose or approach pose, in the order of the
    module docstring: reach, joint limits, required branch, collision (the
    nearest shape named), the candidate's branch.
    """
    T_base_pose = invert_transform(scenes.T_world_base) @ problem.T_world_pose
    ik = problem.solver.solve(T_base_pose, T_flange_tool=problem.T_flange_tool)
    labels = np.stack([ik.shoulder, ik.elbow, ik.wrist], axis=2)
    required = problem.requirement[:, None, :]
    matches = labels_match(labels, required)
    allowed = ik.valid & ik.within_limits & matches
    on_branch = labels_match(labels, BRANCHES[branch])
    reasons = []
    for k in range(problem.target_pose.shape[0]):
        poses = [int(problem.target_pose[k])]
        if problem.approach_pose[k] >= 0:
            poses.append(int(problem.approach_pose[k]))
        reason = ""
        for p in poses:
            what = "approach pose" if p != poses[0] else "pose"
            if not np.any(ik.valid[p]):
                reason = f"{what} out of reach"
            elif not np.any(ik.valid[p] & ik.within_limits[p]):
                reason = f"{what} outside the joint limits on every branch"
            elif not np.any(allowed[p]):
                reason = f"{what} not reachable on the required branch"
            else:
                q = ik.q[p][allowed[p]]
                checked = (scenes.support, scenes.environment, scenes.own)
                results = [clearance_batch(c, q) for c in checked]
                margins = (problem.margin, problem.margin, 0.0)
                slack = np.stack([r.distance - m for r, m in zip(results, margins, strict=True)])
                free = np.all(slack >= 0.0, axis=0)
                if not np.any(free):
                    best = int(np.argmax(slack.min(axis=0)))  # the least colliding solution
                    which = int(np.argmin(slack[:, best]))
                    result = results[which]
                    names = (
                        checked[which].arm.names
                        if result.is_self[best]
                        else checked[which].obstacles.names
                    )
                    other = names[int(result.other[best])]
                    reason = f"{what} in collision on every allowed branch (nearest: {other})"
                elif not np.any(free & on_branch[p][allowed[p]]):
                    reason = f"{what} reachable only on another branch than the candidate's"
            if reason:
                break
        reasons.append(reason)
    return reasons


def _current_index(scene: Scene, grid: PlacementGrid) -> tuple[int, ...] | None:
    """Grid index (y, x, yaw, height) of the cell's current base pose (rail), if the grid holds it."""
    track = scene.external.track
    if grid.rail and track is not None:
        direction = track.direction
        current = float(np.arctan2(direction[1], direction[0]))
        offset = np.flatnonzero(np.abs(grid.x) < 1e-9)
        turn = np.mod(grid.yaw - current + np.pi, 2 * np.pi) - np.pi
        yaw = np.flatnonzero(np.abs(turn) < 1e-9)
        if offset.size == 0 or yaw.size == 0:
            return None
        return (0, int(offset[0]), int(yaw[0]), 0)
    base = scene.cell.base
    match = []
    for axis, value in (
        (grid.y, float(m_from_mm(base.position_mm[1]))),
        (grid.x, float(m_from_mm(base.position_mm[0]))),
        (
            np.mod(grid.yaw + np.pi, 2 * np.pi),
            float(np.mod(rad_from_deg(base.rpy_deg[2]) + np.pi, 2 * np.pi)),
        ),
        (grid.height, float(m_from_mm(base.pedestal_height_mm))),
    ):
        hit = np.flatnonzero(np.abs(axis - value) < 1e-9)
        if hit.size == 0:
            return None
        match.append(int(hit[0]))
    return tuple(match)

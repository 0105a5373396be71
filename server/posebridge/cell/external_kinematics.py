"""Kinematics of the cell's joint vector: forward kinematics and IK with a redundant external axis.

Forward kinematics (:func:`fk_cell_tool`): ``T_world_tool = T_world_base(track)
@ T_base_tool(q)`` with the track's chain of :mod:`posebridge.cell.external_axes`;
a target on a turntable is at ``D(theta - theta_0) @ T_world_target(theta_0)``
(:func:`target_poses_at`).

**Feasible intervals** (:func:`feasible_intervals`). With one external axis free,
a target pose has a one-parameter family of robot solutions per arm branch. For
each target and branch the set of axis values at which the branch reaches the
pose within the robot's joint limits is a union of intervals. It is found by

1. a sweep of ``samples`` evenly spaced axis values over the axis range, the
   analytic IK of every target at every value solved in one batch
   (:func:`posebridge.kinematics.ik.solve_ik_all`, all branches at once);
2. a search in every sample gap where a branch changes from feasible to
   infeasible, until the bracket is at most ``tolerance`` wide (0.1 mm for the
   track, 0.01 deg for a table): the ITP method (:func:`_refine_ends`), which
   interpolates the branch's joint-limit margin where a joint limit decides
   and the IK family's reach margin (or else extrapolates the closing of its
   two elbow solutions) where the reach decides, taking at most two steps more
   than bisection; brackets of all targets and branches are solved together,
   one IK batch per step, a value shared by several brackets solved once. The reported end is the feasible side of the
   bracket.

The sweep cannot see an interval or a gap narrower than the sample spacing
(range / (samples - 1); by default at most 500 mm on a track, 20 deg on a table); the tests compare with a dense brute-force sweep.
Feasibility is kinematic (reach and joint limits); clearance enters through
the choice rule.

**Choice rule** (:func:`choose_external_value`): among the midpoints of the
feasible intervals of the swept axis (the track, or the table when there is no
track), taken with a table that carries the target at each of its sweep values
and at its current value (the twelve longest intervals), the values whose best
usable solution (within limits, collision-free, on the
required branch) has the highest score: the mean of the limit-margin term (the
smaller of the robot's and the external axes' margin fractions), the clearance
term and the singularity term of :func:`posebridge.cell.quality.branch_score`;
scores within 0.01 count as equal and the values with the least travel time
(sum of |change| / speed limit) from the previous values (the scene's for
none) win (common practice, no source).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from functools import cached_property
from itertools import pairwise, product

import numpy as np
import numpy.typing as npt

from posebridge.arrays import BoolArray, FloatArray, UInt8Array
from posebridge.cell.interval_search import (
    BEFORE_FOLD,
    BEFORE_X,
    FOLD_END,
    HIGH,
    LOW,
    MARGIN_HIGH,
    MARGIN_LOW,
    MOVED,
    REACH_HIGH,
    REACH_LOW,
    branch_state_rows,
    itp_settle,
    itp_values,
    translated_poses,
)
from posebridge.cell.model import Branch
from posebridge.cell.quality import branch_score, evaluate_configurations
from posebridge.cell.scene import Scene, posed_scene
from posebridge.cell.thresholds import QualityThresholds
from posebridge.kinematics.branches import BranchGeometry, branch_geometry
from posebridge.kinematics.fk import fk_tool
from posebridge.kinematics.ik import IkSolutions, ik_solver, solve_ik_all
from posebridge.kinematics.ik.inputs import check_target_poses
from posebridge.transforms import invert_transform
from posebridge.units import m_from_mm, rad_from_deg

__all__ = [
    "SCORE_TIE",
    "AxisIntervals",
    "ExternalChoice",
    "branch_triples",
    "carrier_axis",
    "choose_external_value",
    "feasible_intervals",
    "fk_cell_tool",
    "moving_axes",
    "solutions_along_axis",
    "target_poses_at",
]

SCORE_TIE = 0.01
"""Scores closer than this are equal in the choice rule; then the least travel wins."""
MAX_SCORED_CANDIDATES = 12
"""Candidates scored per target (longest feasible intervals first): each costs a clearance build."""
TRACK_TOLERANCE_M = float(m_from_mm(0.1))
TABLE_TOLERANCE_RAD = float(rad_from_deg(0.01))
TRACK_SWEEP_SPACING_M = 0.5
"""Largest sweep spacing on a track (default sample count: range / spacing + 1, at least 9)."""
TABLE_SWEEP_SPACING_RAD = float(rad_from_deg(20.0))
"""Largest sweep spacing on a turntable."""
ITP_KAPPA = 0.05
"""The ITP truncation: kappa1 = ITP_KAPPA / start width, kappa2 = 2. With the Illinois halving
the interpolation needs little truncation: on the bench poses 0.05 solved fewest poses of 0.02,
0.05, 0.1, 0.2, 0.5 (6,087 against 6,634 for 0.2 and 7,080 for 0.5, with two extra steps)."""
REFINE_EXTRA_STEPS = 2
"""IK batches the interval-end search may spend beyond plain bisection's (the ITP method's n0;
on the bench poses 2 solved 3 % fewer poses than 1, 3 only 0.3 % fewer than 2)."""

Triple = tuple[int, int, int]


def branch_triples(scene: Scene) -> list[Triple]:
    """Every branch of the robot's label scheme, front/up/positive first."""
    return _scheme_triples(branch_geometry(scene.robot).scheme)


def _scheme_triples(scheme: str) -> list[Triple]:
    """:func:`branch_triples` of a label scheme."""
    if scheme == "arm":
        return [(s, e, w) for s, e, w in product((1, -1), repeat=3)]
    if scheme == "planar":
        return [(0, 1, 0), (0, -1, 0)]
    return [(0, 0, 0)]


def fk_cell_tool(scene: Scene, q: npt.ArrayLike, external: npt.ArrayLike) -> FloatArray:
    """Tool poses in the world for robot joints and external values.

    Parameters
    ----------
    q : array-like, shape (N, n)
        Robot joints, rad or m.
    external : array-like, shape (N, m)
        External values, m or rad.

    Returns
    -------
    T_world_tool : array, shape (N, 4, 4)
    """
    T_base_tool = fk_tool(scene.robot, q, scene.T_flange_tool)
    T_world_base = scene.external.T_world_base(external, scene.T_world_base)
    return T_world_base @ T_base_tool


def carrier_axis(scene: Scene, target: int) -> int:
    """External-vector index of the table carrying ``target``, -1 for none."""
    fixture = scene.targets.fixtures[target]
    for k, table in enumerate(scene.external.turntables):
        if fixture in {scene.fixture_names[i] for i in table.fixtures}:
            return scene.external.table_offset + k
    return -1


def moving_axes(scene: Scene, target: int) -> list[int]:
    """External axes that move ``target`` relative to the robot (track, its table)."""
    axes = [] if scene.external.track is None else [0]
    carrier = carrier_axis(scene, target)
    return axes + ([carrier] if carrier >= 0 else [])


def target_poses_at(
    scene: Scene, target: int, external: npt.ArrayLike, *, approach: bool = False
) -> FloatArray:
    """World poses of one target for external vectors ``external`` (m/rad, (N, m)), (N, 4, 4)."""
    values = np.asarray(external, dtype=np.float64).reshape(-1, scene.external.count)
    table = scene.targets.T_world_approach if approach else scene.targets.T_world_target
    T = np.broadcast_to(table[target], (len(values), 4, 4)).copy()
    carrier = carrier_axis(scene, target)
    if carrier >= 0:
        turntable = scene.external.turntables[carrier - scene.external.table_offset]
        T = turntable.motion(values[:, carrier] - scene.external.values[carrier]) @ T
    return T


def _track_origin(scene: Scene, T_world_target: FloatArray) -> tuple[FloatArray, FloatArray]:
    """Targets in the base frame with the track at 0, shape (K, 4, 4), and the travel direction there, (3,).

    The track only translates the base along its direction ``d``, so a target's base-frame
    pose at ``s`` is its pose at 0 moved by ``-s R_world_base^T d``.
    """
    track = scene.external.track
    assert track is not None
    T_world_base = track.T_world_base([0.0])[0]
    return invert_transform(T_world_base) @ T_world_target, T_world_base[:3, :3].T @ track.direction


def _translated(T_base: FloatArray, along: FloatArray, values: FloatArray) -> FloatArray:
    """``T_base`` (K, 4, 4) moved by ``-values * along`` (values (K, S)), shape (K, S, 4, 4)."""
    out = np.broadcast_to(T_base[:, None], (*values.shape, 4, 4)).copy()
    out[..., :3, 3] -= values[..., None] * along
    return out


def _turned_poses(
    scene: Scene, T_world_target: FloatArray, axis: int, values: FloatArray
) -> FloatArray:
    """Target poses in the base frame with turntable ``axis`` at ``values``, shape (K, S, 4, 4).

    ``T_world_target`` (K, 4, 4) at the scene's values; ``values`` (K, S). The table
    turns the target (:func:`~posebridge.cell.external_axes.turntable_motion`).
    """
    external = scene.external
    table = external.turntables[axis - external.table_offset]
    D = table.motion((values - external.values[axis]).ravel()).reshape((*values.shape, 4, 4))
    return invert_transform(scene.T_world_base) @ (D @ T_world_target[:, None])


def _branch_bits(triples: list[Triple]) -> UInt8Array:
    """Branches each combination of labels belongs to, as bits, shape (27,).

    Entry ``9 (shoulder + 1) + 3 (elbow + 1) + (wrist + 1)`` has bit ``b`` set when
    the labels match branch ``b`` of ``triples`` (at most 8): every label equals the
    branch's word, or is 0 (undefined, matches either side), or the branch has no
    such word (0).
    """
    code = np.arange(27)
    labels = np.stack([code // 9, code // 3 % 3, code % 3], axis=1) - 1
    want = np.asarray(triples).reshape(-1, 3)
    match = np.all(
        (want == 0) | (labels[:, None] == 0) | (labels[:, None] == want), axis=2
    )  # (27, B)
    weights = np.left_shift(1, np.arange(len(triples)))
    return (match @ weights).astype(np.uint8)


def _slot_branches(solutions: IkSolutions, table: UInt8Array) -> UInt8Array:
    """Branches each slot reaches within limits, as bits of ``table``, shape (N, M).

    Empty slots and slots outside the limits have no bit set.
    """
    code = 9 * solutions.shoulder + 3 * solutions.elbow + solutions.wrist + 13
    return table[code] * (solutions.valid & solutions.within_limits)


def _reached(solutions: IkSolutions, table: UInt8Array, count: int) -> BoolArray:
    """Whether branch ``b < count`` (bit ``b`` of ``table``) reaches each pose in limits, (N, B)."""
    slots = _slot_branches(solutions, table)
    reached = slots[:, 0].copy()
    for m in range(1, slots.shape[1]):  # slot by slot: a reduction over a short axis is slow
        reached |= slots[:, m]
    return (reached[:, None] >> np.arange(count, dtype=np.uint8)) & 1 == 1


def _branch_state(
    solutions: IkSolutions,
    rows: npt.NDArray[np.intp],
    branches: npt.NDArray[np.intp],
    table: UInt8Array,
    limits: tuple[FloatArray, FloatArray],
    pairing: tuple[int, npt.NDArray[np.intp]],
) -> tuple[BoolArray, FloatArray, FloatArray]:
    """Feasibility, limit margin and fold of branch ``branches[i]`` at pose ``rows[i]``, (D,).

    The margin is the largest, over the branch's solutions that reach the pose, of
    the smallest signed distance of a joint to its limits (m or rad, negative
    outside); NaN when the branch does not reach the pose at all. It is continuous
    in the external value while the branch's solution exists, and at least zero
    exactly where the branch is feasible (the joint limits decide). The fold is
    ``(half the elbow angle between the branch's solution and its elbow partner's)^2``:
    at the edge of the reach the two elbow solutions meet (stretched or folded
    elbow), so it falls to zero there, about linearly in the distance to the edge
    (the half angle goes as its square root). NaN without a partner. Both are what
    :func:`_refine_ends` interpolates.
    """
    out = np.empty((len(rows), 3))
    branch_state_rows(
        solutions.q,
        solutions.valid,
        solutions.within_limits,
        (solutions.shoulder, solutions.elbow, solutions.wrist),
        rows,
        branches,
        table,
        limits,
        pairing,
        out,
    )
    return out[:, 0] == 1.0, out[:, 1], out[:, 2]


def solutions_along_axis(
    scene: Scene, axis: int, values: npt.ArrayLike
) -> tuple[list[Triple], FloatArray]:
    """Per cell target and branch, the robot joints reaching it with one external axis at ``values``.

    The other axes stay at the scene's values. The track moves the base under every target,
    a turntable turns the targets it carries (the others keep their pose). One analytic IK
    batch of ``K * R`` poses; the first solution of each branch within the limits is taken.

    Parameters
    ----------
    scene : Scene
    axis : int
        External axis index.
    values : array-like, shape (R,)
        Axis values, m or rad.

    Returns
    -------
    branches : list of (int, int, int), length B
        :func:`branch_triples`.
    q : array, shape (K, R, B, n)
        Robot joints, rad or m; NaN where the branch does not reach the target within limits.
    """
    grid = np.asarray(values, dtype=np.float64).reshape(-1)
    T_world_target = scene.targets.T_world_target
    K, R = len(T_world_target), len(grid)
    external = scene.external
    along = np.broadcast_to(grid, (K, R))
    if external.track is not None and axis == 0:
        T_base = _translated(*_track_origin(scene, T_world_target), along)
    else:
        fixed = invert_transform(scene.T_world_base) @ T_world_target
        T_base = np.broadcast_to(fixed[:, None], (K, R, 4, 4)).copy()
        carried = [k for k in range(K) if carrier_axis(scene, k) == axis]
        if carried:
            T_base[carried] = _turned_poses(scene, T_world_target[carried], axis, along[carried])
    solutions = solve_ik_all(
        scene.robot, T_base.reshape(-1, 4, 4), T_flange_tool=scene.T_flange_tool
    )
    triples = branch_triples(scene)
    q = np.full((K * R, len(triples), scene.robot.dof), np.nan)
    slots = _slot_branches(solutions, _branch_bits(triples))
    for b in range(len(triples)):
        match = (slots >> b) & 1 == 1
        rows = np.flatnonzero(np.any(match, axis=1))
        q[rows, b] = solutions.q[rows, np.argmax(match[rows], axis=1)]
    return triples, q.reshape(K, R, len(triples), scene.robot.dof)


def _sorted_ends(
    group: npt.NDArray[np.int64], value: FloatArray
) -> tuple[npt.NDArray[np.int64], FloatArray]:
    """Interval ends sorted by group (target * B + branch), then value."""
    order = np.lexsort((value, group))
    return group[order], value[order]


class _AxisPoses:
    """Base-frame poses of K world targets with one external axis moved, the others kept."""

    def __init__(self, scene: Scene, T_world_target: FloatArray, axis: int) -> None:
        self.scene, self.T_world_target, self.axis = scene, T_world_target, axis
        external = scene.external
        self.track = (
            _track_origin(scene, T_world_target)
            if external.track is not None and axis == 0
            else None
        )

    def at(self, targets: npt.NDArray[np.intp], values: FloatArray) -> FloatArray:
        """Pose of target ``targets[i]`` with the axis at ``values[i]``, shape (D, 4, 4)."""
        if self.track is not None:
            return translated_poses(*self.track, targets, values)
        turned = _turned_poses(self.scene, self.T_world_target[targets], self.axis, values[:, None])
        return turned[:, 0]


def _joint_limits(scene: Scene) -> tuple[FloatArray, FloatArray]:
    """Robot joint limits for the margin of :func:`_branch_state`; none for continuous joints."""
    robot = scene.robot
    return (
        np.where(robot.continuous, -np.inf, robot.lower),
        np.where(robot.continuous, np.inf, robot.upper),
    )


def _elbow_pairing(
    geometry: BranchGeometry, triples: list[Triple]
) -> tuple[int, npt.NDArray[np.intp]]:
    """Elbow joint and, per branch, the branch with the other elbow, shape (B,) (-1 for none)."""
    joint = geometry.elbow_joint
    index = {t: b for b, t in enumerate(triples)}
    partner = [index.get((s, -e, w), -1) if e != 0 and joint >= 0 else -1 for s, e, w in triples]
    return max(joint, 0), np.array(partner, dtype=np.intp)


def _reach_measure(
    margins: Callable[[FloatArray], FloatArray] | None,
) -> Callable[[FloatArray], FloatArray]:
    """Return the IK family's reach margins (:meth:`~posebridge.kinematics.ik.IkSolver.reach_margins`), NaN without."""
    if margins is not None:
        return margins
    return lambda T: np.full((len(T), 2), np.nan)


def _shoulder_columns(triples: list[Triple]) -> npt.NDArray[np.intp]:
    """Column of the reach margins of each branch's shoulder: 0 front, 1 back, -1 undefined, (B,)."""
    return np.array([{1: 0, -1: 1}.get(s, -1) for s, _, _ in triples], dtype=np.intp)


def _refine_ends(
    solve: Callable[[FloatArray], IkSolutions],
    reach: tuple[Callable[[FloatArray], FloatArray], npt.NDArray[np.intp]],
    poses: _AxisPoses,
    table: UInt8Array,
    limits: tuple[FloatArray, FloatArray],
    brackets: tuple[npt.NDArray[np.intp], npt.NDArray[np.intp], BoolArray],
    ends: tuple[FloatArray, FloatArray],
    margins: tuple[FloatArray, FloatArray],
    reaches: tuple[FloatArray, FloatArray],
    pairing: tuple[int, npt.NDArray[np.intp]],
    fold_start: FloatArray,
    *,
    tolerance: float,
    extra_steps: int,
) -> tuple[FloatArray, FloatArray, int]:
    """Shrink every bracket of a branch change to at most ``tolerance``.

    The ITP method (interpolate, truncate, project; Oliveira & Takahashi, ACM TOMS
    47(1), 2020, algorithm 1; :func:`~posebridge.cell.interval_search.itp_values`) on
    the branch's limit margin where a joint limit ends the interval, and on the reach
    margin of its shoulder (``reach``) or else its fold (:func:`_branch_state`) where
    the reach ends it, with the Illinois halving of a bracket end's values kept twice
    (Dowell & Jarratt, BIT 11, 1971). The projection keeps every bracket within
    ``ceil(log2(start width / tolerance)) + extra_steps`` evaluations, so with
    ``extra_steps = 0`` no bracket needs more IK batches than bisection; a larger one
    gives the interpolation more room. The bracket is always updated from the
    branch's feasibility (the margins and the fold only choose where to look), so the
    ends are exact to the tolerance whatever they do. Brackets of all targets and branches are solved together, one IK batch
    per step (:func:`~posebridge.cell.interval_search.itp_values`, the batch,
    :func:`~posebridge.cell.interval_search.itp_settle`), a (target, value) shared by
    several brackets solved once.

    Parameters
    ----------
    solve : callable
        The robot's prepared IK (:meth:`~posebridge.kinematics.ik.IkSolver.prepare`).
    reach : (callable, array of int, shape (B,))
        The IK family's reach margins of poses, (P, 2), NaN without
        (:func:`_reach_measure`), and the column of each branch's shoulder
        (:func:`_shoulder_columns`).
    poses : _AxisPoses
    table, limits
        :func:`_branch_bits`, :func:`_joint_limits`.
    brackets : (targets, branches, low_feasible), arrays of shape (D,)
    ends : (low, high), arrays of shape (D,)
        Axis values, m or rad; ``low < high``, the branch's feasibility differs.
    margins : (low, high), arrays of shape (D,)
        Margins at the ends, NaN where the branch does not reach the pose.
    reaches : (low, high), arrays of shape (D,)
        Reach margins of the branch's shoulder at the ends, NaN without.
    pairing : (int, array of shape (B,))
        :func:`_elbow_pairing`.
    fold_start : array, shape (D,)
        Folds at the feasible ends.
    tolerance : float
        Largest final bracket, m or rad.
    extra_steps : int
        IK batches allowed beyond bisection's (the method's n0).

    Returns
    -------
    low, high : arrays, shape (D,)
        The final brackets (``high - low <= tolerance``).
    solved : int
        Poses solved.
    """
    targets, branches, low_feasible = brackets
    measure, columns = reach
    D = len(targets)
    state = np.empty((10, D))
    state[MOVED] = 0.0
    state[LOW], state[HIGH] = ends
    state[MARGIN_LOW], state[MARGIN_HIGH] = margins
    state[REACH_LOW], state[REACH_HIGH] = reaches
    state[FOLD_END] = fold_start
    state[BEFORE_X] = state[BEFORE_FOLD] = np.nan
    start_width = state[HIGH] - state[LOW]
    most = np.ceil(np.log2(np.maximum(start_width / tolerance, 1.0))) + extra_steps
    value = np.empty(D)
    pairs = (np.empty(D, dtype=np.intp), np.empty(D))
    slot = np.empty(D, dtype=np.intp)
    solved = 0
    step = 0
    open_ = np.flatnonzero(start_width > tolerance)
    while len(open_):
        count = itp_values(
            open_,
            targets,
            state,
            low_feasible,
            start_width,
            most,
            step,
            tolerance,
            ITP_KAPPA,
            value,
            pairs,
            slot,
        )
        T = poses.at(pairs[0][:count], pairs[1][:count])
        solutions = solve(T)
        solved += count
        open_ = itp_settle(
            open_,
            slot,
            (
                solutions.q,
                solutions.valid,
                solutions.within_limits,
                (solutions.shoulder, solutions.elbow, solutions.wrist),
            ),
            (measure(T), columns),
            branches,
            table,
            limits,
            pairing,
            low_feasible,
            value,
            state,
            tolerance,
        )
        step += 1
    return state[LOW], state[HIGH], solved


@dataclass(frozen=True, eq=False)
class AxisIntervals:
    """Feasible intervals of one external axis for K targets.

    Attributes
    ----------
    axis : int
        Index in the external vector.
    branches : list of (int, int, int)
        Shoulder, elbow, wrist labels of each branch, length B.
    ends : array, shape (I, 2)
        ``[start, end]`` of every feasible interval, m or rad, by target, then
        branch, then ascending.
    offsets : array of int, shape (K * B + 1,)
        The intervals of target ``k`` and branch ``b`` are
        ``ends[offsets[k * B + b] : offsets[k * B + b + 1]]``.
    spacing, tolerance : float
        Sweep spacing and end accuracy, m or rad.
    ik_poses : int
        Poses solved (sweep plus bisection).
    """

    axis: int
    branches: list[Triple]
    ends: FloatArray
    offsets: npt.NDArray[np.intp]
    spacing: float
    tolerance: float
    ik_poses: int

    @cached_property
    def intervals(self) -> list[list[FloatArray]]:
        """Per target (K), per branch (B), the intervals of :attr:`ends`, each (I, 2)."""
        B = len(self.branches)
        bounds = self.offsets.tolist()
        per = [self.ends[a:b] for a, b in pairwise(bounds)]
        return [per[k : k + B] for k in range(0, len(per), B)]


def feasible_intervals(
    scene: Scene,
    T_world_target: npt.ArrayLike,
    axis: int,
    *,
    samples: int | None = None,
    tolerance: float | None = None,
) -> AxisIntervals:
    """Per target and branch, the intervals of one external axis where the branch reaches it.

    Method in the module docstring (sweep, then bisection at the interval ends).

    Parameters
    ----------
    scene : Scene
    T_world_target : array-like, shape (K, 4, 4)
        Tool poses in the world at the scene's external values.
    axis : int
        External axis index; the other axes stay at the scene's values.
    samples : int, optional
        Sweep values over the axis range (>= 2); by default enough for a spacing of at
        most 500 mm (track) or 20 deg (table), at least 9.
    tolerance : float, optional
        Bracket width at the ends, m or rad (0.1 mm / 0.01 deg if omitted).

    Returns
    -------
    AxisIntervals
    """
    external = scene.external
    prismatic = bool(external.prismatic[axis])
    tol = (
        (TRACK_TOLERANCE_M if prismatic else TABLE_TOLERANCE_RAD)
        if tolerance is None
        else tolerance
    )
    T_target = check_target_poses(np.reshape(T_world_target, (-1, 4, 4)))
    K = len(T_target)
    lower, upper = float(external.lower[axis]), float(external.upper[axis])
    if samples is None:
        step = TRACK_SWEEP_SPACING_M if prismatic else TABLE_SWEEP_SPACING_RAD
        samples = max(9, int(np.ceil((upper - lower) / step)) + 1)
    grid = np.linspace(lower, upper, max(int(samples), 2))
    spacing = float(grid[1] - grid[0])
    geometry = branch_geometry(scene.robot)
    triples = _scheme_triples(geometry.scheme)
    B = len(triples)
    poses = _AxisPoses(scene, T_target, axis)
    # the targets are checked once; the axis only moves them rigidly
    ik = ik_solver(scene.robot)
    solve = ik.prepare(T_flange_tool=scene.T_flange_tool)
    measure = _reach_measure(ik.reach_margins(T_flange_tool=scene.T_flange_tool))
    T_swept = poses.at(np.repeat(np.arange(K), len(grid)), np.tile(grid, K))
    swept = solve(T_swept)
    table = _branch_bits(triples)
    feasible = _reached(swept, table, B).reshape(K, len(grid), B)
    ik_poses = K * len(grid)
    # brackets: (target, gap, branch) where a branch changes between neighbouring samples
    k_idx, gap, b_idx = np.nonzero(feasible[:, :-1] != feasible[:, 1:])
    low_feasible = feasible[k_idx, gap, b_idx]
    steps = int(np.ceil(np.log2(max(spacing / tol, 1.0)))) if len(gap) else 0
    if steps:
        limits = _joint_limits(scene)
        pairing = _elbow_pairing(geometry, triples)
        rows = k_idx * len(grid) + gap
        _, margin_low, fold_low = _branch_state(swept, rows, b_idx, table, limits, pairing)
        _, margin_high, fold_high = _branch_state(swept, rows + 1, b_idx, table, limits, pairing)
        columns = _shoulder_columns(triples)
        reach_swept = measure(T_swept)
        shoulder = columns[b_idx]
        reach_low, reach_high = (
            np.where(shoulder >= 0, reach_swept[r, shoulder], np.nan) for r in (rows, rows + 1)
        )
        low, high, solved = _refine_ends(
            solve,
            (measure, columns),
            poses,
            table,
            limits,
            (k_idx, b_idx, low_feasible),
            (grid[gap], grid[gap + 1]),
            (margin_low, margin_high),
            (reach_low, reach_high),
            pairing,
            np.where(low_feasible, fold_low, fold_high),
            tolerance=tol,
            extra_steps=REFINE_EXTRA_STEPS,
        )
        ik_poses += solved
    else:
        low, high = grid[gap], grid[gap + 1]
    ends = np.where(low_feasible, low, high)  # the feasible side of each bracket
    # interval starts: a bracket feasible on its high side, or the range's start; stops alike
    first_k, first_b = np.nonzero(feasible[:, 0])
    last_k, last_b = np.nonzero(feasible[:, -1])
    opening = ~low_feasible
    starts = _sorted_ends(
        np.concatenate([k_idx[opening], first_k]) * B + np.concatenate([b_idx[opening], first_b]),
        np.concatenate([ends[opening], np.full(len(first_k), lower)]),
    )
    stops = _sorted_ends(
        np.concatenate([k_idx[low_feasible], last_k]) * B
        + np.concatenate([b_idx[low_feasible], last_b]),
        np.concatenate([ends[low_feasible], np.full(len(last_k), upper)]),
    )
    pairs = np.stack([starts[1], stops[1]], axis=1)
    offsets = np.searchsorted(starts[0], np.arange(K * B + 1))
    return AxisIntervals(axis, triples, pairs, offsets, spacing, tol, ik_poses)


@dataclass(frozen=True, eq=False)
class ExternalChoice:
    """The chosen external values of one target.

    Attributes
    ----------
    values : array, shape (m,)
        m, rad.
    score : float or None
        Score of the best usable solution there; None when no candidate is usable.
    pinned : tuple of str
        Axes the user pinned.
    intervals : dict of int to AxisIntervals
        Feasible intervals of each free moving axis (for this one target).
    """

    values: FloatArray
    score: float | None
    pinned: tuple[str, ...]
    intervals: dict[int, AxisIntervals]


def _required(branch: Branch | None) -> Triple:
    if branch is None:
        return (0, 0, 0)
    words = {"front": 1, "back": -1, "up": 1, "down": -1, "positive": 1, "negative": -1}
    return tuple(
        0 if w is None else words[w] for w in (branch.shoulder, branch.elbow, branch.wrist)
    )  # type: ignore[return-value]


def _score_at(
    scene: Scene, target: int, values: FloatArray, thresholds: QualityThresholds
) -> float | None:
    """Best score of a usable solution of ``target`` with the external axes at ``values``."""
    posed = posed_scene(scene, values)
    T_base = invert_transform(posed.T_world_base) @ posed.targets.T_world_target[target]
    solutions = solve_ik_all(posed.robot, T_base[None], T_flange_tool=posed.T_flange_tool)
    slots = np.flatnonzero(solutions.valid[0] & solutions.within_limits[0])
    if slots.size == 0:
        return None
    quality = evaluate_configurations(posed, solutions.q[0, slots], thresholds)
    required = _required(scene.targets.branches[target])
    labels = np.stack([quality.shoulder, quality.elbow, quality.wrist], axis=1)
    usable = quality.collision_free & np.all(
        (np.array(required) == 0) | (labels == np.array(required)) | (labels == 0), axis=1
    )
    if not np.any(usable):
        return None
    external = scene.external
    span = external.upper - external.lower
    external_fraction = float(
        np.min(np.minimum(values - external.lower, external.upper - values) / span)
    )
    score = branch_score(quality)
    t = quality.thresholds
    robot_margin = np.clip(quality.margins.min_fraction / t.score_margin_fraction, 0.0, 1.0)
    own_margin = np.clip(
        np.minimum(quality.margins.min_fraction, external_fraction) / t.score_margin_fraction,
        0.0,
        1.0,
    )
    adjusted = score + (own_margin - robot_margin) / 3.0  # the margin term with the external axes
    return float(np.max(adjusted[usable]))


def choose_external_value(
    scene: Scene,
    target: int,
    *,
    previous: npt.ArrayLike | None = None,
    thresholds: QualityThresholds | None = None,
    samples: int | None = None,
) -> ExternalChoice:
    """External values for one target: pinned ones kept, free moving axes chosen by the rule.

    Parameters
    ----------
    scene : Scene
    target : int
    previous : array-like, shape (m,), optional
        Values at the previous waypoint (m, rad); the scene's values if omitted.
    thresholds : QualityThresholds, optional
    samples : int, optional
        Sweep values per free axis (default as in :func:`feasible_intervals`).

    Returns
    -------
    ExternalChoice
        Free axes are chosen one after the other (track first), each with the
        ones before it at their chosen values.
    """
    external = scene.external
    thresholds = scene.cell.thresholds if thresholds is None else thresholds
    values = external.values.copy() if previous is None else np.array(previous, dtype=np.float64)
    start = values.copy()
    pins = scene.cell.targets[target].external_axes
    pinned = []
    for name, value in pins.items():
        i = external.index(name)
        values[i] = float(m_from_mm(value) if external.prismatic[i] else rad_from_deg(value))
        pinned.append(name)
    free = [axis for axis in moving_axes(scene, target) if external.names[axis] not in pins]
    candidates: list[tuple[float, FloatArray]] = []  # (interval length, values)
    if free:
        sweep, outer = free[0], free[1:]  # the track is swept, a table is stepped over its grid
        outer_count = samples or max(
            9,
            int(
                np.ceil(
                    (external.upper[outer[0]] - external.lower[outer[0]]) / TABLE_SWEEP_SPACING_RAD
                )
            )
            + 1
            if outer
            else 1,
        )
        outer_values = (  # the grid and the value the table is at (no travel)
            np.union1d(
                np.linspace(external.lower[outer[0]], external.upper[outer[0]], outer_count),
                [values[outer[0]]],
            )
            if outer
            else np.array([np.nan])
        )
        trials = np.broadcast_to(values, (len(outer_values), external.count)).copy()
        if outer:
            trials[:, outer[0]] = outer_values
        poses = np.concatenate([target_poses_at(scene, target, trial[None]) for trial in trials])
        found = feasible_intervals(posed_scene(scene, values), poses, sweep, samples=samples)
        for row, trial in enumerate(trials):
            spans = {(float(a), float(b)) for per in found.intervals[row] for a, b in per}
            for start_value, stop_value in spans:
                value = trial.copy()
                value[sweep] = 0.5 * (start_value + stop_value)
                candidates.append((stop_value - start_value, value))
    candidates.sort(key=lambda item: -item[0])
    weights = 1.0 / external.velocity_max
    scored: list[tuple[float, float, FloatArray]] = []  # (score, travel time, values)
    best_score: float | None
    for _, trial in candidates[:MAX_SCORED_CANDIDATES]:
        score = _score_at(scene, target, trial, thresholds)
        if score is not None:
            scored.append((score, float(np.sum(np.abs(trial - start) * weights)), trial))
    if scored:
        top = max(score for score, _, _ in scored)
        best_score, _, values = min(
            (item for item in scored if item[0] >= top - SCORE_TIE), key=lambda item: item[1]
        )
    else:
        best_score = _score_at(scene, target, values, thresholds)
    posed = posed_scene(scene, values)
    intervals = {
        axis: feasible_intervals(
            posed, posed.targets.T_world_target[target][None], axis, samples=samples
        )
        for axis in free
    }
    return ExternalChoice(values, best_score, tuple(pinned), intervals)

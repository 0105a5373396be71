"""The fastest consistent IK solution sequence along a path: a shortest path over layered candidates.

Every waypoint ``w`` has ``K_w`` candidate configurations (a ``(K_w, n)`` array,
SI units): for a Cartesian waypoint every IK solution inside the joint limits
(branches times revolutions, :func:`ik_candidates`), for a joint waypoint its
given values. Choosing one per waypoint so that the cycle time is smallest is a
shortest path through the layered graph whose nodes are the candidates and
whose edges join consecutive layers, weighted by the segment's rest-to-rest
duration (:mod:`posebridge.planning.cycle_time`: the synchronised trapezoid of
a joint move, :func:`~posebridge.planning.cycle_time.linear_move_timing` of a
linear move). The graph is acyclic, so one pass of dynamic programming in layer
order (Bellman 1957; the single-source shortest path in a DAG, Cormen, Leiserson,
Rivest & Stein, *Introduction to Algorithms*, 3rd ed., sec. 24.2) is exact: the
cycle time is a sum of per-segment durations that depend only on the segment's
two end configurations.

Constraints, each removing candidates or edges (and recorded with its reason):

* **candidates** inside the joint limits with a limit margin of at least
  ``limit_margin_rad`` (``limit_margin_m`` for prismatic joints), on the
  target's required branch, and collision-free (:func:`collision_batch` with
  the scene's clearance scene and ``collision_threshold_m``);
* **joint moves** collision-free along the straight joint-space line, sampled
  as the path check samples it (no joint moves more than ``resolution_rad``,
  ``resolution_m`` for prismatic joints, between samples). The limit margin
  holds along the line because it holds at both ends (the margin box is convex);
* **linear moves** followed with branch continuity exactly as
  :func:`posebridge.planning.path_sampling.sample_path` does (every IK solution
  of every sample, each sample taking the solution nearest the previous one):
  every sample reached, no branch change and no configuration jump (no
  singularity crossing), the limit margin at every sample, collision-free, and
  arriving on one of the next waypoint's candidates (the edge joins the start
  candidate to that one only). Linear moves the joint velocity limits slow
  below the requested speed are timed slower (as in the rest-to-rest timing),
  or refused with ``slowed_linear_moves=False``.

Edge costs are computed for all ``K_w x K_{w+1}`` pairs at once (numpy).
Collision checks along edges, the expensive part, are lazy (as in Lazy PRM,
Bohlin & Kavraki, "Path planning using lazy PRM", ICRA 2000): the shortest path
is found assuming unchecked edges are free, its unchecked edges are checked in
one batch, colliding edges are removed, and the search repeats until the
shortest path consists of checked edges only. Edges are only ever removed when
they truly collide, so the result is the exact optimum over collision-free
sequences while only edges that were on some tentative optimum are checked.

Ties between equally fast sequences go to the lower candidate index (IK slot
order: nearest the previous choice's seed, then the stable branch order).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numba as nb
import numpy as np
import numpy.typing as npt

from posebridge.arrays import Int8Array, Int16Array
from posebridge.cell.clearance import clearance_scene
from posebridge.cell.scene import ResolvedPath, Scene
from posebridge.geometry.clearance import collision_batch
from posebridge.kinematics.branches import centred_revolutions, label_branches, labels_match
from posebridge.kinematics.fk import fk_tool
from posebridge.kinematics.ik import IkSolver, ik_solver
from posebridge.kinematics.ik.finishing import (
    JOINT_CONTINUOUS,
    JOINT_REVOLUTE,
    joint_modes,
    joint_weights,
)
from posebridge.kinematics.metrics import limit_margins
from posebridge.planning.cycle_time import (
    DEFAULT_LINEAR_ACCELERATION_M_S2,
    joint_move_durations,
    linear_move_timing,
    path_cycle_time,
)
from posebridge.planning.errors import PlanningInputError, check_non_negative, check_positive
from posebridge.planning.path_sampling import (
    MAX_SAMPLES_PER_SEGMENT,
    SegmentSamples,
    branch_requirement,
    path_of,
    sample_path,
    slerp,
)
from posebridge.transforms import (
    invert_transform,
    quaternion_from_rotation_matrix,
    rotation_matrix_from_quaternion,
)
from posebridge.units import BoolArray, FloatArray

__all__ = [
    "CANDIDATE_REASONS",
    "EDGE_REASONS",
    "CandidateExclusion",
    "SequenceChoice",
    "SequenceLimits",
    "SequenceResult",
    "Violation",
    "WaypointCandidates",
    "ik_candidates",
    "optimise_sequence",
    "revolutions_of",
    "segment_costs",
]

IntArray = npt.NDArray[np.int64]

CANDIDATE_REASONS = ("outside_limits", "limit_margin", "branch", "collision")
"""Why a candidate configuration was excluded at its waypoint."""
EDGE_REASONS = (
    "unreached",
    "branch_change",
    "configuration_jump",
    "limit_margin",
    "arrival_excluded",
    "joint_speed",
    "collision",
)
"""Why an edge (a segment between two candidates) was excluded. ``arrival_excluded``:
the linear move arrives on a configuration that is not a candidate of the next waypoint."""
_MATCH_TOLERANCE = 1e-6
"""Largest joint difference (rad or m) at which a linear move's arrival is that candidate."""


@dataclass(frozen=True)
class SequenceLimits:
    """The constraints and sampling of a sequence search (SI units).

    Attributes
    ----------
    limit_margin_rad, limit_margin_m : float
        Smallest distance to a joint limit, revolute and prismatic joints.
    collision_threshold_m : float
        Clearance below which a configuration collides (0: contact or penetration).
    resolution_m, resolution_rad : float
        Sampling of moves: TCP travel and rotation of linear moves, joint travel
        of joint moves (m for prismatic joints), as the path check samples.
    jump_rad, jump_m : float
        Joint step between two linear-move samples that counts as a configuration jump.
    linear_acceleration_m_s2 : float
        TCP path acceleration of linear moves (rest-to-rest timing).
    slowed_linear_moves : bool
        Allow linear moves that the joint velocity limits slow below the requested speed.
    """

    limit_margin_rad: float = 0.0
    limit_margin_m: float = 0.0
    collision_threshold_m: float = 0.0
    resolution_m: float = 0.005
    resolution_rad: float = math.radians(1.0)
    jump_rad: float = math.radians(10.0)
    jump_m: float = 0.02
    linear_acceleration_m_s2: float = DEFAULT_LINEAR_ACCELERATION_M_S2
    slowed_linear_moves: bool = True

    def __post_init__(self) -> None:
        """Check the margins and thresholds (non-negative, finite)."""
        for name in ("limit_margin_rad", "limit_margin_m"):
            check_non_negative(name, getattr(self, name))
        if not math.isfinite(self.collision_threshold_m):
            raise PlanningInputError(
                f"collision_threshold_m: expected a finite number, got {self.collision_threshold_m!r}"
            )
        for name in (
            "resolution_m",
            "resolution_rad",
            "jump_rad",
            "jump_m",
            "linear_acceleration_m_s2",
        ):
            check_positive(name, getattr(self, name))


@dataclass(frozen=True)
class CandidateExclusion:
    """A configuration left out at its waypoint.

    Attributes
    ----------
    q : array, shape (n,)
        rad or m.
    reason : str
        One of :data:`CANDIDATE_REASONS`.
    joint : int
        Joint outside its limits or closest to them (-1 for the other reasons).
    value : float
        Limit margin of that joint (rad or m; negative: outside), NaN for the other reasons.
    """

    q: FloatArray
    reason: str
    joint: int = -1
    value: float = math.nan


@dataclass(frozen=True, eq=False)
class WaypointCandidates:
    """The candidate configurations of one waypoint.

    Attributes
    ----------
    q : array, shape (K, n)
        rad or m; any generic set of configurations (IK branches and
        revolutions, external-axis positions, ...).
    excluded : tuple of CandidateExclusion
        Configurations left out, with the reason.
    """

    q: FloatArray
    excluded: tuple[CandidateExclusion, ...] = ()


@dataclass(frozen=True)
class Violation:
    """A constraint a choice of configurations breaks.

    Attributes
    ----------
    reason : str
        At a waypoint: one of :data:`CANDIDATE_REASONS` or ``"unreached"`` (no
        configuration); on a segment: one of :data:`EDGE_REASONS` or
        ``"unreached"`` (an end has no configuration).
    waypoint : int
        The waypoint (-1 for a segment's violation).
    segment : int
        The segment ``k``, from waypoint ``k`` to ``k + 1`` (-1 for a waypoint's).
    """

    reason: str
    waypoint: int = -1
    segment: int = -1


@dataclass(frozen=True, eq=False)
class SequenceChoice:
    """One configuration per waypoint and its rest-to-rest timing (SI units).

    Attributes
    ----------
    q : array, shape (W, n)
        rad or m (NaN rows where the waypoint has no configuration).
    labels : array of int8, shape (W, 3)
        Shoulder, elbow and wrist labels (:mod:`posebridge.kinematics.branches`).
    revolutions : array of int16, shape (W, n)
        Whole revolutions of each joint (:func:`revolutions_of`).
    segment_durations : array, shape (W - 1,)
        s; NaN where the segment is not feasible.
    total : float
        s; NaN if any segment is not feasible.
    same_branch_throughout : bool
        No label changes sign between any two waypoints (0, singular, matches either).
    violations : tuple of Violation
        Constraints the choice breaks, waypoints first, then segments.
    """

    q: FloatArray
    labels: Int8Array
    revolutions: Int16Array
    segment_durations: FloatArray
    total: float
    same_branch_throughout: bool
    violations: tuple[Violation, ...]


@dataclass(frozen=True, eq=False)
class SequenceResult:
    """The fastest consistent sequence and the cell's current choice.

    Attributes
    ----------
    feasible : bool
        A sequence meeting every constraint exists.
    indices : array of int64, shape (W,)
        Chosen candidate per waypoint (-1 everywhere when not feasible).
    best : SequenceChoice or None
        The chosen sequence (None when not feasible).
    current : SequenceChoice
        The configurations :func:`~posebridge.planning.path_sampling.sample_path`
        chooses today, with the constraints they break.
    current_indices : array of int64, shape (W,)
        The current configuration's candidate index, -1 where it is not a candidate.
    saving : float
        ``current.total - best.total``, s (NaN if either is not timed).
    candidates : tuple of WaypointCandidates, length W
    edge_exclusions : tuple of dict, length W - 1
        Per segment, how many edges each :data:`EDGE_REASONS` reason removed
        (a linear move has one edge per start candidate, to the candidate it
        arrives on; collisions only among the edges checked).
    blocked_at : int
        First waypoint that no feasible sequence reaches (-1 when feasible).
    edges_checked : int
        Edges whose collision check ran (lazy search).
    edges_total : int
        Edges in the graph.
    """

    feasible: bool
    indices: IntArray
    best: SequenceChoice | None
    current: SequenceChoice
    current_indices: IntArray
    saving: float
    candidates: tuple[WaypointCandidates, ...]
    edge_exclusions: tuple[dict[str, int], ...]
    blocked_at: int
    edges_checked: int
    edges_total: int


def revolutions_of(scene: Scene, q: npt.ArrayLike) -> Int16Array:
    """Whole revolutions of each joint value, counted as IK results count them.

    :func:`~posebridge.kinematics.branches.centred_revolutions` of
    ``q - (lower + upper) / 2`` for revolute joints (non-zero only with more than one
    revolution of range) and of ``q`` for continuous joints, 0 otherwise (the rule of
    :mod:`posebridge.kinematics.ik.finishing`).

    Parameters
    ----------
    scene : Scene
    q : array-like, shape (N, n)

    Returns
    -------
    revolutions : array of int16, shape (N, n); 0 where ``q`` is NaN
    """
    robot = scene.robot
    values = np.asarray(q, dtype=np.float64)
    modes = joint_modes(robot)
    centre = np.where(modes == JOINT_REVOLUTE, 0.5 * (robot.lower + robot.upper), 0.0)
    count = centred_revolutions(values - centre)
    counted = (modes == JOINT_REVOLUTE) | (modes == JOINT_CONTINUOUS)
    return np.where(counted & np.isfinite(count), count, 0.0).astype(np.int16)


def _margin_limit(scene: Scene, limits: SequenceLimits) -> FloatArray:
    return np.where(scene.robot.prismatic, limits.limit_margin_m, limits.limit_margin_rad)


def _filter_candidates(
    scene: Scene, q: FloatArray, required: Int8Array, limits: SequenceLimits
) -> WaypointCandidates:
    """Apply the candidate constraints (module docstring) to configurations ``q`` (K, n)."""
    excluded: list[CandidateExclusion] = []
    if q.shape[0] == 0:
        return WaypointCandidates(q, ())
    margins = limit_margins(scene.robot, q)
    threshold = _margin_limit(scene, limits)
    short = margins.margin - threshold
    worst = np.argmin(short, axis=1)
    rows = np.arange(q.shape[0])
    keep = np.ones(q.shape[0], dtype=bool)
    for i in np.flatnonzero(short[rows, worst] < 0.0):
        value = float(margins.margin[i, worst[i]])
        reason = "outside_limits" if value < 0.0 else "limit_margin"
        excluded.append(CandidateExclusion(q[i].copy(), reason, int(worst[i]), value))
        keep[i] = False
    if np.any(required != 0) and np.any(keep):
        labels = np.stack(label_branches(scene.robot, q[keep]), axis=1)
        match = np.ones(q.shape[0], dtype=bool)
        match[keep] = labels_match(labels, required)
        for i in np.flatnonzero(keep & ~match):
            excluded.append(CandidateExclusion(q[i].copy(), "branch"))
        keep &= match
    if np.any(keep):
        hits = np.zeros(q.shape[0], dtype=bool)
        hits[keep] = collision_batch(
            clearance_scene(scene), q[keep], threshold_m=limits.collision_threshold_m
        )
        for i in np.flatnonzero(hits):
            excluded.append(CandidateExclusion(q[i].copy(), "collision"))
        keep &= ~hits
    return WaypointCandidates(np.ascontiguousarray(q[keep]), tuple(excluded))


def _required(scene: Scene, path: ResolvedPath, w: int) -> Int8Array:
    if path.target_index[w] < 0:
        return np.zeros(3, dtype=np.int8)
    return branch_requirement(scene.targets.branches[int(path.target_index[w])])


def ik_candidates(
    scene: Scene, path: int | ResolvedPath, limits: SequenceLimits | None = None
) -> tuple[WaypointCandidates, ...]:
    """Candidate configurations of every waypoint of a path (module docstring).

    Cartesian waypoints: every valid IK solution with every revolution of the
    joints whose range exceeds one (:func:`posebridge.kinematics.ik.ik_solver`,
    one batch for all waypoints), filtered by the candidate constraints; joint
    waypoints: the given values, filtered the same way.

    Parameters
    ----------
    scene : Scene
    path : int or ResolvedPath
    limits : SequenceLimits, optional

    Returns
    -------
    tuple of WaypointCandidates, length W
    """
    limits = SequenceLimits() if limits is None else limits
    resolved = path_of(scene, path)
    robot = scene.robot
    cartesian = np.flatnonzero(~resolved.joints_given)
    raw: dict[int, FloatArray] = {}
    if cartesian.size:
        T_base_tool = invert_transform(scene.T_world_base) @ resolved.T_world_tool[cartesian]
        result = ik_solver(robot).solve(
            T_base_tool, T_flange_tool=scene.T_flange_tool, all_revolutions=True
        )
        for row, w in enumerate(cartesian.tolist()):
            raw[w] = result.q[row, result.valid[row]]
    out = []
    for w in range(len(resolved.sources)):
        q = resolved.q[w][None] if resolved.joints_given[w] else raw[w]
        out.append(_filter_candidates(scene, q, _required(scene, resolved, w), limits))
    return tuple(out)


# --- edges ---------------------------------------------------------------------------------


@dataclass(frozen=True, eq=False)
class _Edges:
    """Costs of every pair of one segment and where to look for collisions.

    ``cost`` (Ka, Kb) is inf where there is no edge or it is excluded, ``reason``
    (Ka, Kb) the index into :data:`EDGE_REASONS` of an excluded edge (-1: none;
    a linear move from start ``i`` has its one edge to the candidate it arrives
    on, or nearest); ``tracked`` (Ka, S, n) the linear move's samples from each
    start (None for a joint move).
    """

    cost: FloatArray
    reason: npt.NDArray[np.int8]
    tracked: FloatArray | None


def _joint_samples(q_a: FloatArray, q_b: FloatArray, resolution: FloatArray) -> FloatArray:
    """Interior samples of the joint-space line ``q_a -> q_b`` at the path check's spacing."""
    steps = max(1, math.ceil(float(np.max(np.abs(q_b - q_a) / resolution)) - 1e-9))
    t = np.linspace(0.0, 1.0, steps + 1)[1:-1, None]
    return q_a + t * (q_b - q_a)


def _joint_edges(
    scene: Scene, path: ResolvedPath, k: int, q_a: FloatArray, q_b: FloatArray
) -> _Edges:
    Ka, Kb = q_a.shape[0], q_b.shape[0]
    robot = scene.robot
    percent = float(path.speed_percent[k + 1])
    if not math.isfinite(percent) or not 0.0 < percent <= 100.0:
        raise PlanningInputError(
            f"speed_percent of waypoint {k + 1}: expected a value above 0 and at most 100, "
            f"got {percent!r}"
        )
    start = np.repeat(q_a, Kb, axis=0)
    end = np.tile(q_b, (Ka, 1))
    cost = joint_move_durations(
        start, end, robot.velocity_max, robot.acceleration_max, percent
    ).reshape(Ka, Kb)
    return _Edges(cost, np.full((Ka, Kb), -1, dtype=np.int8), None)


def _line_poses(
    scene: Scene, q_a: FloatArray, T_world_b: FloatArray, k: int, limits: SequenceLimits
) -> tuple[FloatArray, FloatArray, float, float]:
    """Commanded TCP poses of a linear move as :func:`sample_path` makes them.

    Straight TCP line and quaternion slerp from the start configuration's TCP to
    ``T_world_b``; returns the poses (S, 4, 4) in the world, the fractions (S,),
    the TCP length (m) and the rotation angle (rad).
    """
    T_a = scene.T_world_base @ fk_tool(scene.robot, q_a[None], scene.T_flange_tool)[0]
    offset = T_world_b[:3, 3] - T_a[:3, 3]
    length = float(np.linalg.norm(offset))
    quaternions = quaternion_from_rotation_matrix(np.stack([T_a[:3, :3], T_world_b[:3, :3]]))
    angle = 2.0 * float(np.arccos(min(abs(float(quaternions[0] @ quaternions[1])), 1.0)))
    count = max(length / limits.resolution_m, angle / limits.resolution_rad)
    steps = max(1, math.ceil(count - 1e-9))
    if steps + 1 > MAX_SAMPLES_PER_SEGMENT:
        raise PlanningInputError(
            f"resolution: segment {k} needs {steps + 1} samples, more than "
            f"{MAX_SAMPLES_PER_SEGMENT}; use a coarser resolution"
        )
    t = np.linspace(0.0, 1.0, steps + 1)
    T = np.tile(np.eye(4), (t.shape[0], 1, 1))
    T[:, :3, 3] = T_a[:3, 3] + t[:, None] * offset
    T[:, :3, :3] = rotation_matrix_from_quaternion(slerp(quaternions[0], quaternions[1], t))
    return T, t, length, angle


@nb.njit(cache=True)
def _walk_nearest(q, ok, starts, weights, choice):
    """Per start and sample, the allowed slot nearest the previous sample's configuration.

    ``q`` (S, M, n) every IK slot of every sample, ``ok`` (S, M) allowed slots,
    ``starts`` (K, n), ``weights`` (n,) of the weighted joint distance; writes
    ``choice`` (K, S), -1 where no slot is allowed (the previous configuration
    carries on). Samples depend on the one before; starts are independent.
    """
    S, M, n = q.shape
    previous = np.empty(n)
    for k in range(starts.shape[0]):
        for j in range(n):
            previous[j] = starts[k, j]
        for s in range(S):
            best = -1
            best_distance = np.inf
            for m in range(M):
                if not ok[s, m]:
                    continue
                distance = 0.0
                for j in range(n):
                    e = (q[s, m, j] - previous[j]) * weights[j]
                    distance += e * e
                if distance < best_distance:
                    best_distance = distance
                    best = m
            choice[k, s] = best
            if best >= 0:
                for j in range(n):
                    previous[j] = q[s, best, j]


def _track_batch(
    scene: Scene, solver: IkSolver, T_world: FloatArray, q_a: FloatArray
) -> FloatArray:
    """Branch-continuous IK along the poses from every start; NaN where unreached.

    One IK batch for all samples (every solution, every revolution), then for
    every start each sample takes the allowed solution nearest the previous
    sample's configuration in the speed-weighted joint distance
    (:func:`posebridge.kinematics.ik.finishing.joint_weights`), the previous one
    carrying on where none is allowed: the rule of :func:`sample_path`.

    Returns
    -------
    tracked : array, shape (Ka, S, n)
    """
    T_base_tool = invert_transform(scene.T_world_base) @ T_world
    result = solver.solve(T_base_tool, T_flange_tool=scene.T_flange_tool, all_revolutions=True)
    allowed = np.ascontiguousarray(result.valid & result.within_limits)
    Ka, S = q_a.shape[0], T_world.shape[0]
    choice = np.empty((Ka, S), dtype=np.int64)
    _walk_nearest(
        np.ascontiguousarray(result.q),
        allowed,
        np.ascontiguousarray(q_a),
        joint_weights(scene.robot),
        choice,
    )
    found = choice >= 0
    tracked = np.where(
        found[:, :, None], result.q[np.arange(S)[None, :], np.maximum(choice, 0)], np.nan
    )
    tracked[:, 0] = q_a
    return tracked


def _sampling(limits: SequenceLimits) -> dict[str, float]:
    """Return the sampling options of :func:`sample_path` for ``limits``."""
    return {
        "resolution_m": limits.resolution_m,
        "resolution_rad": limits.resolution_rad,
        "jump_rad": limits.jump_rad,
        "jump_m": limits.jump_m,
    }


def _track_numeric(
    scene: Scene, path: ResolvedPath, k: int, q_a: FloatArray, limits: SequenceLimits
) -> FloatArray:
    """Track the path with the numerical solver, seeded, one start at a time through :func:`sample_path`."""
    out = []
    for q in q_a:
        two = ResolvedPath(
            name=path.name,
            sources=("joints", "pose"),
            target_index=np.array([-1, -1], dtype=np.int64),
            approach=np.zeros(2, dtype=bool),
            T_world_tool=path.T_world_tool[[k, k + 1]],
            q=np.stack([q, np.full_like(q, np.nan)]),
            joints_given=np.array([True, False]),
            linear=np.array([False, True]),
            linear_speed=path.linear_speed[[k, k + 1]],
            speed_percent=np.full(2, np.nan),
            blend_radius=np.zeros(2),
        )
        out.append(sample_path(scene, two, **_sampling(limits)).segments[0].q)
    return np.stack(out)


def _linear_edges(
    scene: Scene,
    path: ResolvedPath,
    k: int,
    q_a: FloatArray,
    q_b: FloatArray,
    limits: SequenceLimits,
) -> _Edges:
    robot = scene.robot
    Ka, Kb = q_a.shape[0], q_b.shape[0]
    cost = np.full((Ka, Kb), np.inf)
    reason = np.full((Ka, Kb), -1, dtype=np.int8)
    T, fraction, length, angle = _line_poses(scene, q_a[0], path.T_world_tool[k + 1], k, limits)
    solver = ik_solver(robot)
    if solver.family == "numeric":
        tracked = _track_numeric(scene, path, k, q_a, limits)
    else:
        tracked = _track_batch(scene, solver, T, q_a)
    Ka, S, n = tracked.shape
    reached = np.all(np.isfinite(tracked), axis=2)
    flat = tracked.reshape(Ka * S, n)
    labels = np.zeros((Ka * S, 3), dtype=np.int8)
    ok = reached.reshape(-1)
    if np.any(ok):
        labels[ok] = np.stack(label_branches(robot, flat[ok]), axis=1)
    labels = labels.reshape(Ka, S, 3)
    a, b = labels[:, :-1], labels[:, 1:]
    branch_change = np.any((a != 0) & (b != 0) & (a != b), axis=(1, 2))
    jump_limit = np.where(robot.prismatic, limits.jump_m, limits.jump_rad)
    with np.errstate(invalid="ignore"):
        jump = np.any(np.abs(np.diff(tracked, axis=1)) > jump_limit, axis=(1, 2))
        margin = np.full((Ka * S, n), -np.inf)
        if np.any(ok):
            margin[ok] = limit_margins(robot, flat[ok]).margin
        short = np.any(margin.reshape(Ka, S, n) < _margin_limit(scene, limits), axis=(1, 2))
    with np.errstate(invalid="ignore"):
        difference = np.max(np.abs(tracked[:, -1][:, None, :] - q_b[None, :, :]), axis=2)
    difference = np.where(np.isfinite(difference), difference, np.inf)
    match = np.argmin(difference, axis=1)
    travel = fraction * (angle if length < 1e-9 else length)
    speed = float(path.linear_speed[k + 1])
    for i in range(Ka):
        code = -1
        if not np.all(reached[i]):
            code = EDGE_REASONS.index("unreached")
        elif branch_change[i]:
            code = EDGE_REASONS.index("branch_change")
        elif jump[i]:
            code = EDGE_REASONS.index("configuration_jump")
        elif short[i]:
            code = EDGE_REASONS.index("limit_margin")
        elif difference[i, match[i]] > _MATCH_TOLERANCE:
            code = EDGE_REASONS.index("arrival_excluded")
        j = int(match[i])
        if code >= 0:
            reason[i, j] = code
            continue
        segment = SegmentSamples(
            index=k,
            motion="linear",
            q=tracked[i],
            fraction=fraction,
            travel=travel,
            travel_is_angle=length < 1e-9,
            T_world_tool=T,
            reason=("",) * S,
            labels=labels[i],
            branch_change=np.zeros(S, dtype=bool),
            jump=np.zeros(S, dtype=bool),
            sampled=True,
            external=np.broadcast_to(scene.external.values, (S, scene.external.count)).copy(),
        )
        timing = linear_move_timing(
            robot, segment, speed, acceleration_m_s2=limits.linear_acceleration_m_s2
        )
        if timing.speed_capped and not limits.slowed_linear_moves:
            reason[i, j] = EDGE_REASONS.index("joint_speed")
            continue
        cost[i, j] = timing.duration
    return _Edges(cost, reason, tracked)


def _segment_edges(
    scene: Scene,
    path: ResolvedPath,
    k: int,
    q_a: FloatArray,
    q_b: FloatArray,
    limits: SequenceLimits,
) -> _Edges:
    if q_a.shape[0] == 0 or q_b.shape[0] == 0:
        empty = np.zeros((q_a.shape[0], q_b.shape[0]))
        return _Edges(empty + np.inf, np.full(empty.shape, -1, dtype=np.int8), None)
    if path.linear[k + 1]:
        return _linear_edges(scene, path, k, q_a, q_b, limits)
    return _joint_edges(scene, path, k, q_a, q_b)


def _edge_samples(
    edges: _Edges, q_a: FloatArray, q_b: FloatArray, i: int, j: int, resolution: FloatArray
) -> FloatArray:
    """Return configurations to collision-check along edge ``(i, j)`` (ends are checked candidates)."""
    if edges.tracked is not None:
        return edges.tracked[i, 1:-1]
    return _joint_samples(q_a[i], q_b[j], resolution)


def _check_collisions(
    scene: Scene,
    edges: Sequence[_Edges | None],
    layers: list[FloatArray],
    pairs: list[tuple[int, int, int]],
    limits: SequenceLimits,
) -> BoolArray:
    """Whether each edge ``(k, i, j)`` collides, all in one :func:`collision_batch` call."""
    resolution = np.where(scene.robot.prismatic, limits.resolution_m, limits.resolution_rad)
    chunks = []
    for k, i, j in pairs:
        segment_edges = edges[k]
        assert segment_edges is not None  # only edges that exist are checked
        chunks.append(_edge_samples(segment_edges, layers[k], layers[k + 1], i, j, resolution))
    sizes = np.array([chunk.shape[0] for chunk in chunks], dtype=np.int64)
    hits = np.zeros(len(pairs), dtype=bool)
    if not pairs or sizes.sum() == 0:
        return hits
    colliding = collision_batch(
        clearance_scene(scene),
        np.concatenate(chunks),
        threshold_m=limits.collision_threshold_m,
    )
    owner = np.repeat(np.arange(len(pairs)), sizes)
    np.logical_or.at(hits, owner, colliding)
    return hits


def _shortest_path(costs: list[FloatArray], first_layer: int) -> tuple[IntArray, float, int]:
    """Cheapest sequence through layered edge costs (DP over a DAG, Cormen et al. sec. 24.2).

    ``costs[k]`` (K_k, K_{k+1}) with inf for excluded edges, ``first_layer`` =
    K_0; returns the index per layer, the total (inf if none) and the first
    layer no finite sequence reaches (-1 if every layer is reached).
    """
    none = np.full(len(costs) + 1, -1, dtype=np.int64)
    if first_layer == 0:
        return none, math.inf, 0
    best = np.zeros(first_layer)
    back: list[IntArray] = []
    for k, cost in enumerate(costs):
        if cost.shape[1] == 0:
            return none, math.inf, k + 1
        total = best[:, None] + cost
        arg = np.argmin(total, axis=0)
        best = total[arg, np.arange(cost.shape[1])]
        back.append(arg)
        if not np.any(np.isfinite(best)):
            return none, math.inf, k + 1
    indices = np.empty(len(costs) + 1, dtype=np.int64)
    indices[-1] = int(np.argmin(best))
    for k in range(len(costs) - 1, -1, -1):
        indices[k] = back[k][indices[k + 1]]
    return indices, float(best[indices[-1]]), -1


@dataclass
class _Graph:
    layers: list[FloatArray]
    edges: list[_Edges]
    checked: list[BoolArray]


def _build_graph(
    scene: Scene, path: ResolvedPath, layers: list[FloatArray], limits: SequenceLimits
) -> _Graph:
    edges = [
        _segment_edges(scene, path, k, layers[k], layers[k + 1], limits)
        for k in range(len(layers) - 1)
    ]
    checked = [np.zeros(e.cost.shape, dtype=bool) for e in edges]
    return _Graph(layers, edges, checked)


def _lazy_search(
    scene: Scene, graph: _Graph, limits: SequenceLimits
) -> tuple[IntArray, float, int]:
    """Shortest path with collision checks only on edges of tentative optima (module docstring)."""
    costs = [e.cost.copy() for e in graph.edges]
    collision = EDGE_REASONS.index("collision")
    while True:
        indices, total, blocked = _shortest_path(costs, graph.layers[0].shape[0])
        if not math.isfinite(total):
            return indices, total, blocked
        pairs = [
            (k, int(indices[k]), int(indices[k + 1]))
            for k in range(len(costs))
            if not graph.checked[k][indices[k], indices[k + 1]]
        ]
        if not pairs:
            return indices, total, -1
        hits = _check_collisions(scene, graph.edges, graph.layers, pairs, limits)
        for (k, i, j), hit in zip(pairs, hits, strict=True):
            graph.checked[k][i, j] = True
            if hit:
                costs[k][i, j] = np.inf
                graph.edges[k].reason[i, j] = collision


def _same_branch(labels: Int8Array) -> bool:
    """No label has both signs among the waypoints (0 matches either)."""
    return bool(np.all(~(np.any(labels > 0, axis=0) & np.any(labels < 0, axis=0))))


def _choice(
    scene: Scene,
    q: FloatArray,
    durations: FloatArray,
    violations: tuple[Violation, ...],
) -> SequenceChoice:
    labels = np.zeros((q.shape[0], 3), dtype=np.int8)
    finite = np.all(np.isfinite(q), axis=1)
    if np.any(finite):
        labels[finite] = np.stack(label_branches(scene.robot, q[finite]), axis=1)
    total = float(np.sum(durations)) if durations.size else 0.0
    return SequenceChoice(
        q=q,
        labels=labels,
        revolutions=revolutions_of(scene, q),
        segment_durations=durations,
        total=total,
        same_branch_throughout=_same_branch(labels[finite]),
        violations=violations,
    )


def _current_choice(scene: Scene, path: ResolvedPath, limits: SequenceLimits) -> SequenceChoice:
    """Return the configurations :func:`sample_path` chooses, with timing and broken constraints.

    Their rest-to-rest timing as the path check reports it, and the constraints of this search they
    break.
    """
    sampled = sample_path(scene, path, **_sampling(limits))
    timing = path_cycle_time(
        scene.robot, sampled, linear_acceleration_m_s2=limits.linear_acceleration_m_s2
    )
    q = sampled.waypoint_q
    W = q.shape[0]
    reached = np.all(np.isfinite(q), axis=1)
    violations: list[Violation] = []
    for w in range(W):
        if not reached[w]:
            violations.append(Violation("unreached", waypoint=w))
            continue
        filtered = _filter_candidates(scene, q[w][None], _required(scene, path, w), limits)
        violations.extend(Violation(e.reason, waypoint=w) for e in filtered.excluded)
    layers = [q[w][None] for w in range(W)]
    timed = [k for k in range(W - 1) if reached[k] and reached[k + 1]]
    edges = {k: _segment_edges(scene, path, k, layers[k], layers[k + 1], limits) for k in timed}
    free = [k for k in timed if edges[k].reason[0, 0] < 0]
    hits = _check_collisions(
        scene, [edges.get(k) for k in range(W - 1)], layers, [(k, 0, 0) for k in free], limits
    )
    collided = {k for k, hit in zip(free, hits, strict=True) if hit}
    for k in range(W - 1):
        if k not in edges:
            violations.append(Violation("unreached", segment=k))
        elif edges[k].reason[0, 0] >= 0:
            violations.append(Violation(EDGE_REASONS[int(edges[k].reason[0, 0])], segment=k))
        elif k in collided:
            violations.append(Violation("collision", segment=k))
    durations = np.array([segment.duration for segment in timing.segments], dtype=np.float64)
    return _choice(scene, q, durations, tuple(violations))


def _layers(
    scene: Scene, path: ResolvedPath, candidates: Sequence[WaypointCandidates]
) -> list[FloatArray]:
    """Return the candidates' configurations, checked: W layers of shape (K_w, n)."""
    W = len(path.sources)
    n = scene.robot.dof
    if len(candidates) != W:
        raise PlanningInputError(f"candidates: expected {W} waypoints, got {len(candidates)}")
    layers = []
    for w, layer in enumerate(candidates):
        q = np.asarray(layer.q, dtype=np.float64)
        if q.ndim != 2 or q.shape[1] != n or not np.all(np.isfinite(q)):
            raise PlanningInputError(
                f"candidates[{w}].q: expected finite values of shape (K, {n}), got {q.shape}"
            )
        layers.append(q)
    return layers


def segment_costs(
    scene: Scene,
    path: int | ResolvedPath,
    candidates: Sequence[WaypointCandidates] | None = None,
    limits: SequenceLimits | None = None,
) -> tuple[FloatArray, ...]:
    """Every edge's duration with every constraint checked, collisions included (eagerly).

    The input of an exhaustive search over all sequences; :func:`optimise_sequence`
    needs only the collision checks along tentative optima.

    Parameters
    ----------
    scene, path, candidates, limits
        As :func:`optimise_sequence`.

    Returns
    -------
    tuple of arrays, length W - 1
        ``(K_w, K_{w+1})`` rest-to-rest durations, s; ``inf`` where the edge is excluded.
    """
    limits = SequenceLimits() if limits is None else limits
    resolved = path_of(scene, path)
    chosen = ik_candidates(scene, resolved, limits) if candidates is None else tuple(candidates)
    graph = _build_graph(scene, resolved, _layers(scene, resolved, chosen), limits)
    pairs = [
        (k, int(i), int(j))
        for k, edges in enumerate(graph.edges)
        for i, j in zip(*np.nonzero(np.isfinite(edges.cost)), strict=True)
    ]
    hits = _check_collisions(scene, graph.edges, graph.layers, pairs, limits)
    costs = [edges.cost.copy() for edges in graph.edges]
    for (k, i, j), hit in zip(pairs, hits, strict=True):
        if hit:
            costs[k][i, j] = np.inf
    return tuple(costs)


def optimise_sequence(
    scene: Scene,
    path: int | ResolvedPath,
    candidates: Sequence[WaypointCandidates] | None = None,
    limits: SequenceLimits | None = None,
) -> SequenceResult:
    """Return the fastest sequence of candidates meeting every constraint, and the current choice.

    Parameters
    ----------
    scene : Scene
    path : int or ResolvedPath
        Index into ``scene.paths``, or a resolved path of this scene's robot.
    candidates : sequence of WaypointCandidates, length W, optional
        Candidates per waypoint; :func:`ik_candidates` when omitted. Candidates
        passed in are used as given (the caller applied the candidate constraints).
    limits : SequenceLimits, optional
        Constraints and sampling (defaults: within limits, contact is a
        collision, the path check's sampling).

    Returns
    -------
    SequenceResult
        Method in the module docstring.

    Raises
    ------
    PlanningInputError
        Bad path, candidate shapes, limits or speed percentages.
    """
    limits = SequenceLimits() if limits is None else limits
    resolved = path_of(scene, path)
    W = len(resolved.sources)
    chosen = ik_candidates(scene, resolved, limits) if candidates is None else tuple(candidates)
    layers = _layers(scene, resolved, chosen)
    graph = _build_graph(scene, resolved, layers, limits)
    indices, total, blocked = _lazy_search(scene, graph, limits)
    feasible = math.isfinite(total)
    best = None
    if feasible:
        q_best = np.stack([layers[w][indices[w]] for w in range(W)])
        durations = np.array(
            [graph.edges[k].cost[indices[k], indices[k + 1]] for k in range(W - 1)]
        )
        best = _choice(scene, q_best, durations, ())
    current = _current_choice(scene, resolved, limits)
    q_current = current.q
    current_indices = np.full(W, -1, dtype=np.int64)
    for w in range(W):
        if layers[w].shape[0] and np.all(np.isfinite(q_current[w])):
            difference = np.max(np.abs(layers[w] - q_current[w]), axis=1)
            nearest = int(np.argmin(difference))
            if difference[nearest] <= _MATCH_TOLERANCE:
                current_indices[w] = nearest
    exclusions = []
    for edges in graph.edges:
        exclusions.append(
            {
                reason: int(np.count_nonzero(edges.reason == code))
                for code, reason in enumerate(EDGE_REASONS)
            }
        )
    saving = current.total - best.total if best is not None else math.nan
    return SequenceResult(
        feasible=feasible,
        indices=indices if feasible else np.full(W, -1, dtype=np.int64),
        best=best,
        current=current,
        current_indices=current_indices,
        saving=float(saving),
        candidates=chosen,
        edge_exclusions=tuple(exclusions),
        blocked_at=blocked,
        edges_checked=int(sum(int(c.sum()) for c in graph.checked)),
        edges_total=int(sum(c.size for c in graph.checked)),
    )

"""A cell path turned into joint configurations: waypoint IK choice and sampled segments.

Waypoints (:class:`posebridge.cell.scene.ResolvedPath`) are resolved in order:

* a waypoint given as joint values is used as given;
* a Cartesian waypoint reached by a joint move (and the first waypoint) gets
  the IK solution (:func:`posebridge.kinematics.ik.ik_solver`, every revolution
  variant) that reaches the pose within the joint limits, matches the
  target's required branch (an undefined, singular label matches either
  side), is collision-free if any such solution is, and is nearest the
  previous waypoint's configuration in the speed-weighted joint distance of
  :func:`posebridge.kinematics.ik.finishing.joint_weights` (the first waypoint:
  nearest the robot's home configuration);
* a Cartesian waypoint reached by a linear move gets the configuration the
  arm arrives with when it follows the line from the previous waypoint.

Segment ``k`` runs from waypoint ``k`` to waypoint ``k + 1`` with the motion
type of waypoint ``k + 1`` (the motion *into* a waypoint, as in the cell
file). Sampling:

* **joint move**: straight line in joint space, ``q(t) = q_a + t (q_b - q_a)``,
  with no joint moving more than ``resolution_rad`` (``resolution_m`` for
  prismatic joints) between samples;
* **linear move**: the TCP position on the straight line and the orientation
  by quaternion slerp (Shoemake 1985, "Animating rotation with quaternion
  curves", SIGGRAPH), at most ``resolution_m`` of travel and
  ``resolution_rad`` of rotation between samples, each solved by IK with
  branch continuity: every solution of every sample is computed in one
  batch (analytic solvers) and each sample takes the solution nearest the
  previous sample's configuration (numerical solver: seeded from the
  previous sample, one start). A sample whose labels differ from the
  previous one's is a **branch change** (labels 0, exactly singular, are
  skipped), a sample where a joint moves more than ``jump_rad`` (``jump_m``
  for prismatic joints) from the previous one a **configuration jump**.

**External axes** (a track, turntables) move with the robot inside a
segment: their values go linearly in the segment's fraction from the start
waypoint's to the end waypoint's (:attr:`SegmentSamples.external`), and every
sample is solved and drawn with the base and the fixtures where the axes put
them. A joint move's samples also keep every external axis within
``resolution_m`` / ``resolution_rad`` of the next. A linear move is straight
in the frame of the turntable that carries its end waypoint's target (the
part: coordinated motion, the table turning under the tool), else in the
world; the track carries the robot base along it.

The along-path coordinate ``travel`` is the TCP path length (m) of a linear
move, the rotation angle (rad) of a pure reorientation, and the path
parameter ``D t`` of a joint move with ``D`` the largest joint travel
(as in :func:`posebridge.planning.time_scaling.joint_move`).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

import numba as nb
import numpy as np
import numpy.typing as npt

from posebridge.arrays import Int8Array
from posebridge.cell.clearance import clearance_scene
from posebridge.cell.external_kinematics import carrier_axis
from posebridge.cell.model import Branch
from posebridge.cell.scene import ResolvedPath, Scene, posed_scene
from posebridge.geometry.clearance import collision_batch
from posebridge.kinematics.branches import BRANCH_LABELS, label_branches, labels_match
from posebridge.kinematics.fk import fk_tool
from posebridge.kinematics.ik import IkSolver, ik_solver
from posebridge.kinematics.ik.finishing import joint_weights
from posebridge.kinematics.ik.numeric import solve_ik_numeric
from posebridge.planning.errors import PlanningInputError, check_positive
from posebridge.transforms import (
    invert_transform,
    quaternion_from_rotation_matrix,
    rotation_matrix_from_quaternion,
)
from posebridge.units import BoolArray, FloatArray, rad_from_deg

__all__ = [
    "DEFAULT_JUMP_M",
    "DEFAULT_JUMP_RAD",
    "DEFAULT_RESOLUTION_M",
    "DEFAULT_RESOLUTION_RAD",
    "MAX_SAMPLES_PER_SEGMENT",
    "Motion",
    "SampledPath",
    "SegmentSamples",
    "branch_requirement",
    "path_of",
    "sample_path",
    "slerp",
    "waypoint_label",
]

Motion = Literal["joint", "linear"]
DEFAULT_RESOLUTION_M = 0.005
"""Largest TCP travel (linear moves) or prismatic joint travel between samples, m (5 mm)."""
DEFAULT_RESOLUTION_RAD = float(rad_from_deg(1.0))
"""Largest tool rotation or revolute joint travel between samples, rad (1 deg)."""
DEFAULT_JUMP_RAD = float(rad_from_deg(10.0))
"""Revolute joint step between two linear-move samples that is a configuration jump (10 deg)."""
DEFAULT_JUMP_M = 0.02
"""Prismatic joint step between two linear-move samples that is a configuration jump (20 mm)."""
MAX_SAMPLES_PER_SEGMENT = 20_000
"""Largest number of samples in one segment; a finer resolution is refused."""
REASON_UNREACHABLE = "out of reach"
REASON_LIMITS = "outside joint limits"
REASON_BRANCH = "not on the required branch"


@dataclass(frozen=True, eq=False)
class SegmentSamples:
    """Joint configurations sampled along one segment (SI units).

    Attributes
    ----------
    index : int
        Segment index ``k``: from waypoint ``k`` to waypoint ``k + 1``.
    motion : {"joint", "linear"}
    q : array, shape (S, n)
        Configurations, rad or m; NaN rows where a linear move's sample has no
        IK solution (all NaN when the segment could not be sampled).
    fraction : array, shape (S,)
        Position along the segment, 0 at the start, 1 at the end.
    travel : array, shape (S,)
        Along-path coordinate (module docstring), m or rad.
    travel_is_angle : bool
        ``travel`` is an angle (joint move of revolute joints, pure reorientation).
    T_world_tool : array, shape (S, 4, 4)
        Commanded TCP pose of a linear move; forward kinematics of a joint move.
    reason : tuple of str, length S
        ``""`` where the sample is reached, else why not.
    labels : array of int8, shape (S, 3)
        Shoulder, elbow and wrist labels (0 where unreached).
    branch_change : array of bool, shape (S,)
    jump : array of bool, shape (S,)
    sampled : bool
        False when an end of the segment has no configuration.
    external : array, shape (S, m)
        External axis values of every sample, m or rad (module docstring).
    """

    index: int
    motion: Motion
    q: FloatArray
    fraction: FloatArray
    travel: FloatArray
    travel_is_angle: bool
    T_world_tool: FloatArray
    reason: tuple[str, ...]
    labels: Int8Array
    branch_change: BoolArray
    jump: BoolArray
    sampled: bool
    external: FloatArray

    @property
    def reachable(self) -> BoolArray:
        """Samples with a configuration, shape (S,)."""
        return np.all(np.isfinite(self.q), axis=1)

    @property
    def length(self) -> float:
        """Total along-path travel, m or rad."""
        return float(self.travel[-1]) if self.travel.size else 0.0


@dataclass(frozen=True, eq=False)
class SampledPath:
    """A path's waypoint configurations and segment samples.

    Attributes
    ----------
    path : ResolvedPath
    waypoint_names : tuple of str, length W
    waypoint_q : array, shape (W, n)
        Chosen configuration per waypoint, NaN where none was found.
    waypoint_problem : tuple of str, length W
        ``""``, or why the waypoint has no usable configuration, or which
        branch requirement a linear move arrives against.
    waypoint_branch : tuple of str, length W
        Plain-words branch of the chosen configuration (``""`` when none).
    segments : tuple of SegmentSamples, length W - 1
    resolution_m, resolution_rad : float
        Sampling resolution used.
    """

    path: ResolvedPath
    waypoint_names: tuple[str, ...]
    waypoint_q: FloatArray
    waypoint_problem: tuple[str, ...]
    waypoint_branch: tuple[str, ...]
    segments: tuple[SegmentSamples, ...]
    resolution_m: float
    resolution_rad: float


def path_of(scene: Scene, path: int | ResolvedPath) -> ResolvedPath:
    """Return the path ``path`` (an index into ``scene.paths``, or a resolved path as is)."""
    if isinstance(path, ResolvedPath):
        return path
    if isinstance(path, bool) or not isinstance(path, int | np.integer):
        raise PlanningInputError(f"path: expected an index or a ResolvedPath, got {path!r}")
    if not 0 <= int(path) < len(scene.paths):
        raise PlanningInputError(
            f"path: expected an index in 0..{len(scene.paths) - 1}, got {path} "
            f"(the cell has {len(scene.paths)} paths)"
        )
    return scene.paths[int(path)]


def waypoint_label(scene: Scene, path: ResolvedPath, w: int) -> str:
    """Plain name of waypoint ``w``: the target (``"<name> approach"``), or ``"pose #k"``/``"joints #k"``."""
    source = path.sources[w]
    if source == "target":
        name = scene.targets.names[int(path.target_index[w])]
        return f"{name} approach" if path.approach[w] else name
    return f"{source} #{w + 1}"


def branch_requirement(branch: Branch | None) -> Int8Array:
    """Return required labels ``[shoulder, elbow, wrist]`` (+1, -1, or 0 for either), shape (3,)."""
    required = np.zeros(3, dtype=np.int8)
    if branch is not None:
        for k, part in enumerate(("shoulder", "elbow", "wrist")):
            word = getattr(branch, part)
            if word is not None:
                required[k] = BRANCH_LABELS[part][word]
    return required


def slerp(q_a: npt.ArrayLike, q_b: npt.ArrayLike, t: npt.ArrayLike) -> FloatArray:
    """Spherical linear interpolation of unit quaternions ``[w, x, y, z]``.

    ``q(t) = sin((1 - t) W) / sin W q_a + sin(t W) / sin W q_b`` with
    ``cos W = q_a . q_b``, after flipping ``q_b`` to the same hemisphere so the
    shorter arc is taken (Shoemake 1985); linear interpolation (normalised)
    when the two are within 1e-9 rad.

    Parameters
    ----------
    q_a, q_b : array-like, shape (4,)
    t : array-like, shape (S,)

    Returns
    -------
    q : array, shape (S, 4)
    """
    a = np.asarray(q_a, dtype=np.float64)
    b = np.asarray(q_b, dtype=np.float64)
    t = np.asarray(t, dtype=np.float64)[:, None]
    dot = float(a @ b)
    if dot < 0.0:
        b, dot = -b, -dot
    omega = np.arccos(min(dot, 1.0))
    if omega < 1e-9:
        q = (1.0 - t) * a + t * b
    else:
        q = (np.sin((1.0 - t) * omega) * a + np.sin(t * omega) * b) / np.sin(omega)
    return q / np.linalg.norm(q, axis=1, keepdims=True)


@nb.njit(cache=True)
def _track_nearest(q, ok, q_start, weights, choice):
    """Per sample, the allowed slot nearest the previous sample's choice (weighted joint distance).

    ``q`` (S, M, n), ``ok`` (S, M), ``q_start`` (n,), ``weights`` (n,); writes
    ``choice`` (S,), -1 where no slot is allowed (the previous choice carries on).
    Each sample depends on the one before, so there is no parallel driver.
    """
    S, M, n = q.shape
    previous = q_start.copy()
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
        choice[s] = best
        if best >= 0:
            for j in range(n):
                previous[j] = q[s, best, j]


def _joint_resolution(scene: Scene, resolution_m: float, resolution_rad: float) -> FloatArray:
    return np.where(scene.robot.prismatic, resolution_m, resolution_rad)


def _step_count(count: float, what: str) -> int:
    steps = max(1, int(np.ceil(count - 1e-9)))
    if steps + 1 > MAX_SAMPLES_PER_SEGMENT:
        raise PlanningInputError(
            f"resolution: {what} needs {steps + 1} samples, more than "
            f"{MAX_SAMPLES_PER_SEGMENT}; use a coarser resolution"
        )
    return steps


def _labels(scene: Scene, q: FloatArray) -> Int8Array:
    labels = np.zeros((q.shape[0], 3), dtype=np.int8)
    finite = np.all(np.isfinite(q), axis=1)
    if np.any(finite):
        labels[finite] = np.stack(label_branches(scene.robot, q[finite]), axis=1)
    return labels


def _continuity(
    q: FloatArray, labels: Int8Array, jump_limit: FloatArray
) -> tuple[BoolArray, BoolArray]:
    """Branch changes and configuration jumps between consecutive reached samples."""
    S = q.shape[0]
    branch_change = np.zeros(S, dtype=bool)
    jump = np.zeros(S, dtype=bool)
    reached = np.flatnonzero(np.all(np.isfinite(q), axis=1))
    if reached.size < 2:
        return branch_change, jump
    before, after = reached[:-1], reached[1:]
    a, b = labels[before], labels[after]
    branch_change[after] = np.any((a != 0) & (b != 0) & (a != b), axis=1)
    jump[after] = np.any(np.abs(q[after] - q[before]) > jump_limit, axis=1)
    return branch_change, jump


def _external_resolution(scene: Scene, resolution_m: float, resolution_rad: float) -> FloatArray:
    return np.where(scene.external.prismatic, resolution_m, resolution_rad)


def _joint_segment(
    scene: Scene,
    k: int,
    q_a: FloatArray,
    q_b: FloatArray,
    ends: FloatArray,
    resolution: FloatArray,
    jump_limit: FloatArray,
) -> SegmentSamples:
    """Joint move from ``q_a`` to ``q_b`` with the external axes from ``ends[0]`` to ``ends[1]``.

    ``resolution`` (n + m,) holds the robot joints' step, then the external axes'.
    """
    delta = q_b - q_a
    moved = ends[1] - ends[0]
    steps = _step_count(
        float(np.max(np.abs(np.concatenate([delta, moved])) / resolution)), f"segment {k}"
    )
    t = np.linspace(0.0, 1.0, steps + 1)
    q = q_a + t[:, None] * delta
    external = ends[0] + t[:, None] * moved
    span = float(np.max(np.abs(delta)))
    labels = _labels(scene, q)
    branch_change, jump = _continuity(q, labels, jump_limit)
    revolute = ~scene.robot.prismatic
    angle = bool(np.any(revolute)) and (
        not np.any(scene.robot.prismatic)
        or float(np.max(np.abs(delta[revolute]))) >= float(np.max(np.abs(delta[~revolute])))
    )
    T_world_base = scene.external.T_world_base(external, scene.T_world_base)
    return SegmentSamples(
        index=k,
        motion="joint",
        q=q,
        fraction=t,
        travel=t * span,
        travel_is_angle=angle,
        T_world_tool=T_world_base @ fk_tool(scene.robot, q, scene.T_flange_tool),
        reason=("",) * q.shape[0],
        labels=labels,
        branch_change=branch_change,
        jump=jump,
        sampled=True,
        external=external,
    )


def _track_numeric(scene: Scene, T_base_tool: FloatArray, q_a: FloatArray) -> FloatArray:
    """Seeded single-solution numerical IK, sample after sample."""
    q = np.full((T_base_tool.shape[0], scene.robot.dof), np.nan)
    previous = q_a
    for s in range(T_base_tool.shape[0]):
        result = solve_ik_numeric(
            scene.robot,
            T_base_tool[s : s + 1],
            T_flange_tool=scene.T_flange_tool,
            seed=previous,
            max_solutions=1,
            restarts=0,
        )
        if result.valid[0, 0] and result.within_limits[0, 0]:
            q[s] = result.q[0, 0]
            previous = q[s]
    return q


def _track_analytic(
    scene: Scene, solver: IkSolver, T_base_tool: FloatArray, q_a: FloatArray
) -> tuple[FloatArray, tuple[str, ...]]:
    """Every solution of every sample in one batch, then the nearest-slot walk."""
    result = solver.solve(T_base_tool, T_flange_tool=scene.T_flange_tool, all_revolutions=True)
    allowed = result.valid & result.within_limits
    choice = np.empty(T_base_tool.shape[0], dtype=np.int64)
    _track_nearest(
        np.ascontiguousarray(result.q),
        np.ascontiguousarray(allowed),
        q_a,
        joint_weights(scene.robot),
        choice,
    )
    rows = np.arange(choice.shape[0])
    q = np.where((choice >= 0)[:, None], result.q[rows, np.maximum(choice, 0)], np.nan)
    reason = tuple(
        "" if c >= 0 else REASON_LIMITS if np.any(result.valid[s]) else REASON_UNREACHABLE
        for s, c in enumerate(choice.tolist())
    )
    return q, reason


def _part_motion(scene: Scene, carrier: int, external: FloatArray) -> FloatArray:
    """Pose of the frame a linear move is straight in, per sample, shape (S, 4, 4).

    The motion of the turntable ``carrier`` (external index) from the scene's
    values; the identity (the world) for ``carrier`` -1.
    """
    if carrier < 0:
        return np.broadcast_to(np.eye(4), (len(external), 4, 4)).copy()
    table = scene.external.turntables[carrier - scene.external.table_offset]
    return table.motion(external[:, carrier] - scene.external.values[carrier])


def _linear_segment(
    scene: Scene,
    solver: IkSolver,
    k: int,
    q_a: FloatArray,
    T_b: FloatArray,
    ends: FloatArray,
    carrier: int,
    resolution_m: float,
    resolution_rad: float,
    jump_limit: FloatArray,
) -> SegmentSamples:
    """Linear move from ``q_a`` (axes at ``ends[0]``) to the world pose ``T_b`` (axes at ``ends[1]``).

    ``carrier``: the turntable (external index) the line is straight on, -1 for the world.
    """
    external_end = scene.external
    T_world_base_a = external_end.T_world_base(ends[:1], scene.T_world_base)[0]
    T_a = T_world_base_a @ fk_tool(scene.robot, q_a[None], scene.T_flange_tool)[0]
    M_ends = _part_motion(scene, carrier, ends)
    P_a = invert_transform(M_ends[0]) @ T_a  # the ends in the frame the line is straight in
    P_b = invert_transform(M_ends[1]) @ T_b
    offset = P_b[:3, 3] - P_a[:3, 3]
    length = float(np.linalg.norm(offset))
    quaternions = quaternion_from_rotation_matrix(np.stack([P_a[:3, :3], P_b[:3, :3]]))
    angle = 2.0 * float(np.arccos(min(abs(float(quaternions[0] @ quaternions[1])), 1.0)))
    moved = ends[1] - ends[0]
    axis_steps = np.abs(moved) / _external_resolution(scene, resolution_m, resolution_rad)
    steps = _step_count(
        max(length / resolution_m, angle / resolution_rad, float(np.max(axis_steps, initial=0.0))),
        f"segment {k}",
    )
    t = np.linspace(0.0, 1.0, steps + 1)
    external = ends[0] + t[:, None] * moved
    P = np.tile(np.eye(4), (t.shape[0], 1, 1))
    P[:, :3, 3] = P_a[:3, 3] + t[:, None] * offset
    P[:, :3, :3] = rotation_matrix_from_quaternion(slerp(quaternions[0], quaternions[1], t))
    T = _part_motion(scene, carrier, external) @ P
    T_base_tool = invert_transform(external_end.T_world_base(external, scene.T_world_base)) @ T
    if solver.family == "numeric":
        q = _track_numeric(scene, T_base_tool, q_a)
        reason = tuple("" if ok else REASON_UNREACHABLE for ok in np.isfinite(q[:, 0]))
    else:
        q, reason = _track_analytic(scene, solver, T_base_tool, q_a)
    q[0] = q_a  # the move starts where the arm is
    reason = ("", *reason[1:])
    labels = _labels(scene, q)
    branch_change, jump = _continuity(q, labels, jump_limit)
    pure_rotation = length < 1e-9
    return SegmentSamples(
        index=k,
        motion="linear",
        q=q,
        fraction=t,
        travel=t * (angle if pure_rotation else length),
        travel_is_angle=pure_rotation,
        T_world_tool=T,
        reason=reason,
        labels=labels,
        branch_change=branch_change,
        jump=jump,
        sampled=True,
        external=external,
    )


def _unsampled(scene: Scene, k: int, motion: Motion) -> SegmentSamples:
    n = scene.robot.dof
    return SegmentSamples(
        index=k,
        motion=motion,
        q=np.full((0, n), np.nan),
        fraction=np.zeros(0),
        travel=np.zeros(0),
        travel_is_angle=False,
        T_world_tool=np.zeros((0, 4, 4)),
        reason=(),
        labels=np.zeros((0, 3), dtype=np.int8),
        branch_change=np.zeros(0, dtype=bool),
        jump=np.zeros(0, dtype=bool),
        sampled=False,
        external=np.zeros((0, scene.external.count)),
    )


def _choose_waypoint(
    scene: Scene,
    solver: IkSolver,
    T_world_tool: FloatArray,
    previous: FloatArray,
    required: Int8Array,
) -> tuple[FloatArray, str]:
    """IK choice of a Cartesian waypoint (module docstring); NaN and the reason if none."""
    n = scene.robot.dof
    T_base_tool = invert_transform(scene.T_world_base) @ T_world_tool
    result = solver.solve(
        T_base_tool[None], T_flange_tool=scene.T_flange_tool, seed=previous, all_revolutions=True
    )
    labels = np.stack([result.shoulder[0], result.elbow[0], result.wrist[0]], axis=1)
    in_limits = result.valid[0] & result.within_limits[0]
    allowed = in_limits & labels_match(labels, required)
    if not np.any(allowed):
        if np.any(in_limits):
            return np.full(n, np.nan), REASON_BRANCH
        return np.full(n, np.nan), REASON_LIMITS if np.any(result.valid[0]) else REASON_UNREACHABLE
    candidates = np.flatnonzero(allowed)  # solver order: nearest the seed first
    free = ~collision_batch(clearance_scene(scene), result.q[0, candidates])
    chosen = candidates[int(np.argmax(free))] if np.any(free) else candidates[0]
    return result.q[0, chosen].copy(), ""


def _branch_words(scene: Scene, q: FloatArray) -> str:
    """Plain-words shoulder, elbow and wrist of one configuration (``""`` if NaN)."""
    if not np.all(np.isfinite(q)):
        return ""
    labels = [int(v[0]) for v in label_branches(scene.robot, q[None])]
    words = (
        ("front", "back", "on axis 1"),
        ("up", "down", "in line"),
        ("positive", "negative", "straight"),
    )
    return ", ".join(words[i][0 if v > 0 else 1 if v < 0 else 2] for i, v in enumerate(labels))


def _waypoint_external(scene: Scene, path: ResolvedPath) -> FloatArray:
    """External values of every waypoint, shape (W, m): the path's, or the scene's for a path without."""
    W, m = len(path.sources), scene.external.count
    if path.external.shape == (W, m):
        return path.external
    return np.broadcast_to(scene.external.values, (W, m)).copy()


def _posed_waypoint(scene: Scene, path: ResolvedPath, w: int) -> tuple[Scene, FloatArray]:
    """Return the scene at waypoint ``w``'s external values and its tool pose there, (4, 4).

    A cell without external axes gives the scene and the resolved pose as they are.
    """
    if scene.external.count == 0 or path.external.shape[1] != scene.external.count:
        return scene, path.T_world_tool[w]
    here = posed_scene(scene, path.external[w])
    k = int(path.target_index[w])
    if k < 0:
        return here, path.T_world_tool[w]
    table = here.targets.T_world_approach if path.approach[w] else here.targets.T_world_target
    return here, table[k]


def sample_path(
    scene: Scene,
    path: int | ResolvedPath,
    *,
    resolution_m: float = DEFAULT_RESOLUTION_M,
    resolution_rad: float = DEFAULT_RESOLUTION_RAD,
    jump_rad: float = DEFAULT_JUMP_RAD,
    jump_m: float = DEFAULT_JUMP_M,
) -> SampledPath:
    """Waypoint configurations and samples of every segment of a path (module docstring).

    Parameters
    ----------
    scene : Scene
    path : int or ResolvedPath
        Index into ``scene.paths``, or a resolved path of this scene's robot.
    resolution_m, resolution_rad : float, keyword-only
        Largest TCP travel and rotation (linear moves) or joint travel (joint
        moves; m for prismatic joints) between samples.
    jump_rad, jump_m : float, keyword-only
        A joint step larger than this between consecutive samples of a
        linear move is a configuration jump (revolute, prismatic).

    Returns
    -------
    SampledPath
    """
    resolved = path_of(scene, path)
    for name, value in (
        ("resolution_m", resolution_m),
        ("resolution_rad", resolution_rad),
        ("jump_rad", jump_rad),
        ("jump_m", jump_m),
    ):
        check_positive(name, value)
    if resolved.q.shape[1] != scene.robot.dof:
        raise PlanningInputError(
            f"path {resolved.name!r}: joint values have {resolved.q.shape[1]} columns, "
            f"robot {scene.robot.name!r} has {scene.robot.dof} joints"
        )
    resolution = np.concatenate(
        [
            _joint_resolution(scene, resolution_m, resolution_rad),
            _external_resolution(scene, resolution_m, resolution_rad),
        ]
    )
    external = _waypoint_external(scene, resolved)
    jump_limit = np.where(scene.robot.prismatic, float(jump_m), float(jump_rad))
    solver = ik_solver(scene.robot)
    W = len(resolved.sources)
    n = scene.robot.dof
    q_way = np.full((W, n), np.nan)
    problems: list[str] = []
    segments: list[SegmentSamples] = []
    previous = scene.robot.home_configuration()
    for w in range(W):
        required = (
            branch_requirement(scene.targets.branches[int(resolved.target_index[w])])
            if resolved.target_index[w] >= 0
            else np.zeros(3, dtype=np.int8)
        )
        linear = w > 0 and bool(resolved.linear[w])
        start = q_way[w - 1] if w > 0 else None
        problem = ""
        here, goal = _posed_waypoint(scene, resolved, w)
        if resolved.joints_given[w]:
            q_way[w] = resolved.q[w]
        elif not linear:
            q_way[w], problem = _choose_waypoint(here, solver, goal, previous, required)
        if w > 0:
            assert start is not None
            motion: Motion = "linear" if linear else "joint"
            if not np.all(np.isfinite(start)) or (not linear and not np.all(np.isfinite(q_way[w]))):
                segments.append(_unsampled(scene, w - 1, motion))
                if linear and not problem:
                    problem = "not reached: the linear move into it starts without a configuration"
            elif linear:
                target = int(resolved.target_index[w])
                segment = _linear_segment(
                    scene,
                    solver,
                    w - 1,
                    start,
                    goal,
                    external[w - 1 : w + 1],
                    carrier_axis(scene, target) if target >= 0 else -1,
                    resolution_m,
                    resolution_rad,
                    jump_limit,
                )
                segments.append(segment)
                end = segment.q[-1]
                if resolved.joints_given[w]:
                    if not np.all(np.isfinite(end)):
                        problem = f"not reached by the linear move ({segment.reason[-1]})"
                    elif np.any(np.abs(end - q_way[w]) > jump_limit):
                        problem = "the linear move arrives with other joint values than given"
                elif np.all(np.isfinite(end)):
                    q_way[w] = end
                    labels = segment.labels[-1]
                    if not labels_match(labels, required):
                        problem = REASON_BRANCH + " (the linear move arrives on another branch)"
                else:
                    problem = f"not reached by the linear move ({segment.reason[-1]})"
            else:
                segments.append(
                    _joint_segment(
                        scene,
                        w - 1,
                        start,
                        q_way[w],
                        external[w - 1 : w + 1],
                        resolution,
                        jump_limit,
                    )
                )
        problems.append(problem)
        if np.all(np.isfinite(q_way[w])):
            previous = q_way[w]
    return SampledPath(
        path=resolved,
        waypoint_names=tuple(waypoint_label(scene, resolved, w) for w in range(W)),
        waypoint_q=q_way,
        waypoint_problem=tuple(problems),
        waypoint_branch=tuple(_branch_words(scene, q_way[w]) for w in range(W)),
        segments=tuple(segments),
        resolution_m=resolution_m,
        resolution_rad=resolution_rad,
    )

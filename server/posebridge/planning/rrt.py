"""Collision-free joint moves by RRT-Connect (Kuffner & LaValle 2000) with OMPL.

When the straight joint move between two configurations collides,
:func:`plan_joint_move` searches joint space with OMPL's RRT-Connect
(Kuffner & LaValle 2000, "RRT-Connect: An efficient approach to
single-query path planning", ICRA): two trees, one from the start and one
from the goal, each extended toward random samples and then greedily toward
the other tree until they meet.

Validity: a configuration is valid when it is inside the joint limits (the
planner's state bounds), its clearance to the cell's obstacles is at least
``safety_margin_m`` and the clearance between the arm's own capsules (the
self pairs) at least ``self_margin_m``
(:func:`posebridge.geometry.clearance.collision_batch` on the pairs of
:func:`posebridge.cell.clearance.clearance_scene`, early exit at the first
pair below its margin). The margins differ because capsules of one arm sit
close together by design (a few millimetres across the wrist).

Motion validation (resolution): an edge ``q_a -> q_b`` is cut into
``ceil(sum_i |dq_i| L_i / step)`` equal joint steps, where ``L_i`` bounds the
distance of every arm point from joint ``i``'s frame (the lever arm, summed
along the chain; 1 for prismatic joints; :func:`lever_arms`), so no point of
the arm moves more than ``step = motion_step_m`` between two checked
configurations (a point's path length is at most ``sum_i |dq_i| L_i``). All
configurations of an edge are checked in one batch. With ``step`` not above
the safety margin, every configuration between two checked ones is within
``step / 2`` of one of them, so its clearance stays above
``margin - step / 2 >= margin / 2 > 0``: the edge is free of obstacle
contact, not just sampled. Two arm points move toward each other by at most
``2 step`` between checks, so self pairs are certified only when
``self_margin_m >= step``; with a smaller self margin they are sampled at
the same step.

Determinism: OMPL draws the seeds of every random generator it creates from
one global seed generator; :func:`plan_joint_move` re-seeds it
(``ompl.util.RNG.setSeed``) right before creating the planner and the path
simplifier, so the same seed gives the same path. The search stops at the
time limit or after ``max_checks`` configuration checks, whichever comes
first; only a search ended by the check budget (or by success) is
reproducible, the time limit is a safety net.

Simplification: OMPL's path simplifier (vertex reduction, rope shortcuts,
collapsing close vertices), every shortcut validated by the same motion
check. The result is then re-checked two ways: an exact clearance of every
configuration of every edge at the motion step (reported as
``min_clearance``), and the path check of
:func:`posebridge.planning.path_check.check_path` on the waypoints as joint
moves at 100 % speed (with its cycle time).
"""

from __future__ import annotations

import itertools
import math
import time
from dataclasses import dataclass, replace
from typing import Literal

import numpy as np
import numpy.typing as npt

from posebridge.cell.clearance import clearance_scene, clearance_to_cell
from posebridge.cell.scene import ResolvedPath, Scene
from posebridge.geometry.clearance import ClearanceScene, collision_batch
from posebridge.geometry.shapes import ArmCapsules
from posebridge.kinematics.fk import PARALLEL_THRESHOLD, fk_tool
from posebridge.planning.errors import PlanningInputError, check_non_negative, check_positive
from posebridge.planning.path_check import PathCheckData, check_path
from posebridge.units import FloatArray

__all__ = [
    "MAX_EDGE_STEPS",
    "JointPlanData",
    "PlanStatus",
    "WorstPair",
    "edge_configurations",
    "lever_arms",
    "plan_joint_move",
]

MAX_EDGE_STEPS = 100_000
"""Largest number of checked configurations on one edge."""

PlanStatus = Literal[
    "solved", "direct", "timeout", "start_in_collision", "goal_in_collision", "outside_limits"
]


def lever_arms(arm: ArmCapsules) -> FloatArray:
    """Upper bound of every arm point's distance from each joint's frame, shape (n,), m.

    For revolute joint ``i`` and a capsule on link ``L > i`` (1-based links),
    ``L_i = sum_{k=i+1..L} |t_k| + sum_{prismatic k in i+1..L} max(|lower_k|, |upper_k|)
    + max(|start|, |end|) + radius`` over the capsules, with ``t_k`` the
    translation of joint ``k``'s origin (triangle inequality along the
    chain; rotations keep lengths). Turning joint ``i`` by ``dq`` moves such a
    point by at most ``L_i |dq|``. Prismatic joints get 1 (a travel of ``dq``
    moves the points by ``dq``); joints that move no capsule get 0.

    Parameters
    ----------
    arm : ArmCapsules

    Returns
    -------
    levers : array, shape (n,)
        m per rad for revolute joints, m per m for prismatic joints.
    """
    robot = arm.robot
    n = robot.dof
    offset = np.linalg.norm(robot.origins[:, :3, 3], axis=1)
    travel = np.where(robot.prismatic, np.maximum(np.abs(robot.lower), np.abs(robot.upper)), 0.0)
    reach = np.maximum(np.linalg.norm(arm.start, axis=1), np.linalg.norm(arm.end, axis=1))
    reach = reach + arm.radius
    levers = np.zeros(n)
    for i in range(n):  # joint i (0-based) moves links i+1..n
        if robot.prismatic[i]:
            levers[i] = 1.0 if np.any(arm.link > i) else 0.0
            continue
        for c in np.flatnonzero(arm.link > i):
            chain = slice(i + 1, int(arm.link[c]))
            levers[i] = max(levers[i], float(offset[chain].sum() + travel[chain].sum() + reach[c]))
    return levers


def edge_configurations(
    q_a: npt.ArrayLike, q_b: npt.ArrayLike, levers: FloatArray, step_m: float
) -> FloatArray:
    """Return configurations on the joint-space line ``q_a -> q_b``, no arm point moving more than ``step_m`` between two.

    Parameters
    ----------
    q_a, q_b : array-like, shape (n,)
    levers : array, shape (n,)
        From :func:`lever_arms`.
    step_m : float
        Largest displacement of any arm point between consecutive configurations, m.

    Returns
    -------
    q : array, shape (K + 1, n)
        ``K = max(1, ceil(sum_i |dq_i| L_i / step_m))`` equal steps, both ends included.
    """
    a = np.asarray(q_a, dtype=np.float64)
    b = np.asarray(q_b, dtype=np.float64)
    sweep = float(np.abs(b - a) @ levers)
    steps = max(1, math.ceil(sweep / step_m - 1e-12))
    if steps > MAX_EDGE_STEPS:
        raise PlanningInputError(
            f"motion_step_m: an edge needs {steps} checks (more than {MAX_EDGE_STEPS}); "
            "use a larger motion step"
        )
    t = np.linspace(0.0, 1.0, steps + 1)[:, None]
    return a + t * (b - a)


class _Checker:
    """State and edge validity for OMPL, counting every configuration checked."""

    def __init__(
        self,
        scene: ClearanceScene,
        margin_m: float,
        self_margin_m: float,
        levers: FloatArray,
        step_m: float,
        deadline: float,
        max_checks: int,
    ) -> None:
        self.environment = replace(scene, self_pairs=np.empty((0, 2), dtype=np.int64))
        self.own = replace(scene, pair_mask=np.zeros_like(scene.pair_mask))
        self.margin = margin_m
        self.self_margin = self_margin_m
        self.levers = levers
        self.step = step_m
        self.deadline = deadline
        self.max_checks = max_checks
        self.checks = 0

    def colliding(self, q: FloatArray) -> npt.NDArray[np.bool_]:
        """Per configuration, shape (K,): closer than a margin to an obstacle or to itself."""
        self.checks += q.shape[0]
        hits = collision_batch(self.environment, q, threshold_m=self.margin)
        return hits | collision_batch(self.own, q, threshold_m=self.self_margin)

    def free(self, q: FloatArray) -> bool:
        """No configuration of ``q`` (K, n) collides."""
        return not bool(np.any(self.colliding(q)))

    def stop(self) -> bool:
        return self.checks >= self.max_checks or time.perf_counter() >= self.deadline


@dataclass(frozen=True)
class WorstPair:
    """The pair furthest inside its margin over some configurations (SI units).

    Attributes
    ----------
    capsule : str
        The arm capsule.
    other : str
        The obstacle, or the arm capsule of a self pair.
    kind : str
        The obstacle's kind, ``"self"`` for the arm's own parts.
    index : int
        Which of the configurations.
    distance : float
        Signed clearance there, m (negative: penetration depth).
    """

    capsule: str
    other: str
    kind: str
    index: int
    distance: float


def _worst_pair(scene: Scene, q: FloatArray, margin_m: float, self_margin_m: float) -> WorstPair:
    """Return the pair furthest inside its margin over configurations ``q``, shape (K, n).

    Obstacle pairs are measured against ``margin_m``, self pairs against
    ``self_margin_m``; the configuration where the slack (clearance minus
    margin) is smallest is reported, not the first one inside a margin, so a
    move is described by its deepest penetration.
    """
    environment = clearance_to_cell(scene, q, scope="environment")
    own = clearance_to_cell(scene, q, scope="self")
    slack_self = own.distance - self_margin_m
    slack_environment = environment.distance - margin_m
    k = int(np.argmin(np.minimum(slack_self, slack_environment)))
    clearance = own if slack_self[k] < slack_environment[k] else environment
    capsule, other, kind = clearance.pair(k)
    return WorstPair(capsule, other, kind, k, float(clearance.distance[k]))


@dataclass(frozen=True, eq=False)
class JointPlanData:
    """A joint move planned by :func:`plan_joint_move`, or why none was found (SI units).

    Attributes
    ----------
    scene : Scene
    status : PlanStatus
    start, goal : array, shape (n,)
        rad, m for prismatic joints.
    waypoints : list of array, shape (n,)
        The simplified path, start and goal included; empty when none.
    seed, max_checks : int
    time_limit_s, planning_time_s : float
    validity_checks : int
        Configurations checked.
    safety_margin, self_margin, motion_step : float
        m (module docstring).
    min_clearance : float or None
        Smallest clearance along the result from the dense re-check, m; None without a path.
    worst : WorstPair or None
        Where the straight move is worst (solved, timeout) or what a refused start or
        goal is too close to.
    worst_fraction : float or None
        Where the straight move is worst: fraction of it, 0..1.
    outside : tuple of str
        For ``outside_limits``: ``"start"`` or ``"goal"`` and the joints outside their limits.
    check : PathCheckData or None
        The result re-checked as joint moves at 100 % speed.
    """

    scene: Scene
    status: PlanStatus
    start: FloatArray
    goal: FloatArray
    waypoints: list[FloatArray]
    seed: int
    time_limit_s: float
    max_checks: int
    planning_time_s: float
    validity_checks: int
    safety_margin: float
    self_margin: float
    motion_step: float
    min_clearance: float | None
    worst: WorstPair | None
    worst_fraction: float | None
    outside: tuple[str, ...]
    check: PathCheckData | None


def _joint_path(scene: Scene, q: FloatArray, name: str) -> ResolvedPath:
    """Return the configurations as joint-value waypoints reached by joint moves at 100 %."""
    W = q.shape[0]
    return ResolvedPath(
        name=name,
        sources=("joints",) * W,
        target_index=np.full(W, -1, dtype=np.int64),
        approach=np.zeros(W, dtype=bool),
        T_world_tool=scene.T_world_base @ fk_tool(scene.robot, q, scene.T_flange_tool),
        q=q.copy(),
        joints_given=np.ones(W, dtype=bool),
        linear=np.zeros(W, dtype=bool),
        linear_speed=np.full(W, np.nan),
        speed_percent=np.full(W, 100.0),
        blend_radius=np.zeros(W),
    )


def _check_configuration(scene: Scene, name: str, value: npt.ArrayLike) -> FloatArray:
    q = np.asarray(value, dtype=np.float64)
    robot = scene.robot
    if q.shape != (robot.dof,) or not np.all(np.isfinite(q)):
        raise PlanningInputError(
            f"{name}: expected {robot.dof} finite joint values (rad, m), got shape {q.shape}"
        )
    return q


def _solve(
    checker: _Checker,
    robot_lower: FloatArray,
    robot_upper: FloatArray,
    q_start: FloatArray,
    q_goal: FloatArray,
    seed: int,
) -> list[FloatArray] | None:
    """RRT-Connect and simplification with OMPL; the waypoints, or None if no path was found."""
    from ompl import base as ob
    from ompl import geometric as og
    from ompl import util as ou

    n = q_start.shape[0]
    space = ob.RealVectorStateSpace(n)
    bounds = ob.RealVectorBounds(n)
    for j in range(n):
        bounds.setLow(j, float(robot_lower[j]))
        bounds.setHigh(j, float(robot_upper[j]))
    space.setBounds(bounds)
    info = ob.SpaceInformation(space)

    def as_array(state: object) -> FloatArray:
        return np.array(state[0:n])  # type: ignore[index]

    def state_valid(state: object) -> bool:
        return checker.free(as_array(state)[None])

    class EdgeValidator(ob.MotionValidator):
        def checkMotion(self, first: object, second: object) -> bool:  # OMPL's name
            q = edge_configurations(as_array(first), as_array(second), checker.levers, checker.step)
            return checker.free(q[1:])

    info.setStateValidityChecker(state_valid)
    validator = EdgeValidator(info)
    info.setMotionValidator(validator)
    info.setup()
    start = info.allocState()
    goal = info.allocState()
    for j in range(n):
        start[j] = float(q_start[j])
        goal[j] = float(q_goal[j])
    level = ou.getLogLevel()
    ou.setLogLevel(ou.LogLevel.LOG_NONE)  # seeding again logs an error; the re-seed still applies
    try:
        ou.RNG.setSeed(seed)
        problem = ob.ProblemDefinition(info)
        problem.setStartAndGoalStates(start, goal)
        planner = og.RRTConnect(info)
        planner.setProblemDefinition(problem)
        planner.setup()
        status = planner.solve(ob.PlannerTerminationCondition(checker.stop))
        if status.getStatus() != ob.PlannerStatus.EXACT_SOLUTION:
            return None
        path = problem.getSolutionPath()
        simplifier = og.PathSimplifier(info)
        simplifier.reduceVertices(path)
        simplifier.ropeShortcutPath(path)
        simplifier.collapseCloseVertices(path)
        simplifier.reduceVertices(path)
    finally:
        ou.setLogLevel(level)
    return [as_array(path.getState(i)) for i in range(path.getStateCount())]


def plan_joint_move(
    scene: Scene,
    q_start: npt.ArrayLike,
    q_goal: npt.ArrayLike,
    *,
    seed: int = 1,
    time_limit_s: float = 5.0,
    max_checks: int = 2_000_000,
    safety_margin_m: float = 0.01,
    self_margin_m: float = 0.0,
    motion_step_m: float | None = None,
    recheck: bool = True,
) -> JointPlanData:
    """Return a collision-free joint move from ``q_start`` to ``q_goal`` (module docstring).

    :func:`posebridge.results.joint_plan.joint_plan_result` makes the boundary model
    (mm, deg, with the message in words) of the result.

    Parameters
    ----------
    scene : Scene
    q_start, q_goal : array-like, shape (n,)
        Joint values, rad or m, inside the joint limits.
    seed : int, keyword-only
        Seed of OMPL's random generators (>= 1).
    time_limit_s : float, keyword-only
        Planning stops after this time (a safety net, see Determinism).
    max_checks : int, keyword-only
        Planning stops after this many configuration checks.
    safety_margin_m : float, keyword-only
        Clearance to the cell's obstacles every checked configuration keeps (> 0).
    self_margin_m : float, keyword-only
        Clearance between the arm's own capsules every checked configuration
        keeps (>= 0; 0: no contact).
    motion_step_m : float, optional, keyword-only
        Largest displacement of any arm point between two checked
        configurations; the safety margin if omitted (must not exceed it).
    recheck : bool, keyword-only
        Run the path check on the result.

    Returns
    -------
    JointPlanData
        Status ``"direct"`` (the straight move is free), ``"solved"``,
        ``"timeout"`` (no path within the limits), ``"start_in_collision"``,
        ``"goal_in_collision"`` (refused before planning, the obstacle named)
        or ``"outside_limits"``.
    """
    robot = scene.robot
    start = _check_configuration(scene, "q_start", q_start)
    goal = _check_configuration(scene, "q_goal", q_goal)
    if isinstance(seed, bool) or not isinstance(seed, int) or seed < 1:
        raise PlanningInputError(f"seed: expected an integer >= 1, got {seed!r}")
    check_non_negative("time_limit_s", time_limit_s)
    check_positive("safety_margin_m", safety_margin_m)
    step = safety_margin_m if motion_step_m is None else motion_step_m
    if not math.isfinite(step) or not 0.0 < step <= safety_margin_m:
        raise PlanningInputError(
            f"motion_step_m: expected a value above 0 and at most the safety margin "
            f"({safety_margin_m:g} m), got {motion_step_m!r}"
        )
    check_non_negative("self_margin_m", self_margin_m)
    margin = float(safety_margin_m)
    cell = clearance_scene(scene)
    levers = lever_arms(cell.arm)
    # compile (or load) the serial and parallel collision kernels before the planning clock starts,
    # so a first run after installation is not cut short by the time limit
    collision_batch(cell, np.repeat(start[None], PARALLEL_THRESHOLD, axis=0), threshold_m=margin)
    t0 = time.perf_counter()
    checker = _Checker(
        cell, margin, float(self_margin_m), levers, float(step), t0 + time_limit_s, max_checks
    )

    def result(
        status: PlanStatus,
        waypoints: list[FloatArray],
        worst: WorstPair | None = None,
        fraction: float | None = None,
        outside: tuple[str, ...] = (),
    ) -> JointPlanData:
        elapsed = time.perf_counter() - t0
        min_clearance = None
        check = None
        if len(waypoints) >= 2:
            dense = np.concatenate(
                [
                    edge_configurations(a, b, levers, checker.step)
                    for a, b in itertools.pairwise(waypoints)
                ]
            )
            min_clearance = float(clearance_to_cell(scene, dense).distance.min())
            if recheck:
                check = check_path(
                    scene, _joint_path(scene, np.array(waypoints), "joint move plan")
                )
        return JointPlanData(
            scene=scene,
            status=status,
            start=start,
            goal=goal,
            waypoints=waypoints,
            seed=seed,
            time_limit_s=float(time_limit_s),
            max_checks=max_checks,
            planning_time_s=elapsed,
            validity_checks=checker.checks,
            safety_margin=margin,
            self_margin=float(self_margin_m),
            motion_step=float(step),
            min_clearance=min_clearance,
            worst=worst,
            worst_fraction=fraction,
            outside=outside,
            check=check,
        )

    for name, q in (("start", start), ("goal", goal)):
        outside = (q < robot.lower) | (q > robot.upper)
        if np.any(outside):
            return result(
                "outside_limits", [], outside=(name, *np.array(robot.joint_names)[outside])
            )
    for name, q in (("start", start), ("goal", goal)):
        if not checker.free(q[None]):
            pair = _worst_pair(scene, q[None], margin, checker.self_margin)
            status: PlanStatus = "start_in_collision" if name == "start" else "goal_in_collision"
            return result(status, [], pair)
    straight = edge_configurations(start, goal, levers, checker.step)
    hits = checker.colliding(straight[1:])
    if not np.any(hits):
        return result("direct", [start, goal])
    worst = _worst_pair(scene, straight[1:], margin, checker.self_margin)
    fraction = (worst.index + 1) / (straight.shape[0] - 1)
    waypoints = _solve(checker, robot.lower, robot.upper, start, goal, seed)
    if waypoints is None:
        return result("timeout", [], worst, fraction)
    return result("solved", waypoints, worst, fraction)

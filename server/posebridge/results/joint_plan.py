"""The joint move's result (mm, deg): model, builder from the SI plan, text table.

:func:`joint_plan_result` turns :class:`~posebridge.planning.rrt.JointPlanData`
(:func:`posebridge.planning.rrt.plan_joint_move`) into :class:`JointPlanReport`, with
its message in words, millimetres and degrees; :func:`render_joint_plan` is its
plain-text summary for the CLI.
"""

from __future__ import annotations

from pydantic import BaseModel, ConfigDict, Field

from posebridge.planning.rrt import JointPlanData, PlanStatus, WorstPair
from posebridge.results.path_check import PathCheckReport, path_check_result
from posebridge.results.text_table import number_text, table_lines
from posebridge.units import joints_user_from_si, mm_from_m

__all__ = ["JointPlanReport", "joint_plan_result", "render_joint_plan"]


class _Report(BaseModel):
    model_config = ConfigDict(extra="forbid", allow_inf_nan=False)


class JointPlanReport(_Report):
    """A collision-free joint move found by RRT-Connect, or why none was found."""

    status: PlanStatus
    message: str
    joint_names: list[str]
    start_deg: list[float]
    goal_deg: list[float]
    waypoints_deg: list[list[float]] = Field(
        description="Joint values of the simplified path, start and goal included (prismatic in mm)."
    )
    seed: int
    time_limit_s: float
    planning_time_s: float
    validity_checks: int
    safety_margin_mm: float
    motion_step_mm: float = Field(
        description="Largest displacement of any arm point between two checked configurations."
    )
    min_clearance_mm: float | None = Field(
        description="Smallest clearance along the result, from an exact dense re-check."
    )
    straight_move_obstacle: str | None = Field(
        default=None,
        description="What the straight joint move comes closest to inside the safety margin "
        "(its worst point), if it collides; for a refused start or goal, what that is too close to.",
    )
    straight_move_worst_mm: float | None = Field(
        default=None,
        description="Signed clearance at that worst point (negative: penetration depth).",
    )
    straight_move_worst_fraction: float | None = Field(
        default=None, description="Where the worst point is: fraction of the straight move, 0..1."
    )
    check: PathCheckReport | None = Field(
        default=None, description="The result re-checked as joint moves at 100 % speed."
    )
    robot_geometry_missing: str | None = Field(
        default=None,
        description="Set (a warning text) when the robot has no collision geometry: every "
        "clearance in this result is then meaningless.",
    )


def _pair_words(pair: WorstPair) -> str:
    """Return ``capsule hits/is ... from what`` with the distance in mm."""
    distance = float(mm_from_m(pair.distance))
    what = f"the arm's own {pair.other}" if pair.kind == "self" else f"{pair.kind} {pair.other!r}"
    state = (
        f"hits {what} ({-distance:.1f} mm deep)"
        if distance < 0
        else f"is {distance:.1f} mm from {what}"
    )
    return f"{pair.capsule} {state}"


def _message(data: JointPlanData) -> str:
    """Return what happened, in words (mm, deg)."""
    status = data.status
    if status == "outside_limits":
        name, *joints = data.outside
        return f"{name} is outside the joint limits of {', '.join(joints)}"
    if status == "direct":
        return "the straight joint move is collision-free"
    assert data.worst is not None  # every other status names the worst pair
    if status in ("start_in_collision", "goal_in_collision"):
        name = "start" if status == "start_in_collision" else "goal"
        return (
            f"refused: the {name} configuration is closer than the safety margin "
            f"({float(mm_from_m(data.safety_margin)):g} mm, "
            f"{float(mm_from_m(data.self_margin)):g} mm between arm parts): "
            f"{_pair_words(data.worst)}"
        )
    words = (
        f"{_pair_words(data.worst)} at {100 * float(data.worst_fraction or 0.0):.0f} % of the move"
    )
    if status == "timeout":
        return (
            f"no path found within the time limit ({data.time_limit_s:g} s) and check budget "
            f"({data.max_checks} checks); the straight move is worst where {words}"
        )
    return (
        f"{len(data.waypoints) - 2} intermediate waypoints avoid the collision of the straight "
        f"move (worst: {words})"
    )


def joint_plan_result(data: JointPlanData) -> JointPlanReport:
    """Build the boundary model (mm, deg) of a joint move plan, with its message.

    Parameters
    ----------
    data : JointPlanData
        From :func:`posebridge.planning.rrt.plan_joint_move`.

    Returns
    -------
    JointPlanReport
    """
    robot = data.scene.robot
    prismatic = robot.prismatic
    worst = data.worst
    return JointPlanReport(
        status=data.status,
        message=_message(data),
        joint_names=list(robot.joint_names),
        start_deg=joints_user_from_si(data.start, prismatic).tolist(),
        goal_deg=joints_user_from_si(data.goal, prismatic).tolist(),
        waypoints_deg=[joints_user_from_si(q, prismatic).tolist() for q in data.waypoints],
        seed=data.seed,
        time_limit_s=data.time_limit_s,
        planning_time_s=data.planning_time_s,
        validity_checks=data.validity_checks,
        safety_margin_mm=float(mm_from_m(data.safety_margin)),
        motion_step_mm=float(mm_from_m(data.motion_step)),
        min_clearance_mm=None
        if data.min_clearance is None
        else float(mm_from_m(data.min_clearance)),
        straight_move_obstacle=None if worst is None else worst.other,
        straight_move_worst_mm=None if worst is None else float(mm_from_m(worst.distance)),
        straight_move_worst_fraction=data.worst_fraction,
        check=None if data.check is None else path_check_result(data.check),
        robot_geometry_missing=robot.geometry_missing,
    )


def render_joint_plan(report: JointPlanReport) -> str:
    """Plain-text summary and waypoint table of a joint-move plan."""
    lines = [
        f"Joint move plan: {report.status} - {report.message}",
        f"seed {report.seed}, {report.validity_checks} checks in {report.planning_time_s:.3f} s "
        f"(limit {report.time_limit_s:g} s), safety margin {report.safety_margin_mm:g} mm, "
        f"motion step {report.motion_step_mm:g} mm, min clearance {number_text(report.min_clearance_mm)} mm",
    ]
    if report.waypoints_deg:
        rows = [[str(i)] + [f"{v:.2f}" for v in q] for i, q in enumerate(report.waypoints_deg)]
        lines += ["", *table_lines(["#", *report.joint_names], rows)]
    if report.robot_geometry_missing:
        lines.insert(0, f"WARNING: {report.robot_geometry_missing}")
    return "\n".join(lines)

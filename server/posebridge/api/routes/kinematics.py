"""Forward and inverse kinematics of one robot."""

from __future__ import annotations

from fastapi import APIRouter, Request

from posebridge.api.compute_context import ComputeContext
from posebridge.api.deps import compute_for
from posebridge.api.json_body import StrictJsonRoute
from posebridge.api.schemas.errors import error_responses
from posebridge.api.schemas.kinematics import (
    FkRequest,
    IkRequest,
    base_transform,
    joints_si_from_request,
    pose_transform,
    tool_transform,
)
from posebridge.kinematics.ik import solve_ik_all
from posebridge.results.kinematics import FkResult, IkResult, fk_result, ik_result

__all__ = ["forward", "inverse", "router"]

router = APIRouter(prefix="/api", tags=["kinematics"], route_class=StrictJsonRoute)


def forward(context: ComputeContext, body: FkRequest) -> FkResult:
    """Return the answer of ``POST /api/fk`` (runs for the asker, :func:`compute_for`)."""
    robot = context.robot(body.robot)
    q = joints_si_from_request(robot, body.joints_deg)
    return fk_result(
        robot,
        q,
        T_flange_tool=tool_transform(body.tool),
        spec=body.robot,
        T_world_base=base_transform(body.base),
    )


def inverse(context: ComputeContext, body: IkRequest) -> IkResult:
    """Return the answer of ``POST /api/ik`` (runs for the asker, :func:`compute_for`)."""
    robot = context.robot(body.robot)
    T_flange_tool = tool_transform(body.tool)
    seed = (
        None
        if body.seed_deg is None
        else joints_si_from_request(robot, [body.seed_deg], field="seed_deg")[0]
    )
    solutions = solve_ik_all(
        robot,
        pose_transform(body.pose, body.base),
        T_flange_tool=T_flange_tool,
        seed=seed,
        all_revolutions=body.all_revolutions,
    )
    return ik_result(robot, solutions, T_flange_tool=T_flange_tool, spec=body.robot)


@router.post("/fk", summary="Forward kinematics", responses=error_responses(403, 422, 503))
async def compute_fk(body: FkRequest, request: Request) -> FkResult:
    """TCP pose, manipulability, limit margins and drawing geometry per joint configuration."""
    return await compute_for(request, forward, body)


@router.post("/ik", summary="Inverse kinematics", responses=error_responses(403, 422, 503))
async def compute_ik(body: IkRequest, request: Request) -> IkResult:
    """Every solution of one tool pose on every arm branch, or the reason there is none."""
    return await compute_for(request, inverse, body)

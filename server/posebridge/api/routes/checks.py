"""Checks of the server's cell: targets, paths, one pose, a controller log.

The answers are the check modules' own result models, the same the command
line prints with ``--json``.
"""

from __future__ import annotations

from typing import Annotated

import numpy as np
from fastapi import APIRouter, HTTPException, Path, Query, Request, Response
from starlette.concurrency import run_in_threadpool

from posebridge.api.auth import charge_reviewer
from posebridge.api.compute_context import ComputeContext
from posebridge.api.deps import CellsDep, compute_for
from posebridge.api.json_body import StrictJsonRoute
from posebridge.api.routes.cells import index_of_named
from posebridge.api.schemas.checks import (
    MAX_LOG_ROWS,
    LogDiagnosisRequest,
    PoseDiagnosisRequest,
)
from posebridge.api.schemas.errors import error_responses
from posebridge.api.schemas.kinematics import joints_si_from_request
from posebridge.cell.arm_state import arm_state
from posebridge.cell.checks import check_targets
from posebridge.cell.joint_log import JointLog, JointLogTooLongError, parse_joint_log
from posebridge.cell.log_diagnosis import diagnose_log
from posebridge.cell.pose_diagnosis import diagnose_pose
from posebridge.planning.motion_export import DEFAULT_PERIOD_MS, MIN_PERIOD_MS, export_motion
from posebridge.planning.path_check import check_path
from posebridge.planning.sequence_report import optimise_path
from posebridge.results.arm_state import ArmState, arm_state_result
from posebridge.results.cell import LogDiagnosis, PoseDiagnosis, TargetCheckReport
from posebridge.results.diagnosis import pose_diagnosis_result
from posebridge.results.log_diagnosis import log_diagnosis_result
from posebridge.results.motion_export import MotionExportReport, motion_csv, motion_export_result
from posebridge.results.path_check import PathCheckReport, path_check_result
from posebridge.results.sequence import SequenceReport, sequence_result
from posebridge.results.target_check import target_check_result
from posebridge.units import m_from_mm, rad_from_deg

__all__ = ["router"]

router = APIRouter(prefix="/api/cell", tags=["checks"], route_class=StrictJsonRoute)


@router.get("/check", summary="Check every target", responses=error_responses(422, 429, 503))
async def read_target_check(cells: CellsDep, request: Request) -> TargetCheckReport:
    """Check every target of the cell.

    Per target: reachable or why not, usable branches, recommended branch and why; the branch
    consistent over all targets; findings, errors first. The check of a cell version is kept
    and answered again without computing.
    """
    snapshot = await run_in_threadpool(cells.read)
    scene = snapshot.scene
    poses = len(scene.targets.names) + int(np.count_nonzero(scene.targets.approach_offset > 0.0))
    charge_reviewer(request, "check_targets", poses)
    kept = snapshot.memo.get("target-check", "")
    if isinstance(kept, TargetCheckReport):
        return kept
    report = await compute_for(request, _check_targets)
    snapshot.memo.put("target-check", "", report)
    return report


def _check_targets(context: ComputeContext) -> TargetCheckReport:
    return target_check_result(check_targets(context.cell().scene))


def _check_path(context: ComputeContext, index: int) -> PathCheckReport:
    return path_check_result(check_path(context.cell().scene, index))


@router.get(
    "/paths/{name}/check",
    summary="Check a path and time it",
    responses=error_responses(404, 422, 429, 503),
)
async def read_path_check(
    name: Annotated[str, Path(min_length=1, max_length=100)], cells: CellsDep, request: Request
) -> PathCheckReport:
    """Run the sampled check of every segment of a path.

    Reach, continuity, limits, singularities, clearance and speed, with the cycle time per segment;
    findings tied to segment and position.
    """
    scene = (await run_in_threadpool(cells.read)).scene
    index = index_of_named("path", [path.name for path in scene.paths], name)
    return await compute_for(request, _check_path, index)


PathName = Annotated[str, Path(min_length=1, max_length=100)]
PeriodMs = Annotated[
    float,
    Query(ge=MIN_PERIOD_MS, le=1000.0, allow_inf_nan=False, description="Row period, ms."),
]


@router.get(
    "/paths/{name}/sequence",
    summary="Fastest consistent solution sequence of a path",
    responses=error_responses(404, 422, 429, 503),
)
async def read_path_sequence(
    name: PathName,
    cells: CellsDep,
    request: Request,
    limit_margin_deg: Annotated[
        float | None,
        Query(
            ge=0.0,
            le=90.0,
            allow_inf_nan=False,
            description="Revolute joints; the cell's thresholds.limit_margin_deg if omitted.",
        ),
    ] = None,
    limit_margin_mm: Annotated[
        float | None,
        Query(
            ge=0.0,
            le=1000.0,
            allow_inf_nan=False,
            description="Prismatic joints; the cell's thresholds.limit_margin_mm if omitted.",
        ),
    ] = None,
) -> SequenceReport:
    """Find the IK solution sequence of a path with the shortest cycle time.

    One IK solution per waypoint for the shortest rest-to-rest cycle time (exact, dynamic
    programming over the layered graph of solutions) under the limit margin, required branches,
    linear-move continuity and collisions; the current choice, the saving in words and the waypoint
    edits that make the path follow the sequence.
    """
    scene = (await run_in_threadpool(cells.read)).scene
    index = index_of_named("path", [path.name for path in scene.paths], name)
    return await compute_for(request, _optimise, index, limit_margin_deg, limit_margin_mm)


def _optimise(
    context: ComputeContext,
    index: int,
    limit_margin_deg: float | None,
    limit_margin_mm: float | None,
) -> SequenceReport:
    return sequence_result(
        optimise_path(
            context.cell().scene,
            index,
            limit_margin_rad=(
                None if limit_margin_deg is None else float(rad_from_deg(limit_margin_deg))
            ),
            limit_margin_m=None if limit_margin_mm is None else float(m_from_mm(limit_margin_mm)),
        ),
        limit_margin_deg=limit_margin_deg,
        limit_margin_mm=limit_margin_mm,
    )


def _export_motion(
    context: ComputeContext, index: int, period_ms: float, cell_name: str
) -> MotionExportReport:
    return motion_export_result(
        export_motion(context.cell().scene, index, period_ms=period_ms), cell_name=cell_name
    )


async def _export(
    name: str, cells: CellsDep, request: Request, period_ms: float
) -> MotionExportReport:
    snapshot = await run_in_threadpool(cells.read)
    scene = snapshot.scene
    index = index_of_named("path", [path.name for path in scene.paths], name)
    cell_name = cells.path.name if cells.path is not None else "demo-cell.json"
    return await compute_for(request, _export_motion, index, period_ms, cell_name)


@router.get(
    "/paths/{name}/export.json",
    summary="The path's timed motion as plain numbers (JSON)",
    responses=error_responses(404, 422, 429, 503),
)
async def export_path_json(
    name: PathName, cells: CellsDep, request: Request, period_ms: PeriodMs = DEFAULT_PERIOD_MS
) -> MotionExportReport:
    """Export the blended motion at a fixed period as JSON.

    Time, every joint (unit in the column name), TCP pose, branch, limit margin and clearance per
    row, and a header block.
    """
    return await _export(name, cells, request, period_ms)


@router.get(
    "/paths/{name}/export.csv",
    summary="The path's timed motion as plain numbers (CSV)",
    response_class=Response,
    responses={
        200: {"content": {"text/csv": {"schema": {"type": "string"}}}},
        **error_responses(404, 422, 429, 503),
    },
)
async def export_path_csv(
    name: PathName, cells: CellsDep, request: Request, period_ms: PeriodMs = DEFAULT_PERIOD_MS
) -> Response:
    """Export the motion as CSV, the header block as ``#`` comment lines.

    As the JSON export; it reads back as a joint log in the pose check.
    """
    report = await _export(name, cells, request, period_ms)
    filename = "".join(c if c.isalnum() or c in "-_" else "_" for c in report.header.path)
    return Response(
        content=motion_csv(report),
        media_type="text/csv; charset=utf-8",
        headers={"Content-Disposition": f'attachment; filename="{filename}.csv"'},
    )


@router.post(
    "/diagnose/pose", summary="Diagnose one pose", responses=error_responses(422, 429, 503)
)
async def diagnose_joint_pose(body: PoseDiagnosisRequest, request: Request) -> PoseDiagnosis:
    """Diagnose one pose of the arm.

    TCP pose, branch, margins, singularity, clearance with the closest object, nearest targets and
    the other branches of the same tool pose.
    """
    return await compute_for(request, _diagnose_pose, body.joints_deg)


def _diagnose_pose(context: ComputeContext, joints_deg: list[float]) -> PoseDiagnosis:
    scene = context.cell().scene
    if scene.external.count and len(joints_deg) == scene.robot.dof + scene.external.count:
        q, external = scene.split_joints([joints_deg], where="joints_deg")
        return pose_diagnosis_result(diagnose_pose(scene, q[0], external=external[0]))
    q = joints_si_from_request(scene.robot, [joints_deg])
    return pose_diagnosis_result(diagnose_pose(scene, q[0]))


def _arm_state(context: ComputeContext, joints_deg: list[float]) -> ArmState:
    scene = context.cell().scene
    q = joints_si_from_request(scene.robot, [joints_deg])
    return arm_state_result(arm_state(scene, q[0]))


def _diagnose_log(context: ComputeContext, log: JointLog) -> LogDiagnosis:
    return log_diagnosis_result(diagnose_log(context.cell().scene, log))


@router.post(
    "/fk", summary="State of the arm in the cell", responses=error_responses(422, 429, 503)
)
async def read_arm_state(body: PoseDiagnosisRequest, request: Request) -> ArmState:
    """Return the quality of one configuration, shown beside the arm.

    Per joint the signed limit margin, every obstacle or self pair inside the clearance threshold
    with the capsule and depth, the singularity distances and the thresholds: what the page shows
    beside the arm after every change of the joint values.
    """
    return await compute_for(request, _arm_state, body.joints_deg)


@router.post(
    "/diagnose/log",
    summary="Diagnose a controller log",
    responses=error_responses(413, 422, 429, 503),
)
async def diagnose_joint_log(
    body: LogDiagnosisRequest, cells: CellsDep, request: Request
) -> LogDiagnosis:
    """Diagnose a joint log row by row.

    Values per row (margins, clearance, manipulability), the worst row, branch changes, velocity
    jumps and findings.
    """
    scene = (await run_in_threadpool(cells.read)).scene
    try:
        log = await run_in_threadpool(
            lambda: parse_joint_log(
                body.csv,
                scene.robot,
                source=body.source,
                max_rows=MAX_LOG_ROWS,
                external=scene.external,
            )
        )
    except JointLogTooLongError as error:
        raise HTTPException(
            status_code=413,
            detail=f"csv: {error}; split the log into parts of at most {MAX_LOG_ROWS} rows",
        ) from error
    charge_reviewer(request, "log_rows", log.count)
    return await compute_for(request, _diagnose_log, log)

"""Joint-space obstacle maps of the cell's robot, computed as jobs."""

from __future__ import annotations

import threading
from collections.abc import Callable

from fastapi import APIRouter, HTTPException, Request

from posebridge.api.deps import CellsDep, JobsDep
from posebridge.api.jobs import JobLimitError
from posebridge.api.schemas.errors import error_responses
from posebridge.api.schemas.jobs import JobStatus, job_status
from posebridge.api.schemas.kinematics import joints_si_from_request
from posebridge.api.schemas.maps import (
    MAX_MAP_CELLS_2,
    MAX_MAP_CELLS_3,
    JointMapRequest,
    JointMapResult,
    joint_map_result,
)
from posebridge.spaces.joint_map import joint_map
from posebridge.units import m_from_mm

__all__ = ["client_key", "router", "started"]

router = APIRouter(prefix="/api/maps", tags=["maps"])


def client_key(request: Request) -> str:
    """Who asks, for the per-client job limits: the peer address."""
    return request.client.host if request.client is not None else "unknown"


def started(error: JobLimitError) -> HTTPException:
    """The 429 answer of a refused job start."""
    return HTTPException(status_code=429, detail=f"jobs: {error}", headers={"Retry-After": "5"})


@router.post(
    "/joint",
    summary="Start a joint-space map",
    status_code=202,
    responses=error_responses(413, 422, 429),
)
def start_joint_map(
    body: JointMapRequest, request: Request, cells: CellsDep, jobs: JobsDep
) -> JobStatus:
    """Obstacle map of the cell over two or three joints, a slice through ``hold_deg``.

    Answers at once with the job; poll ``GET /api/jobs/{id}`` for progress and the result.
    """
    snapshot = cells.read()
    robot = snapshot.scene.robot
    if len(set(body.joints)) != len(body.joints) or max(body.joints) >= robot.dof:
        raise HTTPException(
            status_code=422,
            detail=f"joints: expected distinct indices in 0..{robot.dof - 1} for robot "
            f"{robot.name!r}, got {body.joints}",
        )
    cells_count = body.resolution ** len(body.joints)
    largest = MAX_MAP_CELLS_2 if len(body.joints) == 2 else MAX_MAP_CELLS_3
    if cells_count > largest:
        raise HTTPException(
            status_code=413,
            detail=f"resolution: a {len(body.joints)}-joint map of {body.resolution} cells per "
            f"axis has {cells_count} cells; this server computes at most {largest}",
        )
    q_hold = joints_si_from_request(robot, [body.hold_deg], field="hold_deg")[0]
    scene = snapshot.clearance

    def work(progress: Callable[[int, int], None], cancel: threading.Event) -> JointMapResult:
        computed = joint_map(
            scene,
            body.joints,
            q_hold,
            resolution=body.resolution,
            threshold_m=float(m_from_mm(body.threshold_mm)),
            progress=progress,
            cancel=cancel,
        )
        return joint_map_result(computed, robot, snapshot.etag)

    try:
        job = jobs.start("joint-map", client_key(request), work)
    except JobLimitError as error:
        raise started(error) from error
    return job_status(job)

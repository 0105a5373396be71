"""Joint-space obstacle maps and Cartesian reach sections of the cell's robot, computed as jobs."""

from __future__ import annotations

import threading
from collections.abc import Callable
from dataclasses import replace
from typing import Literal

import numpy as np
from fastapi import APIRouter, HTTPException, Request
from pydantic import BaseModel

from posebridge.api.auth import charge_reviewer
from posebridge.api.compute_context import ComputeContext
from posebridge.api.deps import CellsDep, JobsDep, job_work
from posebridge.api.jobs import JobLimitError, JobManager, JobWork
from posebridge.api.json_body import StrictJsonRoute
from posebridge.api.schemas.errors import error_responses
from posebridge.api.schemas.jobs import JobStatus, job_status
from posebridge.api.schemas.kinematics import joints_si_from_request
from posebridge.api.schemas.maps import (
    MAX_MAP_CELLS_2,
    MAX_MAP_CELLS_3,
    MAX_SECTION_CELLS,
    JointMapRequest,
    ReachSectionRequest,
)
from posebridge.results.spaces import (
    JointMapResult,
    ReachSectionResult,
    joint_map_result,
    reach_section_result,
)
from posebridge.spaces.joint_map import cell_joint_map
from posebridge.spaces.planar_boundary import planar_section_mask
from posebridge.spaces.workspace import (
    reach_map,
    reach_section,
    tcp_distance_bound,
    tool_directions,
)
from posebridge.units import FloatArray, m_from_mm

__all__ = ["client_key", "router", "start_job", "started"]

router = APIRouter(prefix="/api/maps", tags=["maps"], route_class=StrictJsonRoute)


def client_key(request: Request) -> str:
    """Who asks, for the per-client job limits: the peer address."""
    return request.client.host if request.client is not None else "unknown"


def started(error: JobLimitError) -> HTTPException:
    """Return the 429 answer of a refused job start."""
    return HTTPException(status_code=429, detail=f"jobs: {error}", headers={"Retry-After": "5"})


def start_job(
    jobs: JobManager, kind: str, request: Request, work: JobWork, result: BaseModel | None = None
) -> JobStatus:
    """Queue ``work`` as a job of the asking client and answer with its status.

    429 when the client has too many jobs or started too many lately; with a kept ``result``
    the job is done at once.
    """
    reviewer = getattr(request.state, "review_role", "reviewer") != "owner"
    try:
        job = jobs.start(kind, client_key(request), work, reviewer=reviewer, result=result)
    except JobLimitError as error:
        raise started(error) from error
    return job_status(job)


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
    A map already computed for this cell version is kept: the job is then done at once,
    its result in this answer.
    """
    snapshot = cells.read()
    scene = snapshot.scene
    robot = scene.robot
    names = [*robot.joint_names, *scene.external.names]
    if len(set(body.joints)) != len(body.joints) or max(body.joints) >= len(names):
        axes = f" ({', '.join(names)})" if scene.external.count else ""
        raise HTTPException(
            status_code=422,
            detail=f"joints: expected distinct indices in 0..{len(names) - 1} for robot "
            f"{robot.name!r}{axes}, got {body.joints}",
        )
    if sum(j >= robot.dof for j in body.joints) > 1:
        raise HTTPException(
            status_code=422,
            detail=f"joints: at most one external axis per map, got "
            f"{[names[j] for j in body.joints]}",
        )
    cells_count = body.resolution ** len(body.joints)
    largest = MAX_MAP_CELLS_2 if len(body.joints) == 2 else MAX_MAP_CELLS_3
    if cells_count > largest:
        raise HTTPException(
            status_code=413,
            detail=f"resolution: a {len(body.joints)}-joint map of {body.resolution} cells per "
            f"axis has {cells_count} cells; this server computes at most {largest}",
        )
    charge_reviewer(request, "job_cells", cells_count)
    if scene.external.count and len(body.hold_deg) == len(names):
        q, external = scene.split_joints([body.hold_deg], where="hold_deg")
        q_hold, external_hold = q[0], external[0]
    else:
        q_hold = joints_si_from_request(robot, [body.hold_deg], field="hold_deg")[0]
        external_hold = scene.external.values.copy()
    asked = body.model_dump_json()
    computed_map = job_work(request, _joint_map, body, q_hold, external_hold)

    def work(progress: Callable[[int, int], None], cancel: threading.Event) -> BaseModel:
        result = computed_map(progress, cancel)
        snapshot.memo.put("joint-map", asked, result)
        return result

    return start_job(jobs, "joint-map", request, work, snapshot.memo.get("joint-map", asked))


def _joint_map(
    context: ComputeContext,
    body: JointMapRequest,
    q_hold: FloatArray,
    external_hold: FloatArray,
    *,
    progress: Callable[[int, int], None],
    cancel: threading.Event,
) -> JointMapResult:
    snapshot = context.cell()
    scene = snapshot.scene
    computed = cell_joint_map(
        scene,
        body.joints,
        q_hold,
        external_hold,
        resolution=body.resolution,
        threshold_m=float(m_from_mm(body.threshold_mm)),
        progress=progress,
        cancel=cancel,
    )
    return joint_map_result(computed, scene.robot, snapshot.etag, scene.external)


@router.post(
    "/reach-section",
    summary="Start a reach section",
    status_code=202,
    responses=error_responses(413, 422, 429),
)
def start_reach_section(
    body: ReachSectionRequest, request: Request, cells: CellsDep, jobs: JobsDep
) -> JobStatus:
    """Count the tool directions the cell's robot reaches in each cell of one slice.

    World frame, the cell's base and tool, over the square around the base that holds its reach.

    Answers at once with the job; poll ``GET /api/jobs/{id}`` for the result.
    """
    snapshot = cells.read()
    scene = snapshot.scene
    voxel = float(m_from_mm(body.voxel_mm))
    # the bound is a tight lower bound of the farthest TCP distance: add a margin of 5 %
    reach = (
        1.05 * tcp_distance_bound(scene.robot, np.zeros(3), T_flange_tool=scene.T_flange_tool)
        + voxel
    )
    centre = scene.T_world_base[:3, 3]
    cells_per_axis = int(2.0 * reach / voxel) + 2
    if cells_per_axis**2 > MAX_SECTION_CELLS:
        raise HTTPException(
            status_code=413,
            detail=f"voxel_mm: {body.voxel_mm:g} mm cells over this robot's reach make "
            f"{cells_per_axis**2} cells; this server computes at most {MAX_SECTION_CELLS}",
        )
    charge_reviewer(request, "job_cells", cells_per_axis**2)
    value = float(m_from_mm(body.value_mm))
    k = 2 if body.axis == "z" else 1
    box = np.stack([centre - reach, centre + reach])
    box[:, k] = [value - 0.5 * voxel, value + 0.5 * voxel]

    work = job_work(request, _reach_section, body.axis, voxel, value, box)
    return start_job(jobs, "reach-section", request, work)


def _reach_section(
    context: ComputeContext,
    axis: Literal["x", "y", "z"],
    voxel: float,
    value: float,
    box: FloatArray,
    *,
    progress: Callable[[int, int], None],
    cancel: threading.Event,
) -> ReachSectionResult:
    snapshot = context.cell()
    scene = snapshot.scene
    computed = reach_map(
        scene.robot,
        voxel_size_m=voxel,
        T_world_base=scene.T_world_base,
        T_flange_tool=scene.T_flange_tool,
        box_m=box,
        progress=progress,
        cancel=cancel,
    )
    section = reach_section(computed, axis=axis, value_m=value)
    planar = planar_section_mask(
        scene.robot,
        axis=axis,
        value_m=section.value_m,
        u_m=section.u_m,
        v_m=section.v_m,
        T_world_base=scene.T_world_base,
        T_flange_tool=scene.T_flange_tool,
        half_thickness_m=0.5 * voxel,
    )
    if planar is not None:  # a planar arm reaches its plane only
        section = replace(
            section,
            count=np.where(planar, section.count, 0).astype(np.int16),
            best_manipulability=np.where(planar, section.best_manipulability, np.nan),
        )
    return reach_section_result(section, tool_directions().shape[0], snapshot.etag)

"""Base placement search over a grid of candidate base poses, computed as a job."""

from __future__ import annotations

import threading
from collections.abc import Callable

from fastapi import APIRouter, HTTPException, Request

from posebridge.api.auth import charge_reviewer
from posebridge.api.compute_context import ComputeContext
from posebridge.api.deps import CellsDep, JobsDep, job_work
from posebridge.api.json_body import StrictJsonRoute
from posebridge.api.routes.maps import start_job
from posebridge.api.schemas.checks import MAX_PLACEMENT_CANDIDATES, PlacementRequest
from posebridge.api.schemas.errors import error_responses
from posebridge.api.schemas.jobs import JobStatus
from posebridge.planning.placement import PlacementGrid, search_base_placement
from posebridge.planning.placement_table import search_mode, search_table_placement, table_grid
from posebridge.results.placement import PlacementReport, placement_result
from posebridge.units import m_from_mm

__all__ = ["router"]

router = APIRouter(prefix="/api/placement", tags=["placement"], route_class=StrictJsonRoute)


@router.post(
    "",
    summary="Start a base placement search",
    status_code=202,
    responses=error_responses(413, 422, 429),
)
def start_placement(
    body: PlacementRequest, request: Request, cells: CellsDep, jobs: JobsDep
) -> JobStatus:
    """Score candidate base poses around the current one and rank them.

    Candidates vary positions, yaws and pedestal heights; for a cell with a track (or
    ``search: "rail"``) the rail line's offset and direction instead; for a cell whose
    targets ride a turntable (or ``search: "table"``) the table's position. Answers at once
    with the job; poll ``GET /api/jobs/{id}``.
    """
    scene = cells.read().scene
    mode = search_mode(scene, body.search)
    if body.table is not None and mode != "table":
        raise HTTPException(status_code=422, detail="table: only for a table search")
    rail = mode == "rail"
    heights = 1 if body.heights_mm is None or mode != "base" else len(body.heights_mm)
    yaws = 1 if mode == "table" else body.yaw_count
    candidates = (1 if rail else body.count) * body.count * yaws * heights
    if candidates > MAX_PLACEMENT_CANDIDATES:
        raise HTTPException(
            status_code=413,
            detail=f"grid: {body.count} x {body.count} positions x {yaws} yaws x "
            f"{heights} heights = {candidates} candidates; this server searches at most "
            f"{MAX_PLACEMENT_CANDIDATES}",
        )
    charge_reviewer(request, "job_cells", candidates)
    if mode == "table":
        grid = table_grid(
            scene, table=body.table, half_width_mm=body.half_width_mm, count=body.count
        )
        return start_job(jobs, "placement", request, job_work(request, _placement, grid, body))
    if rail:
        grid = PlacementGrid.rail_around(
            scene, half_width_mm=body.half_width_mm, count=body.count, yaw_count=body.yaw_count
        )
        return start_job(jobs, "placement", request, job_work(request, _placement, grid, body))
    around = PlacementGrid.around(
        scene, half_width_mm=body.half_width_mm, count=body.count, yaw_count=body.yaw_count
    )
    grid = (
        around
        if body.heights_mm is None
        else PlacementGrid(
            x=around.x,
            y=around.y,
            yaw=around.yaw,
            height=PlacementGrid.from_user([0.0], [0.0], [0.0], body.heights_mm).height,
        )
    )

    work = job_work(request, _placement, grid, body)
    return start_job(jobs, "placement", request, work)


def _placement(
    context: ComputeContext,
    grid: PlacementGrid,
    body: PlacementRequest,
    *,
    progress: Callable[[int, int], None],
    cancel: threading.Event,
) -> PlacementReport:
    search = search_base_placement if grid.table_axis is None else search_table_placement
    result = search(
        context.cell().scene,
        grid,
        progress=progress,
        cancel=cancel,
        top=body.top,
        collision_margin_m=float(m_from_mm(body.collision_margin_mm)),
        clearance_goal_m=float(m_from_mm(max(body.clearance_goal_mm, body.collision_margin_mm))),
    )
    return placement_result(result)

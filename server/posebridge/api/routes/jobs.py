"""Progress, result and cancelling of long computations started by other routes.

Also the picture of a finished grid result (two-joint map, reach section, placement scores).
"""

from __future__ import annotations

from typing import Annotated

from fastapi import APIRouter, HTTPException, Path, Query, Response

from posebridge.api.deps import JobsDep
from posebridge.api.jobs import Job, JobManager
from posebridge.api.json_body import StrictJsonRoute
from posebridge.api.schemas.errors import error_responses
from posebridge.api.schemas.jobs import JobStatus, job_status
from posebridge.results.map_images import (
    joint_map_rgba,
    png_bytes,
    reach_section_rgba,
    score_plane,
    score_rgba,
)
from posebridge.results.spaces import JointMapResult, ReachSectionResult

__all__ = ["router"]

router = APIRouter(prefix="/api/jobs", tags=["jobs"], route_class=StrictJsonRoute)

JobId = Annotated[str, Path(min_length=1, max_length=64, pattern=r"^[0-9a-f]+$")]


def _job(jobs: JobManager, job_id: str) -> Job:
    try:
        return jobs.get(job_id)
    except KeyError:
        raise HTTPException(
            status_code=404, detail=f"job: no job {job_id!r} (unknown, or finished long ago)"
        ) from None


@router.get("/{job_id}", summary="Job progress and result", responses=error_responses(404, 422))
def read_job(job_id: JobId, jobs: JobsDep) -> JobStatus:
    """State and progress; the result once the state is done."""
    return job_status(_job(jobs, job_id))


@router.post("/{job_id}/cancel", summary="Cancel a job", responses=error_responses(404, 422))
def cancel_job(job_id: JobId, jobs: JobsDep) -> JobStatus:
    """Ask the job to stop; it ends as cancelled at its next step."""
    _job(jobs, job_id)
    return job_status(jobs.cancel(job_id))


@router.get(
    "/{job_id}/image",
    summary="Picture of a finished grid result",
    response_class=Response,
    responses={
        200: {"content": {"image/png": {}}, "description": "PNG, one pixel per grid cell"},
        **error_responses(404, 409, 422),
    },
)
def read_job_image(
    job_id: JobId,
    jobs: JobsDep,
    yaw_index: Annotated[int, Query(ge=-1, le=10_000)] = -1,
    height_index: Annotated[int, Query(ge=0, le=10_000)] = 0,
) -> Response:
    """Return the coloured grid of a finished map, reach section or placement search as PNG.

    One pixel per grid cell, the first row at the largest value of the vertical axis; the
    colours are those of the page and the report (:mod:`posebridge.results.map_images`). A
    placement's picture shows one yaw (``yaw_index``, -1: the best over all yaws) at one
    pedestal height (``height_index``). 409 while the job is not done, 422 for a result
    without a picture (a three-joint map) or an index outside the grid.
    """
    job = _job(jobs, job_id)
    if job.state != "done" or job.result is None:
        raise HTTPException(
            status_code=409, detail=f"job: {job_id!r} is {job.state}, not done: no picture yet"
        )
    result = job.result
    grid = getattr(result, "grid", None) if job.kind == "placement" else None
    try:
        if isinstance(result, JointMapResult):
            pixels = joint_map_rgba(result)
        elif isinstance(result, ReachSectionResult):
            pixels = reach_section_rgba(result)
        elif grid is not None:
            pixels = score_rgba(score_plane(grid.score, yaw_index, height_index))
        else:
            raise ValueError(f"job: a {job.kind} result has no picture")
    except (ValueError, IndexError) as error:
        raise HTTPException(status_code=422, detail=str(error)) from None
    # a finished job's result never changes: the browser may keep the picture
    return Response(
        png_bytes(pixels), media_type="image/png", headers={"Cache-Control": "private, max-age=600"}
    )

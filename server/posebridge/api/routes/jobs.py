"""Progress, result and cancelling of long computations started by other routes."""

from __future__ import annotations

from typing import Annotated

from fastapi import APIRouter, HTTPException, Path

from posebridge.api.deps import JobsDep
from posebridge.api.jobs import Job, JobManager
from posebridge.api.json_body import StrictJsonRoute
from posebridge.api.schemas.errors import error_responses
from posebridge.api.schemas.jobs import JobStatus, job_status

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

"""Job answers: state, progress and, once done, the result."""

from __future__ import annotations

from typing import Literal

from pydantic import BaseModel, ConfigDict, Field

from posebridge.api.jobs import Job
from posebridge.results.placement import PlacementReport
from posebridge.results.spaces import JointMapResult, ReachSectionResult

__all__ = ["JobResult", "JobStatus", "job_status"]

JobResult = JointMapResult | ReachSectionResult | PlacementReport
"""Results a job can carry: a joint map, a reach section or a base placement ranking."""


class JobStatus(BaseModel):
    """A job: what it computes, how far it is, and its result when done."""

    model_config = ConfigDict(extra="forbid")

    id: str
    kind: str = Field(description="What the job computes.")
    state: Literal["queued", "running", "done", "failed", "cancelled"]
    done: int = Field(description="Steps finished.")
    total: int = Field(description="Steps in all; 0 while not yet known.")
    detail: str = Field(description="Why the job failed; empty otherwise.")
    result: JobResult | None = Field(description="The result, once state is done.")


def job_status(job: Job) -> JobStatus:
    """Return the answer describing ``job``."""
    result = job.result if job.state == "done" else None
    return JobStatus(
        id=job.id,
        kind=job.kind,
        state=job.state,
        done=job.done,
        total=job.total,
        detail=job.error,
        result=result,  # type: ignore[arg-type]
    )

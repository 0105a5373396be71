"""Long computations as jobs: started by one request, polled for progress, cancelled, collected.

Jobs run one at a time on a worker thread, off the event loop, so the page
stays responsive while a map or a placement search runs: the owner's jobs on
one worker, reviewers' jobs on another, whose every step first yields to the
owner's requests (``reviewer_pause``, :mod:`posebridge.api.lanes`). The workers
are daemon threads: a server that exits does not wait for queued jobs. Each
job gets a ``progress(done, total)`` callback and a cancel event, as the
compute executor's ``map_chunks`` takes them. Finished jobs, with their
results, are kept for :data:`KEPT_FINISHED_S` seconds and at most the newest
:data:`KEPT_FINISHED` of them, so results cannot pile up in memory.

Per reviewer (its address), at most :data:`MAX_ACTIVE_PER_CLIENT` jobs may be
queued or running and at most :data:`MAX_STARTS_PER_MINUTE` may be started in
any sixty seconds; beyond that a start is refused (HTTP 429). The owner is
never refused: rate caps are for reviewers, and the owner's page asks again
whenever the arm moves. The owner's jobs run in order on their own worker,
so of more than :data:`MAX_ACTIVE_OWNER` active ones the oldest queued job is
superseded (cancelled, its poll answers ``cancelled``): memory stays bounded
and the newest request is always served.
"""

from __future__ import annotations

import queue
import threading
import time
import uuid
from collections import OrderedDict, deque
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Literal

from pydantic import BaseModel

from posebridge.compute import ComputationCancelled

__all__ = [
    "KEPT_FINISHED",
    "KEPT_FINISHED_S",
    "MAX_ACTIVE_OWNER",
    "MAX_ACTIVE_PER_CLIENT",
    "MAX_STARTS_PER_MINUTE",
    "Job",
    "JobLimitError",
    "JobManager",
    "JobState",
    "JobWork",
]

KEPT_FINISHED = 16
"""Finished jobs (and their results) remembered at most; the oldest are dropped first."""
KEPT_FINISHED_S = 600.0
"""Seconds a finished job and its result are kept."""
MAX_ACTIVE_PER_CLIENT = 3
"""Queued or running jobs allowed per client."""
MAX_STARTS_PER_MINUTE = 60
"""Job starts allowed per client in any sixty seconds."""
MAX_ACTIVE_OWNER = 8
"""The owner's queued or running jobs kept; a newer start supersedes the oldest queued one."""

JobState = Literal["queued", "running", "done", "failed", "cancelled"]
JobWork = Callable[[Callable[[int, int], None], threading.Event], BaseModel]
"""A job's body: ``work(progress, cancel) -> result``."""


class JobLimitError(RuntimeError):
    """A client asked for more jobs than allowed; the message says which limit."""


@dataclass(eq=False)
class Job:
    """One job and what is known of it.

    Attributes
    ----------
    id : str
    kind : str
        What it computes (``"joint-map"``, ``"placement"``, ...).
    client : str
    state : JobState
    done, total : int
        Progress in the work's own steps (chunks).
    result : BaseModel or None
        Set when ``state == "done"``.
    error : str
        Why it failed, when ``state == "failed"``.
    cancel : threading.Event
    """

    id: str
    kind: str
    client: str
    state: JobState = "queued"
    done: int = 0
    total: int = 0
    result: BaseModel | None = None
    error: str = ""
    cancel: threading.Event = field(default_factory=threading.Event)
    finished_at: float | None = None
    owner: bool = False

    @property
    def active(self) -> bool:
        """Queued or running."""
        return self.state in ("queued", "running")


class JobManager:
    """Runs jobs on one worker thread and keeps their state.

    Parameters
    ----------
    expected_errors : tuple of exception types
        Errors that are the request's fault (bad input); their message
        becomes the job's ``error``. Any other error is reported as an
        internal error naming its type.
    reviewer_pause : callable, optional
        Called before every progress step of a reviewer's job (waits for the
        owner's requests).
    clock : callable
        Monotonic seconds; :func:`time.monotonic` by default.
    """

    def __init__(
        self,
        expected_errors: tuple[type[Exception], ...] = (ValueError,),
        *,
        reviewer_pause: Callable[[], None] | None = None,
        clock: Callable[[], float] = time.monotonic,
    ) -> None:
        self._expected = expected_errors
        self._reviewer_pause = reviewer_pause
        self._clock = clock
        self._jobs: OrderedDict[str, Job] = OrderedDict()
        self._starts: dict[str, deque[float]] = {}
        self._lock = threading.Lock()
        self._queues: dict[bool, queue.SimpleQueue[tuple[Job, JobWork] | None]] = {}
        for reviewer in (False, True):
            self._queues[reviewer] = queue.SimpleQueue()
            name = "posebridge-review-jobs" if reviewer else "posebridge-jobs"
            worker = threading.Thread(target=self._serve, args=(reviewer,), name=name, daemon=True)
            worker.start()

    def _serve(self, reviewer: bool) -> None:
        while (item := self._queues[reviewer].get()) is not None:
            self._run(*item, reviewer=reviewer)

    def start(
        self,
        kind: str,
        client: str,
        work: JobWork,
        *,
        reviewer: bool = False,
        result: BaseModel | None = None,
    ) -> Job:
        """Queue ``work`` as a new job of ``client`` (a reviewer's on the reviewers' worker).

        The owner's start never fails: beyond :data:`MAX_ACTIVE_OWNER` active
        owner jobs the oldest queued one is cancelled (superseded). With a
        ``result`` already known (a kept one), the job is done at once and
        ``work`` is not run; the reviewers' limits still count it.

        Raises
        ------
        JobLimitError
            A reviewer has too many active jobs or started too many lately.
        """
        now = self._clock()
        with self._lock:
            if not reviewer:
                job = self._start_owner_job(kind, client)
                self._forget_old(now)
                if result is not None:
                    self._done_at_once(job, result, now)
                else:
                    self._queues[False].put((job, work))
                return job
            active = sum(1 for job in self._jobs.values() if job.client == client and job.active)
            if active >= MAX_ACTIVE_PER_CLIENT:
                raise JobLimitError(
                    f"{active} jobs of this client are queued or running (at most "
                    f"{MAX_ACTIVE_PER_CLIENT}); cancel one or wait for it to finish"
                )
            starts = self._starts.setdefault(client, deque())
            while starts and now - starts[0] > 60.0:
                starts.popleft()
            if len(starts) >= MAX_STARTS_PER_MINUTE:
                raise JobLimitError(
                    f"at most {MAX_STARTS_PER_MINUTE} jobs per minute per client; "
                    "try again in a few seconds"
                )
            starts.append(now)
            job = Job(id=uuid.uuid4().hex, kind=kind, client=client)
            self._jobs[job.id] = job
            self._forget_old(now)
            if result is not None:
                self._done_at_once(job, result, now)
                return job
        self._queues[reviewer].put((job, work))
        return job

    @staticmethod
    def _done_at_once(job: Job, result: BaseModel, now: float) -> None:
        """Finish ``job`` with a result known at its start (called with the lock held)."""
        job.result = result
        job.state = "done"
        job.finished_at = now

    def _start_owner_job(self, kind: str, client: str) -> Job:
        """Start a new owner job (called with the lock held).

        The oldest queued owner jobs beyond the bound are superseded.
        """
        owner_jobs = [job for job in self._jobs.values() if job.owner and job.active]
        queued = [job for job in owner_jobs if job.state == "queued"]
        for old in queued[: max(0, len(owner_jobs) + 1 - MAX_ACTIVE_OWNER)]:
            old.cancel.set()
            old.state = "cancelled"
            old.error = "superseded by a newer request of the owner"
            old.finished_at = self._clock()
        job = Job(id=uuid.uuid4().hex, kind=kind, client=client, owner=True)
        self._jobs[job.id] = job
        return job

    def _forget_old(self, now: float) -> None:
        """Drop finished jobs beyond the age and count bounds (called with the lock held).

        Finished jobs older than :data:`KEPT_FINISHED_S` and all but the newest
        :data:`KEPT_FINISHED` finished ones are dropped.
        """
        finished = {
            key: job.finished_at
            for key, job in self._jobs.items()
            if job.finished_at is not None and not job.active
        }
        expired = [key for key, at in finished.items() if now - at > KEPT_FINISHED_S]
        excess = list(finished)[: max(0, len(finished) - KEPT_FINISHED)]
        for key in {*expired, *excess}:
            del self._jobs[key]

    def _finish(self, job: Job) -> None:
        with self._lock:
            job.finished_at = self._clock()
            self._forget_old(job.finished_at)

    def _run(self, job: Job, work: JobWork, *, reviewer: bool = False) -> None:
        try:
            self._run_work(job, work, reviewer)
        finally:
            self._finish(job)

    def _run_work(self, job: Job, work: JobWork, reviewer: bool) -> None:
        if job.cancel.is_set():
            job.state = "cancelled"
            return
        job.state = "running"
        pause = self._reviewer_pause if reviewer else None

        def progress(done: int, total: int) -> None:
            job.done, job.total = done, total
            if pause is not None:
                pause()

        try:
            result = work(progress, job.cancel)
        except ComputationCancelled:
            job.state = "cancelled"
        except self._expected as error:
            job.error = str(error)
            job.state = "failed"
        except Exception as error:  # reported to the client, not raised
            job.error = f"internal error ({type(error).__name__}); see the server log"
            job.state = "failed"
        else:
            if job.cancel.is_set():
                job.state = "cancelled"
            else:
                job.result = result
                job.state = "done"

    def get(self, job_id: str) -> Job:
        """Return the job called ``job_id`` (``KeyError`` if unknown or forgotten)."""
        with self._lock:
            self._forget_old(self._clock())
            return self._jobs[job_id]

    def cancel(self, job_id: str) -> Job:
        """Ask the job to stop (``KeyError`` if unknown); a queued job never starts."""
        job = self.get(job_id)
        job.cancel.set()
        if job.state == "queued":
            job.state = "cancelled"
        return job

    def close(self) -> None:
        """Cancel every job and stop the worker threads."""
        with self._lock:
            for job in self._jobs.values():
                job.cancel.set()
        for jobs in self._queues.values():
            jobs.put(None)

"""Long computations as jobs: started by one request, polled for progress, cancelled, collected.

Jobs run one at a time on a worker thread, off the event loop, so the page
stays responsive while a map or a placement search runs. The worker is a
daemon thread: a server that exits does not wait for queued jobs. Each job gets a
``progress(done, total)`` callback and a cancel event, as the compute
executor's ``map_chunks`` takes them. Finished jobs are kept (the newest
:data:`KEPT_JOBS`) until their result is read again or they are pushed out.

Per client (its address), at most :data:`MAX_ACTIVE_PER_CLIENT` jobs may be
queued or running and at most :data:`MAX_STARTS_PER_MINUTE` may be started in
any sixty seconds; beyond that a start is refused (HTTP 429).
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
    "KEPT_JOBS",
    "MAX_ACTIVE_PER_CLIENT",
    "MAX_STARTS_PER_MINUTE",
    "Job",
    "JobLimitError",
    "JobManager",
    "JobState",
    "JobWork",
]

KEPT_JOBS = 64
"""Jobs remembered at most (oldest finished ones are dropped first)."""
MAX_ACTIVE_PER_CLIENT = 3
"""Queued or running jobs allowed per client."""
MAX_STARTS_PER_MINUTE = 60
"""Job starts allowed per client in any sixty seconds."""

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
    """

    def __init__(self, expected_errors: tuple[type[Exception], ...] = (ValueError,)) -> None:
        self._expected = expected_errors
        self._jobs: OrderedDict[str, Job] = OrderedDict()
        self._starts: dict[str, deque[float]] = {}
        self._lock = threading.Lock()
        self._queue: queue.SimpleQueue[tuple[Job, JobWork] | None] = queue.SimpleQueue()
        self._worker = threading.Thread(target=self._serve, name="posebridge-jobs", daemon=True)
        self._worker.start()

    def _serve(self) -> None:
        while (item := self._queue.get()) is not None:
            self._run(*item)

    def start(self, kind: str, client: str, work: JobWork) -> Job:
        """Queue ``work`` as a new job of ``client``.

        Raises
        ------
        JobLimitError
            The client has too many active jobs or started too many lately.
        """
        now = time.monotonic()
        with self._lock:
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
            self._forget_old()
        self._queue.put((job, work))
        return job

    def _forget_old(self) -> None:
        while len(self._jobs) > KEPT_JOBS:
            finished = next((key for key, job in self._jobs.items() if not job.active), None)
            if finished is None:
                return
            del self._jobs[finished]

    def _run(self, job: Job, work: JobWork) -> None:
        if job.cancel.is_set():
            job.state = "cancelled"
            return
        job.state = "running"

        def progress(done: int, total: int) -> None:
            job.done, job.total = done, total

        try:
            result = work(progress, job.cancel)
        except ComputationCancelled:
            job.state = "cancelled"
        except self._expected as error:
            job.error = str(error)
            job.state = "failed"
        except Exception as error:  # noqa: BLE001 - reported to the client, not raised
            job.error = f"internal error ({type(error).__name__}); see the server log"
            job.state = "failed"
        else:
            if job.cancel.is_set():
                job.state = "cancelled"
            else:
                job.result = result
                job.state = "done"

    def get(self, job_id: str) -> Job:
        """The job called ``job_id`` (``KeyError`` if unknown or forgotten)."""
        with self._lock:
            return self._jobs[job_id]

    def cancel(self, job_id: str) -> Job:
        """Ask the job to stop (``KeyError`` if unknown); a queued job never starts."""
        job = self.get(job_id)
        job.cancel.set()
        if job.state == "queued":
            job.state = "cancelled"
        return job

    def close(self) -> None:
        """Cancel every job and stop the worker thread."""
        with self._lock:
            for job in self._jobs.values():
                job.cancel.set()
        self._queue.put(None)

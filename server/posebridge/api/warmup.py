"""Loading the numerical kernels at server start: the page's first needs first, the rest behind.

numba compiles a kernel on its first call after installation (minutes on a
busy two-core machine, all kernels together) and loads it from its cache
afterwards (about a second). The server answers at once and loads the kernels
on a background thread in the order the page needs them (forward and inverse
kinematics, then clearance and joint maps, then the target check); a request
that needs a kernel not yet loaded waits for it. :data:`FIRST_STEPS` steps may
be run before serving instead; none are, because compiling even forward and
inverse kinematics took 211 s on the busy two-core machine (load about 11),
far beyond the 15 s the address should take. Every step is
announced on stderr as it starts ("kernels 2/4: inverse kinematics"), also
when stderr is not a terminal: one line per step. The state is read by
``GET /api/health`` (``kernels_ready``, ``kernels_done``, ``kernels_total``,
``kernels_current``), which the page can show.
"""

from __future__ import annotations

import sys
import threading
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from typing import TextIO

__all__ = ["FIRST_STEPS", "KernelWarmUp", "WarmStep"]

FIRST_STEPS = 0
"""How many of the steps run before the server answers (none: see the module docstring)."""


@dataclass(frozen=True)
class WarmStep:
    """One step: a name for the user and the calls that load its kernels."""

    name: str
    run: Callable[[], None]


@dataclass
class KernelWarmUp:
    """Runs warm-up steps in order and tells how far it is.

    Parameters
    ----------
    steps : sequence of WarmStep
    first : int
        Steps run by :meth:`run_first` (the rest by :meth:`start_rest`).
    stream : text stream, optional
        Where progress lines go; ``sys.stderr`` if omitted.
    """

    steps: Sequence[WarmStep]
    first: int = FIRST_STEPS
    stream: TextIO | None = None
    done: int = 0
    current: str | None = None
    failed: str | None = None
    _lock: threading.Lock = field(default_factory=threading.Lock, repr=False)
    _finished: threading.Event = field(default_factory=threading.Event, repr=False)

    @property
    def total(self) -> int:
        """Number of steps."""
        return len(self.steps)

    @property
    def ready(self) -> bool:
        """Every step has run (or one failed: the kernels then load on first use)."""
        return self._finished.is_set()

    def _say(self, text: str) -> None:
        stream = sys.stderr if self.stream is None else self.stream
        print(f"posebridge: {text}", file=stream, flush=True)

    def _run(self, steps: Sequence[WarmStep]) -> None:
        for step in steps:
            with self._lock:
                self.current = step.name
                number = self.done + 1
            self._say(
                f"kernels {number}/{self.total}: {step.name} (compiled on the first start "
                "after installing, loaded from the cache afterwards)"
            )
            try:
                step.run()
            except Exception as error:  # a failed warm-up only costs speed later
                with self._lock:
                    self.failed = f"{step.name}: {type(error).__name__}: {error}"
                    self.current = None
                self._say(f"kernels: {step.name} could not be loaded now ({self.failed})")
                self._finished.set()
                return
            with self._lock:
                self.done += 1
                self.current = None

    def run_first(self) -> None:
        """Run the first :attr:`first` steps here and now."""
        self._run(self.steps[: self.first])
        if self.done == self.total:
            self._finished.set()

    def start_rest(self) -> threading.Thread | None:
        """Run the remaining steps on a daemon thread (None when nothing is left)."""
        if self.ready:
            return None

        def rest() -> None:
            self._run(self.steps[self.first :])
            if not self._finished.is_set():
                self._say("kernels: all loaded")
            self._finished.set()

        thread = threading.Thread(target=rest, name="posebridge-warm-up", daemon=True)
        thread.start()
        return thread

    def wait(self, timeout_s: float | None = None) -> bool:
        """Block until every step has run; True if it has."""
        return self._finished.wait(timeout_s)

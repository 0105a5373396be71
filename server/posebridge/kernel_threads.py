"""How numba's threads wait between parallel regions: passively, unless the user chose.

Numba's parallel kernels run on its OpenMP threading layer here. By default GNU OpenMP
lets a thread that finished its share spin for a while before it sleeps, so that the
next region starts at once. That pays on a machine with cores to spare; on a shared
one it takes cores from everything else, and two processes that both run parallel
kernels (the server and a placement worker, a test run beside a benchmark) spin
against each other. Measured on a 2-core machine, one IK batch of 700 poses on the
parallel driver, median of 300: idle, 0.65 ms spinning and 0.47 ms passive; with
another posebridge process running tests beside it, 8.0 ms spinning and 0.62 ms
passive (about the serial run's time).

:func:`use_passive_waiting` sets ``OMP_WAIT_POLICY=PASSIVE`` in the process environment
when the user has not set it; it runs when the package is imported
(``posebridge/__init__.py``), before numba starts its threads (OpenMP reads the
variable then), and worker processes inherit it. It does nothing when another
threading layer is in use or OpenMP was started before the import.

This module is a leaf: it imports nothing of posebridge and not numba.
"""

from __future__ import annotations

import os
from collections.abc import MutableMapping

__all__ = ["WAIT_POLICY_ENV", "use_passive_waiting"]

WAIT_POLICY_ENV = "OMP_WAIT_POLICY"
"""The OpenMP environment variable for how idle threads wait (``ACTIVE`` or ``PASSIVE``)."""


def use_passive_waiting(environ: MutableMapping[str, str] = os.environ) -> str:
    """Set :data:`WAIT_POLICY_ENV` to ``PASSIVE`` unless it is set; return its value."""
    return environ.setdefault(WAIT_POLICY_ENV, "PASSIVE")

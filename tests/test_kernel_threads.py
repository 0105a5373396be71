"""numba's OpenMP threads wait passively unless the user chose (posebridge.kernel_threads).

The expectations are the module's contract (DEVELOPERS.md, "Numba kernels"); the variable and
its values are the OpenMP specification's environment variable ``OMP_WAIT_POLICY`` (from memory).
"""

from __future__ import annotations

import os
import subprocess
import sys

from posebridge.kernel_threads import WAIT_POLICY_ENV, use_passive_waiting


def test_passive_waiting_is_set_when_unset() -> None:
    environ: dict[str, str] = {}
    assert use_passive_waiting(environ) == "PASSIVE"
    # OpenMP's OMP_WAIT_POLICY: PASSIVE asks waiting threads not to use the processor (from memory)
    assert environ == {WAIT_POLICY_ENV: "PASSIVE"}


def test_the_users_choice_is_kept() -> None:
    environ = {WAIT_POLICY_ENV: "ACTIVE"}
    assert use_passive_waiting(environ) == "ACTIVE"
    assert environ == {WAIT_POLICY_ENV: "ACTIVE"}


def test_importing_the_package_sets_it_before_numba_starts_threads() -> None:
    environ = {k: v for k, v in os.environ.items() if k != WAIT_POLICY_ENV}
    script = "import os, posebridge; print(os.environ['OMP_WAIT_POLICY'])"
    out = subprocess.run(
        [sys.executable, "-c", script], env=environ, capture_output=True, text=True, check=True
    )
    # the module's contract: set on import, in the process environment OpenMP reads
    assert out.stdout.strip() == "PASSIVE"

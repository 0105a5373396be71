"""The numba cache folder is keyed by the kernel sources (posebridge.kernel_cache).

The expectations are the module's contract (DEVELOPERS.md, "Numba kernels"): a changed kernel
source, or a module a kernel module imports, gives a new key; anything else, or the same
sources at another place, keeps it. They are checked on a copy of the package in a temporary
folder, edited there.
"""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
from pathlib import Path

import numba.core.config
import pytest

from posebridge.kernel_cache import (
    CACHE_ENV,
    PACKAGE,
    kernel_source_key,
    kernel_sources,
    use_kernel_cache,
)


@pytest.fixture
def package_copy(tmp_path: Path) -> Path:
    """A copy of the installed package's sources (no bytecode, no kernel cache)."""
    copy = tmp_path / "posebridge"
    shutil.copytree(PACKAGE, copy, ignore=shutil.ignore_patterns("__pycache__", "_data"))
    return copy


def _append(path: Path, line: str) -> None:
    path.write_text(path.read_text(encoding="utf-8") + line + "\n", encoding="utf-8")


def test_key_depends_on_the_sources_not_their_place(package_copy: Path) -> None:
    assert kernel_source_key(package_copy) == kernel_source_key(PACKAGE)
    assert kernel_source_key(package_copy) == kernel_source_key(package_copy)


def test_sources_are_kernel_modules_and_their_imports(package_copy: Path) -> None:
    names = {path.relative_to(package_copy).as_posix() for path in kernel_sources(package_copy)}
    # kernels that others inline (DEVELOPERS.md, "Numba kernels") and their callers
    assert {"kinematics/chain_kernels.py", "kinematics/fk.py", "geometry/distance.py"} <= names
    # the shape codes the clearance kernels read are imported from geometry/shapes.py
    assert "geometry/shapes.py" in names
    # the command line and the server define no kernel and none imports them
    assert "cli/main.py" not in names
    assert "api/app.py" not in names


def test_key_changes_with_a_kernel_source(package_copy: Path) -> None:
    before = kernel_source_key(package_copy)
    _append(package_copy / "kinematics" / "chain_kernels.py", "# an upgrade changed this kernel")
    assert kernel_source_key(package_copy) != before


def test_key_changes_with_a_module_a_kernel_imports(package_copy: Path) -> None:
    before = kernel_source_key(package_copy)
    _append(package_copy / "geometry" / "shapes.py", "# a constant a kernel reads changed")
    assert kernel_source_key(package_copy) != before


def test_key_stays_when_other_code_changes(package_copy: Path) -> None:
    before = kernel_source_key(package_copy)
    _append(package_copy / "cli" / "main.py", "# new command-line text")
    _append(package_copy / "api" / "app.py", "# a new route")
    assert kernel_source_key(package_copy) == before


def test_use_kernel_cache_sets_numba_folder_once(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    # restored after the test, so kernels compiled later in this process keep their cache
    monkeypatch.setattr(numba.core.config, "CACHE_DIR", numba.core.config.CACHE_DIR)
    monkeypatch.setenv(CACHE_ENV, str(tmp_path))
    folder = use_kernel_cache()
    assert folder == tmp_path / f"kernels-{kernel_source_key()}"
    assert os.environ[CACHE_ENV] == str(folder)
    assert str(folder) == numba.core.config.CACHE_DIR
    # a worker process inherits the chosen folder and keeps it (no nested folder)
    assert use_kernel_cache() == folder


def test_a_fresh_process_compiles_into_the_keyed_folder(tmp_path: Path) -> None:
    # numba reads NUMBA_CACHE_DIR when it is imported: importing posebridge first must set it
    script = "import posebridge, numba; print(numba.config.CACHE_DIR)"
    env = os.environ | {CACHE_ENV: str(tmp_path)}
    done = subprocess.run(
        [sys.executable, "-c", script], env=env, capture_output=True, text=True, check=True
    )
    assert done.stdout.strip() == str(tmp_path / f"kernels-{kernel_source_key()}")

"""Where numba keeps the compiled kernels: a folder named after a hash of the kernel sources.

Numba's disk cache (``cache=True``) checks only the source file of the function it
compiles. A kernel inlined from another file (``kinematics/chain_kernels.py``,
``geometry/distance.py``, ...) and a module constant read by a kernel are frozen into
the caller's cached code, so after an in-place upgrade that changes them the callers
would keep running the old code. The package therefore points numba's cache
(``NUMBA_CACHE_DIR``) at a folder named after :func:`kernel_source_key`: a hash of
every module that defines a kernel (a ``@nb.njit`` decorator in its source) and of
every posebridge module such a module imports (where inlined kernels and frozen
constants come from; for an imported package, also what its ``__init__`` imports).
An install whose kernel sources changed compiles afresh in a new folder; an unchanged
one reuses its cache.

The folder is ``kernels-<key>`` under ``$NUMBA_CACHE_DIR`` when the user set it (a
benchmark's empty cache, a CI cache), else under ``$XDG_CACHE_HOME/posebridge``
(``~/.cache/posebridge`` by default). :func:`use_kernel_cache` runs once when the
package is imported (``posebridge/__init__.py``), before any kernel is defined. It
sets ``NUMBA_CACHE_DIR`` in the process environment, so worker processes inherit
the folder (a name that already ends in this key is kept as it is).

This module is a leaf: it imports nothing of posebridge and not numba.
"""

from __future__ import annotations

import hashlib
import os
import re
import sys
from collections.abc import Mapping
from pathlib import Path

__all__ = [
    "CACHE_ENV",
    "PACKAGE",
    "kernel_cache_folder",
    "kernel_source_key",
    "kernel_sources",
    "use_kernel_cache",
]

CACHE_ENV = "NUMBA_CACHE_DIR"
"""The environment variable numba reads for its cache folder."""

PACKAGE = Path(__file__).resolve().parent
"""The installed package folder (``.../posebridge``)."""

_KERNEL_DECORATOR = re.compile(r"^[ \t]*@(?:nb|numba)\.(?:njit|jit)\b", re.MULTILINE)
_FROM_IMPORT = re.compile(
    r"^[ \t]*from[ \t]+(\w+(?:\.\w+)*)[ \t]+import[ \t]+(\([^)]*\)|[^\n#]*)", re.MULTILINE
)
_IMPORT = re.compile(r"^[ \t]*import[ \t]+(\w+(?:\.\w+)*)", re.MULTILINE)
_KEY_LENGTH = 16
_FOLDER_PREFIX = "kernels-"


def _module_file(package: Path, module: str) -> Path | None:
    """Return the source file of ``module`` (dotted, starting with the package's name), if any."""
    parts = module.split(".")
    if parts[0] != package.name:
        return None
    base = package.joinpath(*parts[1:])
    for candidate in (base.with_suffix(".py"), base / "__init__.py"):
        if candidate.is_file():
            return candidate
    return None


def _imported_files(package: Path, source: Path) -> set[Path]:
    """Return the package's source files that ``source`` imports (anywhere in its body).

    Read with a regular expression over absolute imports (``from pkg.mod import a, b``,
    ``import pkg.mod``): parsing the files would cost tens of milliseconds on every start.
    """
    found: set[Path] = set()
    text = source.read_text(encoding="utf-8")
    names = [m.group(1) for m in _IMPORT.finditer(text)]
    for m in _FROM_IMPORT.finditer(text):
        # ``from pkg import name``: name may be a submodule of pkg
        names.append(m.group(1))
        for alias in m.group(2).strip("()").split(","):
            words = alias.split()  # "name" or "name as other"
            if words and words[0].isidentifier():
                names.append(f"{m.group(1)}.{words[0]}")
    found.update(f for f in (_module_file(package, name) for name in names) if f is not None)
    return found


def kernel_sources(package: Path = PACKAGE) -> list[Path]:
    """Return the source files whose content decides the compiled kernels, sorted.

    Every module of ``package`` with a numba decorator in its source, every module of the
    package it imports, and what the ``__init__`` of an imported package imports.

    Parameters
    ----------
    package : Path
        The package folder (``.../posebridge``).

    Returns
    -------
    files : list of Path
        Sorted by their path relative to ``package``.
    """
    kernels = {
        path
        for path in package.rglob("*.py")
        if _KERNEL_DECORATOR.search(path.read_text(encoding="utf-8"))
    }
    files = set(kernels)
    for path in kernels:
        for imported in _imported_files(package, path):
            files.add(imported)
            if imported.name == "__init__.py":
                files.update(_imported_files(package, imported))
    return sorted(files, key=lambda path: path.relative_to(package).as_posix())


def kernel_source_key(package: Path = PACKAGE) -> str:
    """Return the hash that names the kernel cache folder of ``package``.

    SHA-256 over each file of :func:`kernel_sources` (its path relative to ``package``
    and its bytes), cut to 16 hex digits. It depends on the files' content and names
    only: the same sources at another place give the same key.
    """
    digest = hashlib.sha256()
    for path in kernel_sources(package):
        content = path.read_bytes()
        name = path.relative_to(package).as_posix().encode()
        digest.update(b"%d:%s\0%d:" % (len(name), name, len(content)))
        digest.update(content)
    return digest.hexdigest()[:_KEY_LENGTH]


def kernel_cache_folder(environ: Mapping[str, str], key: str) -> Path:
    """Return the cache folder for kernel sources of hash ``key``.

    ``kernels-<key>`` under ``environ["NUMBA_CACHE_DIR"]`` when set (the folder itself
    when its name already is ``kernels-<key>``: a worker started by a process that chose
    it), else under ``$XDG_CACHE_HOME/posebridge`` (``~/.cache/posebridge``).

    >>> kernel_cache_folder({"NUMBA_CACHE_DIR": "/tmp/c"}, "0123").as_posix()
    '/tmp/c/kernels-0123'
    >>> kernel_cache_folder({"NUMBA_CACHE_DIR": "/tmp/c/kernels-0123"}, "0123").as_posix()
    '/tmp/c/kernels-0123'
    >>> kernel_cache_folder({"XDG_CACHE_HOME": "/tmp/x"}, "0123").as_posix()
    '/tmp/x/posebridge/kernels-0123'
    """
    name = _FOLDER_PREFIX + key
    chosen = environ.get(CACHE_ENV)
    if chosen:
        base = Path(chosen)
        return base if base.name == name else base / name
    cache_home = environ.get("XDG_CACHE_HOME") or str(Path.home() / ".cache")
    return Path(cache_home) / "posebridge" / name


def use_kernel_cache(package: Path = PACKAGE) -> Path:
    """Point numba's disk cache at :func:`kernel_cache_folder` of this package's sources.

    Sets ``NUMBA_CACHE_DIR`` in ``os.environ`` (inherited by worker processes; numba reads
    it when imported) and, when numba is imported already, its ``config.CACHE_DIR``.
    Returns the folder (numba creates it when it first writes).
    """
    folder = kernel_cache_folder(os.environ, kernel_source_key(package))
    os.environ[CACHE_ENV] = str(folder)
    config = sys.modules.get("numba.core.config")
    if config is not None:
        config.CACHE_DIR = str(folder)  # type: ignore[attr-defined]
    return folder

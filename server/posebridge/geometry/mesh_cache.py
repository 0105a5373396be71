"""A disk cache of processed mesh results, keyed by file content and processing parameters.

Reading, cleaning, decimating and fitting a robot's meshes takes seconds; the
results depend only on the files' bytes and the parameters used, so they are
kept as ``.npz`` files named by the SHA-256 of ``(CACHE_VERSION, kind,
content hashes, parameters)`` (:func:`cache_key`). A second load of the same
files reads a few small arrays instead.

* Folder: ``<user data folder>/mesh-cache``
  (:func:`posebridge.resources.user_data_folder`), or any folder given to
  :class:`MeshCache` (tests pass a temporary one).
* Writes are atomic (temporary file in the same folder, fsync, rename), so a
  reader never sees half an entry; a folder that cannot be written is not an
  error (the result is simply not kept).
* Entries are read with ``allow_pickle=False``; an entry that cannot be read
  or lacks an expected array counts as a miss, is deleted, and is rebuilt by
  the caller. The arrays read back are validated by their users before any
  kernel sees them (:meth:`posebridge.geometry.meshes.TriangleMesh.from_processed`).
* Size: after a write, the oldest entries (by modification time; a hit
  refreshes it) are deleted while the folder holds more than ``max_bytes``.
"""

from __future__ import annotations

import contextlib
import hashlib
import os
import tempfile
import zipfile
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

import numpy as np
import numpy.typing as npt

from posebridge.resources import user_data_folder

__all__ = ["CACHE_VERSION", "DEFAULT_CACHE_BYTES", "MeshCache", "cache_key"]

CACHE_VERSION = "2"
"""Changes whenever the processing changes, so old entries are never read again."""
DEFAULT_CACHE_BYTES = 2 * 1024**3
"""Default size cap of the cache folder, bytes."""


def cache_key(kind: str, *parts: str) -> str:
    """SHA-256 hex key of a cache entry: the cache version, the kind of result and its inputs.

    Parameters
    ----------
    kind : str
        What is cached, e.g. ``"mesh"``, ``"display"``, ``"capsules"``.
    *parts : str
        Content hashes and processing parameters as text.

    Returns
    -------
    str
        64 hex digits.
    """
    digest = hashlib.sha256()
    for part in (CACHE_VERSION, kind, *parts):
        encoded = part.encode()
        digest.update(len(encoded).to_bytes(8, "little"))
        digest.update(encoded)
    return digest.hexdigest()


class MeshCache:
    """Processed mesh results on disk (module docstring).

    Parameters
    ----------
    folder : path-like
        Created on the first write.
    max_bytes : int, keyword-only
        Size cap of the folder.

    Attributes
    ----------
    folder : Path
    hits, misses, discarded : int
        Counts of entries found, not found, and found unreadable (deleted)
        since this object was made.
    """

    def __init__(self, folder: str | os.PathLike[str], *, max_bytes: int = DEFAULT_CACHE_BYTES):
        self.folder = Path(folder)
        self.max_bytes = int(max_bytes)
        self.hits = 0
        self.misses = 0
        self.discarded = 0

    @classmethod
    def default(cls) -> MeshCache:
        """Return the cache in the user data folder: ``<user data folder>/mesh-cache``."""
        return cls(user_data_folder() / "mesh-cache")

    def _path(self, key: str) -> Path:
        if len(key) != 64 or any(c not in "0123456789abcdef" for c in key):
            raise ValueError(f"cache key: expected 64 lower-case hex digits, got {key!r}")
        return self.folder / f"{key}.npz"

    def load(self, key: str, names: Sequence[str]) -> dict[str, npt.NDArray[np.generic]] | None:
        """Return the arrays of entry ``key``, or ``None`` on a miss or an unreadable entry.

        Parameters
        ----------
        key : str
            From :func:`cache_key`.
        names : sequence of str
            Arrays the entry must hold.

        Returns
        -------
        dict of str to array, or None
        """
        path = self._path(key)
        try:
            with np.load(path, allow_pickle=False) as entry:
                arrays = {name: np.array(entry[name]) for name in names}
        except FileNotFoundError:
            self.misses += 1
            return None
        except (OSError, ValueError, KeyError, EOFError, zipfile.BadZipFile):
            self.discarded += 1
            path.unlink(missing_ok=True)
            return None
        self.hits += 1
        with contextlib.suppress(OSError):
            os.utime(path)
        return arrays

    def store(self, key: str, arrays: Mapping[str, npt.ArrayLike]) -> None:
        """Write entry ``key`` atomically; nothing happens if the folder cannot be written."""
        path = self._path(key)
        try:
            self.folder.mkdir(parents=True, exist_ok=True)
            handle, temporary = tempfile.mkstemp(dir=self.folder, prefix=".tmp-", suffix=".npz")
            try:
                with os.fdopen(handle, "wb") as stream:
                    contents: dict[str, Any] = {name: np.asarray(v) for name, v in arrays.items()}
                    np.savez(stream, **contents)
                    stream.flush()
                    os.fsync(stream.fileno())
                os.replace(temporary, path)
            finally:
                Path(temporary).unlink(missing_ok=True)
        except OSError:
            return
        self._trim()

    def _trim(self) -> None:
        """Delete the oldest entries while the folder holds more than ``max_bytes``."""
        try:
            entries = [(p.stat().st_mtime, p.stat().st_size, p) for p in self.folder.glob("*.npz")]
        except OSError:
            return
        total = sum(size for _, size, _ in entries)
        for _, size, path in sorted(entries, key=lambda entry: entry[0]):
            if total <= self.max_bytes:
                break
            path.unlink(missing_ok=True)
            total -= size

    def clear(self) -> None:
        """Delete every entry."""
        for path in self.folder.glob("*.npz"):
            path.unlink(missing_ok=True)

"""The cell a server works on: read, replaced or edited under a content-version check.

A server started with a cell file reads and saves that file
(:func:`posebridge.cell.files.save_cell`: atomic, with a ``.bak`` of the
previous version). Without one it works on the bundled demo cell held in
memory: edits are kept for the life of the server and never written to the
package's own files.

Every change names the content version (ETag, :func:`posebridge.cell.files.cell_etag`)
it was made from; a change made from an older version is refused with
:class:`~posebridge.cell.files.CellConflictError`, so two pages editing the
same cell never overwrite each other silently. Changes are serialised by a
lock (``save_cell`` itself does not make check-and-rename one step).
Temporary files of saves that were killed are removed when the store is made
(server start).
"""

from __future__ import annotations

import logging
import threading
from collections.abc import Callable
from dataclasses import dataclass, field
from functools import cached_property
from pathlib import Path

from posebridge.api.result_memo import ResultMemo
from posebridge.cell.clearance import clearance_scene
from posebridge.cell.files import (
    CellConflictError,
    cell_etag,
    load_cell,
    remove_leftover_temporaries,
    save_cell,
)
from posebridge.cell.mesh_fixtures import MeshFixtureLoader
from posebridge.cell.model import Cell, CellFileError, validate_cell
from posebridge.cell.scene import Scene, resolve_scene
from posebridge.geometry.clearance import ClearanceScene
from posebridge.geometry.mesh_cache import MeshCache
from posebridge.resources import data_folder
from posebridge.robot.errors import ChainChoiceError

__all__ = ["DEMO_CELL_FILE", "CellSnapshot", "CellStore", "snapshot_of"]

_log = logging.getLogger(__name__)

DEMO_CELL_FILE = "demo-cell.json"
"""The bundled demo cell in the robots folder."""


@dataclass(frozen=True, eq=False)
class CellSnapshot:
    """One content version of the cell and its resolved scene.

    Attributes
    ----------
    cell : Cell
    etag : str
        Content version (SHA-256 of the canonical JSON).
    scene : Scene
        The cell resolved into world-frame SI arrays.
    path : Path or None
        The cell file, or None for the in-memory demo cell.
    memo : ResultMemo
        Finished joint maps and target checks of this version, for the next asker.
    """

    cell: Cell
    etag: str
    scene: Scene
    path: Path | None
    memo: ResultMemo = field(default_factory=ResultMemo, repr=False)

    @cached_property
    def clearance(self) -> ClearanceScene:
        """The scene's arm, obstacles and pairs for clearance queries (built on first use)."""
        return clearance_scene(self.scene)


def snapshot_of(
    cell: Cell,
    path: Path | None,
    mesh_loader: MeshFixtureLoader,
    previous: CellSnapshot | None = None,
) -> CellSnapshot:
    """Resolve the cell into a snapshot (file names relative to ``path``).

    The previous snapshot's robot is kept when the robot entry is unchanged (a
    robot with meshes is not read again on every edit).
    """
    robot = (
        previous.scene.robot if previous is not None and previous.cell.robot == cell.robot else None
    )
    return CellSnapshot(
        cell=cell,
        etag=cell_etag(cell),
        scene=resolve_scene(cell, path, robot=robot, mesh_loader=mesh_loader),
        path=path,
    )


class CellStore:
    """The server's cell, with content-version checked changes.

    Parameters
    ----------
    path : Path, optional
        Cell file to read and save; the bundled demo cell in memory if omitted.
    """

    def __init__(self, path: Path | None) -> None:
        self._path = None if path is None else Path(path)
        self._lock = threading.Lock()
        if self._path is not None:
            for leftover in remove_leftover_temporaries(self._path):
                _log.warning("removed %s, left by a save that was interrupted", leftover)
        self._snapshot: CellSnapshot | None = None
        self._mtime_ns: int | None = None
        self.mesh_loader = MeshFixtureLoader(MeshCache.default())
        """Reads the mesh fixtures' files once and keeps them across edits."""

    @property
    def path(self) -> Path | None:
        """The cell file, or None for the in-memory demo cell."""
        return self._path

    def _file_mtime(self) -> int | None:
        if self._path is None:
            return None
        try:
            return self._path.stat().st_mtime_ns
        except OSError:
            return None

    def _snapshot_of(self, cell: Cell, previous: CellSnapshot | None = None) -> CellSnapshot:
        return snapshot_of(cell, self._path, self.mesh_loader, previous)

    def read(self) -> CellSnapshot:
        """Return the current cell; the file is read again when it changed on disk.

        Raises
        ------
        CellFileError
            The file cannot be read or is not a valid cell.
        """
        with self._lock:
            return self._read_locked()

    def _read_locked(self) -> CellSnapshot:
        mtime = self._file_mtime()
        if self._snapshot is not None and (self._path is None or mtime == self._mtime_ns):
            return self._snapshot
        source = data_folder("robots") / DEMO_CELL_FILE if self._path is None else self._path
        self._snapshot = self._snapshot_of(load_cell(source))
        self._mtime_ns = mtime
        return self._snapshot

    def chain_choice(self) -> tuple[Cell, str, ChainChoiceError] | None:
        """Return what a chain-end choice needs, or None when the cell loads.

        The cell as written, its content version and the error listing the leaf links, when
        the cell's URDF robot cannot be loaded until its chain end is chosen.

        Raises
        ------
        CellFileError
            The cell cannot be read for another reason.
        """
        try:
            self.read()
        except CellFileError as error:
            cause = error.__cause__
            if self._path is None or not isinstance(cause, ChainChoiceError):
                raise
            written = load_cell(self._path)
            return written, cell_etag(written), cause
        return None

    def choose_chain_end(self, to_link: str, expected_etag: str) -> CellSnapshot:
        """Set the robot's ``to_link`` in the cell file at content version ``expected_etag``.

        The file is read as written (its robot need not load, :meth:`chain_choice`).

        Raises
        ------
        CellConflictError
            The file has another content version now, or there is no cell file.
        CellFileError
            The robot does not load with that chain end either.
        CellSaveError
            The file cannot be written; it is then unchanged.
        """
        with self._lock:
            if self._path is None:
                raise CellConflictError("demo cell", expected_etag, None)
            written = load_cell(self._path)
            etag = cell_etag(written)
            if etag != expected_etag:
                raise CellConflictError(str(self._path), expected_etag, etag)
            robot = written.robot.model_copy(update={"to_link": to_link})
            edited = validate_cell(
                written.model_copy(update={"robot": robot}).model_dump(
                    mode="json", exclude_none=True
                )
            )
            snapshot = self._snapshot_of(edited)
            save_cell(edited, self._path, expected_etag=expected_etag)
            self._mtime_ns = self._file_mtime()
            self._snapshot = snapshot
            return snapshot

    def replace(self, cell: Cell, expected_etag: str) -> CellSnapshot:
        """Replace the whole cell, if it is still at content version ``expected_etag``.

        Raises
        ------
        CellConflictError
            The cell has another content version now (edited elsewhere).
        CellFileError
            The new cell is invalid (its robot cannot be loaded, joint counts).
        CellSaveError
            The file cannot be written (read-only, no space...); it is then unchanged.
        """
        return self.edit(lambda _: cell, expected_etag)

    def edit(self, change: Callable[[Cell], Cell], expected_etag: str) -> CellSnapshot:
        """Apply ``change`` to the cell at content version ``expected_etag`` and keep the result.

        ``change`` gets the current cell and returns the edited one (it is
        validated again). Errors as :meth:`replace`; ``KeyError`` and
        ``ValueError`` raised by ``change`` pass through unchanged.
        """
        with self._lock:
            current = self._read_locked()
            if current.etag != expected_etag:
                raise CellConflictError(str(self._path or "demo cell"), expected_etag, current.etag)
            edited = validate_cell(change(current.cell).model_dump(mode="json", exclude_none=True))
            snapshot = self._snapshot_of(edited, current)
            if self._path is not None:
                save_cell(edited, self._path, expected_etag=expected_etag)
                self._mtime_ns = self._file_mtime()
            self._snapshot = snapshot
            return snapshot

"""Mesh fixtures: reading a cell's mesh files, with their length units, for the scene.

A mesh fixture names a file relative to the cell file and the file's length
unit (:class:`~posebridge.cell.model.MeshFixture`). Files are read by the
mesh layer (:func:`posebridge.geometry.mesh_files.load_mesh_file`: trimesh,
size and triangle caps, hostile files refused, never modified).

**Units.** STL, OBJ and PLY state no unit. When the fixture gives none,
millimetres (the cell's own unit) are assumed, unless the file's bounding box
is implausible in millimetres and plausible in another unit
(:func:`posebridge.geometry.mesh_files.suggest_length_unit`): then the
fixture is refused with the unit to give, so a file exported in metres never
becomes a robot-sized speck silently. glTF/GLB, COLLADA and STEP state
their unit, which is used when the fixture gives none.

**Reuse.** A :class:`MeshFixtureLoader` keeps the meshes it read by file
(resolved path, size, modification time, unit), so resolving the same cell
again after an edit reuses the mesh objects, and with them their
bounding-volume hierarchies; the dashboard's cell store holds one loader for
the life of the server. A changed file is read again.
"""

from __future__ import annotations

import threading
from collections import OrderedDict
from pathlib import Path

import numpy as np

from posebridge.cell.model import Cell, CellFileError, MeshFixture
from posebridge.geometry.errors import MeshFileError
from posebridge.geometry.mesh_cache import MeshCache
from posebridge.geometry.mesh_files import (
    LENGTH_UNITS,
    PLAUSIBLE_SIZE_M,
    MeshLimits,
    load_mesh_file,
    suggest_length_unit,
)
from posebridge.geometry.meshes import TriangleMesh

__all__ = ["MAX_KEPT_MESHES", "UNITLESS_SUFFIXES", "MeshFixtureLoader", "mesh_fixture_path"]

UNITLESS_SUFFIXES = (".stl", ".obj", ".ply")
"""Mesh formats that state no length unit."""
MAX_KEPT_MESHES = 32
"""Meshes a loader keeps in memory (the least recently used go first)."""


def mesh_fixture_path(fixture: MeshFixture, cell_path: Path | None, where: str) -> Path:
    """Return the mesh file of ``fixture``: absolute, or relative to the cell file's folder.

    Raises
    ------
    CellFileError
        A relative file without a cell file to resolve it against.
    """
    file = Path(fixture.file)
    if file.is_absolute():
        return file
    if cell_path is None:
        raise CellFileError(
            [
                f"{where}.file: relative path {fixture.file!r} needs the cell file's folder; "
                "give cell_path or an absolute path"
            ]
        )
    return Path(cell_path).parent / file


class MeshFixtureLoader:
    """Reads mesh fixture files and keeps the meshes it read (module docstring).

    Parameters
    ----------
    cache : MeshCache, optional
        Disk cache of cleaned meshes (none if omitted).
    limits : MeshLimits, optional
        Size and triangle caps (:class:`~posebridge.geometry.mesh_files.MeshLimits` defaults).
    """

    def __init__(self, cache: MeshCache | None = None, limits: MeshLimits | None = None) -> None:
        self.cache = cache
        self.limits = limits or MeshLimits()
        self._kept: OrderedDict[tuple[str, int, int, str], TriangleMesh] = OrderedDict()
        self._lock = threading.Lock()

    def _read(self, file: Path, unit: str, fixture: MeshFixture, where: str) -> TriangleMesh:
        try:
            status = file.stat()
        except OSError as e:
            raise CellFileError(
                [f"{where}.file: {fixture.file!r} cannot be read ({e.strerror or e})"]
            ) from e
        key = (str(file.resolve()), status.st_size, status.st_mtime_ns, unit)
        with self._lock:
            mesh = self._kept.get(key)
            if mesh is not None:
                self._kept.move_to_end(key)
                return mesh
        try:
            mesh = load_mesh_file(file, unit=unit, limits=self.limits, cache=self.cache)  # type: ignore[arg-type]
        except MeshFileError as e:
            raise CellFileError([f"{where}.file: {e}"]) from e
        with self._lock:
            self._kept[key] = mesh
            while len(self._kept) > MAX_KEPT_MESHES:
                self._kept.popitem(last=False)
        return mesh

    def load(self, fixture: MeshFixture, cell_path: Path | None, where: str) -> TriangleMesh:
        """Return the mesh of one fixture in metres, in the fixture frame.

        Parameters
        ----------
        fixture : MeshFixture
        cell_path : Path or None
            The cell file (relative files are resolved against its folder).
        where : str
            JSON path of the fixture, e.g. ``"fixtures[3]"``, for messages.

        Returns
        -------
        TriangleMesh

        Raises
        ------
        CellFileError
            The file cannot be read or is refused, or its unit is missing and
            its size says it is not millimetres.
        """
        file = mesh_fixture_path(fixture, cell_path, where)
        suffix = file.suffix.lower()
        if fixture.unit is not None:
            return self._read(file, fixture.unit, fixture, where)
        if suffix not in UNITLESS_SUFFIXES:
            return self._read(file, "declared", fixture, where)
        mesh = self._read(file, "mm", fixture, where)
        side_m = float(np.ptp(mesh.bounds, axis=0).max())
        lo, hi = PLAUSIBLE_SIZE_M
        if not lo <= side_m <= hi:
            side_in_file = side_m / LENGTH_UNITS["mm"]
            suggested = suggest_length_unit(side_in_file)
            if suggested is not None and suggested != "mm":
                size_in_file = f"{side_in_file:.4g}"
                raise CellFileError(
                    [
                        f"{where}.unit: required for {fixture.file!r}: its largest side is "
                        f"{size_in_file} file units, {side_m * 1000.0:.4g} mm if they were "
                        f"millimetres; as {suggested} it would be "
                        f"{side_in_file * LENGTH_UNITS[suggested]:.4g} m. Give "
                        f'"unit": "{suggested}" (or "mm", "m", "inch")'
                    ]
                )
        return mesh

    def load_cell(self, cell: Cell, cell_path: Path | None) -> dict[int, TriangleMesh]:
        """Return the meshes of every mesh fixture of ``cell``, by fixture index.

        Raises
        ------
        CellFileError
            Every mesh fixture that cannot be loaded, each with its JSON path.
        """
        meshes: dict[int, TriangleMesh] = {}
        problems: list[str] = []
        for i, fixture in enumerate(cell.fixtures):
            if isinstance(fixture, MeshFixture):
                try:
                    meshes[i] = self.load(fixture, cell_path, f"fixtures[{i}]")
                except CellFileError as e:
                    problems += e.problems
        if problems:
            raise CellFileError(problems)
        return meshes

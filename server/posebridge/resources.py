"""Locations of the bundled data folders (static/, templates/, robots/).

In an installed wheel they live in ``posebridge/_data/``; in an editable
install or a source checkout they are the top-level folders of the repository.
"""

from __future__ import annotations

import os
import shutil
from pathlib import Path

__all__ = ["DEMO_FILES", "data_folder", "demo_working_folder", "user_data_folder"]

DEMO_FILES = (
    "demo-cell.json",
    "demo-log.csv",
    "demo-machine-cell.json",
    "meshes/machine-housing.stl",
    "meshes/conveyor.stl",
    "meshes/fence.stl",
)
"""The bundled demo cells, the press cell's invented controller log and the machine cell's
generated mesh files (paths relative to the robots folder)."""

_PACKAGE = Path(__file__).resolve().parent


def data_folder(name: str) -> Path:
    """Return the bundled folder ``name`` (``"static"``, ``"templates"`` or ``"robots"``).

    Returns the packaged copy if present, else the repository folder.
    """
    packaged = _PACKAGE / "_data" / name
    if packaged.is_dir():
        return packaged
    repository = _PACKAGE.parent.parent / name
    if repository.is_dir():
        return repository
    raise FileNotFoundError(f"bundled folder {name!r} not found in {packaged} or {repository}")


def user_data_folder() -> Path:
    """Posebridge's folder for the user's own data (not created here).

    ``$XDG_DATA_HOME/posebridge`` (``~/.local/share/posebridge`` by default):
    the demo working copy, the mesh cache.
    """
    base = Path(os.environ.get("XDG_DATA_HOME") or Path.home() / ".local" / "share")
    return base / "posebridge"


def demo_working_folder() -> Path:
    """Return a writable folder holding a working copy of the demo files, created on first use.

    ``$XDG_DATA_HOME/posebridge/demo`` (``~/.local/share/posebridge/demo`` by
    default). Edits made in the dashboard go to these copies, never to the
    bundled originals; a missing file is copied again, an existing one is kept
    (delete it to start afresh).
    """
    folder = user_data_folder() / "demo"
    folder.mkdir(parents=True, exist_ok=True)
    for name in DEMO_FILES:
        copy = folder / name
        if not copy.exists():
            copy.parent.mkdir(parents=True, exist_ok=True)
            shutil.copyfile(data_folder("robots") / name, copy)
    return folder

"""Locations of the bundled data folders (static/, templates/, robots/).

In an installed wheel they live in ``posebridge/_data/``; in an editable
install or a source checkout they are the top-level folders of the repository.
"""

from __future__ import annotations

from pathlib import Path

__all__ = ["data_folder"]

_PACKAGE = Path(__file__).resolve().parent


def data_folder(name: str) -> Path:
    """The bundled folder ``name`` (``"static"``, ``"templates"`` or ``"robots"``).

    Returns the packaged copy if present, else the repository folder.
    """
    packaged = _PACKAGE / "_data" / name
    if packaged.is_dir():
        return packaged
    repository = _PACKAGE.parent.parent / name
    if repository.is_dir():
        return repository
    raise FileNotFoundError(f"bundled folder {name!r} not found in {packaged} or {repository}")

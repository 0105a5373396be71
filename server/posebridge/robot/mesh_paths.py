"""Where a robot description's mesh reference points: ``package://``, ``file://`` and plain paths.

A URDF names its meshes as ``package://PKG/rest``, ``file:///absolute/path``,
``file://relative/path`` or a plain (relative or absolute) path. ROS finds
packages through its own environment; posebridge looks, in this order:

* ``package://PKG/rest``: ``A/rest`` for every ancestor folder ``A`` of the
  URDF's folder (the folder itself included) whose name is ``PKG``; then, for
  every folder ``F`` the user listed (CLI ``--mesh-folder``, overlay or cell
  field ``mesh_folders``), ``F/rest`` if ``F`` is named ``PKG``, else
  ``F/PKG/rest``; finally ``rest`` relative to the URDF's folder and its
  parent (a description copied out of its package with its meshes beside it).
* ``file://`` and plain paths: absolute ones as they are; relative ones
  relative to the URDF's folder, then to every listed folder.

Only existing regular files are returned; the first match wins. Nothing is
read here.
"""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path
from urllib.parse import unquote

__all__ = ["resolve_mesh_path"]


def _candidates(filename: str, base_folder: Path | None, folders: Sequence[Path]) -> list[Path]:
    """Files to try for one reference, in order (module docstring)."""
    bases = [] if base_folder is None else [base_folder]
    if filename.startswith("package://"):
        package, _, rest = filename[len("package://") :].partition("/")
        found: list[Path] = []
        if base_folder is not None:
            found += [a / rest for a in (base_folder, *base_folder.parents) if a.name == package]
        found += [(f / rest) if f.name == package else (f / package / rest) for f in folders]
        if base_folder is not None:
            found += [base_folder / rest, base_folder.parent / rest]
        return found
    path_text = unquote(filename[len("file://") :]) if filename.startswith("file://") else filename
    path = Path(path_text)
    if path.is_absolute():
        return [path]
    return [b / path for b in (*bases, *folders)]


def resolve_mesh_path(
    filename: str, base_folder: Path | None, folders: Sequence[Path] = ()
) -> tuple[Path | None, list[Path]]:
    """Return the file a mesh reference names, and every place tried.

    Parameters
    ----------
    filename : str
        The reference as written in the description.
    base_folder : Path or None
        The description's folder (``None`` for text without a file).
    folders : sequence of Path
        Folders the user listed, in order.

    Returns
    -------
    path : Path or None
        The first existing regular file, or ``None``.
    tried : list of Path
        Every candidate, in order (for the note when nothing was found).
    """
    tried = _candidates(filename.strip(), base_folder, folders)
    for candidate in tried:
        if candidate.is_file():
            return candidate, tried
    return None, tried

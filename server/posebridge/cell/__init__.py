"""The work cell: file model, safe saving, and resolution into SI arrays.

* :mod:`posebridge.cell.model` — pydantic models of the cell file and their validation.
* :mod:`posebridge.cell.files` — load, migrate, atomic save, content versions (ETags).
* :mod:`posebridge.cell.scene` — a cell resolved into world-frame SI arrays.
* :mod:`posebridge.cell.schema` — the JSON Schema of the cell file.
"""

from posebridge.cell.files import CellConflictError, cell_etag, load_cell, save_cell
from posebridge.cell.model import CELL_SCHEMA_VERSION, Cell, CellFileError, validate_cell
from posebridge.cell.scene import Scene, resolve_scene
from posebridge.cell.schema import cell_json_schema

__all__ = [
    "CELL_SCHEMA_VERSION",
    "Cell",
    "CellConflictError",
    "CellFileError",
    "Scene",
    "cell_etag",
    "cell_json_schema",
    "load_cell",
    "resolve_scene",
    "save_cell",
    "validate_cell",
]

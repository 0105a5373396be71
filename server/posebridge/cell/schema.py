"""JSON Schema of the cell file, generated from the pydantic models.

The schema covers the shape of a cell file: fields, types, bounds, list sizes,
the choice of exactly one robot source and one waypoint kind, and which speed a
motion needs. It cannot express the checks that need the whole file: unique
names, references between fixtures, targets and waypoints, parent cycles, and
finiteness (JSON itself has no NaN or infinity); :func:`posebridge.cell.model.validate_cell`
applies those.
"""

from __future__ import annotations

from typing import Any

from posebridge.cell.model import CELL_SCHEMA_VERSION, Cell

__all__ = ["CELL_SCHEMA_ID", "cell_json_schema"]

CELL_SCHEMA_ID = f"https://posebridge.invalid/schema/cell-v{CELL_SCHEMA_VERSION}.json"
"""Identifier of the cell schema (a name, not a download address)."""


def cell_json_schema() -> dict[str, Any]:
    """Return the JSON Schema (draft 2020-12) of cell files of the current schema version."""
    schema = Cell.model_json_schema(mode="validation")
    return {
        "$schema": "https://json-schema.org/draft/2020-12/schema",
        "$id": CELL_SCHEMA_ID,
        **schema,
        "description": (
            f"posebridge cell file, schema version {CELL_SCHEMA_VERSION}. "
            "Lengths in mm, angles in degrees; rpy_deg is roll-pitch-yaw about fixed "
            "X, then Y, then Z (R = Rz(yaw) Ry(pitch) Rx(roll))."
        ),
    }

"""Mesh fixtures over HTTP: their triangles for drawing, and uploading a file as a new fixture.

Vertices are in millimetres in the fixture's own frame; the page places them
with the fixture's world pose from the cell drawing (``scene.shapes``).
"""

from __future__ import annotations

import re
from typing import Annotated, Literal

from pydantic import BaseModel, ConfigDict, Field

from posebridge.cell.model import MAX_COORDINATE_MM, MESH_FILE_SUFFIXES

__all__ = ["MAX_UPLOAD_BYTES", "MeshDrawing", "MeshUpload"]

MAX_UPLOAD_BYTES = 10 * 1024**2
"""Largest uploaded mesh file, bytes (10 MiB; as base64 it stays under the owner's body cap)."""

_FILE_NAME = r"(?i)^[^/\\\x00-\x1f\x7f]{1,200}\.(" + "|".join(MESH_FILE_SUFFIXES) + r")$"
FILE_NAME_PATTERN = re.compile(_FILE_NAME)

Coordinate = Annotated[
    float, Field(allow_inf_nan=False, ge=-MAX_COORDINATE_MM, le=MAX_COORDINATE_MM)
]
Angle = Annotated[float, Field(allow_inf_nan=False, ge=-360.0, le=360.0)]


class MeshDrawing(BaseModel):
    """A mesh fixture's triangles for drawing, decimated to a budget, in its own frame (mm)."""

    model_config = ConfigDict(extra="forbid")

    name: str = Field(description="The fixture.")
    mesh_version: str = Field(description="Content version (as in the cell drawing's shapes).")
    source_triangles: int = Field(description="Triangles of the mesh the clearance uses.")
    vertices_mm: list[list[float]] = Field(description="Vertices in the fixture frame, mm.")
    faces: list[list[int]] = Field(description="Triangles as three vertex indices each.")


class MeshUpload(BaseModel):
    """A mesh file to add as a new fixture: its name, its bytes (base64), unit and where to put it."""

    model_config = ConfigDict(extra="forbid", strict=True)

    file_name: Annotated[str, Field(pattern=_FILE_NAME)] = Field(
        description="The file's own name (its ending says the format); stored under a safe "
        "name derived from it and the content."
    )
    data_base64: Annotated[str, Field(min_length=4, max_length=(MAX_UPLOAD_BYTES * 4) // 3 + 8)] = (
        Field(description=f"The file's bytes, base64; at most {MAX_UPLOAD_BYTES:,} bytes.")
    )
    unit: Literal["mm", "m", "inch"] | None = Field(
        default=None,
        description="The file's length unit; omitted: the unit the file states, else mm (a "
        "file whose size says otherwise is refused naming the unit).",
    )
    position_mm: Annotated[list[Coordinate], Field(min_length=3, max_length=3)] = Field(
        description="World point where the bottom centre of the mesh's bounding box goes."
    )
    rpy_deg: Annotated[list[Angle], Field(min_length=3, max_length=3)] = Field(
        default=[0.0, 0.0, 0.0],
        description="Fixture orientation. Roll, pitch, yaw in degrees about fixed X, Y, Z.",
    )

"""Joint-space obstacle maps over two or three joints, computed as jobs for the current cell.

Grid values are flat lists in C order over the grid shape: the first chosen
joint varies slowest. Joint values are degrees for revolute joints and
millimetres for prismatic joints, as everywhere at this interface.
"""

from __future__ import annotations

from typing import Annotated, Literal

from pydantic import BaseModel, ConfigDict, Field

from posebridge.api.schemas.kinematics import MAX_JOINTS, Finite, WholeNumber

__all__ = [
    "MAX_MAP_CELLS_2",
    "MAX_MAP_CELLS_3",
    "MAX_SECTION_CELLS",
    "JointMapRequest",
    "ReachSectionRequest",
]

MAX_MAP_CELLS_2 = 256 * 256
"""Most cells of a two-joint map computed by the server."""
MAX_MAP_CELLS_3 = 48 * 48 * 48
"""Most cells of a three-joint map computed by the server."""

MAX_SECTION_CELLS = 100 * 100
"""Most cells of a reach section computed by the server."""

_JOINTS = "Revolute joints in degrees, prismatic joints in millimetres, in the robot's joint order."


class JointMapRequest(BaseModel):
    """A joint-space map over two or three joints of the cell's robot."""

    model_config = ConfigDict(extra="forbid", strict=True)

    joints: Annotated[
        list[Annotated[WholeNumber, Field(ge=0, lt=MAX_JOINTS)]], Field(min_length=2, max_length=3)
    ] = Field(
        description="Chosen joint indices (0-based), distinct, into the cell's joint vector: "
        "the robot's joints, then the cell's external axes (track, turntables); at most one "
        "external axis."
    )
    hold_deg: Annotated[list[Finite], Field(min_length=1, max_length=MAX_JOINTS)] = Field(
        description="The configuration the map is a slice through; the chosen joints are swept. "
        + _JOINTS
        + " The cell's external axes may follow (track in mm, turntables in deg); without "
        "them they are at the cell's values."
    )
    resolution: WholeNumber = Field(
        default=96,
        ge=2,
        le=256,
        description="Cells per axis; at most 256 for two joints and 48 for three.",
    )
    threshold_mm: float = Field(
        default=0.0,
        ge=0.0,
        le=1000.0,
        allow_inf_nan=False,
        description="A clearance below this counts as a collision, mm.",
    )


class ReachSectionRequest(BaseModel):
    """A slice of the robot's reach through the cell, for the plan or the elevation."""

    model_config = ConfigDict(extra="forbid", strict=True)

    axis: Literal["z", "y"] = Field(
        description="Normal of the slice: z for a horizontal slice (plan), y for a vertical "
        "slice seen from the side (elevation)."
    )
    value_mm: float = Field(
        ge=-100_000.0,
        le=100_000.0,
        allow_inf_nan=False,
        description="World coordinate of the slice.",
    )
    voxel_mm: float = Field(
        default=100.0, ge=20.0, le=1000.0, allow_inf_nan=False, description="Cell size."
    )

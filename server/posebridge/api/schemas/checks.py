"""Requests of the cell checks: one pose, a controller log, base placement.

The answers are the result models of the checks themselves
(:mod:`posebridge.results.cell`, :mod:`posebridge.results.path_check` and
:mod:`posebridge.results.placement`),
shared with the command line.
"""

from __future__ import annotations

from typing import Annotated, Literal

from pydantic import BaseModel, ConfigDict, Field

from posebridge.api.schemas.kinematics import MAX_JOINTS, Finite, WholeNumber

__all__ = [
    "MAX_LOG_CHARS",
    "MAX_LOG_ROWS",
    "MAX_PLACEMENT_CANDIDATES",
    "LogDiagnosisRequest",
    "PlacementRequest",
    "PoseDiagnosisRequest",
]

MAX_LOG_CHARS = 5_000_000
"""Longest log text accepted (characters)."""
MAX_LOG_ROWS = 50_000
"""Most log rows diagnosed in one request."""
MAX_PLACEMENT_CANDIDATES = 20_000
"""Most candidate base poses of one placement search."""


class PoseDiagnosisRequest(BaseModel):
    """One joint configuration to diagnose in the cell."""

    model_config = ConfigDict(extra="forbid", strict=True)

    joints_deg: Annotated[list[Finite], Field(min_length=1, max_length=MAX_JOINTS)] = Field(
        description="Joint values: revolute joints in degrees, prismatic joints in millimetres."
    )


class LogDiagnosisRequest(BaseModel):
    """A controller log (CSV text) to diagnose row by row in the cell."""

    model_config = ConfigDict(extra="forbid", strict=True)

    csv: str = Field(
        min_length=1,
        max_length=MAX_LOG_CHARS,
        description="CSV text: a header of joint names (optionally time_s), then one row of "
        "joint values per line (deg; mm for prismatic joints).",
    )
    source: str = Field(default="pasted log", max_length=200, description="Name shown in messages.")


class PlacementRequest(BaseModel):
    """A base placement search around the current base."""

    model_config = ConfigDict(extra="forbid", strict=True)

    half_width_mm: float = Field(
        default=1000.0,
        gt=0.0,
        le=10_000.0,
        allow_inf_nan=False,
        description="Candidate foot positions within this distance of the current one, in x and y.",
    )
    count: WholeNumber = Field(
        default=21, ge=1, le=101, description="Positions along x and along y."
    )
    yaw_count: WholeNumber = Field(
        default=8, ge=1, le=72, description="Yaws evenly around the turn."
    )
    heights_mm: (
        Annotated[
            list[Annotated[float, Field(ge=0.0, le=5000.0, allow_inf_nan=False)]],
            Field(min_length=1, max_length=10),
        ]
        | None
    ) = Field(default=None, description="Pedestal heights; the current one if omitted.")
    top: WholeNumber = Field(default=10, ge=1, le=50, description="Candidates listed with details.")
    search: Literal["auto", "base", "rail", "table"] = Field(
        default="auto",
        description="What to move: the robot's base, the track's rail line (count offsets "
        "across the travel within half_width_mm x yaw_count directions, each target reached "
        "from its own track position; heights_mm unused), or a turntable (count x count "
        "positions of its axis within half_width_mm of the current one, each target on it "
        "reached at its own table angle; yaw_count and heights_mm unused); auto: rail for a "
        "cell with a track, else table for a cell whose targets ride a turntable, else base.",
    )
    table: Annotated[str, Field(min_length=1, max_length=200)] | None = Field(
        default=None,
        description="Table search: the turntable to move (default: the first carrying a target).",
    )
    collision_margin_mm: float = Field(default=0.0, ge=0.0, le=500.0, allow_inf_nan=False)
    clearance_goal_mm: float = Field(default=50.0, ge=0.0, le=1000.0, allow_inf_nan=False)

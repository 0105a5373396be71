"""JSON-ready results of base placement.

These pydantic models are the boundary shared by the command line and the
HTTP API: millimetres, degrees and seconds, with the unit in every field
name (prismatic joint values are millimetres inside ``joints_deg`` lists,
as everywhere at the boundary). The computations in this package work in
SI units and convert through :mod:`posebridge.units` when they build these
models.

Roles:

* :class:`PlacementReport` — ranked base poses and the score grid
  (:func:`posebridge.planning.placement.search_base_placement`).

The path check's, the joint move's, the solution sequence's and the motion export's models
are in :mod:`posebridge.results.path_check`, :mod:`posebridge.results.joint_plan`,
:mod:`posebridge.results.sequence` and :mod:`posebridge.results.motion_export`;
:mod:`posebridge.results.planning_text` renders these as plain-text tables for the CLI.
"""

from __future__ import annotations

from pydantic import BaseModel, ConfigDict, Field

__all__ = [
    "PlacementCandidateReport",
    "PlacementGridReport",
    "PlacementReport",
    "TargetPlacementReport",
]


class _Report(BaseModel):
    model_config = ConfigDict(extra="forbid", allow_inf_nan=False)


# --- base placement -----------------------------------------------------------------------


class TargetPlacementReport(_Report):
    """One target at one candidate base pose."""

    name: str
    reached: bool = Field(description="Reached on the candidate's branch, within limits and free.")
    reason: str
    joints_deg: list[float] | None
    min_margin_deg: float | None
    manipulability: float | None
    clearance_mm: float | None


class PlacementCandidateReport(_Report):
    """One candidate base pose, its score and its per-target details."""

    rank: int
    x_mm: float
    y_mm: float
    yaw_deg: float
    pedestal_height_mm: float
    score: float
    reach_fraction: float
    targets_reached: int
    branch: str
    min_margin_deg: float | None
    manipulability: float | None
    min_clearance_mm: float | None
    cycle_time_s: float | None = Field(
        description="Rest-to-rest estimate over the cell's paths (upper bound); null if a path "
        "waypoint is not reached."
    )
    blended_cycle_time_s: float | None = Field(
        default=None,
        description="Blended cycle time over the cell's paths with the base here (the paths "
        "sampled and timed as the path check does); only for the best-ranked few candidates "
        "(see cycle_time_note), null otherwise or if a path cannot be timed.",
    )
    targets: list[TargetPlacementReport]
    tie_rank: int = Field(
        default=0,
        description="Rank of the best candidate this one ties with (within score_noise); its "
        "own rank when it ties with no better one.",
    )


class PlacementGridReport(_Report):
    """The full score grid for a heatmap, shape (ny, nx, nyaw, nheights)."""

    x_mm: list[float]
    y_mm: list[float]
    yaw_deg: list[float]
    pedestal_height_mm: list[float]
    score: list[list[list[list[float]]]]
    reach_fraction: list[list[list[list[float]]]]


class PlacementReport(_Report):
    """Ranked base poses and the score grid."""

    robot: str
    targets: list[str]
    candidates_evaluated: int
    best: list[PlacementCandidateReport]
    grid: PlacementGridReport
    score_note: str
    cycle_time_note: str
    current_score: float | None = Field(description="Score of the cell's current base pose.")
    current_cycle_time_s: float | None = Field(
        default=None, description="Cycle time estimate at the current base pose, if on the grid."
    )
    score_words: str = Field(default="", description="The score explained in plain words.")
    score_noise: float = Field(
        default=0.0,
        description="Median score change over one grid step at equal reach: scores this close tie.",
    )
    speed_note: str = Field(
        default="",
        description="Set when the best candidate's cycle is slower than the current base's.",
    )
    robot_geometry_missing: str | None = Field(
        default=None,
        description="Set (a warning text) when the robot has no collision geometry: every "
        "clearance in this result is then meaningless.",
    )


# --- text tables --------------------------------------------------------------------------

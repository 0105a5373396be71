"""The planning package's domain exception."""

from __future__ import annotations

__all__ = ["PlanningInputError"]


class PlanningInputError(ValueError):
    """A planning request that cannot be used: bad path index, resolution, grid, limits or joint values."""

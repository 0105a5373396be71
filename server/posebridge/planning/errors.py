"""The planning package's domain exception, and the number checks that raise it."""

from __future__ import annotations

import math

__all__ = ["PlanningInputError", "check_non_negative", "check_positive"]


class PlanningInputError(ValueError):
    """A planning request that cannot be used: bad path index, resolution, grid, limits or joint values."""


def check_positive(name: str, value: float) -> None:
    """Refuse ``value`` unless it is a positive finite number (PlanningInputError naming ``name``)."""
    if not math.isfinite(value) or value <= 0.0:
        raise PlanningInputError(f"{name}: expected a positive finite number, got {value!r}")


def check_non_negative(name: str, value: float) -> None:
    """Refuse ``value`` unless it is a finite number >= 0 (PlanningInputError naming ``name``)."""
    if not math.isfinite(value) or value < 0.0:
        raise PlanningInputError(f"{name}: expected a finite number >= 0, got {value!r}")

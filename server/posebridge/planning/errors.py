"""The planning package's domain exception, and the number checks that raise it."""

from __future__ import annotations

from posebridge import errors
from posebridge.errors import InputError

__all__ = ["PlanningInputError", "check_non_negative", "check_positive"]


class PlanningInputError(InputError):
    """A planning request that cannot be used: bad path index, resolution, grid, limits or joint values."""


def check_positive(name: str, value: float) -> float:
    """Refuse ``value`` unless it is a positive finite number (PlanningInputError naming ``name``)."""
    return errors.check_positive(name, value, PlanningInputError)


def check_non_negative(name: str, value: float) -> float:
    """Refuse ``value`` unless it is a finite number >= 0 (PlanningInputError naming ``name``)."""
    return errors.check_positive(name, value, PlanningInputError, allow_zero=True)

"""External-axis values at the boundary: m/rad of the cell's track and turntables to mm/deg."""

from __future__ import annotations

import numpy as np
import numpy.typing as npt

from posebridge.cell.external_axes import ExternalAxes
from posebridge.units import FloatArray, deg_from_rad, mm_from_m

__all__ = ["external_user_from_si"]


def external_user_from_si(external: ExternalAxes, values: npt.ArrayLike) -> FloatArray:
    """External values from m/rad to mm/deg (track in mm, turntables in deg).

    Parameters
    ----------
    external : ExternalAxes
        The cell's ``m`` external axes (``prismatic`` tells the unit of each).
    values : array-like, shape (..., m)
        m for the track, rad for the turntables.

    Returns
    -------
    array, shape (..., m)
        mm for the track, deg for the turntables.
    """
    v = np.asarray(values, dtype=np.float64)
    return np.where(external.prismatic, mm_from_m(v), deg_from_rad(v))

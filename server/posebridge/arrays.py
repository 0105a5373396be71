"""Type aliases of the numpy arrays posebridge passes around (a leaf: imports only numpy).

Shapes are given in each function's docstring; these aliases name only the dtype.
"""

from __future__ import annotations

import numpy as np
import numpy.typing as npt

__all__ = ["BoolArray", "FloatArray", "IndexArray", "Int8Array", "Int16Array", "IntArray"]

FloatArray = npt.NDArray[np.float64]
BoolArray = npt.NDArray[np.bool_]
IntArray = npt.NDArray[np.int64]
IndexArray = npt.NDArray[np.intp]
"""Indices as numpy makes them (``np.flatnonzero``, ``argsort``)."""
Int8Array = npt.NDArray[np.int8]
"""Branch labels (+1, -1, 0) and kernel reason codes."""
Int16Array = npt.NDArray[np.int16]
"""Whole extra revolutions per joint."""

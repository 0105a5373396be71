"""Type aliases of the numpy arrays posebridge passes around (a leaf: imports only numpy).

Shapes are given in each function's docstring; these aliases name only the dtype.
:func:`read_only` and :func:`freeze_array_fields` make the arrays of immutable
models (robots, scenes) refuse writes.
"""

from __future__ import annotations

import dataclasses
from typing import Any, TypeVar

import numpy as np
import numpy.typing as npt

__all__ = [
    "BoolArray",
    "FloatArray",
    "IndexArray",
    "Int8Array",
    "Int16Array",
    "IntArray",
    "UInt8Array",
    "freeze_array_fields",
    "read_only",
    "writable_float_array",
]

_Array = TypeVar("_Array", bound=np.ndarray[Any, Any])

FloatArray = npt.NDArray[np.float64]
BoolArray = npt.NDArray[np.bool_]
IntArray = npt.NDArray[np.int64]
IndexArray = npt.NDArray[np.intp]
"""Indices as numpy makes them (``np.flatnonzero``, ``argsort``)."""
Int8Array = npt.NDArray[np.int8]
"""Branch labels (+1, -1, 0) and kernel reason codes."""
Int16Array = npt.NDArray[np.int16]
"""Whole extra revolutions per joint."""
UInt8Array = npt.NDArray[np.uint8]
"""8-bit pixels (PNG pictures of grid results)."""


def read_only(array: _Array) -> _Array:
    """``array`` itself if it refuses writes, else a view of it that does.

    Writing to the result raises ``ValueError``; the data are not copied, so
    a model that keeps the result must own ``array`` (every model here builds
    its arrays itself). numba types a read-only array apart from a writable
    one (``readonly array(float64, ...)``): a kernel argument should be
    read-only always or never, or the kernel is compiled twice.
    """
    if not array.flags.writeable:
        return array
    view = array.view()
    view.flags.writeable = False
    return view


def writable_float_array(value: npt.ArrayLike) -> FloatArray:
    """``value`` as a C-contiguous, writable float64 array, copied only when it is not one.

    The form every kernel entry point hands its callers' arrays to numba in:
    a read-only input (a robot's or a scene's array, a broadcast view) is
    copied, so the kernel sees one array type whatever the caller passed.
    """
    return np.require(value, dtype=np.float64, requirements=("C", "W", "E"))


def freeze_array_fields(instance: object) -> None:
    """Make every numpy array field of a frozen dataclass instance read-only (:func:`read_only`).

    Called from ``__post_init__``; fields holding other values are left alone.
    """
    for field in dataclasses.fields(instance):  # type: ignore[arg-type]
        value = getattr(instance, field.name)
        if isinstance(value, np.ndarray):
            object.__setattr__(instance, field.name, read_only(value))

"""The geometry package's exceptions (a module of its own so every geometry module can raise them)."""

from __future__ import annotations

from posebridge.errors import InputError

__all__ = ["GeometryInputError", "MeshFileError"]


class GeometryInputError(InputError):
    """A shape, pose or pair list of the wrong shape or with invalid values."""


class MeshFileError(GeometryInputError):
    """A mesh file (or mesh array) that cannot be used; the message names the file and the problem."""

"""The mesh files of the machine-tending demo cell, generated in code (all invented).

``robots/demo-machine-cell.json`` places ``pb-arm6`` in front of a machine
whose housing has a door opening and an inner table, beside a conveyor, with a
fence behind it. Its three mesh files in ``robots/meshes/`` are written by
:func:`write_demo_meshes`; a test regenerates them and compares the bytes, so
the committed files are exactly this code's output::

    python -m posebridge.bench.demo_meshes robots/meshes

* ``machine-housing.stl`` (millimetres, about 100k triangles):
  :func:`posebridge.bench.meshes.housing_mesh` at size 1 m, the door opening
  facing ``-x``;
* ``conveyor.stl`` (millimetres): belt bed, two side rails and four legs;
* ``fence.stl`` (metres): three panels between four posts.

Files are binary STL (little-endian: 80-byte header, triangle count,
per triangle a unit normal, three vertices as 32-bit floats and a zero
attribute word), written here with numpy so the bytes depend on nothing else.
"""

from __future__ import annotations

import sys
from collections.abc import Sequence
from pathlib import Path

import numpy as np

from posebridge.bench.meshes import box_arrays, housing_mesh
from posebridge.units import FloatArray

__all__ = [
    "DEMO_MESH_FILES",
    "HOUSING_SIZE_M",
    "conveyor_arrays",
    "demo_mesh_bytes",
    "fence_arrays",
    "stl_bytes",
    "write_demo_meshes",
]

HOUSING_SIZE_M = 1.0
"""Size parameter of the demo housing (:func:`posebridge.bench.meshes.housing_boxes`), m."""
DEMO_MESH_FILES = ("machine-housing.stl", "conveyor.stl", "fence.stl")

_HEADER = b"posebridge generated mesh (invented geometry)".ljust(80, b" ")
_RECORD = np.dtype([("normal", "<f4", (3,)), ("vertices", "<f4", (3, 3)), ("attribute", "<u2")])


def stl_bytes(vertices: FloatArray, faces: np.ndarray) -> bytes:
    """Binary STL of a triangle mesh, in the numbers given (module docstring).

    Parameters
    ----------
    vertices : array, shape (V, 3)
    faces : array of int, shape (F, 3)

    Returns
    -------
    bytes
        ``84 + 50 F`` bytes.
    """
    triangles = np.asarray(vertices, dtype=np.float64)[np.asarray(faces)]
    normal = np.cross(triangles[:, 1] - triangles[:, 0], triangles[:, 2] - triangles[:, 0])
    length = np.linalg.norm(normal, axis=1, keepdims=True)
    normal = np.divide(normal, length, out=np.zeros_like(normal), where=length > 0.0)
    records = np.zeros(triangles.shape[0], dtype=_RECORD)
    records["normal"] = normal
    records["vertices"] = triangles
    return _HEADER + np.uint32(triangles.shape[0]).astype("<u4").tobytes() + records.tobytes()


def _boxes(
    corners: Sequence[tuple[tuple[float, float, float], tuple[float, float, float]]], level: int
) -> tuple[FloatArray, np.ndarray]:
    vertices, faces, offset = [], [], 0
    for lo, hi in corners:
        v, f = box_arrays(np.array(lo, dtype=float), np.array(hi, dtype=float), level)
        vertices.append(v)
        faces.append(f + offset)
        offset += v.shape[0]
    return np.concatenate(vertices), np.concatenate(faces)


def conveyor_arrays() -> tuple[FloatArray, np.ndarray]:
    """Return the conveyor in its own frame, mm: 2000 mm long along x, belt top at z = 750 mm."""
    corners = [
        ((-1000.0, -200.0, 690.0), (1000.0, 200.0, 750.0)),  # belt bed
        ((-1000.0, -240.0, 660.0), (1000.0, -200.0, 790.0)),  # rail -y
        ((-1000.0, 200.0, 660.0), (1000.0, 240.0, 790.0)),  # rail +y
    ]
    for x in (-950.0, 890.0):
        for y in (-230.0, 170.0):
            corners.append(((x, y, 0.0), (x + 60.0, y + 60.0, 660.0)))
    return _boxes(corners, 3)


def fence_arrays() -> tuple[FloatArray, np.ndarray]:
    """Return the fence in its own frame, m: a 3.3 m line along y, 2 m high, panels 20 mm thick."""
    corners = []
    for k in range(4):
        y = -1.65 + 1.1 * k
        corners.append(((-0.03, y - 0.03, 0.0), (0.03, y + 0.03, 2.0)))
        if k < 3:
            corners.append(((-0.01, y + 0.03, 0.15), (0.01, y + 1.07, 1.95)))
    return _boxes(corners, 2)


def demo_mesh_bytes() -> dict[str, bytes]:
    """Return the demo's mesh files by name (:data:`DEMO_MESH_FILES`), as their bytes."""
    housing = housing_mesh(HOUSING_SIZE_M, triangles=100_000)
    return {
        "machine-housing.stl": stl_bytes(housing.vertices * 1000.0, housing.faces),
        "conveyor.stl": stl_bytes(*conveyor_arrays()),
        "fence.stl": stl_bytes(*fence_arrays()),
    }


def write_demo_meshes(folder: str | Path) -> list[Path]:
    """Write the demo's mesh files into ``folder`` (created if missing); their paths."""
    target = Path(folder)
    target.mkdir(parents=True, exist_ok=True)
    written = []
    for name, data in demo_mesh_bytes().items():
        path = target / name
        path.write_bytes(data)
        written.append(path)
    return written


if __name__ == "__main__":  # pragma: no cover - the regeneration command of the module docstring
    for path in write_demo_meshes(sys.argv[1] if len(sys.argv) > 1 else "robots/meshes"):
        print(path)

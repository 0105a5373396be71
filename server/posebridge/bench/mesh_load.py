"""Loading a meshed robot's files through the mesh layer, cold and warm, and the fitted capsules' excess.

The robot: an invented seven-link arm whose links are generated in code
(:func:`posebridge.bench.meshes.meshed_arm_parts`: three closed parts per link,
about 200 000 triangles in all), written to a temporary folder as 21 files in
turn as binary STL, OBJ, PLY, GLB and COLLADA. Loading a robot means, per
file, :func:`~posebridge.geometry.mesh_files.load_mesh_file` (read, check,
clean) and :func:`~posebridge.geometry.mesh_display.decimate_for_display`
(a share of a 60 000-triangle robot budget), and per link
:func:`~posebridge.geometry.capsule_fit.fit_capsules` on the link's vertices,
all with one :class:`~posebridge.geometry.mesh_cache.MeshCache`. The URDF side
(resolving the file names) is not part of this figure.

Figures
-------
``robot_mesh_load_cold_s``
    One load with an empty cache folder (modules already imported). Target 10 s.
``robot_mesh_load_warm_s``
    The same load again with the cache filled by the cold load; best of three.
    Target 0.5 s.
``capsule_fit_excess_median``
    Median over the seven links of the fitted capsules' volume over the link's
    convex-hull volume.
``robot_urdf_load_cold_s``, ``robot_urdf_load_warm_s``
    The whole front-door path for a URDF with meshes: the invented gripper arm
    package (:mod:`posebridge.bench.invented_urdf`, 20 mesh files, about 61 000
    triangles; 15 000 with ``--quick``) through
    :func:`~posebridge.geometry.robot_meshes.load_robot_with_meshes` (parse,
    chain, ``package://`` resolution, reading, capsule fits) and
    :func:`~posebridge.geometry.robot_meshes.robot_display_meshes` (the page's
    drawing), empty cache, then warm (best of three).
"""

from __future__ import annotations

import tempfile
import time
from pathlib import Path

import numpy as np

from posebridge.bench.invented_urdf import write_invented_arm
from posebridge.bench.meshes import meshed_arm_parts
from posebridge.geometry.capsule_fit import CapsuleFit, fit_capsules
from posebridge.geometry.mesh_cache import MeshCache
from posebridge.geometry.mesh_display import decimate_for_display, split_triangle_budget
from posebridge.geometry.mesh_files import load_mesh_file
from posebridge.geometry.robot_meshes import load_robot_with_meshes, robot_display_meshes

__all__ = [
    "LINK_LENGTHS_M",
    "ROBOT_DISPLAY_BUDGET",
    "bench_mesh_load",
    "load_robot_meshes",
    "write_robot_meshes",
]

LINK_LENGTHS_M = np.array([0.25, 0.45, 0.4, 0.3, 0.2, 0.15, 0.1])
"""Invented link lengths of the generated seven-link arm, m."""
ROBOT_DISPLAY_BUDGET = 60_000
"""Triangles for drawing the whole robot."""
_FORMATS = ("stl", "obj", "ply", "glb", "dae")


def write_robot_meshes(folder: Path, *, triangles: int = 200_000) -> list[list[Path]]:
    """Write the generated arm's link meshes, formats in turn; the file paths per link."""
    import trimesh
    from trimesh.exchange.dae import export_collada

    links = []
    index = 0
    for link, parts in enumerate(meshed_arm_parts(LINK_LENGTHS_M, triangles=triangles)):
        paths = []
        for part, (vertices, faces) in enumerate(parts):
            kind = _FORMATS[index % len(_FORMATS)]
            index += 1
            mesh = trimesh.Trimesh(vertices, faces, process=False)
            path = folder / f"link{link}-part{part}.{kind}"
            data = export_collada(mesh) if kind == "dae" else mesh.export(file_type=kind)
            if isinstance(data, str):
                data = data.encode()
            if not isinstance(data, bytes):
                raise TypeError(f"trimesh wrote {type(data).__name__} for {kind}, expected bytes")
            path.write_bytes(data)
            paths.append(path)
        links.append(paths)
    return links


def load_robot_meshes(links: list[list[Path]], cache: MeshCache) -> list[CapsuleFit]:
    """Load every file, decimate for display, fit capsules per link (module docstring)."""
    meshes = [[load_mesh_file(path, unit="m", cache=cache) for path in paths] for paths in links]
    flat = [mesh for link in meshes for mesh in link]
    budgets = split_triangle_budget([mesh.triangle_count for mesh in flat], ROBOT_DISPLAY_BUDGET)
    for mesh, budget in zip(flat, budgets, strict=True):
        decimate_for_display(mesh, max_triangles=budget, cache=cache)
    return [
        fit_capsules(np.concatenate([m.vertices for m in link]), cache=cache) for link in meshes
    ]


def _urdf_load(urdf: Path, cache: MeshCache) -> None:
    robot = load_robot_with_meshes(urdf, to_link="tool0", cache=cache)
    robot_display_meshes(robot, cache=cache)


def bench_mesh_load(quick: bool) -> dict[str, float | str]:
    """Cold and warm robot mesh loads and the median capsule excess (module docstring)."""
    with tempfile.TemporaryDirectory(prefix="posebridge-bench-") as folder:
        root = Path(folder)
        (root / "meshes").mkdir()
        links = write_robot_meshes(root / "meshes", triangles=50_000 if quick else 200_000)
        cache = MeshCache(root / "cache")
        start = time.perf_counter()
        fits = load_robot_meshes(links, cache)
        cold = time.perf_counter() - start
        warm = np.inf
        for _ in range(3):
            start = time.perf_counter()
            load_robot_meshes(links, cache)
            warm = min(warm, time.perf_counter() - start)
    excess = [fit.excess for fit in fits if fit.excess is not None]
    with tempfile.TemporaryDirectory(prefix="posebridge-bench-") as folder:
        root = Path(folder)
        urdf = write_invented_arm(root, level=3 if quick else 4)
        cache = MeshCache(root / "cache")
        start = time.perf_counter()
        _urdf_load(urdf, cache)
        urdf_cold = time.perf_counter() - start
        urdf_warm = np.inf
        for _ in range(3):
            start = time.perf_counter()
            _urdf_load(urdf, cache)
            urdf_warm = min(urdf_warm, time.perf_counter() - start)
    return {
        "robot_mesh_load_cold_s": cold,
        "robot_mesh_load_warm_s": float(warm),
        "capsule_fit_excess_median": float(np.median(excess)),
        "robot_urdf_load_cold_s": urdf_cold,
        "robot_urdf_load_warm_s": float(urdf_warm),
    }

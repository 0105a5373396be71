"""A robot's mesh files read through the mesh layer: fitted collision capsules and display meshes.

The robot importers record mesh references as :class:`~posebridge.robot.model.LinkMesh`
(file resolved, pose in the internal link frame, ``<mesh scale>``) without
reading them. Here:

* :func:`fit_robot_meshes` reads every resolved file with
  :func:`~posebridge.geometry.mesh_files.load_mesh_file` (STL, OBJ and PLY in
  metres as URDF prescribes, COLLADA and glTF in their declared unit), moves
  the vertices into the link frame and fits capsules per description link with
  :func:`~posebridge.geometry.capsule_fit.fit_capsules` - to the link's
  collision meshes, or to its visual meshes when it has none - so every vertex
  is inside (conservative: clearance may be under-stated, never over-stated).
  A split into two or three capsules is kept only when every triangle has its
  three corners inside one capsule (then, capsules being convex, the whole
  triangle is); else one capsule, which holds the vertices' convex hull.
  A file that cannot be read is a note naming it, never an error.
* :func:`robot_display_meshes` gives the visual meshes (collision meshes for
  links without visual ones) decimated to one budget for the whole robot
  (:data:`ROBOT_DISPLAY_TRIANGLES`), in mm, in their link frames.

Both use a :class:`~posebridge.geometry.mesh_cache.MeshCache` (content hash),
so a second load reads processed arrays only.
"""

from __future__ import annotations

import dataclasses
from collections import defaultdict
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Literal

import numpy as np
import numpy.typing as npt

from posebridge.geometry.capsule_fit import CapsuleFit, fit_capsules, point_segment_distances
from posebridge.geometry.errors import MeshFileError
from posebridge.geometry.mesh_cache import MeshCache
from posebridge.geometry.mesh_display import (
    DisplayMesh,
    decimate_for_display,
    split_triangle_budget,
)
from posebridge.geometry.mesh_files import MeshLimits, load_mesh_file
from posebridge.geometry.meshes import TriangleMesh
from posebridge.robot.library import load_robot
from posebridge.robot.model import Capsule, LinkFit, LinkMesh, MeshRole, Robot
from posebridge.robot.overlay import apply_capsule_removals
from posebridge.units import FloatArray

__all__ = [
    "ROBOT_DISPLAY_TRIANGLES",
    "LinkDisplayMesh",
    "fit_robot_meshes",
    "load_robot_with_meshes",
    "robot_display_meshes",
]

ROBOT_DISPLAY_TRIANGLES = 60_000
"""Triangles for drawing one whole robot."""

_INSIDE_TOLERANCE_M = 1e-9
IntArray = npt.NDArray[np.int64]
_DECLARED_UNIT_SUFFIXES = (".dae", ".gltf", ".glb", ".step", ".stp")


@dataclass(frozen=True)
class LinkDisplayMesh:
    """One decimated mesh to draw on a link.

    Attributes
    ----------
    source_link : str
    link : int
        Internal link index (pose it with the link frame from forward kinematics).
    mesh : DisplayMesh
        Vertices in mm in the link frame.
    """

    source_link: str
    link: int
    mesh: DisplayMesh


def _read(reference: LinkMesh, cache: MeshCache | None, limits: MeshLimits | None) -> TriangleMesh:
    assert reference.path is not None
    unit: Literal["m", "declared"] = (
        "declared" if reference.path.suffix.lower() in _DECLARED_UNIT_SUFFIXES else "m"
    )
    return load_mesh_file(
        reference.path, unit=unit, scale=tuple(reference.scale), limits=limits, cache=cache
    )


def _link_vertices(reference: LinkMesh, mesh: TriangleMesh) -> FloatArray:
    """Mesh vertices in the internal link frame, shape (V, 3), m."""
    T = reference.T_link_mesh
    return mesh.vertices @ T[:3, :3].T + T[:3, 3]


def _loaded(
    robot: Robot, cache: MeshCache | None, limits: MeshLimits | None
) -> tuple[list[tuple[LinkMesh, TriangleMesh]], list[str]]:
    """Every resolved reference with its mesh, and notes for the ones that failed."""
    loaded = []
    failed = []
    for reference in robot.meshes:
        if reference.path is None:
            continue  # already a note from the importer
        try:
            loaded.append((reference, _read(reference, cache, limits)))
        except MeshFileError as error:
            failed.append(
                f"{reference.filename} ({reference.role} of {reference.source_link}): {error}"
            )
    return loaded, failed


def _triangles_covered(fit: CapsuleFit, points: FloatArray, faces: IntArray) -> bool:
    """Tell whether every triangle has all three corners in one capsule.

    So, capsules being convex, the whole triangle is inside it. A split fit can hold every vertex
    and still leave the middle of a long coarse face uncovered; one capsule holds the vertices'
    hull.
    """
    if len(fit.capsules) == 1:
        return True
    covered = np.zeros(faces.shape[0], dtype=bool)
    for capsule in fit.capsules:
        inside = (
            point_segment_distances(points, capsule.start, capsule.end)
            <= capsule.radius + _INSIDE_TOLERANCE_M
        )
        covered |= inside[faces].all(axis=1)
    return bool(covered.all())


def _unique(name: str, taken: set[str]) -> str:
    while name in taken or f"{name}-2" in taken or f"{name}-3" in taken:
        name += "-fit"
    taken.add(name)
    return name


def fit_robot_meshes(
    robot: Robot, *, cache: MeshCache | None = None, limits: MeshLimits | None = None
) -> Robot:
    """Return the robot with capsules fitted to its meshes (module docstring); unchanged without meshes.

    Parameters
    ----------
    robot : Robot
        With :attr:`Robot.meshes` from an importer.
    cache : MeshCache, optional, keyword-only
        Processed meshes and fits by content hash.
    limits : MeshLimits, optional, keyword-only

    Returns
    -------
    Robot
        Fitted capsules added (named after the description link, ``-2``/``-3``
        for split links), :attr:`Robot.link_fits` filled, unreadable files in
        :attr:`Robot.notes`.
    """
    if not robot.meshes or robot.link_fits:
        return robot
    loaded, failed = _loaded(robot, cache, limits)
    by_link: dict[str, dict[str, list[tuple[LinkMesh, TriangleMesh]]]] = defaultdict(
        lambda: {"collision": [], "visual": []}
    )
    for reference, mesh in loaded:
        by_link[reference.source_link][reference.role].append((reference, mesh))
    taken = {capsule.name for capsule in robot.capsules}
    capsules: list[Capsule] = list(robot.capsules)
    fits = []
    single: list[str] = []
    for source_link, roles in by_link.items():
        if source_link in robot.replaced_links:
            continue
        role: MeshRole = "collision" if roles["collision"] else "visual"
        chosen = roles[role]
        points = np.concatenate([_link_vertices(r, m) for r, m in chosen])
        offsets = np.cumsum([0] + [m.vertices.shape[0] for _, m in chosen])
        faces = np.concatenate([m.faces + o for (_, m), o in zip(chosen, offsets, strict=False)])
        fit = fit_capsules(points, cache=cache)
        if not _triangles_covered(fit, points, faces):
            fit = fit_capsules(points, max_capsules=1, cache=cache)
            single.append(source_link)
        link = chosen[0][0].link
        fitted = tuple(
            dataclasses.replace(c, source_link=source_link)
            for c in fit.as_capsules(link, _unique(source_link, taken))
        )
        capsules += fitted
        fits.append(
            LinkFit(
                source_link=source_link,
                link=link,
                role=role,
                meshes=tuple(r.filename for r, _ in chosen),
                capsule_names=tuple(c.name for c in fitted),
                capsule_volume_m3=fit.capsule_volume_m3,
                hull_volume_m3=fit.hull_volume_m3,
                excess=fit.excess,
            )
        )
    notes = list(robot.notes)
    if failed:
        notes.append(f"{len(failed)} mesh file(s) could not be read: " + "; ".join(failed))
    if single:
        notes.append(
            "one capsule kept (a split would leave triangles outside every single capsule) on "
            "links: " + ", ".join(single)
        )
    if fits:
        notes.append(
            "capsules fitted to the meshes of "
            f"{len(fits)} link(s) enclose every vertex: an approximation of the real arm's "
            "shape that may be larger than it (check against the real robot)"
        )
    return dataclasses.replace(
        robot, capsules=tuple(capsules), link_fits=tuple(fits), notes=tuple(notes)
    )


def robot_display_meshes(
    robot: Robot,
    *,
    max_triangles: int = ROBOT_DISPLAY_TRIANGLES,
    cache: MeshCache | None = None,
    limits: MeshLimits | None = None,
) -> list[LinkDisplayMesh]:
    """Return the robot's visual meshes (collision meshes of links without) decimated to one budget.

    Unreadable files are left out (:func:`fit_robot_meshes` notes them).

    Returns
    -------
    list of LinkDisplayMesh
        In the link frames, mm; at most ``max_triangles`` triangles in all.
    """
    loaded, _ = _loaded(robot, cache, limits)
    with_visual = {r.source_link for r, _ in loaded if r.role == "visual"}
    shown = [(r, m) for r, m in loaded if r.role == "visual" or r.source_link not in with_visual]
    if not shown:
        return []
    budgets = split_triangle_budget([m.triangle_count for _, m in shown], max_triangles)
    out = []
    for (reference, mesh), budget in zip(shown, budgets, strict=True):
        display = decimate_for_display(mesh, max_triangles=budget, cache=cache)
        out.append(
            LinkDisplayMesh(
                reference.source_link, reference.link, display.posed(reference.T_link_mesh)
            )
        )
    return out


def load_robot_with_meshes(
    spec: str | Path,
    *,
    from_link: str | None = None,
    to_link: str | None = None,
    mesh_folders: Sequence[Path] = (),
    cache: MeshCache | None = None,
) -> Robot:
    """Load a robot (:func:`posebridge.robot.library.load_robot`) and fit capsules to its meshes.

    The one loader of the front doors (CLI, cell files, HTTP API): chain
    choice, overlays, mesh folders, fitted capsules, overlay capsule removals.
    ``cache`` defaults to :meth:`MeshCache.default` (the user data folder)
    when the robot has mesh files.
    """
    robot = load_robot(spec, from_link=from_link, to_link=to_link, mesh_folders=mesh_folders)
    if robot.meshes and cache is None:
        cache = MeshCache.default()
    return apply_capsule_removals(fit_robot_meshes(robot, cache=cache))

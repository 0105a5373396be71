"""Plotly figures of a cell for the review report, as plain JSON-ready dicts.

Every solid (box and cylinder fixtures, keep-out zones, the pedestal, the
arm's and the tool's capsules) is drawn from a triangle mesh of its surface:
boxes from their eight corners, cylinders and capsules as surfaces of
revolution (rings of points about the axis, consecutive rings joined by two
triangles per segment). The 3D view shows the meshes; the plan (x–y) and
elevation (x–z) views show each solid's outline, the convex hull of its
projected mesh points (the projection of a convex solid is the convex hull
of its projected points, so the outline is exact up to the mesh's
segments; common practice, no source).

Lengths are millimetres and joint values degrees (millimetres for prismatic
joints) in every figure; conversions go through :mod:`posebridge.units`.
Colours come from :mod:`posebridge.palette`, the page's palette, with the
page's choices per kind of solid, so fixtures, keep-out zones, the robot,
targets and joint-space regions look the same in the report as on the page.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import numpy.typing as npt
from scipy.spatial import ConvexHull, QhullError

from posebridge.cell.scene import BoxSet, CylinderSet, Scene
from posebridge.geometry.mesh_cache import MeshCache
from posebridge.geometry.mesh_display import (
    MIN_TRIANGLE_BUDGET,
    decimate_for_display,
    split_triangle_budget,
)
from posebridge.geometry.robot_meshes import robot_display_meshes
from posebridge.kinematics.fk import fk_frames
from posebridge.palette import PALETTE, region_colour, rgba
from posebridge.spaces.joint_map import JointMap
from posebridge.transforms import transform_points
from posebridge.units import FloatArray, m_from_mm, mm_from_m

__all__ = [
    "Mesh",
    "TargetMarker",
    "box_mesh",
    "capsule_mesh",
    "cartesian_figures",
    "cylinder_mesh",
    "joint_map_figure",
    "outline_2d",
    "revolution_mesh",
    "scene_meshes",
]

Figure = dict[str, Any]
IntArray = npt.NDArray[np.int64]

_SERIES = ("branch-1", "branch-2", "branch-3", "branch-6", "branch-7", "branch-8")
"""Path colours, cycled: branch colours other than the target and keep-out colours."""
_KIND_STYLE = {
    "fixture": ("fixture", "fixture-edge", 1.0, 0.45, "fixtures"),
    "keep-out": ("bad", "bad", 0.12, 0.06, "keep-out zones"),
    "pedestal": ("robot-edge", "robot-edge", 1.0, 0.35, "pedestal"),
    "robot": ("robot", "robot-edge", 1.0, 0.55, "robot"),
    "tool": ("robot", "robot-edge", 1.0, 0.55, "tool"),
}
"""Per kind of solid: palette names of its fill and edge, its 3D opacity and 2D fill opacity
(the page's choices in static/views/scene3d.js and projection.js), and its legend label."""
_REGION_OPACITY = 0.85
_SELF_COLLISION_OPACITY = 0.22
_CYLINDER_SEGMENTS = 32
_CAPSULE_SEGMENTS = 16
_CAPSULE_CAP_RINGS = 4
_AXIS_LENGTH_MM = 100.0
_DECIMALS = 1

# the 6 faces of a box as quads of corner indices, corner k at signs (bit 2: x, bit 1: y, bit 0: z)
_BOX_QUADS = np.array(
    [[0, 1, 3, 2], [4, 6, 7, 5], [0, 4, 5, 1], [2, 3, 7, 6], [0, 2, 6, 4], [1, 5, 7, 3]],
    dtype=np.int64,
)
_BOX_TRIANGLES = np.concatenate([_BOX_QUADS[:, [0, 1, 2]], _BOX_QUADS[:, [0, 2, 3]]])
_BOX_SIGNS = (
    np.array([[(k >> 2) & 1, (k >> 1) & 1, k & 1] for k in range(8)], dtype=np.float64) * 2.0 - 1.0
)


@dataclass(frozen=True, eq=False)
class Mesh:
    """A triangle mesh of one solid, world frame.

    Attributes
    ----------
    name : str
    kind : str
        ``fixture``, ``keep-out``, ``pedestal``, ``robot`` or ``tool``.
    vertices : array, shape (V, 3)
        m.
    triangles : array of int64, shape (T, 3)
        Vertex indices.
    """

    name: str
    kind: str
    vertices: FloatArray
    triangles: IntArray


@dataclass(frozen=True)
class TargetMarker:
    """A configuration to mark on the joint map: label and joint values (deg or mm), shape (n,)."""

    label: str
    joints_user: tuple[float, ...]


def box_mesh(T_world: npt.ArrayLike, half_extents: npt.ArrayLike) -> tuple[FloatArray, IntArray]:
    """Corners and triangles of a box centred on its frame.

    Parameters
    ----------
    T_world : array-like, shape (4, 4)
        Box centre frame in the world.
    half_extents : array-like, shape (3,)
        Half side lengths along the frame's x, y, z, m.

    Returns
    -------
    vertices : array, shape (8, 3)
    triangles : array of int64, shape (12, 3)
    """
    corners = _BOX_SIGNS * np.asarray(half_extents, dtype=np.float64)
    return transform_points(np.asarray(T_world, dtype=np.float64), corners), _BOX_TRIANGLES.copy()


def _perpendicular_pair(axis: FloatArray) -> tuple[FloatArray, FloatArray]:
    """Two unit vectors completing the unit ``axis`` to a right-handed frame."""
    helper = np.zeros(3)
    helper[int(np.argmin(np.abs(axis)))] = 1.0
    u = np.cross(axis, helper)
    u /= np.linalg.norm(u)
    return u, np.cross(axis, u)


def revolution_mesh(
    centres: npt.ArrayLike,
    radii: npt.ArrayLike,
    u: npt.ArrayLike,
    v: npt.ArrayLike,
    segments: int,
) -> tuple[FloatArray, IntArray]:
    """Mesh of a surface of revolution given as rings about an axis.

    Ring ``r`` holds ``segments`` points ``centres[r] + radii[r] (cos a u + sin a v)``,
    ``a = 2 pi s / segments``; consecutive rings are joined by two triangles
    per segment. A ring of radius 0 closes the surface (a cap or a pole).

    Parameters
    ----------
    centres : array-like, shape (R, 3)
    radii : array-like, shape (R,)
    u, v : array-like, shape (3,)
        Orthonormal vectors perpendicular to the axis.
    segments : int

    Returns
    -------
    vertices : array, shape (R * segments, 3)
    triangles : array of int64, shape (2 (R - 1) segments, 3)
    """
    centres = np.asarray(centres, dtype=np.float64)
    radii = np.asarray(radii, dtype=np.float64)
    angle = 2.0 * np.pi * np.arange(segments) / segments
    circle = np.cos(angle)[:, None] * np.asarray(u) + np.sin(angle)[:, None] * np.asarray(v)
    vertices = (centres[:, None, :] + radii[:, None, None] * circle[None]).reshape(-1, 3)
    ring = np.arange(len(radii) - 1)[:, None] * segments
    s = np.arange(segments)[None, :]
    a = ring + s
    b = ring + (s + 1) % segments
    c = a + segments
    d = b + segments
    triangles = np.concatenate(
        [np.stack([a, b, d], axis=-1).reshape(-1, 3), np.stack([a, d, c], axis=-1).reshape(-1, 3)]
    )
    return vertices, triangles.astype(np.int64)


def cylinder_mesh(
    T_world: npt.ArrayLike, radius: float, half_length: float, *, segments: int = _CYLINDER_SEGMENTS
) -> tuple[FloatArray, IntArray]:
    """Return a closed cylinder centred on its frame, axis along the frame's z (radii 0, r, r, 0).

    Returns
    -------
    vertices : array, shape (4 segments, 3)
    triangles : array of int64, shape (6 segments, 3)
    """
    T = np.asarray(T_world, dtype=np.float64)
    axis = T[:3, 2]
    centres = T[:3, 3] + np.array([-1.0, -1.0, 1.0, 1.0])[:, None] * half_length * axis
    return revolution_mesh(
        centres, [0.0, radius, radius, 0.0], T[:3, 0], T[:3, 1], segments=segments
    )


def capsule_mesh(
    start: npt.ArrayLike,
    end: npt.ArrayLike,
    radius: float,
    *,
    segments: int = _CAPSULE_SEGMENTS,
    cap_rings: int = _CAPSULE_CAP_RINGS,
) -> tuple[FloatArray, IntArray]:
    """Capsule (points within ``radius`` of the segment start–end): a tube and two hemispheres.

    Hemisphere rings sit at polar angles ``phi`` in ``[-pi/2, 0]`` about the
    start and ``[0, pi/2]`` about the end: centre ``p + radius sin(phi) axis``,
    ring radius ``radius cos(phi)``.

    Returns
    -------
    vertices : array, shape (2 (cap_rings + 1) segments, 3)
    triangles : array of int64, shape (2 (2 cap_rings + 1) segments, 3)
    """
    a = np.asarray(start, dtype=np.float64)
    b = np.asarray(end, dtype=np.float64)
    length = float(np.linalg.norm(b - a))
    axis = (b - a) / length if length > 0.0 else np.array([0.0, 0.0, 1.0])
    u, v = _perpendicular_pair(axis)
    phi_start = np.linspace(-0.5 * np.pi, 0.0, cap_rings + 1)
    phi_end = np.linspace(0.0, 0.5 * np.pi, cap_rings + 1)
    centres = np.concatenate(
        [
            a + radius * np.sin(phi_start)[:, None] * axis,
            b + radius * np.sin(phi_end)[:, None] * axis,
        ]
    )
    radii = radius * np.cos(np.concatenate([phi_start, phi_end]))
    return revolution_mesh(centres, radii, u, v, segments=segments)


def _box_meshes(boxes: BoxSet, kind: str) -> list[Mesh]:
    return [
        Mesh(name, kind, *box_mesh(T, half))
        for name, T, half in zip(boxes.names, boxes.T_world, boxes.half_extents, strict=True)
    ]


def _cylinder_meshes(cylinders: CylinderSet, kind: str) -> list[Mesh]:
    return [
        Mesh(name, kind, *cylinder_mesh(T, float(radius), float(half)))
        for name, T, radius, half in zip(
            cylinders.names, cylinders.T_world, cylinders.radius, cylinders.half_length, strict=True
        )
    ]


REPORT_MESH_TRIANGLES = 20_000
"""Triangles the review file draws for all mesh fixtures together (shared by size)."""


def _fixture_meshes(scene: Scene) -> list[Mesh]:
    """Mesh fixtures decimated to their share of :data:`REPORT_MESH_TRIANGLES`, world frame."""
    meshes = scene.meshes
    budgets = split_triangle_budget(
        [mesh.triangle_count for mesh in meshes.meshes], REPORT_MESH_TRIANGLES
    )
    drawn = []
    for name, T, mesh, budget in zip(
        meshes.names, meshes.T_world, meshes.meshes, budgets, strict=True
    ):
        display = decimate_for_display(mesh, max_triangles=max(budget, MIN_TRIANGLE_BUDGET))
        vertices = transform_points(T, m_from_mm(display.vertices_mm))
        drawn.append(Mesh(name, "fixture", vertices, display.faces))
    return drawn


def scene_meshes(scene: Scene, q: npt.ArrayLike) -> list[Mesh]:
    """Meshes of every solid of the cell with the arm at ``q``, world frame.

    Parameters
    ----------
    scene : Scene
    q : array-like, shape (n,)
        Joint values, rad or m.

    Returns
    -------
    list of Mesh
        Box, cylinder and mesh fixtures (meshes decimated to
        :data:`REPORT_MESH_TRIANGLES`), keep-out zones, the pedestal, the arm's
        link meshes (decimated visual meshes; its capsules for a robot without
        mesh files), then the tool's capsules.
    """
    frames = (
        scene.T_world_base
        @ fk_frames(scene.robot, np.asarray(q, dtype=np.float64)[None], scene.T_flange_tool)[0]
    )
    meshes = _box_meshes(scene.boxes, "fixture") + _cylinder_meshes(scene.cylinders, "fixture")
    meshes += _fixture_meshes(scene)
    meshes += _box_meshes(scene.keep_outs, "keep-out")
    meshes += _cylinder_meshes(scene.pedestal, "pedestal")
    drawings = robot_display_meshes(
        scene.robot, cache=MeshCache.default() if scene.robot.meshes else None
    )
    for drawing in drawings:  # the robot as itself: its link meshes
        vertices = transform_points(frames[drawing.link], m_from_mm(drawing.mesh.vertices_mm))
        meshes.append(Mesh(drawing.source_link, "robot", vertices, drawing.mesh.faces))
    for capsule in () if drawings else scene.robot.capsules:
        ends = transform_points(frames[capsule.link], np.stack([capsule.start, capsule.end]))
        meshes.append(Mesh(capsule.name, "robot", *capsule_mesh(ends[0], ends[1], capsule.radius)))
    flange = frames[scene.robot.dof + 1]
    tool = scene.tool_capsules
    for name, start, end, radius in zip(tool.names, tool.start, tool.end, tool.radius, strict=True):
        ends = transform_points(flange, np.stack([start, end]))
        meshes.append(Mesh(name, "tool", *capsule_mesh(ends[0], ends[1], float(radius))))
    return meshes


def outline_2d(points: npt.ArrayLike) -> FloatArray:
    """Return the closed convex outline of 2D points (Quickhull via scipy), shape (H + 1, 2).

    Falls back to the two extreme points when the points are collinear.
    """
    points = np.asarray(points, dtype=np.float64)
    try:
        hull = ConvexHull(points)
    except QhullError:  # flat input; draw the extent along the first axis
        order = np.argsort(points[:, 0] + 1e-9 * points[:, 1])
        ends = points[[order[0], order[-1]]]
        return np.concatenate([ends, ends[:1]])
    ring = points[hull.vertices]
    return np.concatenate([ring, ring[:1]])


def _rounded(values: npt.ArrayLike) -> list[Any]:
    rounded: list[Any] = np.round(np.asarray(values, dtype=np.float64), _DECIMALS).tolist()
    return rounded


def _with_gaps(parts: Sequence[FloatArray], column: int) -> list[float | None]:
    """Columns of several polylines joined with None gaps (plotly's line breaks)."""
    joined: list[float | None] = []
    for part in parts:
        joined.extend(_rounded(part[:, column]))
        joined.append(None)
    return joined


def _mesh3d_traces(meshes: Sequence[Mesh]) -> list[Figure]:
    traces = []
    for kind, (fill, _, opacity, _, label) in _KIND_STYLE.items():
        chosen = [mesh for mesh in meshes if mesh.kind == kind]
        if not chosen:
            continue
        offsets = np.cumsum([0] + [len(mesh.vertices) for mesh in chosen[:-1]])
        vertices = mm_from_m(np.concatenate([mesh.vertices for mesh in chosen]))
        triangles = np.concatenate(
            [mesh.triangles + offset for mesh, offset in zip(chosen, offsets, strict=True)]
        )
        names = [mesh.name for mesh in chosen for _ in range(len(mesh.vertices))]
        traces.append(
            {
                "type": "mesh3d",
                "name": label,
                "legendgroup": kind,
                "showlegend": True,
                "x": _rounded(vertices[:, 0]),
                "y": _rounded(vertices[:, 1]),
                "z": _rounded(vertices[:, 2]),
                "i": triangles[:, 0].tolist(),
                "j": triangles[:, 1].tolist(),
                "k": triangles[:, 2].tolist(),
                "color": PALETTE[fill],
                "opacity": opacity,
                "flatshading": True,
                "text": names,
                "hoverinfo": "text+name",
            }
        )
    return traces


def _outline_traces(meshes: Sequence[Mesh], axes: tuple[int, int]) -> list[Figure]:
    traces = []
    for kind, (fill, edge, _, fill_opacity, label) in _KIND_STYLE.items():
        chosen = [mesh for mesh in meshes if mesh.kind == kind]
        if not chosen:
            continue
        outlines = [outline_2d(mm_from_m(mesh.vertices[:, list(axes)])) for mesh in chosen]
        names: list[str | None] = []
        for mesh, outline in zip(chosen, outlines, strict=True):
            names.extend([mesh.name] * len(outline) + [None])
        traces.append(
            {
                "type": "scatter",
                "mode": "lines",
                "name": label,
                "legendgroup": kind,
                "x": _with_gaps(outlines, 0),
                "y": _with_gaps(outlines, 1),
                "fill": "toself",
                "fillcolor": rgba(PALETTE[fill], fill_opacity),
                "line": {
                    "color": PALETTE[edge],
                    "width": 1,
                    **({"dash": "dash"} if kind == "keep-out" else {}),
                },
                "text": names,
                "hoverinfo": "text+name",
            }
        )
    return traces


def _target_traces(scene: Scene, axes: tuple[int, ...]) -> list[Figure]:
    """Targets (markers and names), approach poses, and the tool z axis at each target."""
    targets = scene.targets
    if not targets.names:
        return []
    position = mm_from_m(targets.T_world_target[:, :3, 3])
    z_end = position + _AXIS_LENGTH_MM * targets.T_world_target[:, :3, 2]
    names = list(targets.names)
    coordinate = "xyz"
    three_d = len(axes) == 3
    kind = "scatter3d" if three_d else "scatter"
    markers: Figure = {
        "type": kind,
        "mode": "markers+text",
        "name": "targets",
        "text": names,
        "textposition": "top center",
        "textfont": {"size": 10, "color": PALETTE["ink"]},
        "marker": {"size": 5 if three_d else 9, "color": PALETTE["target"]},
        "hoverinfo": "text",
    }
    axis_line: Figure = {
        "type": kind,
        "mode": "lines",
        "name": "tool z at targets",
        "line": {"color": PALETTE["axis-z"], "width": 3 if three_d else 1.5},
        "hoverinfo": "skip",
    }
    for slot, axis in zip(coordinate, axes, strict=False):
        markers[slot] = _rounded(position[:, axis])
        axis_line[slot] = _with_gaps(
            [np.stack([position[k], z_end[k]]) for k in range(len(names))], axis
        )
    traces = [markers, axis_line]
    has_approach = targets.approach_offset > 0.0
    if np.any(has_approach):
        approach = mm_from_m(targets.T_world_approach[has_approach, :3, 3])
        approach_trace: Figure = {
            "type": kind,
            "mode": "markers",
            "name": "approach poses",
            "marker": {
                "size": 3 if three_d else 6,
                "color": PALETTE["target"],
                "symbol": "diamond" if three_d else "diamond-open",
            },
            "text": [
                f"{name} (approach)" for name, keep in zip(names, has_approach, strict=True) if keep
            ],
            "hoverinfo": "text",
        }
        for slot, axis in zip(coordinate, axes, strict=False):
            approach_trace[slot] = _rounded(approach[:, axis])
        traces.append(approach_trace)
    return traces


def _path_traces(scene: Scene, axes: tuple[int, ...]) -> list[Figure]:
    traces = []
    three_d = len(axes) == 3
    for p, path in enumerate(scene.paths):
        if len(path.sources) == 0:
            continue
        position = mm_from_m(path.T_world_tool[:, :3, 3])
        colour = PALETTE[_SERIES[p % len(_SERIES)]]
        trace: Figure = {
            "type": "scatter3d" if three_d else "scatter",
            "mode": "lines+markers",
            "name": f"path {path.name}",
            "line": {"color": colour, "width": 4 if three_d else 2, "dash": "dot"},
            "marker": {"size": 3 if three_d else 6, "color": colour},
            "text": [f"{path.name} waypoint {w + 1}" for w in range(len(path.sources))],
            "hoverinfo": "text",
        }
        for slot, axis in zip("xyz", axes, strict=False):
            trace[slot] = _rounded(position[:, axis])
        traces.append(trace)
    return traces


def _axis(title: str, **extra: Any) -> Figure:
    return {
        "title": {"text": title},
        "zeroline": False,
        "gridcolor": PALETTE["rule"],
        "color": PALETTE["ink-muted"],
        **extra,
    }


def _legend() -> Figure:
    return {"orientation": "h", "y": -0.12, "font": {"size": 11}}


def cartesian_figures(scene: Scene, q: npt.ArrayLike) -> dict[str, Figure]:
    """Return the 3D view, plan (top, x–y) and elevation (side, x–z) of the cell, arm at ``q``.

    Parameters
    ----------
    scene : Scene
    q : array-like, shape (n,)
        Joint values, rad or m.

    Returns
    -------
    dict
        ``{"scene3d": figure, "plan": figure, "elevation": figure}``, plotly
        figures (``data`` and ``layout``) with lengths in mm, world frame.
    """
    meshes = scene_meshes(scene, q)
    scene3d = {
        "data": _mesh3d_traces(meshes)
        + _target_traces(scene, (0, 1, 2))
        + _path_traces(scene, (0, 1, 2)),
        "layout": {
            "scene": {
                "aspectmode": "data",
                "xaxis": _axis("x (mm)"),
                "yaxis": _axis("y (mm)"),
                "zaxis": _axis("z (mm)"),
                "camera": {"eye": {"x": 1.4, "y": -1.6, "z": 0.9}},
            },
            "margin": {"l": 0, "r": 0, "t": 10, "b": 0},
            "legend": _legend(),
            "paper_bgcolor": PALETTE["paper"],
        },
    }
    views: dict[str, Figure] = {}
    for key, axes, titles in (
        ("plan", (0, 1), ("x (mm)", "y (mm)")),
        ("elevation", (0, 2), ("x (mm)", "z (mm)")),
    ):
        views[key] = {
            "data": _outline_traces(meshes, axes)
            + _target_traces(scene, axes)
            + _path_traces(scene, axes),
            "layout": {
                "xaxis": _axis(titles[0]),
                "yaxis": _axis(titles[1], scaleanchor="x", scaleratio=1),
                "margin": {"l": 60, "r": 10, "t": 10, "b": 40},
                "legend": _legend(),
                "plot_bgcolor": "#fbfcfd",
                "paper_bgcolor": PALETTE["paper"],
                "hovermode": "closest",
            },
        }
    floor_mm = float(mm_from_m(scene.floor_height))
    elevation_layout: Figure = views["elevation"]["layout"]
    elevation_layout["shapes"] = [
        {
            "type": "line",
            "xref": "paper",
            "x0": 0,
            "x1": 1,
            "yref": "y",
            "y0": floor_mm,
            "y1": floor_mm,
            "line": {"color": PALETTE["robot-edge"], "width": 2},
        }
    ]
    return {"scene3d": scene3d, **views}


def joint_map_figure(
    joint_map: JointMap, current_user: npt.ArrayLike, markers: Sequence[TargetMarker] = ()
) -> Figure:
    """Obstacle map over two joints with the limit box and configuration markers.

    Each cell is coloured by the obstacle it collides with (the nearest one
    when several overlap), or as a self collision; free cells stay white.

    Parameters
    ----------
    joint_map : JointMap
        A two-joint map (:func:`posebridge.spaces.joint_map.joint_map`).
    current_user : array-like, shape (n,)
        The configuration the map is a slice through, deg or mm.
    markers : sequence of TargetMarker
        Further configurations to mark (their other joints may differ).

    Returns
    -------
    dict
        A plotly figure; axes in deg (mm for prismatic joints).
    """
    if len(joint_map.joints) != 2:
        raise ValueError(f"joint_map: expected a two-joint map, got {len(joint_map.joints)} joints")
    a, b = joint_map.joints
    x_axis, y_axis = joint_map.axes_user
    units = ["mm" if p else "deg" for p in joint_map.prismatic]
    labels = np.asarray(joint_map.obstacle, dtype=np.int64)
    present = sorted(int(k) for k in np.unique(labels) if k >= 0)
    category = np.zeros(labels.shape, dtype=np.int64)
    for slot, obstacle in enumerate(present, start=1):
        category[labels == obstacle] = slot
    names = ["free"] + [joint_map.obstacle_names[k] for k in present]
    self_slot = len(names)
    self_cells = joint_map.self_collision & (labels < 0)
    if np.any(self_cells):
        category[self_cells] = self_slot
        names.append("arm itself")
    # as on the page: the k-th object the map shows (cell order) gets region colour k;
    # regions and self collision are drawn translucent over white
    colours = [PALETTE["paper"]] + [
        rgba(region_colour(rank), _REGION_OPACITY) for rank in range(len(present))
    ]
    if len(names) > len(colours):
        colours.append(rgba(PALETTE["ink"], _SELF_COLLISION_OPACITY))
    count = len(names)
    scale = []
    for k, colour in enumerate(colours):
        scale += [[k / count, colour], [(k + 1) / count, colour]]
    hover = np.asarray(names, dtype=object)[category.T]
    data: list[Figure] = [
        {
            "type": "heatmap",
            "x": _rounded(x_axis),
            "y": _rounded(y_axis),
            "z": category.T.tolist(),
            "zmin": -0.5,
            "zmax": count - 0.5,
            "colorscale": scale,
            "showscale": False,
            "text": hover.tolist(),
            "hovertemplate": "%{x:.1f}, %{y:.1f}: %{text}<extra></extra>",
        }
    ]
    for name, colour in zip(names[1:], colours[1:], strict=True):
        data.append(
            {
                "type": "scatter",
                "mode": "markers",
                "name": f"collision: {name}",
                "x": [None],
                "y": [None],
                "marker": {"symbol": "square", "size": 12, "color": colour},
            }
        )
    current = np.asarray(current_user, dtype=np.float64)
    data.append(
        {
            "type": "scatter",
            "mode": "markers",
            "name": "shown configuration",
            "x": [round(float(current[a]), _DECIMALS)],
            "y": [round(float(current[b]), _DECIMALS)],
            "marker": {
                "symbol": "cross-thin-open",
                "size": 16,
                "color": PALETTE["ink"],
                "line": {"width": 2.5, "color": PALETTE["ink"]},
            },
        }
    )
    if markers:
        data.append(
            {
                "type": "scatter",
                "mode": "markers+text",
                "name": "targets' recommended branches",
                "x": [round(m.joints_user[a], _DECIMALS) for m in markers],
                "y": [round(m.joints_user[b], _DECIMALS) for m in markers],
                "text": [m.label for m in markers],
                "textposition": "top center",
                "textfont": {"size": 10},
                "marker": {
                    "symbol": "diamond",
                    "size": 9,
                    "color": PALETTE["target"],
                    "line": {"width": 1, "color": PALETTE["paper"]},
                },
            }
        )
    lower, upper = joint_map.lower_user, joint_map.upper_user
    return {
        "data": data,
        "layout": {
            "xaxis": _axis(f"{joint_map.joint_names[0]} ({units[0]})"),
            "yaxis": _axis(f"{joint_map.joint_names[1]} ({units[1]})"),
            "shapes": [
                {
                    "type": "rect",
                    "x0": float(lower[0]),
                    "x1": float(upper[0]),
                    "y0": float(lower[1]),
                    "y1": float(upper[1]),
                    "line": {"color": PALETTE["limit-box"], "width": 1.5, "dash": "dash"},
                }
            ],
            "margin": {"l": 60, "r": 10, "t": 10, "b": 40},
            "legend": _legend(),
            "paper_bgcolor": PALETTE["paper"],
            "plot_bgcolor": PALETTE["paper"],
        },
    }

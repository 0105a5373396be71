"""Plotly figures of a cell for the review report, as plain JSON-ready dicts.

The solids come as triangle meshes from :mod:`posebridge.report.meshes`. The
3D view shows the meshes; the plan (x–y) and elevation (x–z) views show each
solid's outline, the convex hull of its projected mesh points (the
projection of a convex solid is the convex hull of its projected points, so
the outline is exact up to the mesh's segments; common practice, no
source).

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

from posebridge.cell.scene import Scene
from posebridge.palette import PALETTE, region_colour, rgba
from posebridge.report.meshes import Mesh, scene_meshes
from posebridge.results.spaces import joint_map_axes_user, joint_map_limits_user
from posebridge.spaces.joint_map import JointMap
from posebridge.units import FloatArray, mm_from_m

__all__ = [
    "TargetMarker",
    "cartesian_figures",
    "joint_map_figure",
    "outline_2d",
]

Figure = dict[str, Any]

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
_AXIS_LENGTH_MM = 100.0
_DECIMALS = 1


@dataclass(frozen=True)
class TargetMarker:
    """A configuration to mark on the joint map: label and joint values (deg or mm), shape (n,)."""

    label: str
    joints_user: tuple[float, ...]


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
    x_axis, y_axis = joint_map_axes_user(joint_map)
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
    lower, upper = joint_map_limits_user(joint_map)
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

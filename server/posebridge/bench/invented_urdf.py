"""An invented six-axis arm with a two-finger gripper as a URDF package with mesh files.

Made for tests and benchmarks (no real product's description or numbers):
the package folder ``pb_gripper_arm/`` holds ``urdf/pb_gripper_arm.urdf`` and
``meshes/`` with collision meshes as binary STL and visual meshes as OBJ and
COLLADA, referenced as ``package://pb_gripper_arm/meshes/...`` (one as a
path relative to the URDF, one STL in millimetres with ``<mesh scale>``).

The tree has three leaves below ``base_link``: ``tool0`` (a fixed frame after
the flange), ``finger_left`` (a prismatic joint off the arm's chain) and
``finger_right`` (its mimic). Link geometry: closed boxes (subdivided, so
every link has a few hundred triangles) spanning each link's segment.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np

from posebridge.bench.meshes import box_arrays

__all__ = ["ARM_JOINTS", "PACKAGE", "write_invented_arm"]

PACKAGE = "pb_gripper_arm"
"""The package (and folder) name."""

ARM_JOINTS = ("shoulder_pan", "shoulder_lift", "elbow", "wrist_roll", "wrist_bend", "flange_roll")
"""The six arm joints from ``base_link`` to ``tool0``."""

# (joint, parent, child, type, xyz, rpy, axis, lower, upper, velocity) - invented numbers
_JOINTS = (
    ("shoulder_pan", "base_link", "turret", "revolute", (0, 0, 0.21), (0, 0, 0), (0, 0, 1), -2.9, 2.9, 2.2),
    ("shoulder_lift", "turret", "upper_arm", "revolute", (0.11, 0, 0.23), (0, 0, 0), (0, 1, 0), -1.6, 2.5, 2.0),
    ("elbow", "upper_arm", "forearm", "revolute", (0, 0, 0.52), (0, 0, 0), (0, 1, 0), -3.3, 1.2, 2.6),
    ("wrist_roll", "forearm", "wrist_a", "revolute", (0.31, 0, 0.06), (0, 0, 0), (1, 0, 0), -3.1, 3.1, 4.1),
    ("wrist_bend", "wrist_a", "wrist_b", "revolute", (0.14, 0, 0), (0, 0, 0), (0, 1, 0), -2.0, 2.0, 4.3),
    ("flange_roll", "wrist_b", "wrist_c", "continuous", (0.07, 0, 0), (0, 0, 0), (1, 0, 0), 0, 0, 5.9),
    ("flange_mount", "wrist_c", "flange", "fixed", (0.02, 0, 0), (0, math.pi / 2, 0), None, 0, 0, 0),
    ("tool_mount", "flange", "tool0", "fixed", (0, 0, 0.13), (0, 0, 0), None, 0, 0, 0),
    ("gripper_mount", "flange", "gripper_body", "fixed", (0, 0, 0.01), (0, 0, 0), None, 0, 0, 0),
    ("finger_left_slide", "gripper_body", "finger_left", "prismatic", (0, 0.01, 0.06), (0, 0, 0), (0, 1, 0), 0, 0.03, 0.1),
    ("finger_right_slide", "gripper_body", "finger_right", "prismatic", (0, -0.01, 0.06), (0, 0, 0), (0, -1, 0), 0, 0.03, 0.1),
)  # fmt: skip

# link: (lo, hi) of its box in the link frame, m
_BOXES = {
    "base_link": ((-0.12, -0.12, 0.0), (0.12, 0.12, 0.2)),
    "turret": ((-0.08, -0.1, 0.0), (0.18, 0.1, 0.28)),
    "upper_arm": ((-0.06, -0.13, -0.05), (0.06, -0.03, 0.57)),
    "forearm": ((-0.05, -0.04, -0.04), (0.34, 0.04, 0.1)),
    "wrist_a": ((0.0, -0.04, -0.04), (0.16, 0.04, 0.04)),
    "wrist_b": ((-0.03, -0.04, -0.03), (0.08, 0.04, 0.03)),
    "wrist_c": ((0.0, -0.035, -0.035), (0.02, 0.035, 0.035)),
    "gripper_body": ((-0.04, -0.05, 0.0), (0.04, 0.05, 0.06)),
    "finger_left": ((-0.01, 0.0, 0.0), (0.01, 0.012, 0.06)),
    "finger_right": ((-0.01, 0.0, 0.0), (0.01, 0.012, 0.06)),
}
_COLLISION_FORMAT = {name: "stl" for name in _BOXES}
_VISUAL_FORMAT = {name: ("obj" if i % 2 else "dae") for i, name in enumerate(_BOXES)}


def _write_mesh(path: Path, vertices: np.ndarray, faces: np.ndarray) -> None:
    import trimesh
    from trimesh.exchange.dae import export_collada

    mesh = trimesh.Trimesh(vertices, faces, process=False)
    kind = path.suffix[1:]
    data = export_collada(mesh) if kind == "dae" else mesh.export(file_type=kind)
    if isinstance(data, str):
        data = data.encode()
    if not isinstance(data, bytes):
        raise TypeError(f"trimesh wrote {type(data).__name__} for {kind}, expected bytes")
    path.write_bytes(data)


def _geometry(link: str) -> str:
    """``<visual>`` and ``<collision>`` of one link."""
    collision = f"package://{PACKAGE}/meshes/{link}_collision.stl"
    scale = ""
    if link == "forearm":  # written in mm, scaled by <mesh scale>
        collision = f"package://{PACKAGE}/meshes/{link}_collision_mm.stl"
        scale = ' scale="0.001 0.001 0.001"'
    visual = f"package://{PACKAGE}/meshes/{link}_visual.{_VISUAL_FORMAT[link]}"
    if link == "turret":  # a path relative to the URDF
        visual = f"../meshes/{link}_visual.{_VISUAL_FORMAT[link]}"
    return (
        f'    <visual><geometry><mesh filename="{visual}"/></geometry></visual>\n'
        f'    <collision><geometry><mesh filename="{collision}"{scale}/></geometry></collision>\n'
    )


def write_invented_arm(folder: Path, *, level: int = 2) -> Path:
    """Write the package under ``folder``; returns the URDF path.

    Parameters
    ----------
    folder : Path
        Existing folder; ``folder / "pb_gripper_arm"`` is created.
    level : int, keyword-only
        Box subdivision level (12 * 4**level triangles per mesh).
    """
    root = folder / PACKAGE
    (root / "urdf").mkdir(parents=True, exist_ok=True)
    (root / "meshes").mkdir(exist_ok=True)
    for link, (lo, hi) in _BOXES.items():
        vertices, faces = box_arrays(np.array(lo, float), np.array(hi, float), level)
        if link == "forearm":
            _write_mesh(root / "meshes" / f"{link}_collision_mm.stl", vertices * 1000.0, faces)
        else:
            _write_mesh(
                root / "meshes" / f"{link}_collision.{_COLLISION_FORMAT[link]}", vertices, faces
            )
        _write_mesh(root / "meshes" / f"{link}_visual.{_VISUAL_FORMAT[link]}", vertices, faces)
    links = [name for name in _BOXES] + ["flange", "tool0"]
    parts = ['<?xml version="1.0"?>\n', f'<robot name="{PACKAGE}">\n']
    for link in links:
        body = _geometry(link) if link in _BOXES else ""
        parts.append(f'  <link name="{link}">\n{body}  </link>\n')
    for name, parent, child, kind, xyz, rpy, axis, lower, upper, velocity in _JOINTS:
        extra = ""
        if axis is not None:
            extra += f'    <axis xyz="{" ".join(map(str, axis))}"/>\n'
        if kind in ("revolute", "prismatic"):
            extra += (
                f'    <limit lower="{lower}" upper="{upper}" velocity="{velocity}" effort="1"/>\n'
            )
        elif kind == "continuous":
            extra += f'    <limit velocity="{velocity}" effort="1"/>\n'
        if name == "finger_right_slide":
            extra += '    <mimic joint="finger_left_slide" multiplier="1"/>\n'
        parts.append(
            f'  <joint name="{name}" type="{kind}">\n'
            f'    <parent link="{parent}"/>\n    <child link="{child}"/>\n'
            f'    <origin xyz="{" ".join(map(str, xyz))}" rpy="{" ".join(map(str, rpy))}"/>\n'
            f"{extra}  </joint>\n"
        )
    parts.append("</robot>\n")
    path = root / "urdf" / f"{PACKAGE}.urdf"
    path.write_text("".join(parts), encoding="utf-8")
    return path

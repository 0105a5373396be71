"""URDF export (ROS URDF specification, an open standard).

:func:`urdf_from_robot` writes a robot as URDF with links ``base``,
``link_<joint>``, ``flange`` and ``tool``; capsules become cylinders or
spheres, so that importing the file again with
:func:`posebridge.robot.urdf_import.parse_robot_urdf` gives the same
kinematics and capsules.
"""

from __future__ import annotations

import math
from xml.sax.saxutils import quoteattr

import numpy as np

from posebridge.robot.model import Capsule, Robot
from posebridge.transforms import rotation_matrix_about_axis, rpy_from_rotation_matrix
from posebridge.units import FloatArray

__all__ = ["urdf_from_robot"]


def _number_text(values: FloatArray | list[float]) -> str:
    """Shortest text that reads back as the same float64 values."""
    return " ".join(repr(float(v) + 0.0) for v in np.ravel(values))  # + 0.0 turns -0.0 into 0.0


def _origin_element(T: FloatArray) -> str:
    rpy = rpy_from_rotation_matrix(T[:3, :3])
    return f'<origin xyz="{_number_text(T[:3, 3])}" rpy="{_number_text(rpy)}"/>'


def _capsule_collision(capsule: Capsule) -> str:
    """Write a capsule as URDF collision: a cylinder along its segment, or a sphere if it has none."""
    segment = capsule.end - capsule.start
    length = float(np.linalg.norm(segment))
    centre = 0.5 * (capsule.start + capsule.end)
    if length == 0.0:
        geometry = f'<sphere radius="{_number_text([capsule.radius])}"/>'
        R = np.eye(3)
    else:
        direction = segment / length
        # rotation taking z onto the segment direction (about z x direction)
        normal = np.cross([0.0, 0.0, 1.0], direction)
        sin_angle = float(np.linalg.norm(normal))
        angle = math.atan2(sin_angle, float(direction[2]))
        axis = normal / sin_angle if sin_angle > 1e-12 else np.array([1.0, 0.0, 0.0])
        R = rotation_matrix_about_axis(axis, angle)
        geometry = (
            f'<cylinder radius="{_number_text([capsule.radius])}" '
            f'length="{_number_text([length])}"/>'
        )
    T = np.eye(4)
    T[:3, :3] = R
    T[:3, 3] = centre
    return (
        f"    <collision name={quoteattr(capsule.name)}>\n"
        f"      {_origin_element(T)}\n"
        f"      <geometry>{geometry}</geometry>\n"
        "    </collision>\n"
    )


def _unique(name: str, taken: set[str]) -> str:
    while name in taken:
        name += "_"
    taken.add(name)
    return name


def urdf_from_robot(robot: Robot) -> str:
    """URDF text of a robot: links ``base``, ``link_<joint>``, ``flange``, ``tool``.

    Joint origins are written as xyz + fixed-axis rpy, capsules as collision
    cylinders (spheres for zero-length capsules). URDF has no acceleration
    limits, so they are lost; ``effort`` is written as 0 (unknown).
    Importing the result with ``to_link="flange"`` gives back the same
    kinematics and capsules (with ``tool`` as tip, the tool becomes the flange).

    Parameters
    ----------
    robot : Robot

    Returns
    -------
    urdf : str
    """
    link_names = ["base"] + [f"link_{joint.name}" for joint in robot.joints]
    taken = {joint.name for joint in robot.joints}
    flange_mount = _unique("flange_mount", taken)
    tool_mount = _unique("tool_mount", taken)
    by_link: dict[int, list[Capsule]] = {}
    for capsule in robot.capsules:
        by_link.setdefault(capsule.link, []).append(capsule)
    parts = [
        '<?xml version="1.0"?>\n',
        f"<!-- {robot.dof}-joint robot exported by posebridge; SI units; "
        "acceleration limits are not part of URDF -->\n",
        f"<robot name={quoteattr(robot.name)}>\n",
    ]
    for index, link in enumerate(link_names):
        collisions = "".join(_capsule_collision(c) for c in by_link.get(index, []))
        parts.append(
            f"  <link name={quoteattr(link)}>\n{collisions}  </link>\n"
            if collisions
            else f"  <link name={quoteattr(link)}/>\n"
        )
    parts += ['  <link name="flange"/>\n', '  <link name="tool"/>\n']
    for index, joint in enumerate(robot.joints):
        kind = "continuous" if joint.continuous else joint.kind
        bounds = (
            ""
            if joint.continuous
            else f'lower="{_number_text([joint.lower])}" upper="{_number_text([joint.upper])}" '
        )
        parts.append(
            f"  <joint name={quoteattr(joint.name)} type={quoteattr(kind)}>\n"
            f"    <parent link={quoteattr(link_names[index])}/>\n"
            f"    <child link={quoteattr(link_names[index + 1])}/>\n"
            f"    {_origin_element(joint.origin)}\n"
            f'    <axis xyz="{_number_text(joint.axis)}"/>\n'
            f'    <limit {bounds}velocity="{_number_text([joint.velocity_max])}" effort="0"/>\n'
            "  </joint>\n"
        )
    for mount, parent, child, T in (
        (flange_mount, link_names[-1], "flange", robot.T_link_flange),
        (tool_mount, "flange", "tool", robot.T_flange_tool),
    ):
        parts.append(
            f'  <joint name={quoteattr(mount)} type="fixed">\n'
            f"    <parent link={quoteattr(parent)}/>\n"
            f'    <child link="{child}"/>\n'
            f"    {_origin_element(T)}\n"
            "  </joint>\n"
        )
    parts.append("</robot>\n")
    return "".join(parts)

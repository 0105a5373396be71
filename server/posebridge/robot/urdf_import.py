"""URDF import (ROS URDF specification, an open standard).

Import (:func:`load_robot_urdf`, :func:`parse_robot_urdf`) takes the serial
chain from ``from_link`` to ``to_link`` of the URDF tree:

* Defaults: ``from_link`` is the root link, ``to_link`` the single leaf below
  it; with several leaves the caller must name one (the error lists the
  candidates and names the options: ``--to-link``, ``to_link`` of a cell's
  robot entry or of a robot overlay). Fixed frames after the last moving
  joint (a ``tool0`` or TCP frame) are valid ``to_link`` choices.
* ``revolute`` and ``prismatic`` joints need ``<limit lower upper velocity>``
  (``lower``/``upper`` default to 0 as in the specification, so a joint
  without them is refused as locked); ``effort`` is not used and not
  required. ``continuous`` joints need ``<limit velocity>``; their range for
  sampling and maps is one revolution, -pi..pi (:attr:`Joint.continuous` is set).
* URDF has no acceleration limits: every joint gets
  ``acceleration_max = DEFAULT_ACCELERATION_PER_S * velocity_max`` (full speed
  reached in a quarter second) and :attr:`Robot.notes` says so.
* ``fixed`` joints are merged: into the next moving joint's origin, or after
  the last moving joint into the flange. The robot base frame is the
  ``from_link`` frame, the flange the ``to_link`` frame, the default tool the
  identity.
* Joints off the chosen chain (gripper fingers, a hand's mimic joints) and
  mimic joints on it are **held at zero**: their links ride rigidly on the
  chain link above them, with their geometry, and the notes list them.
* ``<origin rpy>`` is roll about fixed X, then pitch about fixed Y, then yaw
  about fixed Z, ``R = Rz(y) Ry(p) Rx(r)``. ``<axis>`` defaults to (1, 0, 0).
  The specification says the axis "should be normalized" without saying what
  a reader does otherwise; like pinocchio's reader we normalise a non-unit
  axis (and add a note); a zero axis is refused.
* Refused with :class:`RobotDescriptionError` naming the joint: ``floating``
  and ``planar`` joints on the chain, a link with two parent joints (closed
  loop), joints that form a cycle, several root links.
* Collision shapes of every link below ``from_link`` become :class:`Capsule`
  objects: ``<sphere>`` exactly (zero-length capsule), ``<capsule radius
  length>`` exactly (length of the cylindrical part, the common extension),
  ``<cylinder>`` approximately (a capsule with the same radius and segment
  length, i.e. half-spheres added at both ends), ``<box>`` enclosed (segment
  over the longest side, radius half the diagonal of the other two).
  ``<mesh filename scale>`` references (collision and visual) become
  :class:`LinkMesh` records, resolved to files by
  :mod:`posebridge.robot.mesh_paths` but not read: the mesh layer
  (:mod:`posebridge.geometry.robot_meshes`) reads them and fits capsules. A
  reference that resolves to no file is a note naming it.
* The XML is read with defusedxml (no DTD, no entity expansion, no external
  references), at most :data:`MAX_URDF_BYTES` and :data:`MAX_URDF_ELEMENTS`
  elements (counted while parsing, so a huge document is refused before a
  tree is built), at most :data:`MAX_CHAIN_JOINTS` moving joints on the
  chain; every problem is reported as
  ``file:line: field: message``.

Export is :mod:`posebridge.robot.urdf_export`.
"""

from __future__ import annotations

import difflib
import math
import xml.sax
import xml.sax.handler
import xml.sax.xmlreader
from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path

import defusedxml
import defusedxml.sax
import numpy as np

from posebridge.robot.errors import ChainChoiceError, RobotDescriptionError
from posebridge.robot.mesh_paths import resolve_mesh_path
from posebridge.robot.model import Capsule, Joint, JointKind, LinkMesh, Robot
from posebridge.transforms import (
    transform_from_position_rpy,
)
from posebridge.units import FloatArray

__all__ = [
    "DEFAULT_ACCELERATION_PER_S",
    "MAX_CHAIN_JOINTS",
    "MAX_URDF_BYTES",
    "MAX_URDF_ELEMENTS",
    "load_robot_urdf",
    "parse_robot_urdf",
]

MAX_URDF_BYTES = 5_000_000
"""Largest URDF file accepted, bytes."""

MAX_URDF_ELEMENTS = 20_000
"""Most XML elements read; the parser stops at the next one, before any tree is built
from the file (a six-axis arm with collision and visual geometry has a few hundred)."""

MAX_CHAIN_JOINTS = 64
"""Most moving joints on the chosen chain."""

DEFAULT_ACCELERATION_PER_S = 4.0
"""Acceleration limit given to imported joints, as a multiple of their velocity limit, 1/s."""

_AXIS_TOLERANCE = 1e-9
_MOVING_TYPES = ("revolute", "continuous", "prismatic")
_KNOWN_TYPES = (*_MOVING_TYPES, "fixed", "floating", "planar")
_LISTED_NAMES = 12


# --------------------------------------------------------------------------- XML


@dataclass
class _Element:
    """One XML element with the line it starts on."""

    tag: str
    attrib: dict[str, str]
    line: int
    children: list[_Element] = field(default_factory=list)

    def find(self, tag: str) -> _Element | None:
        return next((child for child in self.children if child.tag == tag), None)

    def findall(self, tag: str) -> list[_Element]:
        return [child for child in self.children if child.tag == tag]

    def walk(self) -> list[_Element]:
        """Return this element and all below it, document order."""
        found = [self]
        for child in self.children:
            found.extend(child.walk())
        return found


class _TooManyElementsError(Exception):
    """The document has more than :data:`MAX_URDF_ELEMENTS` elements (at ``line``)."""

    def __init__(self, line: int) -> None:
        super().__init__(line)
        self.line = line


class _TreeBuilder(xml.sax.handler.ContentHandler):
    """SAX handler building :class:`_Element` trees with line numbers."""

    def __init__(self) -> None:
        super().__init__()
        self.root: _Element | None = None
        self.count = 0
        self._stack: list[_Element] = []
        self._where: xml.sax.xmlreader.Locator | None = None

    def setDocumentLocator(self, locator: xml.sax.xmlreader.Locator) -> None:
        self._where = locator

    def startElement(self, name: str, attrs: xml.sax.xmlreader.AttributesImpl) -> None:
        line = self._where.getLineNumber() if self._where is not None else 0
        self.count += 1
        if self.count > MAX_URDF_ELEMENTS:
            raise _TooManyElementsError(line or 0)
        element = _Element(name, dict(attrs.items()), line or 0)
        if self._stack:
            self._stack[-1].children.append(element)
        else:
            self.root = element
        self._stack.append(element)

    def endElement(self, name: str) -> None:
        self._stack.pop()


def _read_xml(data: bytes, path: str) -> _Element:
    """Parse XML safely (defusedxml SAX reader: DTDs, entities and external references refused)."""
    if len(data) > MAX_URDF_BYTES:
        raise RobotDescriptionError(
            [f"{path}: file is {len(data)} bytes; URDF files are limited to {MAX_URDF_BYTES}"]
        )
    builder = _TreeBuilder()
    try:
        defusedxml.sax.parseString(
            data, builder, forbid_dtd=True, forbid_entities=True, forbid_external=True
        )
    except _TooManyElementsError as error:
        raise RobotDescriptionError(
            [
                f"{path}:{error.line}: xml: more than {MAX_URDF_ELEMENTS} elements; URDF files "
                "of one arm have far fewer (reading stopped here)"
            ]
        ) from error
    except xml.sax.SAXParseException as error:
        raise RobotDescriptionError(
            [f"{path}:{error.getLineNumber()}: xml: not well-formed XML: {error.getMessage()}"]
        ) from error
    except defusedxml.DTDForbidden as error:
        raise RobotDescriptionError(
            [f"{path}: xml: document type declarations (DTD) are refused: {error}"]
        ) from error
    except defusedxml.DefusedXmlException as error:
        raise RobotDescriptionError(
            [f"{path}: xml: entity declarations and external references are refused: {error}"]
        ) from error
    if builder.root is None:
        raise RobotDescriptionError([f"{path}: xml: empty document"])
    return builder.root


# ----------------------------------------------------------------------- parsing


@dataclass
class _Problems:
    path: str
    items: list[str] = field(default_factory=list)

    def add(self, line: int, where: str, message: str) -> None:
        location = f"{self.path}:{line}" if line else self.path
        self.items.append(f"{location}: {where}: {message}")


@dataclass
class _GeometrySpec:
    """One ``<collision>`` or ``<visual>`` element (SI; only the fields of its shape are set)."""

    name: str
    kind: str
    origin: FloatArray
    radius: float = 0.0
    length: float = 0.0
    size: FloatArray = field(default_factory=lambda: np.zeros(3))
    filename: str = ""
    scale: FloatArray = field(default_factory=lambda: np.ones(3))


@dataclass
class _LinkSpec:
    name: str
    line: int
    collisions: list[_GeometrySpec]
    visuals: list[_GeometrySpec]


@dataclass
class _JointSpec:
    name: str
    kind: str
    line: int
    parent: str
    child: str
    origin: FloatArray
    axis: FloatArray
    axis_length: float
    lower: float
    upper: float
    velocity: float
    has_mimic: bool


def _numbers(
    problems: _Problems, text: str | None, count: int, line: int, where: str
) -> list[float] | None:
    """``count`` whitespace-separated finite numbers from an attribute value."""
    if text is None:
        problems.add(line, where, f"missing; expected {count} number(s)")
        return None
    parts = text.split()
    try:
        values = [float(part) for part in parts]
    except ValueError:
        problems.add(line, where, f"expected {count} number(s), got {text!r}")
        return None
    if len(values) != count or not all(math.isfinite(v) for v in values):
        problems.add(line, where, f"expected {count} finite number(s), got {text!r}")
        return None
    return values


def _parse_origin(problems: _Problems, parent: _Element, where: str) -> FloatArray:
    """``<origin xyz rpy>`` (both default to zeros) as a transform, shape (4, 4)."""
    element = parent.find("origin")
    if element is None:
        return np.eye(4)
    xyz = _numbers(
        problems, element.attrib.get("xyz", "0 0 0"), 3, element.line, f"{where}.origin.xyz"
    )
    rpy = _numbers(
        problems, element.attrib.get("rpy", "0 0 0"), 3, element.line, f"{where}.origin.rpy"
    )
    if xyz is None or rpy is None:
        return np.eye(4)
    return transform_from_position_rpy(xyz, rpy)


def _positive(
    problems: _Problems, shape: _Element, key: str, where: str, *, zero: bool
) -> float | None:
    number = _numbers(problems, shape.attrib.get(key), 1, shape.line, f"{where}.{shape.tag}.{key}")
    if number is None:
        return None
    if number[0] < 0.0 or (number[0] == 0.0 and not zero):
        bound = ">= 0" if zero else "> 0"
        problems.add(
            shape.line, f"{where}.{shape.tag}.{key}", f"must be {bound}, got {number[0]:g}"
        )
        return None
    return number[0]


def _parse_geometry(
    problems: _Problems, element: _Element, link: str, index: int, count: int
) -> _GeometrySpec | None:
    """Parse a ``<collision>``/``<visual>``: capsule-like shapes, boxes and mesh references."""
    default_name = link if count == 1 else f"{link}_{index + 1}"
    name = element.attrib.get("name") or default_name
    where = f"link[{link}].{element.tag}[{index}]"
    origin = _parse_origin(problems, element, where)
    geometry = element.find("geometry")
    shape = geometry.children[0] if geometry is not None and geometry.children else None
    if shape is None:
        problems.add(element.line, f"{where}.geometry", "missing geometry")
        return None
    spec = _GeometrySpec(name, shape.tag, origin)
    if shape.tag in ("cylinder", "capsule", "sphere"):
        radius = _positive(problems, shape, "radius", where, zero=False)
        if radius is None:
            return None
        spec.radius = radius
    if shape.tag in ("cylinder", "capsule"):
        length = _positive(problems, shape, "length", where, zero=True)
        if length is None:
            return None
        spec.length = length
    if shape.tag == "box":
        size = _numbers(problems, shape.attrib.get("size"), 3, shape.line, f"{where}.box.size")
        if size is None:
            return None
        spec.size = np.abs(np.array(size))
    if shape.tag == "mesh":
        spec.filename = shape.attrib.get("filename", "").strip()
        if not spec.filename:
            problems.add(shape.line, f"{where}.mesh.filename", "missing file name")
            return None
        scale = _numbers(
            problems, shape.attrib.get("scale", "1 1 1"), 3, shape.line, f"{where}.mesh.scale"
        )
        if scale is None:
            return None
        if any(value == 0.0 for value in scale):
            problems.add(shape.line, f"{where}.mesh.scale", f"must not be zero, got {scale}")
            return None
        spec.scale = np.array(scale)
    return spec


def _parse_link(problems: _Problems, element: _Element) -> _LinkSpec | None:
    name = element.attrib.get("name", "").strip()
    if not name:
        problems.add(element.line, "link", "missing name attribute")
        return None
    found: dict[str, list[_GeometrySpec]] = {}
    for tag in ("collision", "visual"):
        raw = element.findall(tag)
        specs = [_parse_geometry(problems, c, name, i, len(raw)) for i, c in enumerate(raw)]
        found[tag] = [c for c in specs if c is not None]
    return _LinkSpec(name, element.line, found["collision"], found["visual"])


def _parse_limit(
    problems: _Problems, joint: _Element, kind: str, where: str
) -> tuple[float, float, float]:
    """``<limit lower upper velocity>`` of a moving joint: (lower, upper, velocity), SI.

    ``lower`` and ``upper`` default to 0 (URDF specification); a continuous
    joint gets -pi..pi. Zeros are returned for joints that do not move.
    """
    if kind not in _MOVING_TYPES:
        return 0.0, 0.0, 0.0
    limit = joint.find("limit")
    if limit is None:
        expected = 'velocity="..."' if kind == "continuous" else "lower, upper and velocity"
        problems.add(joint.line, f"{where}.limit", f"missing <limit .../>; expected {expected}")
        return 0.0, 0.0, 0.0
    found = _numbers(
        problems, limit.attrib.get("velocity"), 1, limit.line, f"{where}.limit.velocity"
    )
    velocity = found[0] if found is not None else 0.0
    if found is not None and velocity <= 0.0:
        problems.add(limit.line, f"{where}.limit.velocity", f"must be > 0, got {velocity:g}")
    if kind == "continuous":
        return -math.pi, math.pi, velocity
    bounds = [
        _numbers(problems, limit.attrib.get(key, "0"), 1, limit.line, f"{where}.limit.{key}")
        for key in ("lower", "upper")
    ]
    if bounds[0] is None or bounds[1] is None:
        return 0.0, 0.0, velocity
    lower, upper = bounds[0][0], bounds[1][0]
    if lower >= upper:
        missing = [key for key in ("lower", "upper") if key not in limit.attrib]
        hint = f" ({' and '.join(missing)} missing: URDF default 0)" if missing else ""
        problems.add(
            limit.line,
            f"{where}.limit.lower",
            f"lower ({lower:g}) must be less than upper ({upper:g}){hint}",
        )
    return lower, upper, velocity


def _parse_joint(problems: _Problems, element: _Element) -> _JointSpec | None:
    name = element.attrib.get("name", "").strip()
    if not name:
        problems.add(element.line, "joint", "missing name attribute")
        return None
    where = f"joint[{name}]"
    kind = element.attrib.get("type", "")
    if kind not in _KNOWN_TYPES:
        problems.add(
            element.line,
            f"{where}.type",
            f"expected one of {', '.join(_KNOWN_TYPES)}, got {kind!r}",
        )
        return None
    links = {}
    for role in ("parent", "child"):
        tag = element.find(role)
        link = tag.attrib.get("link", "").strip() if tag is not None else ""
        if not link:
            problems.add(element.line, f"{where}.{role}", f'missing <{role} link="..."/>')
        links[role] = link
    origin = _parse_origin(problems, element, where)
    axis = np.array([1.0, 0.0, 0.0])
    axis_length = 1.0
    axis_element = element.find("axis")
    if axis_element is not None and kind in _MOVING_TYPES:
        values = _numbers(
            problems, axis_element.attrib.get("xyz"), 3, axis_element.line, f"{where}.axis.xyz"
        )
        if values is not None:
            axis_length = float(np.linalg.norm(values))
            if axis_length < _AXIS_TOLERANCE:
                problems.add(
                    axis_element.line, f"{where}.axis.xyz", "zero vector; expected a direction"
                )
            else:
                axis = np.array(values) / axis_length
    lower, upper, velocity = _parse_limit(problems, element, kind, where)
    return _JointSpec(
        name=name,
        kind=kind,
        line=element.line,
        parent=links["parent"],
        child=links["child"],
        origin=origin,
        axis=axis,
        axis_length=axis_length,
        lower=lower,
        upper=upper,
        velocity=velocity,
        has_mimic=element.find("mimic") is not None,
    )


def _listed(names: list[str]) -> str:
    shown = ", ".join(names[:_LISTED_NAMES])
    return shown + (f", ... ({len(names)} in all)" if len(names) > _LISTED_NAMES else "")


def _unknown_link(problems: _Problems, role: str, name: str, links: dict[str, _LinkSpec]) -> None:
    close = difflib.get_close_matches(name, list(links), n=1)
    hint = f" (did you mean {close[0]!r}?)" if close else ""
    problems.add(0, role, f"unknown link {name!r}{hint}; links: {_listed(list(links))}")


def _select_chain(
    problems: _Problems,
    links: dict[str, _LinkSpec],
    joints: list[_JointSpec],
    from_link: str | None,
    to_link: str | None,
) -> tuple[str, str, list[_JointSpec]]:
    """Joints from ``from_link`` down to ``to_link`` (the URDF tree checked on the way)."""
    parent_joint: dict[str, _JointSpec] = {}
    children: dict[str, list[_JointSpec]] = {name: [] for name in links}
    for joint in joints:
        for role, link in (("parent", joint.parent), ("child", joint.child)):
            if link not in links:
                problems.add(
                    joint.line, f"joint[{joint.name}].{role}", f"link {link!r} is not declared"
                )
        if joint.child in parent_joint:
            other = parent_joint[joint.child]
            problems.add(
                joint.line,
                f"joint[{joint.name}]",
                f"link {joint.child!r} already has parent joint {other.name!r} (line {other.line}):"
                " closed kinematic loops are not supported",
            )
            continue
        parent_joint[joint.child] = joint
        if joint.parent in children:
            children[joint.parent].append(joint)
    if problems.items:
        raise RobotDescriptionError(problems.items)
    roots = [name for name in links if name not in parent_joint]
    if len(roots) != 1:
        message = (
            f"several root links ({_listed(roots)}); a URDF is one tree"
            if roots
            else "no root link: the joints form a cycle"
        )
        problems.add(0, "robot", message)
        raise RobotDescriptionError(problems.items)
    reached = {roots[0]}
    stack = [roots[0]]
    while stack:
        for joint in children[stack.pop()]:
            if joint.child not in reached:
                reached.add(joint.child)
                stack.append(joint.child)
    cut_off = [name for name in links if name not in reached]
    if cut_off:
        problems.add(
            0,
            "robot",
            f"links not below the root link {roots[0]!r} (their joints form a cycle): "
            + _listed(cut_off),
        )
        raise RobotDescriptionError(problems.items)
    base = from_link if from_link is not None else roots[0]
    if base not in links:
        _unknown_link(problems, "from_link", base, links)
    if to_link is not None and to_link not in links:
        _unknown_link(problems, "to_link", to_link, links)
    if problems.items:
        raise RobotDescriptionError(problems.items)
    if to_link is None:
        leaves: list[str] = []
        stack = [base]
        while stack:
            link = stack.pop()
            below = children[link]
            if not below and link != base:
                leaves.append(link)
            stack.extend(joint.child for joint in below)
        if len(leaves) != 1:
            reason = "has no links below it" if not leaves else "has several leaf links below it"
            problems.add(
                0,
                "to_link",
                f"from_link {base!r} {reason}; choose the to_link (--to-link on the command "
                "line, to_link in a cell's robot entry or a robot overlay)"
                + (f" among: {_listed(sorted(leaves))}" if leaves else ""),
            )
            raise ChainChoiceError(problems.items, leaves)
        tip = leaves[0]
    else:
        tip = to_link
    chain: list[_JointSpec] = []
    link = tip
    while link != base:  # ends: every link is below the single root (checked above)
        if link not in parent_joint:
            problems.add(0, "to_link", f"to_link {tip!r} is not below from_link {base!r}")
            raise RobotDescriptionError(problems.items)
        joint = parent_joint[link]
        chain.append(joint)
        link = joint.parent
    chain.reverse()
    return base, tip, chain


def _capsule_of_box(spec: _GeometrySpec) -> tuple[FloatArray, FloatArray, float]:
    """Return a capsule holding a box: segment over the longest side, radius half the other sides' diagonal.

    Every corner lies on the capsule's surface or inside it (closed form), so the
    convex box does too. Returns start, end (in the geometry frame, m) and radius.
    """
    longest = int(np.argmax(spec.size))
    others = [k for k in range(3) if k != longest]
    half = np.zeros(3)
    half[longest] = 0.5 * spec.size[longest]
    return -half, half, 0.5 * float(np.hypot(spec.size[others[0]], spec.size[others[1]]))


def _capsules_of_link(
    link: _LinkSpec, index: int, T_internal_link: FloatArray, notes: dict[str, list[str]]
) -> list[Capsule]:
    """Capsules of one URDF link's collision shapes, in internal link frame ``index``."""
    capsules = []
    for collision in link.collisions:
        if collision.kind == "mesh":
            continue  # fitted by the mesh layer from LinkMesh records
        if collision.kind not in ("cylinder", "capsule", "sphere", "box"):
            notes["ignored_geometry"].append(f"{collision.kind} on {link.name}")
            continue
        if collision.kind in ("cylinder", "box"):
            notes[collision.kind].append(link.name)
        T = T_internal_link @ collision.origin
        if collision.kind == "box":
            start, end, radius = _capsule_of_box(collision)
        else:
            end = np.array([0.0, 0.0, 0.5 * collision.length])
            start, radius = -end, collision.radius
        capsules.append(
            Capsule(
                collision.name,
                index,
                T[:3, :3] @ start + T[:3, 3],
                T[:3, :3] @ end + T[:3, 3],
                radius,
                source_link=link.name,
            )
        )
    return capsules


def _meshes_of_link(
    link: _LinkSpec,
    index: int,
    T_internal_link: FloatArray,
    base_folder: Path | None,
    mesh_folders: Sequence[Path],
    missing: list[str],
) -> list[LinkMesh]:
    """Mesh references of one URDF link (visual and collision), resolved to files where found."""
    found = []
    for role, specs in (("collision", link.collisions), ("visual", link.visuals)):
        for spec in specs:
            if spec.kind != "mesh":
                continue
            path, tried = resolve_mesh_path(spec.filename, base_folder, mesh_folders)
            if path is None:
                places = ", ".join(str(t) for t in tried[:4]) or "no folder to look in"
                missing.append(f"{spec.filename} ({role} of {link.name}; tried {places})")
            found.append(
                LinkMesh(
                    source_link=link.name,
                    link=index,
                    role="collision" if role == "collision" else "visual",
                    filename=spec.filename,
                    path=path,
                    scale=spec.scale,
                    T_link_mesh=T_internal_link @ spec.origin,
                )
            )
    return found


def _attached_links(
    base: str, chain: list[_JointSpec], joints: list[_JointSpec]
) -> tuple[dict[str, tuple[int, FloatArray]], list[_JointSpec]]:
    """Every link below ``base`` with its internal link index and pose in that link frame.

    Chain links follow the chain (fixed joints merged); links off the chain hang
    from the chain link above them with their joints held at zero (the joint
    frame then equals its origin). Also returns the held joints (off the chain,
    and mimic joints on it, which are merged like fixed joints).
    """
    placed: dict[str, tuple[int, FloatArray]] = {base: (0, np.eye(4))}
    index = 0
    for joint in chain:
        if joint.kind in _MOVING_TYPES and not joint.has_mimic:
            index += 1
            placed[joint.child] = (index, np.eye(4))
        else:
            placed[joint.child] = (index, placed[joint.parent][1] @ joint.origin)
    on_chain = {joint.name for joint in chain}
    held = [j for j in chain if j.has_mimic and j.kind in _MOVING_TYPES]
    children: dict[str, list[_JointSpec]] = {}
    for joint in joints:
        children.setdefault(joint.parent, []).append(joint)
    stack = list(placed)
    while stack:
        link = stack.pop()
        for joint in children.get(link, []):
            if joint.name in on_chain or joint.child in placed:
                continue
            if joint.kind != "fixed":
                held.append(joint)
            link_index, T = placed[link]
            placed[joint.child] = (link_index, T @ joint.origin)
            stack.append(joint.child)
    return placed, held


def parse_robot_urdf(
    text: str | bytes,
    path: str = "<string>",
    from_link: str | None = None,
    to_link: str | None = None,
    *,
    kind: str = "urdf",
    mesh_folders: Sequence[Path] = (),
) -> Robot:
    """Build a :class:`Robot` from URDF text: the serial chain from ``from_link`` to ``to_link``.

    Parameters
    ----------
    text : str or bytes
        The URDF document (bytes keep the encoding named in the XML declaration).
    path : str
        File name used in messages and stored as :attr:`Robot.source`.
    from_link, to_link : str, optional
        Chain ends; default the root link and the single leaf below ``from_link``.
    kind : str, keyword-only
        Family label stored as :attr:`Robot.kind`.
    mesh_folders : sequence of Path, keyword-only
        Folders to look for mesh files in (:mod:`posebridge.robot.mesh_paths`).

    Returns
    -------
    Robot
        Joints in chain order, flange = ``to_link`` frame, tool = identity,
        mesh references in :attr:`Robot.meshes` (not read here), remarks in
        :attr:`Robot.notes`.

    Raises
    ------
    RobotDescriptionError
        Malformed XML or URDF, unsupported joints on the chain, unknown or
        ambiguous chain ends; every problem as ``file:line: field: message``.
    """
    data = text.encode("utf-8") if isinstance(text, str) else text
    root = _read_xml(data, path)
    problems = _Problems(path)
    if root.tag != "robot":
        problems.add(root.line, "robot", f"root element must be <robot>, got <{root.tag}>")
        raise RobotDescriptionError(problems.items)
    if any(element.tag.startswith("xacro:") for element in root.walk()):
        problems.add(root.line, "robot", "contains xacro macros; expand the file with xacro first")
        raise RobotDescriptionError(problems.items)
    name = root.attrib.get("name", "").strip()
    if not name:
        problems.add(root.line, "robot.name", "missing name attribute on <robot>")

    links: dict[str, _LinkSpec] = {}
    for element in root.findall("link"):
        link = _parse_link(problems, element)
        if link is None:
            continue
        if link.name in links:
            problems.add(
                link.line,
                f"link[{link.name}]",
                f"duplicate link name (first on line {links[link.name].line})",
            )
            continue
        links[link.name] = link
    joints: list[_JointSpec] = []
    joint_lines: dict[str, int] = {}
    for element in root.findall("joint"):
        joint = _parse_joint(problems, element)
        if joint is None:
            continue
        if joint.name in joint_lines:
            problems.add(
                joint.line,
                f"joint[{joint.name}]",
                f"duplicate joint name (first on line {joint_lines[joint.name]})",
            )
            continue
        joint_lines[joint.name] = joint.line
        joints.append(joint)
    if not links:
        problems.add(root.line, "robot", "no <link> elements")
    if problems.items:
        raise RobotDescriptionError(problems.items)

    base, tip, chain = _select_chain(problems, links, joints, from_link, to_link)
    for joint in chain:
        if joint.kind in ("floating", "planar"):
            problems.add(
                joint.line,
                f"joint[{joint.name}].type",
                f"{joint.kind} joints are not supported in a serial arm chain",
            )
    moving = [joint for joint in chain if joint.kind in _MOVING_TYPES and not joint.has_mimic]
    if not moving and not problems.items:
        problems.add(0, "robot", f"no moving joint between from_link {base!r} and to_link {tip!r}")
    if len(moving) > MAX_CHAIN_JOINTS:
        problems.add(
            0,
            "robot",
            f"{len(moving)} moving joints between from_link {base!r} and to_link {tip!r}; "
            f"posebridge takes at most {MAX_CHAIN_JOINTS}",
        )
    if problems.items:
        raise RobotDescriptionError(problems.items)

    notes: dict[str, list[str]] = {"ignored_geometry": [], "cylinder": [], "box": []}
    robot_joints: list[Joint] = []
    T_pending = np.eye(4)
    for joint in chain:
        if joint.kind not in _MOVING_TYPES or joint.has_mimic:
            T_pending = T_pending @ joint.origin
            continue
        joint_kind: JointKind = "prismatic" if joint.kind == "prismatic" else "revolute"
        robot_joints.append(
            Joint(
                name=joint.name,
                kind=joint_kind,
                origin=T_pending @ joint.origin,
                axis=joint.axis,
                lower=joint.lower,
                upper=joint.upper,
                velocity_max=joint.velocity,
                acceleration_max=DEFAULT_ACCELERATION_PER_S * joint.velocity,
                continuous=joint.kind == "continuous",
            )
        )
        T_pending = np.eye(4)
    placed, held = _attached_links(base, chain, joints)
    base_folder = None if path == "<string>" else Path(path).parent
    capsules: list[Capsule] = []
    meshes: list[LinkMesh] = []
    missing: list[str] = []
    for link_name, (index, T) in placed.items():
        capsules += _capsules_of_link(links[link_name], index, T, notes)
        meshes += _meshes_of_link(links[link_name], index, T, base_folder, mesh_folders, missing)

    return Robot(
        name=name,
        kind=kind,
        joints=tuple(robot_joints),
        T_link_flange=T_pending,
        T_flange_tool=np.eye(4),
        capsules=tuple(capsules),
        description=f"Imported from URDF: chain {base} -> {tip}",
        source=path,
        notes=_notes(chain, joints, held, notes, missing, set(placed)),
        from_link=base,
        to_link=tip,
        held_joints=tuple(joint.name for joint in held),
        meshes=tuple(meshes),
        link_poses=placed,
        leaf_links=tuple(
            sorted(name for name in placed if name != base and not _has_children(name, joints))
        ),
        chain_starts=_ancestors(tip, joints),
    )


def _has_children(link: str, joints: list[_JointSpec]) -> bool:
    return any(joint.parent == link for joint in joints)


def _ancestors(link: str, joints: list[_JointSpec]) -> tuple[str, ...]:
    """Return the links above ``link`` in the URDF tree, from the root down (a tree)."""
    parent = {joint.child: joint.parent for joint in joints}
    above: list[str] = []
    while link in parent:
        link = parent[link]
        above.append(link)
    return tuple(reversed(above))


def _notes(
    chain: list[_JointSpec],
    joints: list[_JointSpec],
    held: list[_JointSpec],
    notes: dict[str, list[str]],
    missing: list[str],
    attached: set[str],
) -> tuple[str, ...]:
    """Non-fatal remarks about what the import assumed or left out."""
    out = [
        "URDF has no acceleration limits: each joint's acceleration limit is set to "
        f"{DEFAULT_ACCELERATION_PER_S:g} x its velocity limit per second (give them in a "
        "robot overlay)"
    ]
    for joint in chain:
        if joint.kind in _MOVING_TYPES and abs(joint.axis_length - 1.0) > _AXIS_TOLERANCE:
            out.append(
                f"joint {joint.name!r}: axis of length {joint.axis_length:.6g} normalised to unit length"
            )
    if held:
        out.append(
            "joints off the chosen chain (or mimic joints) held at zero, their links carried "
            "rigidly: "
            + _listed([f"{j.name} ({'mimic' if j.has_mimic else j.kind})" for j in held])
        )
    if missing:
        out.append(f"{len(missing)} mesh file(s) not found: " + "; ".join(missing[:_LISTED_NAMES]))
    if notes["cylinder"]:
        out.append(
            "collision cylinders turned into capsules of the same radius and length (an "
            "approximation: the capsule adds a half-sphere at each end) on links: "
            + _listed(sorted(set(notes["cylinder"])))
        )
    if notes["box"]:
        out.append(
            "collision boxes enclosed by capsules (segment over the longest side) on links: "
            + _listed(sorted(set(notes["box"])))
        )
    if notes["ignored_geometry"]:
        out.append(
            "collision geometry without a capsule equivalent ignored: "
            + _listed(notes["ignored_geometry"])
        )
    on_chain = {joint.name for joint in chain} | {joint.name for joint in held}
    outside = [j.name for j in joints if j.name not in on_chain and j.child not in attached]
    if outside:
        out.append(f"joints outside the selected chain ignored: {_listed(outside)}")
    return tuple(out)


def load_robot_urdf(
    path: str | Path,
    from_link: str | None = None,
    to_link: str | None = None,
    *,
    kind: str = "urdf",
    mesh_folders: Sequence[Path] = (),
) -> Robot:
    """Load the serial chain of a URDF file (at most :data:`MAX_URDF_BYTES`).

    See :func:`parse_robot_urdf` for the parameters and the rules.
    """
    path = Path(path)
    try:
        size = path.stat().st_size
        if size > MAX_URDF_BYTES:
            raise RobotDescriptionError(
                [f"{path}: file is {size} bytes; URDF files are limited to {MAX_URDF_BYTES}"]
            )
        data = path.read_bytes()
    except OSError as error:
        raise RobotDescriptionError([f"{path}: cannot read: {error.strerror or error}"]) from error
    return parse_robot_urdf(
        data, str(path), from_link, to_link, kind=kind, mesh_folders=mesh_folders
    )

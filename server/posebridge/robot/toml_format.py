"""Loader for posebridge's own robot description format (TOML).

The format is documented in README.md ("Robot descriptions"). Values are
millimetres and degrees with the unit in every key (``xyz_mm``,
``min_deg``, ``velocity_mm_s``); they are converted to SI here through
:mod:`posebridge.units`.

Every problem found is reported, each as ``file:line: field: message``; the
first problem does not hide the others.
"""

from __future__ import annotations

import difflib
import math
import re
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from posebridge.robot.dh import DhConvention, DhRow, split_dh_chain
from posebridge.robot.errors import RobotDescriptionError
from posebridge.robot.model import Capsule, Joint, JointKind, Robot
from posebridge.transforms import transform_from_position_rpy
from posebridge.units import FloatArray, joints_si_from_user, m_from_mm, rad_from_deg

__all__ = ["MAX_DESCRIPTION_BYTES", "MAX_ROBOT_JOINTS", "load_robot_toml", "parse_robot_toml"]

MAX_DESCRIPTION_BYTES = 1_000_000
"""Largest robot description file accepted, bytes."""
MAX_ROBOT_JOINTS = 64
"""Most ``[[joint]]`` tables in one file (the URDF chain's cap, ``MAX_CHAIN_JOINTS``, is the
same); a longer file is refused in one line before any joint is read."""
SCHEMA_VERSION = 1
_UNIT_TOLERANCE = 1e-6

_TOP_KEYS = {"schema_version", "robot", "joint", "flange", "tool", "capsule"}
_ROBOT_KEYS = {"name", "kind", "description", "convention", "home_deg"}
_JOINT_KEYS = {"name", "type", "continuous", "dh", "origin", "axis", "limits"}
_DH_KEYS = {"a_mm", "alpha_deg", "d_mm", "theta_deg"}
_ORIGIN_KEYS = {"xyz_mm", "rpy_deg"}
_TOOL_KEYS = {"name", "xyz_mm", "rpy_deg"}
_CAPSULE_KEYS = {"name", "link", "start_mm", "end_mm", "radius_mm"}
_LIMIT_KEYS = {
    "revolute": ("min_deg", "max_deg", "velocity_deg_s", "acceleration_deg_s2"),
    "prismatic": ("min_mm", "max_mm", "velocity_mm_s", "acceleration_mm_s2"),
}
_CONVENTIONS = ("dh_standard", "dh_modified", "origin_axis")


@dataclass
class _Problems:
    """Collects problems with their file and line."""

    path: str
    text: str
    items: list[str] = field(default_factory=list)

    def add(
        self, where: str, message: str, *, block: str | None = None, index: int = 0, key: str = ""
    ) -> None:
        """Record a problem; ``block`` names the table it is in (``""`` for the top level)."""
        line = _find_line(self.text, block, index, key) if block is not None else None
        location = f"{self.path}:{line}" if line else self.path
        self.items.append(f"{location}: {where}: {message}")


def _find_line(text: str, table: str, index: int, key: str) -> int | None:
    """1-based line of ``key`` inside the ``index``-th ``[table]``/``[[table]]`` block.

    ``table == ""`` is the top level: the key before the first table header,
    else the first header of a table named ``key``.
    """
    any_header = re.compile(r"^\s*\[")
    key_pattern = re.compile(r"(^|[\s{,.])" + re.escape(key) + r"\s*=")
    lines = text.splitlines()
    if not table:
        for number, line in enumerate(lines, start=1):
            if any_header.match(line):
                break
            if key_pattern.search(line):
                return number
        named = re.compile(r"^\s*\[\[?\s*" + re.escape(key) + r"\s*[\].]")
        return next((n for n, line in enumerate(lines, start=1) if named.match(line)), None)
    header = re.compile(r"^\s*\[\[?\s*" + re.escape(table) + r"\s*\]\]?\s*(#.*)?$")
    starts = [i for i, line in enumerate(lines) if header.match(line)]
    if index >= len(starts):
        return None
    start = starts[index]
    if not key:
        return start + 1
    for offset, line in enumerate(lines[start + 1 :], start=start + 1):
        if any_header.match(line):
            break
        if key_pattern.search(line):
            return offset + 1
    return start + 1


_UNIT_TOKENS = frozenset(
    {"m", "mm", "cm", "um", "km", "in", "inch", "ft", "deg", "degree", "degrees"}
    | {"rad", "radian", "radians", "s", "s2", "sec", "ms", "rpm", "turn", "turns"}
)


def _quantity(key: str) -> str:
    """Key without its unit suffix: ``velocity_deg_s`` -> ``velocity``."""
    tokens = key.split("_")
    while len(tokens) > 1 and tokens[-1] in _UNIT_TOKENS:
        tokens.pop()
    return "_".join(tokens)


def _unknown_keys(
    problems: _Problems,
    mapping: dict[str, Any],
    allowed: set[str] | tuple[str, ...],
    where: str,
    **loc: Any,
) -> None:
    allowed = set(allowed)
    for key in mapping:
        if key in allowed:
            continue
        same_quantity = sorted(a for a in allowed if _quantity(a) == _quantity(key))
        if same_quantity:
            message = (
                f"unknown key {key!r}: wrong unit suffix, expected {same_quantity[0]!r}"
                " (lengths in mm, angles in deg, time in s)"
            )
        else:
            close = difflib.get_close_matches(key, sorted(allowed), n=1)
            hint = f" (did you mean {close[0]!r}?)" if close else ""
            message = f"unknown key {key!r}{hint}; allowed: {', '.join(sorted(allowed))}"
        problems.add(f"{where}.{key}" if where else key, message, key=key, **loc)


def _number(problems: _Problems, value: Any, where: str, **loc: Any) -> float | None:
    if isinstance(value, bool) or not isinstance(value, int | float):
        problems.add(where, f"expected a number, got {type(value).__name__} {value!r}", **loc)
        return None
    if not math.isfinite(value):
        problems.add(where, f"expected a finite number, got {value!r}", **loc)
        return None
    return float(value)


def _vector3(problems: _Problems, value: Any, where: str, **loc: Any) -> FloatArray | None:
    if not isinstance(value, list) or len(value) != 3:
        problems.add(where, f"expected a list of 3 numbers, got {value!r}", **loc)
        return None
    numbers = [_number(problems, v, f"{where}[{i}]", **loc) for i, v in enumerate(value)]
    if any(n is None for n in numbers):
        return None
    return np.array(numbers, dtype=np.float64)


def _string(problems: _Problems, value: Any, where: str, **loc: Any) -> str | None:
    if not isinstance(value, str) or not value.strip():
        problems.add(where, f"expected a non-empty string, got {value!r}", **loc)
        return None
    return value


def _pose(problems: _Problems, table: Any, where: str, allowed: set[str], **loc: Any) -> FloatArray:
    """``xyz_mm`` + ``rpy_deg`` table to a transform in SI (identity where missing)."""
    if not isinstance(table, dict):
        problems.add(where, f"expected a table with xyz_mm and rpy_deg, got {table!r}", **loc)
        return np.eye(4)
    _unknown_keys(problems, table, allowed, where, **loc)
    xyz = _vector3(problems, table.get("xyz_mm", [0, 0, 0]), f"{where}.xyz_mm", **loc)
    rpy = _vector3(problems, table.get("rpy_deg", [0, 0, 0]), f"{where}.rpy_deg", **loc)
    if xyz is None or rpy is None:
        return np.eye(4)
    return transform_from_position_rpy(m_from_mm(xyz), rad_from_deg(rpy))


@dataclass
class _JointSpec:
    name: str
    kind: JointKind
    continuous: bool
    origin: FloatArray
    axis: FloatArray
    dh: DhRow | None
    limits_si: tuple[float, float, float, float]


def _parse_limits(
    problems: _Problems, table: Any, kind: JointKind, continuous: bool, where: str, **loc: Any
) -> tuple[float, float, float, float]:
    keys = _LIMIT_KEYS[kind]
    if not isinstance(table, dict):
        problems.add(
            where, f"missing limits table; expected keys {', '.join(keys)}", key="limits", **loc
        )
        return (0.0, 0.0, 1.0, 1.0)
    _unknown_keys(problems, table, keys, where, **loc)
    required = keys[2:] if continuous else keys
    values: dict[str, float] = {}
    for key in keys:
        if key not in table:
            if key in required:
                problems.add(f"{where}.{key}", f"missing limit {key!r}", key="limits", **loc)
            continue
        if continuous and key in keys[:2]:
            problems.add(
                f"{where}.{key}", "a continuous joint has no position limits", key=key, **loc
            )
            continue
        number = _number(problems, table[key], f"{where}.{key}", key=key, **loc)
        if number is not None:
            values[key] = number
    scale = (
        (lambda v: float(m_from_mm(v)))
        if kind == "prismatic"
        else (lambda v: float(rad_from_deg(v)))
    )
    if continuous:
        lower, upper = -math.pi, math.pi
    else:
        lower = scale(values.get(keys[0], 0.0))
        upper = scale(values.get(keys[1], 0.0))
        if keys[0] in values and keys[1] in values and values[keys[0]] >= values[keys[1]]:
            problems.add(
                f"{where}.{keys[0]}",
                f"min ({values[keys[0]]:g}) must be less than max ({values[keys[1]]:g})",
                key=keys[0],
                **loc,
            )
    velocity = scale(values.get(keys[2], 1.0))
    acceleration = scale(values.get(keys[3], 1.0))
    for key in keys[2:]:
        if key in values and values[key] <= 0.0:
            problems.add(f"{where}.{key}", f"must be > 0, got {values[key]:g}", key=key, **loc)
    return (lower, upper, velocity, acceleration)


def _parse_joint(problems: _Problems, raw: Any, index: int, convention: str) -> _JointSpec | None:
    loc: dict[str, Any] = {"block": "joint", "index": index}
    where = f"joint[{index}]"
    if not isinstance(raw, dict):
        problems.add(where, "expected a [[joint]] table", **loc)
        return None
    _unknown_keys(problems, raw, _JOINT_KEYS, where, **loc)
    name = _string(problems, raw.get("name", f"j{index + 1}"), f"{where}.name", key="name", **loc)
    kind_raw = raw.get("type")
    if kind_raw not in ("revolute", "prismatic"):
        problems.add(
            f"{where}.type",
            f"expected 'revolute' or 'prismatic', got {kind_raw!r}",
            key="type",
            **loc,
        )
        return None
    kind: JointKind = "revolute" if kind_raw == "revolute" else "prismatic"
    continuous = raw.get("continuous", False)
    if not isinstance(continuous, bool) or (continuous and kind != "revolute"):
        problems.add(
            f"{where}.continuous",
            f"expected true/false, and only for revolute joints, got {continuous!r}",
            key="continuous",
            **loc,
        )
        continuous = False
    limits = _parse_limits(problems, raw.get("limits"), kind, continuous, f"{where}.limits", **loc)

    dh: DhRow | None = None
    origin = np.eye(4)
    axis = np.array([0.0, 0.0, 1.0])
    if convention in ("dh_standard", "dh_modified"):
        for key in ("origin", "axis"):
            if key in raw:
                problems.add(
                    f"{where}.{key}",
                    f"not used with convention {convention!r}; give a dh row",
                    key=key,
                    **loc,
                )
        table = raw.get("dh")
        if not isinstance(table, dict):
            problems.add(
                f"{where}.dh",
                f"missing dh row; expected keys {', '.join(sorted(_DH_KEYS))}",
                key="dh",
                **loc,
            )
            return None
        _unknown_keys(problems, table, _DH_KEYS, f"{where}.dh", **loc)
        values: dict[str, float] = {}
        for key in sorted(_DH_KEYS):
            if key not in table:
                problems.add(f"{where}.dh.{key}", f"missing DH value {key!r}", key="dh", **loc)
                continue
            number = _number(problems, table[key], f"{where}.dh.{key}", key=key, **loc)
            if number is not None:
                values[key] = number
        if len(values) == 4:
            dh = DhRow(
                a=float(m_from_mm(values["a_mm"])),
                alpha=float(rad_from_deg(values["alpha_deg"])),
                d=float(m_from_mm(values["d_mm"])),
                theta=float(rad_from_deg(values["theta_deg"])),
                prismatic=kind == "prismatic",
            )
    else:
        if "dh" in raw:
            problems.add(
                f"{where}.dh",
                "not used with convention 'origin_axis'; give origin and axis",
                key="dh",
                **loc,
            )
        origin = _pose(problems, raw.get("origin", {}), f"{where}.origin", _ORIGIN_KEYS, **loc)
        if "axis" not in raw:
            problems.add(
                f"{where}.axis", "missing joint axis (unit vector [x, y, z])", key="axis", **loc
            )
        else:
            vector = _vector3(problems, raw["axis"], f"{where}.axis", key="axis", **loc)
            if vector is not None:
                norm = float(np.linalg.norm(vector))
                if abs(norm - 1.0) > _UNIT_TOLERANCE:
                    problems.add(
                        f"{where}.axis",
                        f"must be a unit vector, has length {norm:.6g}",
                        key="axis",
                        **loc,
                    )
                else:
                    axis = vector / norm
    if name is None:
        return None
    return _JointSpec(name, kind, bool(continuous), origin, axis, dh, limits)


@dataclass
class _CapsuleSpec:
    """A validated [[capsule]] table, still in the file's units and link frame."""

    name: str
    link: int
    start_mm: FloatArray
    end_mm: FloatArray
    radius_mm: float


def _parse_capsule(
    problems: _Problems, raw: Any, index: int, link_index: dict[str, int]
) -> _CapsuleSpec | None:
    loc: dict[str, Any] = {"block": "capsule", "index": index}
    where = f"capsule[{index}]"
    if not isinstance(raw, dict):
        problems.add(where, "expected a [[capsule]] table", **loc)
        return None
    _unknown_keys(problems, raw, _CAPSULE_KEYS, where, **loc)
    name = _string(
        problems, raw.get("name", f"capsule{index + 1}"), f"{where}.name", key="name", **loc
    )
    link_name = raw.get("link")
    if link_name not in link_index:
        problems.add(
            f"{where}.link",
            f"unknown link {link_name!r}; expected 'base' or a joint name: {', '.join(link_index)}",
            key="link",
            **loc,
        )
    start = _vector3(problems, raw.get("start_mm"), f"{where}.start_mm", key="start_mm", **loc)
    end = _vector3(problems, raw.get("end_mm"), f"{where}.end_mm", key="end_mm", **loc)
    radius = _number(problems, raw.get("radius_mm"), f"{where}.radius_mm", key="radius_mm", **loc)
    if radius is not None and radius <= 0.0:
        problems.add(f"{where}.radius_mm", f"must be > 0, got {radius:g}", key="radius_mm", **loc)
        return None
    if (
        name is None
        or link_name not in link_index
        or start is None
        or end is None
        or radius is None
    ):
        return None
    return _CapsuleSpec(name, link_index[link_name], start, end, radius)


def _capsule_in_link_frame(spec: _CapsuleSpec, T_dh: list[FloatArray]) -> Capsule:
    """Capsule in SI in the internal link frame (``T_dh``: convention link frame in it)."""
    T = T_dh[spec.link - 1] if spec.link > 0 else np.eye(4)
    start = T[:3, :3] @ m_from_mm(spec.start_mm) + T[:3, 3]
    end = T[:3, :3] @ m_from_mm(spec.end_mm) + T[:3, 3]
    return Capsule(spec.name, spec.link, start, end, float(m_from_mm(spec.radius_mm)))


_TOML_ERROR_LINE = re.compile(r"^(?P<message>.*?)\s*\(at line (?P<line>\d+), column \d+\)$")


def _parse_home(problems: _Problems, value: Any, n_joints: int) -> FloatArray | None:
    """``robot.home_deg``: one value per joint (deg; mm for prismatic joints), optional."""
    if value is None:
        return None
    where = "robot.home_deg"
    if not isinstance(value, list) or len(value) != n_joints:
        problems.add(
            where,
            f"expected a list of {n_joints} numbers (one per joint), got {value!r}",
            block="robot",
            key="home_deg",
        )
        return None
    numbers = [
        _number(problems, v, f"{where}[{i}]", block="robot", key="home_deg")
        for i, v in enumerate(value)
    ]
    if any(n is None for n in numbers):
        return None
    return np.array(numbers, dtype=np.float64)


def parse_robot_toml(text: str, path: str = "<string>") -> Robot:
    """Build a :class:`Robot` from the text of a posebridge robot TOML file.

    Raises
    ------
    RobotDescriptionError
        Listing every problem as ``file:line: field: message``.
    """
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as error:
        found = _TOML_ERROR_LINE.match(str(error))
        location = f"{path}:{found['line']}" if found else path
        reason = found["message"] if found else str(error)
        raise RobotDescriptionError([f"{location}: toml: not valid TOML: {reason}"]) from error
    problems = _Problems(path, text)
    _unknown_keys(problems, data, _TOP_KEYS, "", block="")
    version = data.get("schema_version", SCHEMA_VERSION)
    if version != SCHEMA_VERSION:
        problems.add(
            "schema_version",
            f"expected {SCHEMA_VERSION}, got {version!r}",
            block="",
            key="schema_version",
        )
    meta = data.get("robot")
    if not isinstance(meta, dict):
        problems.add("robot", "missing [robot] table with name, kind, convention")
        raise RobotDescriptionError(problems.items)
    _unknown_keys(problems, meta, _ROBOT_KEYS, "robot", block="robot")
    name = _string(problems, meta.get("name"), "robot.name", block="robot", key="name")
    kind = _string(problems, meta.get("kind"), "robot.kind", block="robot", key="kind")
    convention = meta.get("convention")
    if convention not in _CONVENTIONS:
        problems.add(
            "robot.convention",
            f"expected one of {', '.join(_CONVENTIONS)}, got {convention!r}",
            block="robot",
            key="convention",
        )
        raise RobotDescriptionError(problems.items)

    raw_joints = data.get("joint")
    if not isinstance(raw_joints, list) or not raw_joints:
        problems.add("joint", "expected at least one [[joint]] table", block="", key="joint")
        raise RobotDescriptionError(problems.items)
    if len(raw_joints) > MAX_ROBOT_JOINTS:
        raise RobotDescriptionError(
            [
                f"{path}: joint: {len(raw_joints)} [[joint]] tables; a robot file has at most "
                f"{MAX_ROBOT_JOINTS} joints"
            ]
        )
    specs = [_parse_joint(problems, raw, i, convention) for i, raw in enumerate(raw_joints)]
    raw_names = [
        raw.get("name", f"j{i + 1}") if isinstance(raw, dict) else None
        for i, raw in enumerate(raw_joints)
    ]
    for i, joint_name in enumerate(raw_names):
        if joint_name is not None and joint_name in raw_names[:i]:
            problems.add(
                f"joint[{i}].name",
                f"duplicate joint name {joint_name!r} (also joint[{raw_names.index(joint_name)}])",
                block="joint",
                index=i,
                key="name",
            )
    flange = _pose(problems, data.get("flange", {}), "flange", _ORIGIN_KEYS, block="flange")
    notes: tuple[str, ...] = ()
    if "flange" not in data:
        notes = (
            "no [flange] table: the flange is taken at the last joint's frame with no offset, "
            "so any link length after the last joint is not counted",
        )
    tool = _pose(problems, data.get("tool", {}), "tool", _TOOL_KEYS, block="tool")
    link_index = {"base": 0} | {
        str(joint_name): i + 1
        for i, joint_name in enumerate(raw_names)
        if isinstance(joint_name, str)
    }
    raw_capsules = data.get("capsule", [])
    if not isinstance(raw_capsules, list):
        problems.add("capsule", "expected [[capsule]] tables", block="", key="capsule")
        raw_capsules = []
    capsule_specs = [
        _parse_capsule(problems, raw, i, link_index) for i, raw in enumerate(raw_capsules)
    ]
    home_user = _parse_home(problems, meta.get("home_deg"), len(raw_joints))
    if problems.items or any(s is None for s in specs):
        raise RobotDescriptionError(problems.items)
    valid_specs = [s for s in specs if s is not None]
    home = None
    if home_user is not None:
        prismatic = np.array([s.kind == "prismatic" for s in valid_specs])
        home = joints_si_from_user(home_user, prismatic)
        for i, s in enumerate(valid_specs):
            if not s.continuous and not s.limits_si[0] <= home[i] <= s.limits_si[1]:
                problems.add(
                    f"robot.home_deg[{i}]",
                    f"home value {home_user[i]:g} of joint {s.name!r} is outside its limits",
                    block="robot",
                    key="home_deg",
                )
        if problems.items:
            raise RobotDescriptionError(problems.items)

    if convention in ("dh_standard", "dh_modified"):
        dh_convention: DhConvention = (
            "dh_standard" if convention == "dh_standard" else "dh_modified"
        )
        rows = [s.dh for s in valid_specs if s.dh is not None]
        origins, tail, T_dh = split_dh_chain(rows, dh_convention)
        axes = [np.array([0.0, 0.0, 1.0])] * len(rows)
        flange = tail @ flange
    else:
        origins = [s.origin for s in valid_specs]
        axes = [s.axis for s in valid_specs]
        T_dh = [np.eye(4)] * len(valid_specs)

    joints = tuple(
        Joint(
            name=s.name,
            kind=s.kind,
            origin=origin,
            axis=axis,
            lower=s.limits_si[0],
            upper=s.limits_si[1],
            velocity_max=s.limits_si[2],
            acceleration_max=s.limits_si[3],
            continuous=s.continuous,
        )
        for s, origin, axis in zip(valid_specs, origins, axes, strict=True)
    )
    assert name is not None
    assert kind is not None
    return Robot(
        name=name,
        kind=kind,
        joints=joints,
        T_link_flange=flange,
        T_flange_tool=tool,
        capsules=tuple(_capsule_in_link_frame(c, T_dh) for c in capsule_specs if c is not None),
        description=str(meta.get("description", "")),
        source=path,
        home=home,
        notes=notes,
    )


def load_robot_toml(path: str | Path) -> Robot:
    """Load a robot from a posebridge TOML file (at most :data:`MAX_DESCRIPTION_BYTES`)."""
    path = Path(path)
    try:
        size = path.stat().st_size
        if size > MAX_DESCRIPTION_BYTES:
            raise RobotDescriptionError(
                [
                    f"{path}: file is {size} bytes; robot descriptions are limited to {MAX_DESCRIPTION_BYTES}"
                ]
            )
        text = path.read_text(encoding="utf-8")
    except OSError as error:
        raise RobotDescriptionError([f"{path}: cannot read: {error.strerror or error}"]) from error
    except UnicodeDecodeError as error:
        raise RobotDescriptionError([f"{path}: not UTF-8 text ({error.reason})"]) from error
    return parse_robot_toml(text, str(path))

"""Robot overlays: a posebridge TOML that names a URDF and adds what URDF lacks or gets wrong.

An overlay is a ``.toml`` file with a top-level ``urdf`` key (which tells it
apart from a full posebridge description)::

    urdf = "my_arm_description/urdf/my_arm.urdf"   # relative to this file
    from_link = "base_link"                           # chain choice (optional)
    to_link = "tool0"
    mesh_folders = ["my_arm_description/.."]          # where package:// is looked up
    name = "my-arm"                                   # optional; default the URDF's name
    home_deg = [0, -30, 60, 0, 60, 0]                 # deg; mm for prismatic joints
    remove_capsules = ["forearm-2"]                   # imported or fitted capsules to drop

    [joint.shoulder_pan]                              # per joint (its URDF name), all optional
    acceleration_deg_s2 = 300                         # replaces the assumed 4 x velocity
    jerk_deg_s3 = 3000
    min_deg = -170                                    # soft limits: inside the URDF's range
    max_deg = 170

    [tool]                                            # default tool in the flange frame
    xyz_mm = [0, 0, 120]
    rpy_deg = [0, 0, 0]

    [[capsule]]                                       # extra capsules, on a URDF link's frame
    name = "gripper"
    link = "wrist_3_link"
    start_mm = [0, 0, 0]
    end_mm = [0, 0, 150]
    radius_mm = 45
    replace = true        # drop the link's imported and fitted capsules (default false)

Prismatic joints use ``_mm`` keys (``acceleration_mm_s2``, ``jerk_mm_s3``,
``min_mm``, ``max_mm``). Values are converted to SI through
:mod:`posebridge.units`; every problem is reported as ``file:line: field: message``.
Capsules removed by name with ``remove_capsules`` may be fitted ones (names
from ``posebridge describe``); they are kept in :attr:`Robot.removed_capsules`
and removed after fitting (:func:`apply_capsule_removals`).
"""

from __future__ import annotations

import dataclasses
import tomllib
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from posebridge.robot.errors import RobotDescriptionError
from posebridge.robot.model import Capsule, Robot
from posebridge.robot.toml_format import (
    MAX_DESCRIPTION_BYTES,
    _number,
    _pose,
    _Problems,
    _string,
    _unknown_keys,
    _vector3,
)
from posebridge.robot.urdf_import import DEFAULT_ACCELERATION_PER_S, load_robot_urdf
from posebridge.units import FloatArray, joints_si_from_user, m_from_mm, rad_from_deg

__all__ = ["apply_capsule_removals", "is_overlay", "load_robot_overlay"]

_TOP_KEYS = {
    "urdf",
    "from_link",
    "to_link",
    "mesh_folders",
    "name",
    "home_deg",
    "remove_capsules",
    "joint",
    "tool",
    "capsule",
}
_JOINT_KEYS = {
    "revolute": ("acceleration_deg_s2", "jerk_deg_s3", "min_deg", "max_deg"),
    "prismatic": ("acceleration_mm_s2", "jerk_mm_s3", "min_mm", "max_mm"),
}
_CAPSULE_KEYS = {"name", "link", "start_mm", "end_mm", "radius_mm", "replace"}


def is_overlay(text: str) -> bool:
    """Whether TOML text is a robot overlay (it has a top-level ``urdf`` key)."""
    try:
        return "urdf" in tomllib.loads(text)
    except tomllib.TOMLDecodeError:
        return False


@dataclass
class _Chain:
    urdf: Path
    from_link: str | None
    to_link: str | None
    mesh_folders: list[Path]


def _chain(problems: _Problems, data: dict[str, Any], folder: Path) -> _Chain | None:
    urdf = _string(problems, data.get("urdf"), "urdf", block="", key="urdf")
    ends: dict[str, str | None] = {}
    for key in ("from_link", "to_link"):
        ends[key] = _string(problems, data[key], key, block="", key=key) if key in data else None
    folders_raw = data.get("mesh_folders", [])
    folders: list[Path] = []
    if not isinstance(folders_raw, list) or not all(isinstance(f, str) for f in folders_raw):
        problems.add(
            "mesh_folders",
            f"expected a list of folder names, got {folders_raw!r}",
            block="",
            key="mesh_folders",
        )
    else:
        folders = [folder / f for f in folders_raw]
    if urdf is None:
        return None
    return _Chain(folder / urdf, ends["from_link"], ends["to_link"], folders)


def _joint_changes(problems: _Problems, data: dict[str, Any], robot: Robot) -> Robot:
    table = data.get("joint", {})
    if not isinstance(table, dict):
        problems.add("joint", "expected [joint.NAME] tables", block="", key="joint")
        return robot
    joints = list(robot.joints)
    for name, raw in table.items():
        where = f"joint.{name}"
        loc: dict[str, Any] = {"block": where}
        if name not in robot.joint_names:
            problems.add(
                where,
                f"unknown joint {name!r}; the chosen chain has: {', '.join(robot.joint_names)}",
                **loc,
            )
            continue
        if not isinstance(raw, dict):
            problems.add(where, "expected a table", **loc)
            continue
        index = robot.joint_names.index(name)
        joint = joints[index]
        keys = _JOINT_KEYS[joint.kind]
        _unknown_keys(problems, raw, keys, where, **loc)
        to_si = (
            (lambda v: float(m_from_mm(v)))
            if joint.kind == "prismatic"
            else (lambda v: float(rad_from_deg(v)))
        )
        values: dict[str, float] = {}
        for key in keys:
            if key in raw:
                number = _number(problems, raw[key], f"{where}.{key}", key=key, **loc)
                if number is not None:
                    values[key] = to_si(number)
        acceleration, jerk, lower, upper = (values.get(key) for key in keys)
        for key, value in ((keys[0], acceleration), (keys[1], jerk)):
            if value is not None and value <= 0.0:
                problems.add(f"{where}.{key}", "must be > 0", key=key, **loc)
        new_lower = joint.lower if lower is None else lower
        new_upper = joint.upper if upper is None else upper
        if (lower is not None or upper is not None) and joint.continuous:
            problems.add(where, "a continuous joint has no position limits to narrow", **loc)
        elif not joint.lower - 1e-12 <= new_lower < new_upper <= joint.upper + 1e-12:
            problems.add(
                f"{where}.{keys[2]}",
                "soft limits must lie inside the URDF's range and min < max",
                key=keys[2],
                **loc,
            )
        joints[index] = dataclasses.replace(
            joint,
            lower=new_lower,
            upper=new_upper,
            acceleration_max=joint.acceleration_max if acceleration is None else acceleration,
            jerk_max=jerk,
        )
    return dataclasses.replace(robot, joints=tuple(joints))


def _capsules(problems: _Problems, data: dict[str, Any], robot: Robot) -> Robot:
    raw_list = data.get("capsule", [])
    if not isinstance(raw_list, list):
        problems.add("capsule", "expected [[capsule]] tables", block="", key="capsule")
        return robot
    added: list[Capsule] = []
    replaced: list[str] = []
    for index, raw in enumerate(raw_list):
        where = f"capsule[{index}]"
        loc: dict[str, Any] = {"block": "capsule", "index": index}
        if not isinstance(raw, dict):
            problems.add(where, "expected a table", **loc)
            continue
        _unknown_keys(problems, raw, _CAPSULE_KEYS, where, **loc)
        name = _string(problems, raw.get("name"), f"{where}.name", key="name", **loc)
        link = _string(problems, raw.get("link"), f"{where}.link", key="link", **loc)
        start = _vector3(problems, raw.get("start_mm"), f"{where}.start_mm", key="start_mm", **loc)
        end = _vector3(problems, raw.get("end_mm"), f"{where}.end_mm", key="end_mm", **loc)
        radius = _number(
            problems, raw.get("radius_mm"), f"{where}.radius_mm", key="radius_mm", **loc
        )
        replace = raw.get("replace", False)
        if not isinstance(replace, bool):
            problems.add(
                f"{where}.replace", f"expected true/false, got {replace!r}", key="replace", **loc
            )
        if radius is not None and radius <= 0.0:
            problems.add(f"{where}.radius_mm", "must be > 0", key="radius_mm", **loc)
            radius = None
        if link is not None and link not in robot.link_poses:
            problems.add(
                f"{where}.link",
                f"unknown link {link!r}; links on the robot: {', '.join(robot.link_poses)}",
                key="link",
                **loc,
            )
            continue
        if name is None or link is None or start is None or end is None or radius is None:
            continue
        internal, T = robot.link_poses[link]
        points: FloatArray = m_from_mm(np.stack([start, end])) @ T[:3, :3].T + T[:3, 3]
        added.append(Capsule(name, internal, points[0], points[1], float(m_from_mm(radius)), link))
        if replace is True:
            replaced.append(link)
    kept = tuple(c for c in robot.capsules if c.source_link not in replaced)
    return dataclasses.replace(
        robot, capsules=kept + tuple(added), replaced_links=tuple(dict.fromkeys(replaced))
    )


def apply_capsule_removals(robot: Robot) -> Robot:
    """Drop the capsules named in :attr:`Robot.removed_capsules` (after fitting).

    Raises
    ------
    RobotDescriptionError
        A name matches no capsule (the message lists the robot's capsules).
    """
    names = robot.removed_capsules
    if not names:
        return robot
    present = {c.name for c in robot.capsules}
    unknown = [n for n in names if n not in present]
    if unknown:
        raise RobotDescriptionError(
            [
                f"{robot.source}: remove_capsules: no capsule named "
                f"{', '.join(map(repr, unknown))}; the robot has: {', '.join(sorted(present))}"
            ]
        )
    return dataclasses.replace(
        robot,
        capsules=tuple(c for c in robot.capsules if c.name not in names),
        removed_capsules=(),
        notes=(*robot.notes, f"capsules removed by the overlay: {', '.join(names)}"),
    )


def load_robot_overlay(
    path: str | Path,
    *,
    from_link: str | None = None,
    to_link: str | None = None,
    mesh_folders: tuple[Path, ...] = (),
) -> Robot:
    """Load an overlay: its URDF's chain with the overlay's additions (module docstring).

    ``from_link``/``to_link`` given here (command line, cell file) win over the
    overlay's; ``mesh_folders`` are looked in after the overlay's own.
    Meshes are not read (:func:`posebridge.geometry.robot_meshes.fit_robot_meshes`).

    Raises
    ------
    RobotDescriptionError
        The overlay, its URDF or the chain choice is invalid.
    """
    path = Path(path)
    try:
        if path.stat().st_size > MAX_DESCRIPTION_BYTES:
            raise RobotDescriptionError(
                [f"{path}: file is larger than {MAX_DESCRIPTION_BYTES} bytes"]
            )
        text = path.read_text(encoding="utf-8")
    except OSError as error:
        raise RobotDescriptionError([f"{path}: cannot read: {error.strerror or error}"]) from error
    except UnicodeDecodeError as error:
        raise RobotDescriptionError([f"{path}: not UTF-8 text ({error.reason})"]) from error
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as error:
        raise RobotDescriptionError([f"{path}: not valid TOML: {error}"]) from error
    problems = _Problems(str(path), text)
    _unknown_keys(problems, data, _TOP_KEYS, "", block="")
    chain = _chain(problems, data, path.parent)
    if problems.items or chain is None:
        raise RobotDescriptionError(problems.items)
    robot = load_robot_urdf(
        chain.urdf,
        from_link if from_link is not None else chain.from_link,
        to_link if to_link is not None else chain.to_link,
        mesh_folders=(*chain.mesh_folders, *mesh_folders),
    )
    name = data.get("name", robot.name)
    if not isinstance(name, str) or not name.strip():
        problems.add("name", f"expected a non-empty string, got {name!r}", block="", key="name")
        name = robot.name
    robot = _joint_changes(problems, data, robot)
    robot = _capsules(problems, data, robot)
    home = None
    if "home_deg" in data:
        values = data["home_deg"]
        if (
            not isinstance(values, list)
            or len(values) != robot.dof
            or not all(isinstance(v, int | float) and not isinstance(v, bool) for v in values)
        ):
            problems.add(
                "home_deg",
                f"expected {robot.dof} numbers (deg; mm for prismatic), got {values!r}",
                block="",
                key="home_deg",
            )
        else:
            home = joints_si_from_user(np.array(values, dtype=np.float64), robot.prismatic)
            if np.any(home < robot.lower - 1e-9) or np.any(home > robot.upper + 1e-9):
                problems.add("home_deg", "outside the joint limits", block="", key="home_deg")
    tool = (
        _pose(problems, data["tool"], "tool", {"xyz_mm", "rpy_deg"}, block="tool")
        if "tool" in data
        else robot.T_flange_tool
    )
    removals = data.get("remove_capsules", [])
    if not isinstance(removals, list) or not all(isinstance(n, str) for n in removals):
        problems.add(
            "remove_capsules",
            f"expected a list of capsule names, got {removals!r}",
            block="",
            key="remove_capsules",
        )
        removals = []
    if problems.items:
        raise RobotDescriptionError(problems.items)
    given = [
        key.split("_")[0]
        for table in data.get("joint", {}).values()
        if isinstance(table, dict)
        for key in table
    ]
    notes = [
        n
        for n in robot.notes
        if not ("acceleration" in given and n.startswith("URDF has no acceleration"))
    ]
    missing_accel = [
        j.name for j in robot.joints if "acceleration" not in _given_keys(data, j.name)
    ]
    if "acceleration" in given and missing_accel:
        notes.insert(
            0,
            "URDF has no acceleration limits and the overlay gives none for "
            f"{', '.join(missing_accel)}: {DEFAULT_ACCELERATION_PER_S:g} x the velocity limit "
            "per second assumed there",
        )
    return dataclasses.replace(
        robot,
        name=name,
        home=home,
        T_flange_tool=tool,
        source=str(path),
        description=f"{robot.description} (overlay {path.name})",
        notes=(f"robot overlay {path.name} on {chain.urdf.name}", *notes),
        removed_capsules=tuple(removals),
    )


def _given_keys(data: dict[str, Any], joint: str) -> set[str]:
    table = data.get("joint", {})
    entry = table.get(joint, {}) if isinstance(table, dict) else {}
    return {key.split("_")[0] for key in entry} if isinstance(entry, dict) else set()

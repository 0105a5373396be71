"""Bundled robot library and the one entry point for loading a robot.

``load_robot(spec)`` accepts a bundled robot name (``pb-arm6``), a path to a
``.toml`` (posebridge format) or ``.urdf`` file, or the bare file name of a
bundled description (``pb-arm6.urdf``) when no such file is in the working
folder.
"""

from __future__ import annotations

import tomllib
from dataclasses import dataclass
from pathlib import Path

from posebridge.resources import data_folder
from posebridge.robot.errors import RobotDescriptionError
from posebridge.robot.model import Robot
from posebridge.robot.toml_format import load_robot_toml
from posebridge.robot.urdf import load_robot_urdf

__all__ = ["BundledRobot", "bundled_robots", "load_robot"]


@dataclass(frozen=True)
class BundledRobot:
    """A robot description shipped in robots/ (name, kind, description, file)."""

    name: str
    kind: str
    description: str
    path: Path


def bundled_robots() -> list[BundledRobot]:
    """Every TOML robot description in the bundled robots/ folder, sorted by name."""
    found = []
    for path in sorted(data_folder("robots").glob("*.toml")):
        with path.open("rb") as handle:
            meta = tomllib.load(handle).get("robot", {})
        found.append(
            BundledRobot(
                name=str(meta.get("name", path.stem)),
                kind=str(meta.get("kind", "")),
                description=str(meta.get("description", "")),
                path=path,
            )
        )
    return sorted(found, key=lambda robot: robot.name)


def load_robot(spec: str | Path) -> Robot:
    """Load a bundled robot by name, or a robot file by path (.toml or .urdf).

    A bare file name (no folder) that does not exist in the working folder is
    looked up in the bundled robots/ folder, so ``load_robot("pb-arm6.urdf")``
    loads the bundled URDF version. URDF files load with their default chain
    (root link to the single leaf); use
    :func:`posebridge.robot.urdf.load_robot_urdf` to choose other links.

    Raises
    ------
    RobotDescriptionError
        Unknown name, unreadable file or invalid description.
    """
    path = Path(spec)
    suffix = path.suffix.lower()
    if suffix in (".toml", ".urdf"):
        bundled = data_folder("robots") / path.name
        if not path.is_file() and path.name == str(spec) and bundled.is_file():
            path = bundled
        if not path.is_file():
            raise RobotDescriptionError([f"{path}: no such robot file"])
        return load_robot_toml(path) if suffix == ".toml" else load_robot_urdf(path)
    library = {robot.name: robot for robot in bundled_robots()}
    if str(spec) not in library:
        raise RobotDescriptionError(
            [
                f"unknown robot {str(spec)!r}; bundled robots: {', '.join(sorted(library))}, or give a .toml/.urdf path"
            ]
        )
    return load_robot_toml(library[str(spec)].path)

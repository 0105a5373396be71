"""Bundled robot library and the one entry point for loading a robot.

``load_robot(spec)`` accepts a bundled robot name (``pb-arm6``), a path to a
``.toml`` (posebridge format) or ``.urdf`` file, or the bare file name of a
bundled description (``pb-arm6.urdf``) when no such file is in the working
folder.
"""

from __future__ import annotations

import tomllib
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

from posebridge.resources import data_folder
from posebridge.robot.errors import RobotDescriptionError
from posebridge.robot.model import Robot
from posebridge.robot.overlay import is_overlay, load_robot_overlay
from posebridge.robot.toml_format import MAX_DESCRIPTION_BYTES, load_robot_toml
from posebridge.robot.urdf_import import load_robot_urdf

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


def load_robot(
    spec: str | Path,
    *,
    from_link: str | None = None,
    to_link: str | None = None,
    mesh_folders: Sequence[Path] = (),
) -> Robot:
    """Load a bundled robot by name, or a robot file by path (.toml, robot overlay .toml or .urdf).

    A bare file name (no folder) that does not exist in the working folder is
    looked up in the bundled robots/ folder, so ``load_robot("pb-arm6.urdf")``
    loads the bundled URDF version. URDF files and overlays load the chain
    ``from_link`` -> ``to_link`` (default: the overlay's choice, else the root
    link to the single leaf); mesh references are resolved (also in
    ``mesh_folders``) but not read: use
    :func:`posebridge.geometry.robot_meshes.load_robot_with_meshes` for that.

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
        if suffix == ".urdf":
            return load_robot_urdf(path, from_link, to_link, mesh_folders=tuple(mesh_folders))
        if _is_overlay_file(path):
            return load_robot_overlay(
                path, from_link=from_link, to_link=to_link, mesh_folders=tuple(mesh_folders)
            )
        _no_chain_choice(path, from_link, to_link)
        return load_robot_toml(path)
    library = {robot.name: robot for robot in bundled_robots()}
    if str(spec) not in library:
        raise RobotDescriptionError(
            [
                f"unknown robot {str(spec)!r}; bundled robots: {', '.join(sorted(library))}, or give a .toml/.urdf path"
            ]
        )
    _no_chain_choice(Path(str(spec)), from_link, to_link)
    return load_robot_toml(library[str(spec)].path)


def _is_overlay_file(path: Path) -> bool:
    try:
        return path.stat().st_size <= MAX_DESCRIPTION_BYTES and is_overlay(
            path.read_text(encoding="utf-8")
        )
    except (OSError, UnicodeDecodeError):
        return False  # the TOML loader reports it


def _no_chain_choice(path: Path, from_link: str | None, to_link: str | None) -> None:
    if from_link is not None or to_link is not None:
        raise RobotDescriptionError(
            [
                f"{path}: from_link/to_link (--from-link/--to-link) choose the chain of a URDF "
                "or a robot overlay; this robot is a posebridge description"
            ]
        )

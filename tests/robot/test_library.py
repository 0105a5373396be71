"""Robot library lookup: names, paths and bundled file names."""

from __future__ import annotations

from pathlib import Path

import pytest

from posebridge.resources import data_folder
from posebridge.robot.errors import RobotDescriptionError
from posebridge.robot.library import bundled_robots, load_robot


def test_bundled_entries_point_at_their_files() -> None:
    for entry in bundled_robots():
        assert entry.path.parent == data_folder("robots")
        robot = load_robot(entry.name)
        assert (robot.name, robot.kind, robot.source) == (entry.name, entry.kind, str(entry.path))


def test_unknown_name_lists_the_bundled_robots() -> None:
    with pytest.raises(
        RobotDescriptionError,
        match=r"unknown robot 'pb-arm9'; bundled robots: pb-arm6, pb-arm6-offset, .*give a \.toml/\.urdf path",
    ):
        load_robot("pb-arm9")


def test_missing_path_is_reported() -> None:
    with pytest.raises(RobotDescriptionError, match=r"nowhere[/\\]robot\.toml: no such robot file"):
        load_robot(Path("nowhere") / "robot.toml")


def test_path_and_bundled_file_name_load_the_same_robot() -> None:
    by_path = load_robot(data_folder("robots") / "pb-scara4.toml")
    by_file_name = load_robot("pb-scara4.toml")
    assert by_path.source == by_file_name.source
    assert by_path.joint_names == by_file_name.joint_names

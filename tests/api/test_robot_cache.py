"""The per-app robot cache: reuse, least-recently-used eviction, reload on file change."""

from __future__ import annotations

import os
import shutil
from pathlib import Path

import pytest

from posebridge.api.robot_cache import RobotCache, RobotPathNotAllowedError
from posebridge.resources import data_folder


def test_get_robot_reuses_loaded() -> None:
    cache = RobotCache(size=2, paths_allowed=True)
    assert cache.get("pb-planar2r", paths_allowed=True) is cache.get(
        "pb-planar2r", paths_allowed=True
    )


def test_get_robot_evicts_least_recently_used() -> None:
    cache = RobotCache(size=1, paths_allowed=True)
    first = cache.get("pb-planar2r", paths_allowed=True)
    cache.get("pb-planar3r", paths_allowed=True)
    assert cache.get("pb-planar2r", paths_allowed=True) is not first


def test_get_robot_reloads_changed_file(tmp_path: Path) -> None:
    path = tmp_path / "arm.toml"
    shutil.copy(data_folder("robots") / "pb-planar2r.toml", path)
    cache = RobotCache(size=2, paths_allowed=True)
    first = cache.get(str(path), paths_allowed=True)
    stat = path.stat()
    os.utime(path, ns=(stat.st_atime_ns, stat.st_mtime_ns + 1_000_000_000))
    assert cache.get(str(path), paths_allowed=True) is not first


def test_get_robot_path_not_allowed() -> None:
    cache = RobotCache(size=2, paths_allowed=False)
    with pytest.raises(RobotPathNotAllowedError, match="file paths are not accepted"):
        cache.get("/tmp/arm.urdf", paths_allowed=True)

"""Shared fixtures of the report tests."""

from __future__ import annotations

import shutil

import pytest

from posebridge.cell.files import load_cell
from posebridge.cell.scene import Scene, resolve_scene
from posebridge.resources import data_folder


@pytest.fixture(scope="module")
def demo_scene(tmp_path_factory: pytest.TempPathFactory) -> Scene:
    path = tmp_path_factory.mktemp("cell") / "demo-cell.json"
    shutil.copy(data_folder("robots") / "demo-cell.json", path)
    return resolve_scene(load_cell(path), path)

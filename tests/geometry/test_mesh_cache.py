"""The processed-mesh cache: hits and misses, corrupt entries, atomic writes, size cap, folder.

References: the meshes read without a cache (the same files through the same
reader), and the cache's documented behaviour (a corrupt entry is a miss and
is rebuilt; writes leave no partial files).
"""

from __future__ import annotations

import os
import stat

import numpy as np
import pytest
import trimesh

from posebridge.geometry.mesh_cache import MeshCache, cache_key
from posebridge.geometry.mesh_files import load_mesh_file


@pytest.fixture
def stl(tmp_path):
    path = tmp_path / "part.stl"
    path.write_bytes(trimesh.creation.icosphere(3, 120.0).export(file_type="stl"))
    return path


def _entries(cache: MeshCache) -> list:
    return sorted(cache.folder.glob("*.npz"))


def test_second_load_is_a_hit_with_the_same_mesh(tmp_path, stl) -> None:
    cache = MeshCache(tmp_path / "cache")
    first = load_mesh_file(stl, unit="mm", cache=cache)
    assert (cache.hits, cache.misses) == (0, 1)
    second = load_mesh_file(stl, unit="mm", cache=cache)
    assert (cache.hits, cache.misses) == (1, 1)
    uncached = load_mesh_file(stl, unit="mm")
    # The cached mesh is the mesh read without a cache.
    np.testing.assert_array_equal(second.vertices, uncached.vertices)
    np.testing.assert_array_equal(second.faces, uncached.faces)
    assert second.is_closed == uncached.is_closed
    assert second.content_key == first.content_key


def test_key_covers_content_and_parameters(tmp_path, stl) -> None:
    cache = MeshCache(tmp_path / "cache")
    load_mesh_file(stl, unit="mm", cache=cache)
    load_mesh_file(stl, unit="m", cache=cache)
    load_mesh_file(stl, unit="mm", scale=(1.0, 2.0, 1.0), cache=cache)
    assert cache.misses == 3
    # A changed file is a new entry, never the old one.
    stl.write_bytes(trimesh.creation.box((10.0, 10.0, 10.0)).export(file_type="stl"))
    changed = load_mesh_file(stl, unit="mm", cache=cache)
    assert cache.misses == 4
    assert changed.triangle_count == 12  # a box: 6 faces, 2 triangles each (closed form)
    assert cache_key("mesh", "a", "bc") != cache_key("mesh", "ab", "c")


@pytest.mark.parametrize("damage", ["garbage", "truncated", "wrong arrays", "bad indices"])
def test_corrupt_entries_are_ignored_and_rebuilt(tmp_path, stl, damage: str) -> None:
    cache = MeshCache(tmp_path / "cache")
    expected = load_mesh_file(stl, unit="mm", cache=cache)
    (entry,) = _entries(cache)
    if damage == "garbage":
        entry.write_bytes(b"not an npz file")
    elif damage == "truncated":
        entry.write_bytes(entry.read_bytes()[:200])
    elif damage == "wrong arrays":
        np.savez(entry, something=np.zeros(3))
    else:
        with np.load(entry) as stored:
            arrays = dict(stored)
        arrays["faces"] = arrays["faces"] + 10_000_000
        with open(entry, "wb") as stream:
            np.savez(stream, **arrays)
    again = load_mesh_file(stl, unit="mm", cache=cache)
    np.testing.assert_array_equal(again.vertices, expected.vertices)
    np.testing.assert_array_equal(again.faces, expected.faces)
    # Rebuilt and stored again: the next load is a clean hit.
    hits = cache.hits
    load_mesh_file(stl, unit="mm", cache=cache)
    assert cache.hits == hits + 1


def test_writes_are_atomic_and_leave_no_temporary_files(tmp_path, stl) -> None:
    cache = MeshCache(tmp_path / "cache")
    load_mesh_file(stl, unit="mm", cache=cache)
    names = [p.name for p in cache.folder.iterdir()]
    assert len(names) == 1
    assert names[0].endswith(".npz")
    assert not names[0].startswith(".tmp-")


def test_unwritable_folder_is_not_an_error(tmp_path, stl) -> None:
    if os.geteuid() == 0:
        pytest.skip("root can write anywhere")
    folder = tmp_path / "locked"
    folder.mkdir()
    folder.chmod(stat.S_IRUSR | stat.S_IXUSR)
    try:
        cache = MeshCache(folder)
        mesh = load_mesh_file(stl, unit="mm", cache=cache)
        assert mesh.triangle_count > 0
        assert _entries(cache) == []
    finally:
        folder.chmod(stat.S_IRWXU)


def test_size_cap_drops_the_oldest_entries(tmp_path) -> None:
    cache = MeshCache(tmp_path / "cache", max_bytes=3_000)
    keys = [cache_key("test", str(i)) for i in range(4)]
    for i, key in enumerate(keys):
        cache.store(key, {"values": np.full(100, float(i))})  # about 1 kB each
        os.utime(cache.folder / f"{key}.npz", (1_000_000 + i, 1_000_000 + i))
    assert cache.load(keys[0], ("values",)) is None
    assert cache.load(keys[3], ("values",)) is not None
    assert sum(p.stat().st_size for p in _entries(cache)) <= 3_000


def test_default_folder_is_in_the_user_data_folder(tmp_path, monkeypatch) -> None:
    monkeypatch.setenv("XDG_DATA_HOME", str(tmp_path))
    # XDG base directory specification: $XDG_DATA_HOME/<application>.
    assert MeshCache.default().folder == tmp_path / "posebridge" / "mesh-cache"


def test_keys_are_checked(tmp_path) -> None:
    cache = MeshCache(tmp_path)
    with pytest.raises(ValueError, match="expected 64 lower-case hex digits"):
        cache.load("../../etc/passwd", ("x",))

"""Reading mesh files: every format, units and scale, and refusal of broken or hostile files.

References: trimesh writes the files (its exporters) and the expected geometry
is the generated mesh itself (bounding boxes and triangle counts are known in
closed form for boxes); file layouts per their specifications (binary STL:
80-byte header, uint32 count, 50 bytes per triangle; GLB: glTF 2.0
specification, section 4.4; COLLADA 1.4 ``<unit meter>``); the inch is
0.0254 m (international yard and pound agreement, 1959).
"""

from __future__ import annotations

import builtins
import hashlib
import json
import re
import struct

import numpy as np
import pytest
import trimesh
from trimesh.exchange.dae import export_collada

from posebridge.geometry.errors import GeometryInputError
from posebridge.geometry.mesh_cache import MeshCache
from posebridge.geometry.mesh_files import (
    MeshFileError,
    MeshLimits,
    load_mesh_file,
    suggest_length_unit,
)

BOX_MM = np.array([100.0, 200.0, 300.0])
"""Sides of the generated box, in the file's numbers."""


def _box() -> trimesh.Trimesh:
    box = trimesh.creation.box(BOX_MM)
    box.apply_translation(BOX_MM / 2.0)  # corner at the origin
    return box


def _scene() -> trimesh.Scene:
    """The box placed 1000 up by the scene graph, and a sphere of radius 50 at the origin."""
    scene = trimesh.Scene()
    scene.add_geometry(_box(), transform=trimesh.transformations.translation_matrix((0, 0, 1000)))
    scene.add_geometry(trimesh.creation.icosphere(2, 50.0))
    return scene


SCENE_BOUNDS = np.array([[-50.0, -50.0, -50.0], [100.0, 200.0, 1300.0]])
SCENE_TRIANGLES = 12 + 320


def _write_all(folder):
    """Every format of the same scene, in the file numbers above."""
    scene = _scene()
    flat = trimesh.util.concatenate(scene.dump())
    files = {
        "scene.stl": flat.export(file_type="stl"),
        "scene-ascii.stl": flat.export(file_type="stl_ascii").encode(),
        "scene.obj": scene.export(file_type="obj").encode(),
        "scene.ply": flat.export(file_type="ply"),
        "scene.glb": scene.export(file_type="glb"),
        "scene.dae": export_collada(flat),
    }
    for name, data in files.items():
        (folder / name).write_bytes(data)
    for name, data in scene.export(file_type="gltf").items():
        (folder / name).write_bytes(data)
    return [*files, "model.gltf"]


@pytest.fixture(scope="module")
def scene_files(tmp_path_factory):
    folder = tmp_path_factory.mktemp("scene")
    return folder, _write_all(folder)


def test_every_format_reads_the_same_geometry(scene_files) -> None:
    folder, names = scene_files
    for name in names:
        mesh = load_mesh_file(folder / name, unit="mm")
        # The generated scene, mm -> m (closed form of the box and sphere placement).
        np.testing.assert_allclose(mesh.bounds, SCENE_BOUNDS / 1000.0, atol=1e-6, err_msg=name)
        assert mesh.triangle_count == SCENE_TRIANGLES, name
        assert mesh.is_closed, name
        assert mesh.name == name


@pytest.mark.parametrize(("unit", "metres"), [("m", 1.0), ("mm", 0.001), ("inch", 0.0254)])
def test_units_scale_to_metres(scene_files, unit: str, metres: float) -> None:
    folder, _ = scene_files
    mesh = load_mesh_file(folder / "scene.stl", unit=unit)
    # Metres per file unit (the inch by its 1959 definition).
    np.testing.assert_allclose(mesh.bounds, SCENE_BOUNDS * metres, rtol=1e-9)


def test_per_axis_scale_and_mirror(scene_files) -> None:
    folder, _ = scene_files
    mesh = load_mesh_file(folder / "scene.stl", unit="mm", scale=(2.0, -1.0, 0.5))
    expected = SCENE_BOUNDS / 1000.0 * np.array([2.0, -1.0, 0.5])
    # Scaling is per axis after the unit; a negative factor mirrors (closed form).
    np.testing.assert_allclose(mesh.bounds, np.sort(expected, axis=0), atol=1e-9)
    assert mesh.is_closed


def test_declared_units(tmp_path, scene_files) -> None:
    folder, _ = scene_files
    # glTF is in metres by specification (glTF 2.0, 3.2).
    np.testing.assert_allclose(
        load_mesh_file(folder / "scene.glb", unit="declared").bounds, SCENE_BOUNDS
    )
    text = (folder / "scene.dae").read_text()
    millimetre = text.replace("<asset>", '<asset><unit meter="0.001" name="millimetre"/>', 1)
    (tmp_path / "mm.dae").write_text(millimetre)
    # COLLADA 1.4 <unit meter>: file numbers times the stated metres.
    np.testing.assert_allclose(
        load_mesh_file(tmp_path / "mm.dae", unit="declared").bounds,
        SCENE_BOUNDS / 1000.0,
        atol=1e-9,
    )
    with pytest.raises(
        MeshFileError, match=r"scene\.stl: STL files do not state their length unit"
    ):
        load_mesh_file(folder / "scene.stl", unit="declared")


def test_step_files_through_the_extra(tmp_path, box_step) -> None:
    pytest.importorskip("cascadio")
    path = tmp_path / "box.step"
    path.write_text(box_step((0, 0, 0), BOX_MM))
    mesh = load_mesh_file(path, unit="declared")
    # The box written in millimetres, converted to metres by OpenCASCADE (float32 in the GLB).
    np.testing.assert_allclose(mesh.bounds, [np.zeros(3), BOX_MM / 1000.0], atol=1e-6)
    assert mesh.is_closed
    with pytest.raises(MeshFileError, match="STEP files state their own length unit"):
        load_mesh_file(path, unit="mm")


def test_step_without_the_extra_names_the_install(tmp_path, box_step, monkeypatch) -> None:
    path = tmp_path / "part.stp"
    path.write_text(box_step((0, 0, 0), BOX_MM))
    real_import = builtins.__import__

    def no_cascadio(name, *args, **kwargs):
        if name == "cascadio":
            raise ImportError("No module named 'cascadio'")
        return real_import(name, *args, **kwargs)

    monkeypatch.setattr(builtins, "__import__", no_cascadio)
    with pytest.raises(MeshFileError, match=r"part\.stp: .*pip install 'posebridge\[step\]'"):
        load_mesh_file(path, unit="declared")


def test_suggested_units() -> None:
    # 5 mm .. 30 m counts as a plausible part size (common practice, no source).
    assert suggest_length_unit(1.2) == "m"
    assert suggest_length_unit(1200.0) == "mm"
    assert suggest_length_unit(0.002) is None
    assert suggest_length_unit(5_000_000.0) is None
    assert suggest_length_unit(0.5) == "m"


def test_files_are_never_modified(scene_files, tmp_path) -> None:
    folder, names = scene_files
    before = {
        n: (hashlib.sha256((folder / n).read_bytes()).hexdigest(), (folder / n).stat().st_mtime_ns)
        for n in names
    }
    cache = MeshCache(tmp_path / "cache")
    for name in names:
        load_mesh_file(folder / name, unit="mm", cache=cache)
        load_mesh_file(folder / name, unit="mm", cache=cache)
    after = {
        n: (hashlib.sha256((folder / n).read_bytes()).hexdigest(), (folder / n).stat().st_mtime_ns)
        for n in names
    }
    assert before == after


# --- refused files -------------------------------------------------------------------------


def _binary_stl(count_declared: int, triangles: int) -> bytes:
    header = b"generated".ljust(80, b" ")
    body = b"".join(
        struct.pack("<12fH", 0, 0, 1, 0, 0, 0, 1, 0, 0, 0, 1, 0, 0) for _ in range(triangles)
    )
    return header + struct.pack("<I", count_declared) + body


def _glb(document: dict, binary: bytes) -> bytes:
    text = json.dumps(document).encode()
    text += b" " * (-len(text) % 4)
    binary += b"\0" * (-len(binary) % 4)
    chunks = struct.pack("<II", len(text), 0x4E4F534A) + text
    if binary:
        chunks += struct.pack("<II", len(binary), 0x004E4942) + binary
    return b"glTF" + struct.pack("<II", 2, 12 + len(chunks)) + chunks


def _triangle_glb(**changes) -> dict:
    """A one-triangle glTF document (positions and indices in one buffer), with changes."""
    document = {
        "asset": {"version": "2.0"},
        "buffers": [{"byteLength": 44}],
        "bufferViews": [
            {"buffer": 0, "byteOffset": 0, "byteLength": 36},
            {"buffer": 0, "byteOffset": 36, "byteLength": 6},
        ],
        "accessors": [
            {"bufferView": 0, "componentType": 5126, "count": 3, "type": "VEC3"},
            {"bufferView": 1, "componentType": 5123, "count": 3, "type": "SCALAR"},
        ],
        "meshes": [{"primitives": [{"attributes": {"POSITION": 0}, "indices": 1}]}],
        "nodes": [{"mesh": 0}],
        "scenes": [{"nodes": [0]}],
        "scene": 0,
    }
    document.update(changes)
    return document


TRIANGLE_BIN = (
    np.array([0, 0, 0, 1, 0, 0, 0, 1, 0], dtype="<f4").tobytes()
    + np.array([0, 1, 2, 0], dtype="<u2").tobytes()
)


def _dae_bomb(levels: int) -> bytes:
    """A COLLADA file whose nodes each instance the previous one ten times (10**levels boxes)."""
    base = export_collada(_box()).decode()
    library = ["<library_nodes>"]
    geometry_id = base.split('<geometry id="', 1)[1].split('"', 1)[0]
    library.append(f'<node id="n0"><instance_geometry url="#{geometry_id}"/></node>')
    for level in range(1, levels + 1):
        children = "".join(f'<instance_node url="#n{level - 1}"/>' for _ in range(10))
        library.append(f'<node id="n{level}">{children}</node>')
    library.append("</library_nodes>")
    text = base.replace("<library_visual_scenes>", "".join(library) + "<library_visual_scenes>", 1)
    return text.replace(
        "</visual_scene>",
        f'<node id="top"><instance_node url="#n{levels}"/></node></visual_scene>',
        1,
    ).encode()


def _hostile_files() -> dict[str, tuple[bytes, str]]:
    """File name -> (bytes, the fault the message must name)."""
    box = _box()
    good_stl = box.export(file_type="stl")
    obj = box.export(file_type="obj")
    lines = obj.splitlines()
    first_vertex = next(i for i, line in enumerate(lines) if line.startswith("v "))
    lines[first_vertex] = "v nan 0 0"
    nan_obj = "\n".join(lines)
    entity_bomb = (
        b'<?xml version="1.0"?><!DOCTYPE c [<!ENTITY a "aaaaaaaaaa">'
        b'<!ENTITY b "&a;&a;&a;&a;&a;&a;&a;&a;&a;&a;">]>'
        b'<COLLADA xmlns="http://www.collada.org/2005/11/COLLADASchema" version="1.4.1">&b;</COLLADA>'
    )
    cycle = (
        export_collada(box)
        .decode()
        .replace(
            "</visual_scene>",
            '<node id="loop"><instance_node url="#loop"/></node></visual_scene>',
            1,
        )
    )
    return {
        "truncated.stl": (good_stl[: len(good_stl) - 30], "truncated or padded binary STL"),
        "short.stl": (good_stl[:50], "truncated binary STL"),
        "huge.stl": (_binary_stl(10_000_000, 1), "declares 10,000,000 triangles"),
        "nan.obj": (nan_obj.encode(), "vertices have NaN or infinite coordinates"),
        "index.obj": (b"v 0 0 0\nv 1 0 0\nv 0 1 0\nf 1 2 9\n", "cannot be read as OBJ"),
        "empty.obj": (b"# nothing\n", "no triangles"),
        "flat.obj": (b"v 0 0 0\nv 1 0 0\nv 2 0 0\nf 1 2 3\n", "every triangle has zero area"),
        "nan-ascii.stl": (
            b"solid t\nfacet normal 0 0 1\nouter loop\nvertex 0 0 0\nvertex nan 0 0\nvertex 0 1 0\n"
            b"endloop\nendfacet\nendsolid t\n",
            "NaN or infinite",
        ),
        "far.obj": (b"v 0 0 0\nv 1e9 0 0\nv 0 1 0\nf 1 2 3\n", "check the length unit"),
        "count.glb": (
            _glb(
                _triangle_glb(
                    accessors=[
                        {
                            "bufferView": 0,
                            "componentType": 5126,
                            "count": 300_000_000,
                            "type": "VEC3",
                        },
                        {"bufferView": 1, "componentType": 5123, "count": 3, "type": "SCALAR"},
                    ]
                ),
                TRIANGLE_BIN,
            ),
            "accessor 0 declares 300,000,000 elements",
        ),
        "instances.glb": (
            _glb(
                _triangle_glb(
                    accessors=[
                        {"bufferView": 0, "componentType": 5126, "count": 3, "type": "VEC3"},
                        {"bufferView": 1, "componentType": 5123, "count": 3, "type": "SCALAR"},
                    ],
                    nodes=[{"mesh": 0}] * 3_000_000,
                ),
                TRIANGLE_BIN,
            ),
            "the file's nodes place",
        ),
        "draco.glb": (
            _glb(_triangle_glb(extensionsRequired=["KHR_draco_mesh_compression"]), TRIANGLE_BIN),
            "compressed geometry",
        ),
        "outside.glb": (
            _glb(_triangle_glb(buffers=[{"byteLength": 44, "uri": "../../secret.bin"}]), b""),
            "only files in the glTF file's own folder",
        ),
        "short.glb": (_glb(_triangle_glb(), TRIANGLE_BIN)[:-8], "truncated or padded GLB"),
        "entities.dae": (entity_bomb, "refused XML construct"),
        "cycle.dae": (cycle.encode(), "cycle in the scene graph"),
        "instances.dae": (_dae_bomb(6), "the file's scene places"),
        "garbage.ply": (
            b"ply\nformat binary_little_endian 1.0\nelement vertex 3\n",
            "no end_header",
        ),
        "shape.txt": (b"solid", "unknown mesh format '.txt'"),
    }


@pytest.mark.parametrize("name", list(_hostile_files()))
def test_broken_and_hostile_files_are_refused(tmp_path, name: str) -> None:
    data, fault = _hostile_files()[name]
    path = tmp_path / name
    path.write_bytes(data)
    with pytest.raises(MeshFileError, match=rf"^{re.escape(name)}: .*{re.escape(fault)}"):
        load_mesh_file(path, unit="m", limits=MeshLimits(max_triangles=1_000_000))
    assert path.read_bytes() == data


def test_limits_and_missing_files(tmp_path, scene_files) -> None:
    folder, _ = scene_files
    with pytest.raises(MeshFileError, match=r"scene\.stl: .* bytes, more than the limit of 1,000"):
        load_mesh_file(folder / "scene.stl", unit="mm", limits=MeshLimits(max_file_bytes=1_000))
    with pytest.raises(
        MeshFileError, match=r"scene\.obj: the file has 332 triangles, more than the limit of 100"
    ):
        load_mesh_file(folder / "scene.obj", unit="mm", limits=MeshLimits(max_triangles=100))
    with pytest.raises(MeshFileError, match=r"gone\.stl: cannot be read"):
        load_mesh_file(tmp_path / "gone.stl", unit="mm")
    with pytest.raises(MeshFileError, match="scale must be three finite non-zero numbers"):
        load_mesh_file(folder / "scene.stl", unit="mm", scale=(1.0, 0.0, 1.0))
    with pytest.raises(MeshFileError, match="unit must be m, mm, inch or declared, got 'cm'"):
        load_mesh_file(folder / "scene.stl", unit="cm")  # type: ignore[arg-type]
    assert issubclass(MeshFileError, GeometryInputError)


def test_triangle_limit_applies_to_cached_meshes(tmp_path, scene_files) -> None:
    folder, _ = scene_files
    cache = MeshCache(tmp_path / "cache")
    load_mesh_file(folder / "scene.ply", unit="mm", cache=cache)
    with pytest.raises(MeshFileError, match="more than the limit of 10"):
        load_mesh_file(
            folder / "scene.ply", unit="mm", cache=cache, limits=MeshLimits(max_triangles=10)
        )
    assert cache.hits == 1

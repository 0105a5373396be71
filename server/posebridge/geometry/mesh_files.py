"""Reading mesh files: STL, OBJ, PLY, glTF/GLB, COLLADA, and STEP through an optional extra.

Every format is parsed by trimesh (pycollada for COLLADA), never by a parser
of posebridge's own; STEP/STP files are first converted to GLB with
OpenCASCADE through the ``cascadio`` package (``pip install 'posebridge[step]'``).
:func:`load_mesh_file` returns one :class:`~posebridge.geometry.meshes.TriangleMesh`
in metres: every body of the file with its scene transforms applied, scaled
by the file's length unit and an optional per-axis scale (URDF's
``<mesh scale>``), cleaned as that class describes. Files are only read,
never modified.

**Refused files** (:class:`MeshFileError`, a
:class:`~posebridge.geometry.errors.GeometryInputError`, naming the file and
the fault), checked before the parser allocates anything where the format
allows:

* files over :attr:`MeshLimits.max_file_bytes`, or declaring more than
  :attr:`MeshLimits.max_triangles` triangles (binary STL header, ASCII STL
  facets, OBJ faces, PLY header, glTF accessors times node instances, COLLADA
  primitive counts times node instances, so a small file that instances a
  mesh a million times is refused too);
* truncated files (binary STL shorter than its header says, glTF buffers or
  accessors reaching past their data, PLY of the wrong length);
* COLLADA with XML entity declarations or external entities (checked with
  defusedxml), node instancing cycles; glTF with compressed geometry
  (Draco, meshopt), buffers outside the file's folder, URIs with a scheme;
* NaN or infinite vertices, triangle indices out of range, no triangles, only
  zero-area triangles, coordinates beyond
  :data:`~posebridge.geometry.meshes.MAX_COORDINATE_M` after scaling;
* anything the parser itself rejects.

**Length units.** ``unit`` is ``"m"``, ``"mm"`` or ``"inch"`` (exactly
0.0254 m, the international inch of 1959), or ``"declared"`` for the unit the
file states: COLLADA's ``<unit meter>`` (metres when absent, as the
COLLADA 1.4 specification defaults), glTF/GLB always metres (glTF 2.0
specification). STEP files always state theirs and OpenCASCADE converts to
metres, so they take only ``"declared"``; STL, OBJ and PLY state no unit and
need one. :func:`suggest_length_unit` says which unit makes a bounding
box a plausible size for cell or robot geometry. COLLADA's ``<up_axis>`` is
not applied (trimesh does not apply it). The unit is read here, where the file
is read, because it belongs to the file (an input conversion into metres, like
the cell file's mm/deg in :mod:`posebridge.cell.scene`): nothing leaves this
module in any unit but metres.

**Cache.** With a :class:`~posebridge.geometry.mesh_cache.MeshCache`, the
cleaned mesh is stored under the file's SHA-256 and the unit and scale, so a
second load reads the file once for its hash and a small array file; the
triangle limit is checked again on every load.
"""

from __future__ import annotations

import base64
import binascii
import io
import json
import math
import re
import struct
import tempfile
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Literal
from urllib.parse import unquote

import numpy as np
import numpy.typing as npt

from posebridge.geometry.errors import MeshFileError
from posebridge.geometry.mesh_cache import MeshCache, cache_key
from posebridge.geometry.meshes import TriangleMesh
from posebridge.units import m_from_mm

__all__ = [
    "LENGTH_UNITS",
    "MESH_SUFFIXES",
    "PLAUSIBLE_SIZE_M",
    "LengthUnit",
    "MeshFileError",
    "MeshLimits",
    "file_content_hash",
    "load_mesh_file",
    "suggest_length_unit",
]

LengthUnit = Literal["m", "mm", "inch"]
LENGTH_UNITS: dict[str, float] = {"m": 1.0, "mm": float(m_from_mm(1.0)), "inch": 0.0254}
"""Metres per file unit (the inch is exactly 0.0254 m by definition, 1959): an input
conversion, the file's own length unit read into metres where the file is read."""

MESH_SUFFIXES = (".stl", ".obj", ".ply", ".glb", ".gltf", ".dae", ".step", ".stp")
"""File name endings :func:`load_mesh_file` reads (case-insensitive)."""

PLAUSIBLE_SIZE_M = (0.005, 30.0)
"""Largest bounding-box side, m, that counts as plausible for a fixture or a robot link
(common practice, no source)."""

_TRIANGLE_MODE = 4
"""glTF primitive mode TRIANGLES (glTF 2.0 specification, 3.7.2.1); the default."""
_COMPONENT_BYTES = {5120: 1, 5121: 1, 5122: 2, 5123: 2, 5125: 4, 5126: 4}
_TYPE_COMPONENTS = {"SCALAR": 1, "VEC2": 2, "VEC3": 3, "VEC4": 4, "MAT2": 4, "MAT3": 9, "MAT4": 16}
_COMPRESSION = ("KHR_draco_mesh_compression", "EXT_meshopt_compression", "KHR_meshopt_compression")


@dataclass(frozen=True)
class MeshLimits:
    """Caps on what a mesh file may hold.

    Attributes
    ----------
    max_file_bytes : int
        Largest file (for glTF: each referenced buffer too), bytes.
    max_triangles : int
        Most triangles after triangulating polygons and expanding instances.
    """

    max_file_bytes: int = 200 * 1024**2
    max_triangles: int = 2_000_000


def suggest_length_unit(largest_side: float) -> LengthUnit | None:
    """Return the length unit that makes a mesh of this size plausible (:data:`PLAUSIBLE_SIZE_M`).

    Parameters
    ----------
    largest_side : float
        Largest side of the mesh's bounding box in the file's own numbers.

    Returns
    -------
    str or None
        ``"m"``, then ``"mm"``, then ``"inch"``: the first under which the
        size is plausible; ``None`` when none is.
    """
    lo, hi = PLAUSIBLE_SIZE_M
    for unit in ("m", "mm", "inch"):
        if lo <= largest_side * LENGTH_UNITS[unit] <= hi:
            return unit
    return None


def file_content_hash(data: bytes) -> str:
    """SHA-256 hex digest of a file's bytes (the cache key of everything made from the file)."""
    import hashlib

    return hashlib.sha256(data).hexdigest()


# --- pre-parse checks ---------------------------------------------------------------------


def _too_many(name: str, count: int, limits: MeshLimits, what: str) -> None:
    if count > limits.max_triangles:
        raise MeshFileError(
            f"{name}: {what} {count:,} triangles, more than the limit of {limits.max_triangles:,}"
        )


def _check_stl(name: str, data: bytes, limits: MeshLimits) -> None:
    if len(data) >= 84:
        count = struct.unpack_from("<I", data, 80)[0]
        if len(data) == 84 + 50 * count:
            _too_many(name, count, limits, "the file declares")
            return
    head = data[:1024].lstrip().lower()
    if head.startswith(b"solid") and b"\0" not in data[:1024]:
        _too_many(name, data.count(b"endfacet"), limits, "the file has")
        return
    if len(data) < 84:
        raise MeshFileError(
            f"{name}: truncated binary STL ({len(data)} bytes, the header alone is 84)"
        )
    count = struct.unpack_from("<I", data, 80)[0]
    _too_many(name, count, limits, "the file declares")
    raise MeshFileError(
        f"{name}: truncated or padded binary STL: the header declares {count:,} triangles "
        f"({84 + 50 * count:,} bytes), the file has {len(data):,} bytes"
    )


def _check_obj(name: str, data: bytes, limits: MeshLimits) -> None:
    triangles = 0
    for line in data.splitlines():
        if line.startswith((b"f ", b"f\t")):
            triangles += max(len(line.split()) - 3, 1)
    _too_many(name, triangles, limits, "the file has")


def _check_ply(name: str, data: bytes, limits: MeshLimits) -> None:
    end = data.find(b"end_header")
    if end < 0:
        raise MeshFileError(f"{name}: not a PLY file (no end_header line)")
    match = re.search(rb"element\s+face\s+(\d+)", data[:end])
    if match:
        _too_many(name, int(match.group(1)), limits, "the file declares")


def _json_chunk(name: str, data: bytes) -> tuple[dict[str, Any], bytes]:
    """Return the JSON and BIN chunks of a GLB (glTF 2.0 specification, 4.4)."""
    if len(data) < 20 or data[:4] != b"glTF":
        raise MeshFileError(f"{name}: not a binary glTF file (no glTF header)")
    version, length = struct.unpack_from("<II", data, 4)
    if version != 2:
        raise MeshFileError(f"{name}: glTF version {version}, only version 2 is read")
    if length != len(data):
        raise MeshFileError(
            f"{name}: truncated or padded GLB: the header says {length:,} bytes, the file has "
            f"{len(data):,}"
        )
    chunks: list[tuple[int, bytes]] = []
    offset = 12
    while offset + 8 <= len(data):
        size, kind = struct.unpack_from("<II", data, offset)
        if offset + 8 + size > len(data):
            raise MeshFileError(f"{name}: a GLB chunk runs past the end of the file")
        chunks.append((kind, data[offset + 8 : offset + 8 + size]))
        offset += 8 + size
    if not chunks or chunks[0][0] != 0x4E4F534A:
        raise MeshFileError(f"{name}: the GLB has no JSON chunk first")
    binary = next((chunk for kind, chunk in chunks[1:] if kind == 0x004E4942), b"")
    return _json(name, chunks[0][1]), binary


def _json(name: str, text: bytes) -> dict[str, Any]:
    try:
        document = json.loads(text)
    except (ValueError, UnicodeDecodeError) as e:
        raise MeshFileError(f"{name}: the glTF JSON cannot be read ({e})") from e
    if not isinstance(document, dict):
        raise MeshFileError(f"{name}: the glTF JSON is not an object")
    return document


def _gltf_buffer_sizes(
    name: str, document: dict[str, Any], binary: bytes, folder: Path | None, limits: MeshLimits
) -> tuple[list[int], dict[str, bytes]]:
    """Available bytes per buffer, and the external files the document refers to (by URI)."""
    sizes: list[int] = []
    files: dict[str, bytes] = {}
    for index, buffer in enumerate(document.get("buffers", [])):
        uri = buffer.get("uri")
        if uri is None:
            if index != 0 or folder is not None:
                raise MeshFileError(f"{name}: buffer {index} has no data")
            sizes.append(len(binary))
            continue
        if not isinstance(uri, str):
            raise MeshFileError(f"{name}: buffer {index} has a URI that is not text")
        if uri.startswith("data:"):
            try:
                payload = base64.b64decode(uri.split(",", 1)[1], validate=False)
            except (IndexError, binascii.Error) as e:
                raise MeshFileError(f"{name}: buffer {index} has a broken data URI") from e
            sizes.append(len(payload))
            continue
        relative = unquote(uri)
        if (
            folder is None
            or ":" in relative
            or relative.startswith(("/", "\\"))
            or ".." in Path(relative).parts
        ):
            raise MeshFileError(
                f"{name}: buffer {index} refers to {uri!r}; only files in the glTF file's own "
                "folder (or embedded data) are read"
            )
        path = folder / relative
        try:
            size = path.stat().st_size
            if size > limits.max_file_bytes:
                raise MeshFileError(
                    f"{name}: buffer file {relative} is {size:,} bytes, more than the limit of "
                    f"{limits.max_file_bytes:,}"
                )
            files[uri] = path.read_bytes()
        except OSError as e:
            raise MeshFileError(f"{name}: buffer file {relative} cannot be read ({e})") from e
        sizes.append(len(files[uri]))
    return sizes, files


def _check_gltf(name: str, document: dict[str, Any], sizes: list[int], limits: MeshLimits) -> None:
    """Compression, data ranges and the triangle count of a glTF document (glTF 2.0, 3.6-3.7)."""
    used = set(document.get("extensionsUsed", [])) | set(document.get("extensionsRequired", []))
    compressed = sorted(used.intersection(_COMPRESSION))
    if compressed:
        raise MeshFileError(
            f"{name}: compressed geometry ({', '.join(compressed)}) is not read; export without "
            "compression"
        )
    views = document.get("bufferViews", [])
    for index, view in enumerate(views):
        buffer = view.get("buffer", -1)
        end = int(view.get("byteOffset", 0)) + int(view.get("byteLength", 0))
        if not 0 <= buffer < len(sizes) or end > sizes[buffer]:
            raise MeshFileError(f"{name}: buffer view {index} reaches past the end of its data")
    accessors = document.get("accessors", [])
    for index, accessor in enumerate(accessors):
        count = int(accessor.get("count", 0))
        width = _COMPONENT_BYTES.get(accessor.get("componentType"), 4) * _TYPE_COMPONENTS.get(
            accessor.get("type"), 1
        )
        view_index = accessor.get("bufferView")
        if view_index is None:
            if count > 3 * limits.max_triangles:
                raise MeshFileError(f"{name}: accessor {index} declares {count:,} elements")
            continue
        if not 0 <= view_index < len(views):
            raise MeshFileError(f"{name}: accessor {index} refers to a missing buffer view")
        view = views[view_index]
        stride = int(view.get("byteStride", 0)) or width
        need = int(accessor.get("byteOffset", 0)) + (stride * (count - 1) + width if count else 0)
        if need > int(view.get("byteLength", 0)):
            raise MeshFileError(
                f"{name}: accessor {index} declares {count:,} elements, more than its buffer "
                "view holds"
            )
    per_mesh = []
    for mesh in document.get("meshes", []):
        triangles = 0
        for primitive in mesh.get("primitives", []):
            if primitive.get("mode", _TRIANGLE_MODE) not in (4, 5, 6):
                continue
            index = primitive.get("indices", primitive.get("attributes", {}).get("POSITION"))
            if isinstance(index, int) and 0 <= index < len(accessors):
                triangles += int(accessors[index].get("count", 0)) // 3 + 1
        per_mesh.append(triangles)
    instances = [node.get("mesh") for node in document.get("nodes", []) if "mesh" in node]
    total = sum(per_mesh[m] for m in instances if isinstance(m, int) and 0 <= m < len(per_mesh))
    _too_many(name, total, limits, "the file's nodes place")


def _check_collada(name: str, data: bytes, limits: MeshLimits) -> float:
    """Entity-free XML, node instancing and the triangle count of a COLLADA file; its unit in metres."""
    import defusedxml.ElementTree
    from defusedxml import DefusedXmlException

    try:
        root = defusedxml.ElementTree.fromstring(data)
    except DefusedXmlException as e:
        raise MeshFileError(f"{name}: refused XML construct ({e})") from e
    except Exception as e:  # any XML syntax error of the parser
        raise MeshFileError(f"{name}: not well-formed XML ({e})") from e

    def local(tag: str) -> str:
        return tag.rsplit("}", 1)[-1]

    unit = 1.0
    geometry_triangles: dict[str, int] = {}
    nodes: dict[str, Any] = {}
    for element in root.iter():
        tag = local(element.tag)
        if tag == "unit" and element.get("meter"):
            try:
                unit = float(element.get("meter", "1"))
            except ValueError as e:
                raise MeshFileError(f"{name}: <unit meter> is not a number") from e
        elif tag == "geometry":
            count = 0
            for primitive in element.iter():
                kind = local(primitive.tag)
                if kind in ("triangles", "polylist", "polygons", "tristrips", "trifans"):
                    count += int(primitive.get("count", "0") or 0)
                    if kind == "polylist":
                        for child in primitive:
                            if local(child.tag) == "vcount" and child.text:
                                count += sum(max(int(v) - 3, 0) for v in child.text.split())
            geometry_triangles[element.get("id", "")] = count
        elif tag == "node" and element.get("id"):
            nodes[element.get("id", "")] = element
    if not math.isfinite(unit) or unit <= 0.0:
        raise MeshFileError(f"{name}: <unit meter> must be a positive number, got {unit}")
    memo: dict[int, int] = {}

    def triangles_below(element: Any, path: tuple[int, ...]) -> int:
        key = id(element)
        if key in path:
            raise MeshFileError(f"{name}: a node instances itself (cycle in the scene graph)")
        if key in memo:
            return memo[key]
        total = 0
        for child in element:
            kind = local(child.tag)
            if kind == "instance_geometry":
                total += geometry_triangles.get(child.get("url", "").lstrip("#"), 0)
            elif kind == "instance_node":
                target = nodes.get(child.get("url", "").lstrip("#"))
                if target is not None:
                    total += triangles_below(target, (*path, key))
            elif kind == "node":
                total += triangles_below(child, (*path, key))
            _too_many(name, total, limits, "the file's scene places")
        memo[key] = total
        return total

    scenes = [element for element in root.iter() if local(element.tag) == "visual_scene"]
    total = sum(triangles_below(scene, ()) for scene in scenes)
    _too_many(name, max(total, sum(geometry_triangles.values())), limits, "the file places")
    return unit


# --- parsing ------------------------------------------------------------------------------


def _parse(
    name: str, data: bytes, file_type: str, buffers: dict[str, bytes] | None
) -> tuple[Any, Any]:
    """Trimesh's reading of the bytes as one mesh: ``(vertices, faces)`` arrays.

    ``buffers`` maps a glTF's buffer URIs to their (checked) bytes; trimesh
    reads nothing else from disk.
    """
    import trimesh

    try:
        loaded = trimesh.load(
            io.BytesIO(data),
            file_type=file_type,
            force="mesh",
            process=False,
            resolver=buffers,
            skip_materials=True,
        )
    except MeshFileError:
        raise
    except Exception as e:  # trimesh and its readers raise many types on broken input
        raise MeshFileError(
            f"{name}: cannot be read as {file_type.upper()} ({type(e).__name__}: {e})"
        ) from e
    vertices = getattr(loaded, "vertices", None)
    faces = getattr(loaded, "faces", None)
    if vertices is None or faces is None or len(faces) == 0:
        raise MeshFileError(f"{name}: the file holds no triangles")
    return vertices, faces


def _step_to_glb(name: str, data: bytes) -> bytes:
    """Convert STEP bytes to GLB bytes with OpenCASCADE through cascadio."""
    try:
        import cascadio
    except ImportError as e:
        raise MeshFileError(
            f"{name}: reading STEP files needs the optional STEP support: "
            "pip install 'posebridge[step]'"
        ) from e
    with tempfile.TemporaryDirectory(prefix="posebridge-step-") as folder:
        source = Path(folder) / "input.step"
        target = Path(folder) / "output.glb"
        source.write_bytes(data)
        try:
            status = cascadio.step_to_glb(str(source), str(target))
        except Exception as e:  # OpenCASCADE reports failures as various exceptions
            raise MeshFileError(f"{name}: the STEP file cannot be converted ({e})") from e
        if status != 0 or not target.is_file():
            raise MeshFileError(f"{name}: the STEP file cannot be converted (no geometry read)")
        return target.read_bytes()


def _scale_vector(
    name: str, scale: float | Sequence[float] | npt.ArrayLike
) -> npt.NDArray[np.float64]:
    vector = np.broadcast_to(np.asarray(scale, dtype=np.float64), (3,)).copy()
    if not np.all(np.isfinite(vector)) or np.any(vector == 0.0):
        raise MeshFileError(
            f"{name}: scale must be three finite non-zero numbers, got {vector.tolist()}"
        )
    return vector


def load_mesh_file(
    path: str | Path,
    *,
    unit: LengthUnit | Literal["declared"],
    scale: float | Sequence[float] = 1.0,
    limits: MeshLimits | None = None,
    cache: MeshCache | None = None,
) -> TriangleMesh:
    """Read a mesh file into one clean triangle mesh in metres (module docstring).

    Parameters
    ----------
    path : str or Path
        A file ending in one of :data:`MESH_SUFFIXES`.
    unit : {"m", "mm", "inch", "declared"}, keyword-only
        The file's length unit; ``"declared"`` takes the unit the file states
        (COLLADA, glTF/GLB, STEP).
    scale : float or sequence of 3 floats, keyword-only
        Per-axis factor applied after the unit (URDF ``<mesh scale>``);
        negative values mirror.
    limits : MeshLimits, optional, keyword-only
        :class:`MeshLimits` defaults if omitted.
    cache : MeshCache, optional, keyword-only
        Where processed meshes are kept (none if omitted).

    Returns
    -------
    TriangleMesh
        Named after the file; ``content_key`` covers the file's bytes, the
        unit and the scale.

    Raises
    ------
    MeshFileError
        The message names the file and what is wrong with it.
    """
    limits = limits or MeshLimits()
    file = Path(path)
    name = file.name
    suffix = file.suffix.lower()
    if suffix not in MESH_SUFFIXES:
        raise MeshFileError(
            f"{name}: unknown mesh format {suffix or '(no ending)'!r}; expected one of "
            f"{', '.join(MESH_SUFFIXES)}"
        )
    if unit != "declared" and unit not in LENGTH_UNITS:
        raise MeshFileError(f"{name}: unit must be m, mm, inch or declared, got {unit!r}")
    if unit == "declared" and suffix in (".stl", ".obj", ".ply"):
        raise MeshFileError(
            f"{name}: {suffix[1:].upper()} files do not state their length unit; give it (m, mm or inch)"
        )
    if unit != "declared" and suffix in (".step", ".stp"):
        raise MeshFileError(
            f"{name}: STEP files state their own length unit (converted to metres); "
            f"use unit 'declared', not {unit!r}"
        )
    factor = _scale_vector(name, scale)
    try:
        size = file.stat().st_size
        if not file.is_file():
            raise MeshFileError(f"{name}: not a file")
        if size > limits.max_file_bytes:
            raise MeshFileError(
                f"{name}: {size:,} bytes, more than the limit of {limits.max_file_bytes:,}"
            )
        data = file.read_bytes()
    except OSError as e:
        raise MeshFileError(f"{name}: cannot be read ({e.strerror or e})") from e
    if len(data) > limits.max_file_bytes:
        raise MeshFileError(f"{name}: grew past the size limit while being read")
    digest = file_content_hash(data)
    document: dict[str, Any] | None = None
    sizes: list[int] = []
    files: dict[str, bytes] = {}
    if suffix == ".gltf":
        document = _json(name, data)
        sizes, files = _gltf_buffer_sizes(name, document, b"", file.parent, limits)
        digest = file_content_hash(
            data + b"".join(file_content_hash(files[uri]).encode() for uri in sorted(files))
        )
    key = cache_key("mesh", digest, suffix, str(unit), repr(factor.tolist()))
    if cache is not None:
        entry = cache.load(key, ("vertices", "faces", "is_closed"))
        if entry is not None:
            try:
                mesh = TriangleMesh.from_processed(
                    entry["vertices"],
                    entry["faces"],
                    name=name,
                    is_closed=bool(entry["is_closed"]),
                    content_key=key,
                )
            except MeshFileError:
                mesh = None
            if mesh is not None:
                _too_many(name, mesh.triangle_count, limits, "the file has")
                return mesh
    unit_m = 1.0
    file_type = suffix[1:]
    if suffix == ".stl":
        _check_stl(name, data, limits)
    elif suffix == ".obj":
        _check_obj(name, data, limits)
    elif suffix == ".ply":
        _check_ply(name, data, limits)
    elif suffix == ".dae":
        unit_m = _check_collada(name, data, limits)
    elif suffix in (".step", ".stp"):
        data = _step_to_glb(name, data)
        file_type = "glb"
    if file_type == "glb":
        document, binary = _json_chunk(name, data)
        sizes, _ = _gltf_buffer_sizes(name, document, binary, None, limits)
    if document is not None:
        _check_gltf(name, document, sizes, limits)
    vertices, faces = _parse(name, data, file_type, files or None)
    raw_faces = np.asarray(faces)
    _too_many(name, int(raw_faces.shape[0]), limits, "the file has")
    if unit != "declared":
        unit_m = LENGTH_UNITS[unit]
    mesh = TriangleMesh.from_arrays(
        np.asarray(vertices, dtype=np.float64) * (unit_m * factor),
        raw_faces,
        name=name,
        content_key=key,
    )
    if cache is not None:
        cache.store(
            key,
            {"vertices": mesh.vertices, "faces": mesh.faces, "is_closed": np.array(mesh.is_closed)},
        )
    return mesh

"""Grid results as PNG pictures: a two-joint map's regions, a reach section, placement scores.

The page draws these grids as one picture under its plotly axes (a layout image) instead of
heatmap traces, so it can load a partial charting bundle without them. One pixel per grid
cell, the first pixel row at the top, i.e. at the largest value of the vertical axis (the page
stretches the picture over the cells' extent and keeps the pixels crisp). Colours come from
:mod:`posebridge.palette` and are composited as the page drew its heatmap layers, bottom up,
with the "over" operator of Porter and Duff ("Compositing digital images", SIGGRAPH 1984) on
straight (not premultiplied) alpha:

* joint map: clearance shading (``#c4ccd3`` at 0 mm fading linearly in RGBA to transparent
  ``#fbfcfd`` at :data:`CLEARANCE_SHADE_MM`), each colliding object in its region colour at
  opacity 0.85 (the k-th object of ``colliding_obstacles`` gets ``region-(k+1)``), self
  collision in ``ink`` at opacity 0.22;
* reach section: ``bluish-green`` with opacity from 0.12 (one direction) to 0.55 (every
  direction), unreached cells transparent;
* placement: the score plane on :data:`SCORE_SCALE` (plotly.js's "Viridis" stops, so the page's
  colour bar of that name matches) from the plane's lowest to its highest score.

The PNG writer is the plain format of ISO/IEC 15948 (W3C PNG, 2nd ed.): 8-bit RGBA (colour
type 6), no interlace, filter type 0 on every row, one zlib ``IDAT`` chunk.
"""

from __future__ import annotations

import struct
import zlib
from collections.abc import Sequence

import numpy as np

from posebridge.arrays import FloatArray, UInt8Array
from posebridge.palette import PALETTE, region_colour
from posebridge.results.spaces import JointMapResult, ReachSectionResult

__all__ = [
    "CLEARANCE_SHADE_MM",
    "SCORE_SCALE",
    "joint_map_rgba",
    "png_bytes",
    "reach_section_rgba",
    "score_plane",
    "score_rgba",
]

CLEARANCE_SHADE_MM = 300.0
"""Clearance at which the joint map's grey shading has faded out, mm."""

SCORE_SCALE: tuple[tuple[float, str], ...] = (
    (0.0, "#440154"),
    (0.06274509803921569, "#48186a"),
    (0.12549019607843137, "#472d7b"),
    (0.18823529411764706, "#424086"),
    (0.25098039215686274, "#3b528b"),
    (0.3137254901960784, "#33638d"),
    (0.3764705882352941, "#2c728e"),
    (0.4392156862745098, "#26828e"),
    (0.5019607843137255, "#21918c"),
    (0.5647058823529412, "#1fa088"),
    (0.6274509803921569, "#28ae80"),
    (0.6901960784313725, "#3fbc73"),
    (0.7529411764705882, "#5ec962"),
    (0.8156862745098039, "#84d44b"),
    (0.8784313725490196, "#addc30"),
    (0.9411764705882353, "#d8e219"),
    (1.0, "#fde725"),
)
"""Placement score colours: plotly.js's "Viridis" colour scale (position 0..1, colour)."""

_SHADE_NEAR = (196.0, 204.0, 211.0, 1.0)
_SHADE_FAR = (251.0, 252.0, 253.0, 0.0)
_REGION_OPACITY = 0.85
_SELF_OPACITY = 0.22
_REACH_OPACITY = (0.12, 0.55)
_PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"


def _rgb(colour: str) -> FloatArray:
    """``#rrggbb`` as floats 0..255, shape (3,)."""
    return np.array([int(colour[k : k + 2], 16) for k in (1, 3, 5)], dtype=np.float64)


def _over(below: FloatArray, colour: FloatArray, alpha: FloatArray) -> FloatArray:
    """Porter-Duff "over" of ``colour`` (3,) at opacity ``alpha`` (H, W) on ``below`` (H, W, 4).

    Straight alpha: ``a = as + ab (1 - as)``, ``c = (cs as + cb ab (1 - as)) / a``.
    """
    below_alpha = below[..., 3] * (1.0 - alpha)
    out_alpha = alpha + below_alpha
    safe = np.where(out_alpha > 0.0, out_alpha, 1.0)
    out = np.empty_like(below)
    out[..., :3] = (colour * alpha[..., None] + below[..., :3] * below_alpha[..., None]) / safe[
        ..., None
    ]
    out[..., 3] = out_alpha
    return out


def _pixels(rgba: FloatArray) -> UInt8Array:
    """Float RGB 0..255 and alpha 0..1 (H, W, 4) as 8-bit RGBA pixels (H, W, 4)."""
    scaled = np.concatenate([rgba[..., :3], rgba[..., 3:] * 255.0], axis=-1)
    return np.clip(np.rint(scaled), 0, 255).astype(np.uint8)


def _chunk(kind: bytes, data: bytes) -> bytes:
    """One PNG chunk: length, type, data, CRC-32 of type and data (ISO/IEC 15948, 5.3)."""
    return (
        struct.pack(">I", len(data))
        + kind
        + data
        + struct.pack(">I", zlib.crc32(kind + data) & 0xFFFFFFFF)
    )


def png_bytes(rgba: UInt8Array) -> bytes:
    """Encode 8-bit RGBA pixels (H, W, 4), first row at the top, as a PNG file.

    >>> png_bytes(np.zeros((1, 1, 4), np.uint8))[:8] == _PNG_SIGNATURE
    True
    """
    height, width, channels = rgba.shape
    if channels != 4 or height < 1 or width < 1:
        raise ValueError(f"rgba: expected (H, W, 4) pixels with H, W >= 1, got {rgba.shape}")
    rows = np.zeros((height, 1 + 4 * width), dtype=np.uint8)  # filter type 0 (None) per row
    rows[:, 1:] = np.ascontiguousarray(rgba, dtype=np.uint8).reshape(height, 4 * width)
    header = struct.pack(">IIBBBBB", width, height, 8, 6, 0, 0, 0)
    return (
        _PNG_SIGNATURE
        + _chunk(b"IHDR", header)
        + _chunk(b"IDAT", zlib.compress(rows.tobytes(), 6))
        + _chunk(b"IEND", b"")
    )


def joint_map_rgba(result: JointMapResult) -> UInt8Array:
    """Return the pixels of a two-joint map (nb, na, 4).

    Column ia is the first joint's ia-th value, row 0 the second joint's last (largest) one.
    Raises ``ValueError`` for a map over three joints (it has no picture).
    """
    if len(result.shape) != 2:
        raise ValueError(f"map: a picture needs a two-joint map, this one has {len(result.shape)}")
    na, nb = result.shape
    # flat values are C order, first joint slowest: (na, nb) -> rows of the second joint, top down
    image = np.zeros((nb, na, 4))
    if result.clearance_mm is not None:
        clearance = np.asarray(result.clearance_mm, dtype=np.float64).reshape(na, nb).T[::-1]
        fraction = np.clip(clearance, 0.0, CLEARANCE_SHADE_MM) / CLEARANCE_SHADE_MM
        near, far = np.array(_SHADE_NEAR), np.array(_SHADE_FAR)
        image = near + fraction[..., None] * (far - near)
    obstacle = np.asarray(result.obstacle, dtype=np.int64).reshape(na, nb).T[::-1]
    for rank, name in enumerate(result.colliding_obstacles):
        index = result.obstacle_names.index(name)
        alpha = np.where(obstacle == index, _REGION_OPACITY, 0.0)
        image = _over(image, _rgb(region_colour(rank)), alpha)
    hit = np.asarray(result.self_collision, dtype=bool).reshape(na, nb).T[::-1]
    if hit.any():
        image = _over(image, _rgb(PALETTE["ink"]), np.where(hit, _SELF_OPACITY, 0.0))
    return _pixels(image)


def reach_section_rgba(result: ReachSectionResult) -> UInt8Array:
    """Return the pixels of a reach section (nv, nu, 4): column k is ``u_mm[k]``, row 0 the last ``v_mm``."""
    count = np.asarray(result.count, dtype=np.float64).reshape(len(result.v_mm), len(result.u_mm))
    fraction = np.clip(count / max(result.directions, 1), 0.0, 1.0)[::-1]
    low, high = _REACH_OPACITY
    alpha = np.where(count[::-1] > 0, low + fraction * (high - low), 0.0)
    image = np.zeros((*alpha.shape, 4))
    image[..., :3] = _rgb(PALETTE["bluish-green"])
    image[..., 3] = alpha
    return _pixels(image)


def score_plane(
    score: Sequence[Sequence[Sequence[Sequence[float]]]], yaw_index: int, height_index: int
) -> FloatArray:
    """Return the placement score over x-y (ny, nx) for one yaw, or the best over all yaws (``-1``).

    ``score`` is the placement grid's (ny, nx, nyaw, nheights) scores (as ``scorePlane`` in
    static/panels/placement.js). Raises ``IndexError`` for an index outside the grid.
    """
    grid = np.asarray(score, dtype=np.float64)
    if grid.ndim != 4:
        raise ValueError(f"score: expected (ny, nx, nyaw, nheights) values, got shape {grid.shape}")
    if not -1 <= yaw_index < grid.shape[2]:
        raise IndexError(f"yaw_index: expected -1 .. {grid.shape[2] - 1}, got {yaw_index}")
    if not 0 <= height_index < grid.shape[3]:
        raise IndexError(f"height_index: expected 0 .. {grid.shape[3] - 1}, got {height_index}")
    plane = grid[:, :, :, height_index]
    return plane.max(axis=2) if yaw_index < 0 else plane[:, :, yaw_index]


def score_rgba(plane: FloatArray) -> UInt8Array:
    """Return the pixels of a score plane (ny, nx) -> (ny, nx, 4) on :data:`SCORE_SCALE`, row 0 the last y.

    The scale runs from the plane's lowest to its highest finite score (a flat plane takes the
    scale's middle); a non-finite score is transparent.
    """
    values = np.asarray(plane, dtype=np.float64)[::-1]
    finite = np.isfinite(values)
    low = float(values[finite].min()) if finite.any() else 0.0
    high = float(values[finite].max()) if finite.any() else 0.0
    fraction = (
        np.full(values.shape, 0.5)
        if high <= low
        else np.clip((np.where(finite, values, low) - low) / (high - low), 0.0, 1.0)
    )
    stops = np.array([position for position, _ in SCORE_SCALE])
    colours = np.stack([_rgb(colour) for _, colour in SCORE_SCALE])
    image = np.zeros((*values.shape, 4))
    for channel in range(3):
        image[..., channel] = np.interp(fraction, stops, colours[:, channel])
    image[..., 3] = np.where(finite, 1.0, 0.0)
    return _pixels(image)

"""PNG pictures of grid results: the writer against Pillow, pixels against the palette.

Expected colours are computed here from the palette's hex values with the Porter-Duff "over"
operator (closed form, Porter and Duff, SIGGRAPH 1984), never by the module under test.
"""

from __future__ import annotations

import io

import numpy as np
import pytest
from PIL import Image

from posebridge.palette import PALETTE, region_colour
from posebridge.results.map_images import (
    joint_map_rgba,
    png_bytes,
    reach_section_rgba,
    score_plane,
    score_rgba,
)
from posebridge.results.spaces import JointMapResult, ReachSectionResult


def _rgb(colour: str) -> np.ndarray:
    return np.array([int(colour[k : k + 2], 16) for k in (1, 3, 5)], dtype=float)


def test_png_bytes_decode_with_pillow() -> None:
    rng = np.random.default_rng(7)
    pixels = rng.integers(0, 256, size=(5, 3, 4), dtype=np.uint8)
    decoded = Image.open(io.BytesIO(png_bytes(pixels)))
    # Pillow reads the file back: 3 wide, 5 high, RGBA, the same bytes (reference library)
    assert decoded.size == (3, 5)
    assert decoded.mode == "RGBA"
    np.testing.assert_array_equal(np.asarray(decoded), pixels)


def test_png_bytes_refuses_other_shapes() -> None:
    with pytest.raises(ValueError, match=r"rgba: expected \(H, W, 4\) pixels"):
        png_bytes(np.zeros((2, 2, 3), np.uint8))


def _map(obstacle: list[int], self_hit: list[bool], clearance: list[float]) -> JointMapResult:
    """A 2 x 3 map (first joint 2 values, second joint 3 values), flat C order."""
    return JointMapResult(
        cell_etag="e",
        joints=[0, 1],
        joint_names=["j1", "j2"],
        joint_units=["deg", "deg"],
        shape=[2, 3],
        axes_deg=[[-10.0, 10.0], [0.0, 5.0, 10.0]],
        lower_deg=[-20.0, -2.5],
        upper_deg=[20.0, 12.5],
        hold_deg=[0.0] * 6,
        threshold_mm=0.0,
        obstacle_names=["table", "column"],
        obstacle=obstacle,
        self_collision=self_hit,
        clearance_mm=clearance,
        colliding_obstacles=["column", "table"],
    )


def test_joint_map_pixels_follow_the_grid_and_the_palette() -> None:
    # cells (ia, ib): (0,0) column, (0,1) free at 150 mm, (0,2) free beyond the shading,
    # (1,0) table, (1,1) self collision, (1,2) free at 0 mm
    result = _map(
        obstacle=[1, -1, -1, 0, -1, -1],
        self_hit=[False, False, False, False, True, False],
        clearance=[-5.0, 150.0, 900.0, -1.0, 0.0, 0.0],
    )
    pixels = joint_map_rgba(result)
    # one pixel per cell: rows are the second joint from its largest value down
    assert pixels.shape == (3, 2, 4)

    def at(ia: int, ib: int) -> np.ndarray:
        return pixels[2 - ib, ia].astype(float)

    shade = _rgb("#c4ccd3")
    # the first colliding object listed gets region-1, the second region-2 (palette contract)
    column = 0.85 * _rgb(region_colour(0)) + 0.15 * shade
    table = 0.85 * _rgb(region_colour(1)) + 0.15 * shade
    np.testing.assert_allclose(at(0, 0), [*column, 255], atol=0.51)
    np.testing.assert_allclose(at(1, 0), [*table, 255], atol=0.51)
    # half-way through the shading: halfway in RGBA between #c4ccd3 and transparent #fbfcfd
    half = 0.5 * (shade + _rgb("#fbfcfd"))
    np.testing.assert_allclose(at(0, 1), [*half, 127.5], atol=0.51)
    assert at(0, 2)[3] == 0.0
    np.testing.assert_allclose(at(1, 2), [*shade, 255], atol=0.51)
    self_hit = 0.22 * _rgb(PALETTE["ink"]) + 0.78 * shade
    np.testing.assert_allclose(at(1, 1), [*self_hit, 255], atol=0.51)


def test_joint_map_of_three_joints_has_no_picture() -> None:
    result = _map([-1] * 6, [False] * 6, [0.0] * 6).model_copy(
        update={"shape": [1, 2, 3], "clearance_mm": None}
    )
    with pytest.raises(ValueError, match=r"two-joint map"):
        joint_map_rgba(result)


def test_reach_section_pixels() -> None:
    result = ReachSectionResult(
        cell_etag="e",
        axis="z",
        value_mm=0.0,
        u_axis="x",
        v_axis="y",
        u_mm=[0.0, 50.0, 100.0],
        v_mm=[0.0, 50.0],
        directions=10,
        count=[[0, 5, 10], [10, 0, 1]],
    )
    pixels = reach_section_rgba(result)
    assert pixels.shape == (2, 3, 4)
    green = _rgb(PALETTE["bluish-green"])
    # row 0 of the picture is the last v row; opacity 0.12 + 0.43 * share (closed form)
    np.testing.assert_allclose(pixels[0, 0], [*green, 0.55 * 255], atol=0.51)
    assert pixels[0, 1, 3] == 0
    np.testing.assert_allclose(pixels[0, 2, 3], (0.12 + 0.043) * 255, atol=0.51)
    assert pixels[1, 0, 3] == 0
    np.testing.assert_allclose(pixels[1, 1, 3], (0.12 + 0.215) * 255, atol=0.51)


def test_score_plane_and_pixels() -> None:
    # (ny=2, nx=2, nyaw=2, nheights=1)
    score = [[[[0.1], [0.3]], [[0.2], [0.2]]], [[[0.9], [0.5]], [[float("nan")], [0.4]]]]
    np.testing.assert_allclose(score_plane(score, 0, 0), [[0.1, 0.2], [0.9, np.nan]])
    # the best over yaws; a missing score stays missing (as Math.max in the page's scorePlane)
    np.testing.assert_allclose(score_plane(score, -1, 0), [[0.3, 0.2], [0.9, np.nan]])
    with pytest.raises(IndexError, match=r"yaw_index: expected -1 \.\. 1, got 2"):
        score_plane(score, 2, 0)
    pixels = score_rgba(score_plane(score, 0, 0))
    # the lowest score takes the scale's first colour, the highest its last (plotly.js's
    # Viridis ends, #440154 and #fde725, from memory); row 0 is the last y
    np.testing.assert_array_equal(pixels[1, 0], [*_rgb("#440154"), 255])
    np.testing.assert_array_equal(pixels[0, 0], [*_rgb("#fde725"), 255])
    assert pixels[0, 1, 3] == 0  # no score: transparent

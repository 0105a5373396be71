"""Reach sections of a planar arm agree with its planar region (the page's reach overlay):
``planar_section_mask`` against the closed-form annulus of the bundled two-link arm."""

from __future__ import annotations

import math

import numpy as np

from posebridge.robot.library import load_robot
from posebridge.spaces.planar_boundary import planar_section_mask

L1_M, L2_M = (
    0.4,
    0.3,
)  # link lengths of robots/pb-planar2r.toml (joint origin 400 mm, flange 300 mm)
J2_LIMIT_RAD = math.radians(150.0)  # j2 range +-150 deg in pb-planar2r.toml; j1 is a full turn
# law of cosines (Spong, Hutchinson, Vidyasagar, Robot Modeling and Control, sec. 5.3): the
# elbow at its limit gives the smallest radius, stretched the largest
INNER_M = math.sqrt(L1_M**2 + L2_M**2 + 2 * L1_M * L2_M * math.cos(J2_LIMIT_RAD))
OUTER_M = L1_M + L2_M
GRID_M = np.arange(-0.8, 0.8001, 0.05)


def _mask(axis: str, value_m: float, T_world_base: np.ndarray) -> np.ndarray:
    mask = planar_section_mask(
        load_robot("pb-planar2r"),
        axis=axis,
        value_m=value_m,
        u_m=GRID_M,
        v_m=GRID_M,
        T_world_base=T_world_base,
        half_thickness_m=0.025,
    )
    assert mask is not None
    return mask


def test_plan_section_through_the_plane_is_the_annulus() -> None:
    T_world_base = np.eye(4)
    T_world_base[:3, 3] = [0.1, -0.2, 0.5]  # base moved: the section is in world coordinates
    mask = _mask("z", 0.5, T_world_base)
    x, y = np.meshgrid(GRID_M - 0.1, GRID_M + 0.2, indexing="xy")
    r = np.hypot(x, y)
    clear = (np.abs(r - INNER_M) > 1e-3) & (np.abs(r - OUTER_M) > 1e-3)
    expected = (r >= INNER_M) & (r <= OUTER_M)  # closed form above
    assert np.array_equal(mask[clear], expected[clear])
    assert mask.any()
    assert not mask.all()


def test_sections_off_the_plane_are_empty_and_an_elevation_is_one_row() -> None:
    assert not _mask("z", 0.1, np.eye(4)).any()  # 100 mm above the plane z = 0 (closed form)
    elevation = _mask("y", 0.0, np.eye(4))
    rows = np.flatnonzero(elevation.any(axis=1))
    # only the row of cells at z = 0 holds the plane (grid from -800 mm in 50 mm steps)
    assert rows.tolist() == [int(np.argmin(np.abs(GRID_M)))]
    x = GRID_M[elevation[rows[0]]]
    assert np.all((np.abs(x) >= INNER_M) & (np.abs(x) <= OUTER_M + 1e-9))  # closed form above


def test_other_robots_have_no_planar_mask() -> None:
    mask = planar_section_mask(
        load_robot("pb-arm6"),
        axis="z",
        value_m=0.5,
        u_m=GRID_M,
        v_m=GRID_M,
        T_world_base=np.eye(4),
        half_thickness_m=0.025,
    )
    assert mask is None  # a six-axis arm is not planar (our own contract)

"""Moving the track in the cell file: the rail of a rail placement candidate, the widened travel
and the carriage's home position.

References: the closed form of the track's base pose (README, cell file: the rail frame at
track position 0 sits at ``origin_mm`` with x along a horizontal ``direction`` and z up, so
its rotation is ``Rz(atan2(d_y, d_x))``; ``T_world_base(s) = T_world_rail Trans(s, 0, 0)
Trans(0, 0, h) T_foot Trans(0, 0, pedestal)``), written here with scipy's ``Rotation`` for the
rotations, and the widening rule ``[min(a, floor(n0)), max(b, ceil(n1))]`` written out per case.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
import pytest
from scipy.spatial.transform import Rotation

from posebridge.cell.model import Cell, CellFileError, validate_cell
from posebridge.cell.scene import posed_scene, resolve_scene
from posebridge.cell.track_move import cell_with_track_moved, widened_travel


def track_cell() -> dict[str, Any]:
    """An invented cell: pb-arm6 turned on the carriage of a yawed track, a fixture, a target."""
    return {
        "robot": {"name": "pb-arm6"},
        "base": {
            "position_mm": [30.0, -20.0, 0.0],
            "rpy_deg": [0.0, 0.0, 35.0],
            "pedestal_height_mm": 320.0,
            "pedestal_radius_mm": 170.0,
        },
        "track": {
            "origin_mm": [150.0, -250.0, 60.0],
            "direction": [1.0, 0.4, 0.0],
            "range_mm": [-500.0, 2500.0],
            "home_mm": 400.0,
            "speed_mm_s": 1200.0,
            "accel_mm_s2": 1500.0,
            "carriage_height_mm": 230.0,
        },
        "fixtures": [
            {
                "name": "bench",
                "shape": "box",
                "position_mm": [900.0, 800.0, 400.0],
                "size_mm": [400.0, 300.0, 800.0],
            }
        ],
        "targets": [
            {
                "name": "on-bench",
                "fixture": "bench",
                "position_mm": [0.0, 0.0, 450.0],
                "rpy_deg": [180.0, 0.0, 0.0],
            }
        ],
    }


def _base_closed_form(
    origin_mm: list[float], direction: list[float], s_mm: float, data: dict[str, Any]
) -> np.ndarray:
    """T_world_base (m) of the module docstring for a horizontal direction."""

    def frame(rotation: Rotation, position_mm: list[float]) -> np.ndarray:
        T = np.eye(4)
        T[:3, :3] = rotation.as_matrix()
        T[:3, 3] = np.asarray(position_mm) / 1000.0
        return T

    yaw = math.atan2(direction[1], direction[0])
    track, base = data["track"], data["base"]
    rail = frame(Rotation.from_euler("z", yaw), origin_mm)
    slide = frame(Rotation.identity(), [s_mm, 0.0, track["carriage_height_mm"]])
    foot = frame(Rotation.from_euler("xyz", base["rpy_deg"], degrees=True), base["position_mm"])
    pedestal = frame(Rotation.identity(), [0.0, 0.0, base["pedestal_height_mm"]])
    return rail @ slide @ foot @ pedestal


def test_rail_candidate_moves_the_robot_and_nothing_else() -> None:
    data = track_cell()
    cell = validate_cell(data)
    before = resolve_scene(cell)
    origin = [420.0, 310.0, 60.0]
    direction = [-0.6, 0.8, 0.0]  # a candidate's unit direction, yaw 126.87 deg
    moved = cell_with_track_moved(
        cell, origin_mm=origin, direction=direction, travel_needed_mm=[-612.3, 1800.2]
    )
    assert moved.track is not None
    assert moved.track.origin_mm == tuple(origin)
    assert moved.track.direction == tuple(direction)
    # widening (module docstring): [min(-500, floor(-612.3)), max(2500, ceil(1800.2))]
    assert moved.track.range_mm == (-613.0, 2500.0)
    assert moved.track.home_mm == 400.0  # not given: kept
    after = resolve_scene(moved)
    # closed form of the base on the carriage at the home position, 400 mm, and at 2000 mm
    np.testing.assert_allclose(
        after.T_world_base, _base_closed_form(origin, direction, 400.0, data), atol=1e-12
    )
    far = posed_scene(after, [2.0])
    np.testing.assert_allclose(
        far.T_world_base, _base_closed_form(origin, direction, 2000.0, data), atol=1e-12
    )
    # fixtures and targets stay where they were (closed form: the edit changes only the track)
    np.testing.assert_array_equal(after.T_world_fixture, before.T_world_fixture)
    np.testing.assert_array_equal(after.targets.T_world_target, before.targets.T_world_target)
    assert moved.model_copy(update={"track": cell.track}) == cell


@pytest.mark.parametrize(
    ("needed", "expected"),
    [
        ([100.4, 3100.6], (-500.0, 3101.0)),  # [min(-500, 100), max(2500, ceil(3100.6) = 3101)]
        ([-800.0, 2600.0], (-800.0, 2600.0)),  # whole millimetres stay as they are
        ([0.5, 2000.0], (-500.0, 2500.0)),  # inside the configured travel: unchanged
    ],
)
def test_widened_travel(needed: list[float], expected: tuple[float, float]) -> None:
    assert widened_travel((-500.0, 2500.0), needed) == expected


def test_carriage_home_is_saved_as_home_mm() -> None:
    cell = validate_cell(track_cell())
    moved = cell_with_track_moved(cell, home_mm=1234.5)
    assert moved.track is not None
    assert moved.track.home_mm == 1234.5
    assert moved.track.range_mm == (-500.0, 2500.0)
    scene = resolve_scene(moved)
    assert scene.external.values[0] == pytest.approx(1.2345, abs=1e-15)  # 1234.5 mm in m
    np.testing.assert_allclose(
        scene.T_world_base,
        _base_closed_form([150.0, -250.0, 60.0], [1.0, 0.4, 0.0], 1234.5, track_cell()),
        atol=1e-12,
    )


def _cell_without_track() -> Cell:
    data = track_cell()
    del data["track"]
    return validate_cell(data)


@pytest.mark.parametrize(
    ("edit", "message"),
    [
        ({"direction": [0.0, 0.0, 0.0]}, "track.direction: must not be the zero vector"),
        ({"direction": [0.0, 0.0, -2.0]}, "track.direction: must not be vertical"),
        ({"home_mm": 2600.0}, r"track.home_mm: must lie in range_mm \[-500, 2500\]"),
        (
            {"travel_needed_mm": [900.0, 100.0]},
            r"travel_needed_mm: expected two finite numbers, lower end first, got \[900, 100\]",
        ),
    ],
)
def test_track_edit_refusals(edit: dict[str, Any], message: str) -> None:
    cell = validate_cell(track_cell())
    with pytest.raises(CellFileError, match=f"^{message}$"):
        cell_with_track_moved(cell, **edit)


def test_home_checked_against_the_widened_travel() -> None:
    cell = validate_cell(track_cell())
    # 2600 mm is outside [-500, 2500] but inside the widened [-500, 2700]
    moved = cell_with_track_moved(cell, travel_needed_mm=[0.0, 2700.0], home_mm=2600.0)
    assert moved.track is not None
    assert moved.track.range_mm == (-500.0, 2700.0)
    assert moved.track.home_mm == 2600.0


def test_track_edit_without_track() -> None:
    with pytest.raises(CellFileError, match=r"^track: the cell has no track$"):
        cell_with_track_moved(_cell_without_track(), home_mm=0.0)

"""Moving a turntable in the cell file: everything it carries moves rigidly by the same step.

Reference: the closed form of a rigid translation. Turning about the moved axis line is
``D_(p+d)(theta) = Trans(d) D_p(theta) Trans(-d)`` (Lynch & Park, Modern Robotics, eq. 3.51
with the point moved), so a carried frame ``T`` must become ``Trans(d) T`` at every table
angle, and every frame the table does not carry must stay where it is.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pytest

from posebridge.cell.model import CellFileError, validate_cell
from posebridge.cell.scene import Scene, posed_scene, resolve_scene
from posebridge.cell.turntable_move import cell_with_turntable_at

STEP_MM = np.array([-250.0, 180.0, 40.0])


def carrying_cell_data() -> dict[str, Any]:
    """A table carrying a fixture whose parent is a rotated stand beside it, a jig and its
    clamp (both listed), a pin on the carried fixture (not listed), a post on the stand
    (not carried) and a target on each, plus one in the world."""
    box = {"shape": "box", "size_mm": [40.0, 40.0, 40.0]}
    return {
        "robot": {"name": "pb-planar2r"},
        "turntables": [
            {
                "name": "table-1",
                "position_mm": [800.0, 100.0, -300.0],
                "range_deg": [-180.0, 180.0],
                "home_deg": 25.0,
                "speed_deg_s": 90.0,
                "accel_deg_s2": 180.0,
                "plate_radius_mm": 300.0,
                "fixtures": ["jig", "holder", "clamp"],
            }
        ],
        "fixtures": [
            {
                "name": "stand",
                **box,
                "position_mm": [1300.0, 500.0, -400.0],
                "rpy_deg": [12.0, -8.0, 35.0],
            },
            {
                "name": "holder",
                **box,
                "parent": "stand",
                "position_mm": [-350.0, -150.0, 120.0],
                "rpy_deg": [0.0, 0.0, -20.0],
            },
            {"name": "pin", **box, "parent": "holder", "position_mm": [30.0, 60.0, 50.0]},
            {"name": "post", **box, "parent": "stand", "position_mm": [100.0, 0.0, 80.0]},
            {
                "name": "jig",
                **box,
                "position_mm": [850.0, 50.0, -250.0],
                "rpy_deg": [0.0, 0.0, 15.0],
            },
            {
                "name": "clamp",
                **box,
                "parent": "jig",
                "position_mm": [20.0, 0.0, 60.0],
                "rpy_deg": [0.0, 0.0, 90.0],
            },
        ],
        "targets": [
            {
                "name": f"on-{f}",
                "fixture": f,
                "position_mm": [10.0, -20.0, 100.0],
                "rpy_deg": [180.0, 0.0, 30.0],
            }
            for f in ("jig", "clamp", "holder", "pin", "post", "stand")
        ]
        + [{"name": "in-world", "position_mm": [500.0, 0.0, 0.0]}],
    }


def resolved(data: dict[str, Any]) -> Scene:
    return resolve_scene(validate_cell(data))


def test_everything_the_table_carries_moves_by_the_step() -> None:
    scene = resolved(carrying_cell_data())
    position = np.array([800.0, 100.0, -300.0]) + STEP_MM
    moved = resolve_scene(cell_with_turntable_at(scene, "table-1", position))
    assert moved.cell.turntables[0].position_mm == pytest.approx(tuple(position))
    translation = np.eye(4)
    translation[:3, 3] = STEP_MM / 1000.0  # m
    carried = {"jig", "clamp", "holder", "pin"}  # listed, or a child of a listed one
    names = scene.fixture_names
    targets = scene.targets
    for angle in np.radians([25.0, -140.0, 0.0, 170.0]):  # the home angle first
        before, after = posed_scene(scene, [angle]), posed_scene(moved, [angle])
        for i, name in enumerate(names):
            # closed form (module docstring): Trans(d) T for a carried frame, T for the others
            expected = (
                translation @ before.T_world_fixture[i]
                if name in carried
                else before.T_world_fixture[i]
            )
            np.testing.assert_allclose(after.T_world_fixture[i], expected, atol=1e-12, err_msg=name)
        for k, name in enumerate(targets.names):
            on_table = targets.fixtures[k] in carried
            for table in ("T_world_target", "T_world_approach"):
                old = getattr(before.targets, table)[k]
                expected = translation @ old if on_table else old
                np.testing.assert_allclose(
                    getattr(after.targets, table)[k], expected, atol=1e-12, err_msg=name
                )
        plate = list(before.cylinders.names).index("table-1 plate")
        # the plate turns about its own axis: its centre moves by the step
        np.testing.assert_allclose(
            after.cylinders.T_world[plate],
            translation @ before.cylinders.T_world[plate],
            atol=1e-12,
        )


def test_stored_positions_change_only_where_a_carried_chain_starts() -> None:
    data = carrying_cell_data()
    scene = resolved(data)
    moved = cell_with_turntable_at(scene, "table-1", np.array([800.0, 100.0, -300.0]) + STEP_MM)
    stored = {f.name: np.array(f.position_mm) for f in moved.fixtures}
    given = {f["name"]: np.array(f["position_mm"]) for f in data["fixtures"]}
    # closed form: a fixture hanging from the world moves by the step itself
    np.testing.assert_allclose(stored["jig"], given["jig"] + STEP_MM, atol=1e-9)
    # the stand's rotation turns the step into its frame: R^T d (Modern Robotics, sec. 3.3.1)
    R_stand = scene.T_world_fixture[scene.fixture_names.index("stand"), :3, :3]
    np.testing.assert_allclose(stored["holder"], given["holder"] + R_stand.T @ STEP_MM, atol=1e-9)
    assert np.linalg.norm(R_stand.T @ STEP_MM - STEP_MM) > 50.0  # the rotation matters here
    for name in ("stand", "post", "pin", "clamp"):  # not carried, or following a carried parent
        np.testing.assert_array_equal(stored[name], given[name])


def test_moving_a_turntable_refuses_unknown_tables_and_bad_positions() -> None:
    scene = resolved(carrying_cell_data())
    with pytest.raises(
        CellFileError, match=r"no turntable named 'table-9' \(the cell has 'table-1'\)"
    ):
        cell_with_turntable_at(scene, "table-9", [0.0, 0.0, 0.0])
    with pytest.raises(CellFileError, match="position_mm: expected three finite numbers"):
        cell_with_turntable_at(scene, "table-1", [0.0, np.nan, 0.0])
    with pytest.raises(ValueError, match="home values"):
        cell_with_turntable_at(posed_scene(scene, [0.5]), "table-1", [0.0, 0.0, 0.0])

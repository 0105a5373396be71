"""External axes: cell fields, the joint vector, forward kinematics against pinocchio on a
composed URDF, carriage and plate as obstacles, feasible intervals against a dense sweep.

References run in these tests: pinocchio (``pin.buildModelFromXML`` on a URDF written here:
a world-rooted tree with a prismatic track carrying the robot chain of ``urdf_from_robot``
and a revolute turntable), scipy's ``Rotation`` for the file's roll-pitch-yaw, and a dense
brute-force sweep of the external axis (every value solved, no bisection).
"""

from __future__ import annotations

import json
import math
import xml.etree.ElementTree as ET
from pathlib import Path
from typing import Any

import numpy as np
import pinocchio as pin
import pytest
from scipy.spatial.transform import Rotation

from posebridge.cell.checks import check_targets
from posebridge.cell.external_kinematics import (
    branch_triples,
    choose_external_value,
    feasible_intervals,
    fk_cell_tool,
    target_poses_at,
)
from posebridge.cell.files import load_cell
from posebridge.cell.model import CellFileError, validate_cell
from posebridge.cell.scene import Scene, posed_scene, resolve_scene
from posebridge.cli import main
from posebridge.kinematics.ik import solve_ik_all
from posebridge.resources import data_folder
from posebridge.results.target_check import target_check_result
from posebridge.robot.library import load_robot
from posebridge.robot.urdf_export import urdf_from_robot
from posebridge.transforms import invert_transform

DEMO = data_folder("robots") / "demo-track-cell.json"
YAW = math.atan2(0.5, 1.0)


def tilted_cell() -> dict[str, Any]:
    """An invented cell with a yawed track and a tilted turntable carrying a fixture."""
    return {
        "robot": {"name": "pb-arm6"},
        "base": {
            "position_mm": [40.0, -30.0, 0.0],
            "rpy_deg": [0.0, 0.0, 25.0],
            "pedestal_height_mm": 300.0,
            "pedestal_radius_mm": 180.0,
        },
        "track": {
            "origin_mm": [200.0, -100.0, 50.0],
            "direction": [1.0, 0.5, 0.0],
            "range_mm": [-500.0, 2500.0],
            "speed_mm_s": 1200.0,
            "accel_mm_s2": 1500.0,
            "carriage_height_mm": 250.0,
        },
        "turntables": [
            {
                "name": "positioner",
                "position_mm": [1300.0, 1100.0, 650.0],
                "axis": [0.0, 0.2, 1.0],
                "range_deg": [-170.0, 170.0],
                "home_deg": 30.0,
                "speed_deg_s": 90.0,
                "accel_deg_s2": 200.0,
                "plate_radius_mm": 350.0,
                "fixtures": ["jig"],
            }
        ],
        "fixtures": [
            {
                "name": "jig",
                "shape": "box",
                "position_mm": [1300.0, 1000.0, 800.0],
                "size_mm": [300.0, 200.0, 300.0],
            }
        ],
        "targets": [
            {
                "name": "corner",
                "fixture": "jig",
                "position_mm": [0.0, -120.0, 0.0],
                "rpy_deg": [100.0, 5.0, -10.0],
            },
            {"name": "free", "position_mm": [900.0, 300.0, 900.0], "rpy_deg": [180.0, 0.0, 0.0]},
        ],
    }


def _origin(T: np.ndarray) -> str:
    rpy = Rotation.from_matrix(T[:3, :3]).as_euler("xyz")
    return 'xyz="{} {} {}" rpy="{} {} {}"'.format(*T[:3, 3], *rpy)


def _pose(position_mm: list[float], rpy_deg: list[float]) -> np.ndarray:
    T = np.eye(4)
    T[:3, :3] = Rotation.from_euler("xyz", rpy_deg, degrees=True).as_matrix()
    T[:3, 3] = np.asarray(position_mm) / 1000.0
    return T


def composed_urdf(data: dict[str, Any]) -> str:
    """world -> rail (fixed) -> track (prismatic) -> carriage -> robot chain; world -> table."""
    track = data["track"]
    table = data["turntables"][0]
    rail = np.eye(4)  # a horizontal rail: yaw about z, x along the direction
    rail[:3, :3] = Rotation.from_euler("z", YAW).as_matrix()
    rail[:3, 3] = np.asarray(track["origin_mm"]) / 1000.0
    mount = _pose([0.0, 0.0, track["carriage_height_mm"]], [0.0, 0.0, 0.0])
    mount = mount @ _pose(data["base"]["position_mm"], data["base"]["rpy_deg"])
    mount = mount @ _pose([0.0, 0.0, data["base"]["pedestal_height_mm"]], [0.0, 0.0, 0.0])
    axis = np.asarray(table["axis"]) / np.linalg.norm(table["axis"])
    robot_xml = ET.fromstring(urdf_from_robot(load_robot("pb-arm6")))
    parts = "".join(ET.tostring(child, encoding="unicode") for child in robot_xml)
    p = np.asarray(table["position_mm"]) / 1000.0
    return f"""<?xml version="1.0"?>
<robot name="composed">
  <link name="world"/><link name="rail"/><link name="carriage"/><link name="plate"/>
  <joint name="rail_fixed" type="fixed"><parent link="world"/><child link="rail"/>
    <origin {_origin(rail)}/></joint>
  <joint name="track" type="prismatic"><parent link="rail"/><child link="carriage"/>
    <axis xyz="1 0 0"/><limit lower="-10" upper="10" effort="0" velocity="1"/></joint>
  <joint name="mount" type="fixed"><parent link="carriage"/><child link="base"/>
    <origin {_origin(mount)}/></joint>
  {parts}
  <joint name="positioner" type="revolute"><parent link="world"/><child link="plate"/>
    <origin xyz="{p[0]} {p[1]} {p[2]}" rpy="0 0 0"/><axis xyz="{axis[0]} {axis[1]} {axis[2]}"/>
    <limit lower="-4" upper="4" effort="0" velocity="1"/></joint>
</robot>"""


@pytest.fixture(scope="module")
def tilted() -> Scene:
    return resolve_scene(validate_cell(tilted_cell()))


@pytest.fixture(scope="module")
def demo() -> Scene:
    return resolve_scene(load_cell(DEMO), DEMO)


def test_joint_vector_names_units_and_defaults(tilted: Scene) -> None:
    assert tilted.joint_names == ("j1", "j2", "j3", "j4", "j5", "j6", "track", "positioner")
    assert tilted.external.units == ["mm", "deg"]
    _q, external = tilted.split_joints([[0, 10, 20, 30, 40, 50]])
    # the home values stated in the cell: 0 mm and 30 deg; common practice, no source
    np.testing.assert_allclose(external, [[0.0, math.radians(30.0)]])
    _q, external = tilted.split_joints([[0, 10, 20, 30, 40, 50, 1200, -45]])
    np.testing.assert_allclose(external, [[1.2, math.radians(-45.0)]])  # mm, deg -> m, rad
    with pytest.raises(CellFileError, match=r"joints: expected 6 or 8 values"):
        tilted.split_joints([[0, 1, 2, 3, 4, 5, 6]])


@pytest.mark.parametrize(
    ("change", "message"),
    [
        ({"track": {"range_mm": [10.0, 0.0]}}, r"track.range_mm: lower end must be below"),
        ({"track": {"home_mm": 5000.0}}, r"track.home_mm: must lie in range_mm"),
        ({"track": {"direction": [0.0, 0.0, 1.0]}}, r"track.direction: must not be vertical"),
        ({"turntables": [{"fixtures": ["nope"]}]}, r"turntables\[0\].fixtures\[0\]: unknown"),
        ({"targets": [{"external_axes": {"trak": 1.0}}]}, r"did you mean 'track'"),
        ({"targets": [{"external_axes": {"track": 9000.0}}]}, r"must lie in the axis range"),
    ],
)
def test_external_axis_fields_are_validated(change: dict[str, Any], message: str) -> None:
    data = tilted_cell()
    for key, value in change.items():
        if isinstance(data[key], list):
            data[key][0].update(value[0])
        else:
            data[key].update(value)
    with pytest.raises(CellFileError, match=message):
        validate_cell(data)


def two_table_cell(second_lists: list[str]) -> dict[str, Any]:
    """The tilted cell with a clamp on its jig and a second table listing ``second_lists``."""
    data = tilted_cell()
    data["fixtures"].append(
        {"name": "clamp", "shape": "frame", "parent": "jig", "position_mm": [0.0, 0.0, 200.0]}
    )
    second = {**data["turntables"][0], "name": "second", "fixtures": second_lists}
    data["turntables"].append(second)
    return data


@pytest.mark.parametrize(
    ("second_lists", "message"),
    [
        # the jig listed on both tables
        (["jig"], "turntables[1].fixtures[0]: fixture 'jig' is already on turntable 0"),
        # the clamp hangs from the jig, which the first table turns: it would turn with both
        (
            ["clamp"],
            "turntables[1].fixtures[0]: fixture 'clamp' is already on turntable 0: its parent "
            "chain reaches 'jig', listed there (a fixture turns with one table only)",
        ),
    ],
)
def test_fixture_on_two_turntables_is_refused_at_load(
    second_lists: list[str], message: str, tmp_path: Path
) -> None:
    path = tmp_path / "two-tables.json"
    path.write_text(json.dumps({"schema_version": 1, **two_table_cell(second_lists)}))
    with pytest.raises(CellFileError) as raised:
        load_cell(path)
    assert raised.value.problems == [message]


def test_fixture_on_one_turntable_twice_over_its_parent_is_accepted() -> None:
    # the first table lists the jig and its clamp: one table, the clamp turns once
    data = two_table_cell([])
    data["turntables"][0]["fixtures"] = ["jig", "clamp"]
    scene = resolve_scene(validate_cell(data))
    # the clamp is fixture 1 in file order, the jig 0: each carried by the first table only
    assert scene.external.turntables[0].fixtures == (0, 1)
    assert scene.external.turntables[1].fixtures == ()


def test_fk_matches_pinocchio_on_composed_urdf(tilted: Scene) -> None:
    """Robot + track + table against pinocchio: tool, carriage and a target on the plate."""
    data = tilted_cell()
    model = pin.buildModelFromXML(composed_urdf(data))
    pin_data = model.createData()
    tool_id = model.getFrameId("tool")
    carriage_id = model.getFrameId("carriage")
    plate_id = model.getFrameId("plate")
    rng = np.random.default_rng(7)
    robot = tilted.robot
    q = rng.uniform(robot.lower, robot.upper, (20, robot.dof))
    external = np.stack([rng.uniform(-0.5, 2.5, 20), rng.uniform(-2.9, 2.9, 20)], axis=1)
    T_ours = fk_cell_tool(tilted, q, external)
    T_target_ours = target_poses_at(tilted, 0, external)
    T_target_file = _pose(data["fixtures"][0]["position_mm"], [0.0, 0.0, 0.0]) @ _pose(
        data["targets"][0]["position_mm"], data["targets"][0]["rpy_deg"]
    )
    p = np.asarray(data["turntables"][0]["position_mm"]) / 1000.0
    for i in range(20):
        config = np.zeros(model.nq)
        for name, value in zip(
            [*robot.joint_names, "track", "positioner"], [*q[i], *external[i]], strict=True
        ):
            config[model.joints[model.getJointId(name)].idx_q] = value
        pin.framesForwardKinematics(model, pin_data, config)
        # reference library: pinocchio on the composed URDF
        np.testing.assert_allclose(T_ours[i], pin_data.oMf[tool_id].homogeneous, atol=1e-12)
        plate = pin_data.oMf[plate_id].homogeneous
        T_plate_target = _pose([0, 0, 0], [0, 0, 0])
        T_plate_target[:3, 3] = -p
        np.testing.assert_allclose(
            T_target_ours[i], plate @ T_plate_target @ T_target_file, atol=1e-12
        )
        posed = posed_scene(tilted, external[i])
        carriage = posed.boxes.T_world[posed.boxes.names.index("track carriage")]
        top = carriage @ _pose([0.0, 0.0, 125.0], [0.0, 0.0, 0.0])
        np.testing.assert_allclose(
            top,
            pin_data.oMf[carriage_id].homogeneous @ _pose([0.0, 0.0, 250.0], [0.0, 0.0, 0.0]),
            atol=1e-12,
        )  # pinocchio's carriage frame, raised by the carriage height


def test_joint_waypoints_with_and_without_external_values() -> None:
    data = tilted_cell()
    data["paths"] = [
        {
            "name": "p",
            "waypoints": [
                {"joints_deg": [10, 20, 30, 40, 50, 60], "motion": "joint", "speed_percent": 50},
                {
                    "joints_deg": [10, 20, 30, 40, 50, 60, 1000, 0],
                    "motion": "joint",
                    "speed_percent": 50,
                },
            ],
        }
    ]
    scene = resolve_scene(validate_cell(data))
    path = scene.paths[0]
    np.testing.assert_allclose(path.external[:, 0], [0.0, 1.0])  # home 0 mm, then 1000 mm
    # the track moves the tool by the travel along the unit direction; closed form
    shift = path.T_world_tool[1, :3, 3] - path.T_world_tool[0, :3, 3]
    np.testing.assert_allclose(shift, [math.cos(YAW), math.sin(YAW), 0.0], atol=1e-12)


def test_carriage_and_plate_are_obstacles(demo: Scene) -> None:
    assert "track carriage" in demo.boxes.names
    assert "table-1 plate" in demo.cylinders.names
    moved = posed_scene(demo, [1.5, 0.0])
    i = demo.boxes.names.index("track carriage")
    # the carriage moves 1500 mm along the rail's x; closed form
    np.testing.assert_allclose(
        moved.boxes.T_world[i, :3, 3] - demo.boxes.T_world[i, :3, 3], [1.5, 0, 0]
    )


def _dense(scene: Scene, T_world_target: np.ndarray, axis: int, values: np.ndarray) -> np.ndarray:
    """Brute force: every value solved, feasibility per branch, shape (S, B)."""
    poses = []
    for v in values:
        ext = scene.external.values.copy()
        ext[axis] = v
        posed = posed_scene(scene, ext)
        if axis == 0:
            poses.append(invert_transform(posed.T_world_base) @ T_world_target)
        else:
            table = scene.external.turntables[axis - scene.external.table_offset]
            turn = table.motion(v - scene.external.values[axis])[0]
            poses.append(invert_transform(posed.T_world_base) @ turn @ T_world_target)
    sol = solve_ik_all(scene.robot, np.array(poses), T_flange_tool=scene.T_flange_tool)
    ok = sol.valid & sol.within_limits
    out = []
    for s, e, w in branch_triples(scene):
        match = ok.copy()
        for labels, want in ((sol.shoulder, s), (sol.elbow, e), (sol.wrist, w)):
            match &= (labels == want) | (labels == 0)
        out.append(np.any(match, axis=1))
    return np.stack(out, axis=1)


@pytest.mark.parametrize(("target", "axis"), [(0, 0), (1, 0), (2, 0), (2, 1), (3, 1)])
def test_intervals_match_a_dense_sweep(demo: Scene, target: int, axis: int) -> None:
    scene = demo if target != 3 else posed_scene(demo, [1.6, 0.0])
    T = scene.targets.T_world_target[target]
    if target == 2 and axis == 1:
        scene = posed_scene(demo, [1.5, 0.0])
        T = scene.targets.T_world_target[target]
    found = feasible_intervals(scene, T[None], axis)
    lower, upper = scene.external.lower[axis], scene.external.upper[axis]
    values = np.linspace(lower, upper, 4001)
    dense = _dense(scene, T, axis, values)
    assert dense.any()  # the case has feasible values at all
    slack = 2.0 * found.tolerance
    for b in range(len(found.branches)):
        spans = found.intervals[0][b]
        inside = np.zeros(len(values), dtype=bool)
        near_end = np.zeros(len(values), dtype=bool)
        for start, stop in spans:
            inside |= (values >= start) & (values <= stop)
            near_end |= (np.abs(values - start) < slack) | (np.abs(values - stop) < slack)
        # brute force: every dense value agrees except within the stated accuracy of an end
        assert np.array_equal(inside[~near_end], dense[~near_end, b])


def _dense_track(
    scene: Scene, T_world_target: np.ndarray, values: np.ndarray, *, limits: bool = True
) -> np.ndarray:
    """Brute force on the track: every value solved, feasibility per branch, shape (P, S, B).

    The base at track value ``v`` is the scene's base moved by ``(v - v0)`` along the
    travel direction (a translation, the track's definition), each pose solved there.
    Without ``limits``, whether the branch reaches the pose at all.
    """
    track = scene.external.track
    assert track is not None
    moves = np.broadcast_to(np.eye(4), (len(values), 4, 4)).copy()
    moves[:, :3, 3] = np.outer(values - scene.external.values[0], track.direction)
    T_base_world = invert_transform(moves @ scene.T_world_base)
    poses = T_base_world[None] @ T_world_target[:, None]
    sol = solve_ik_all(scene.robot, poses.reshape(-1, 4, 4), T_flange_tool=scene.T_flange_tool)
    ok = sol.valid & sol.within_limits if limits else sol.valid
    out = []
    for s, e, w in branch_triples(scene):
        match = ok.copy()
        for labels, want in ((sol.shoulder, s), (sol.elbow, e), (sol.wrist, w)):
            match &= (labels == want) | (labels == 0)
        out.append(np.any(match, axis=1))
    return np.stack(out, axis=1).reshape(len(T_world_target), len(values), -1)


def test_interval_ends_where_a_joint_limit_or_the_reach_decides(demo: Scene) -> None:
    # poses around the demo's track targets (seeded jitter of 100 mm and 10 deg), so that some
    # interval ends are set by a joint limit and some by the reach
    rng = np.random.default_rng(7)
    rows = [k for k, fixture in enumerate(demo.targets.fixtures) if fixture != "weld-jig"]
    T = np.repeat(demo.targets.T_world_target[rows], 4, axis=0)
    T[:, :3, 3] += rng.uniform(-0.1, 0.1, (len(T), 3))
    turn = Rotation.from_euler("xyz", rng.uniform(-10.0, 10.0, (len(T), 3)), degrees=True)
    T[:, :3, :3] = T[:, :3, :3] @ turn.as_matrix()
    found = feasible_intervals(demo, T, 0)
    values = np.linspace(demo.external.lower[0], demo.external.upper[0], 8001)
    dense = _dense_track(demo, T, values)
    slack = 2.0 * found.tolerance
    limit_ends = reach_ends = 0
    for k in range(len(T)):
        for b in range(len(found.branches)):
            spans = found.intervals[k][b]
            inside = np.zeros(len(values), dtype=bool)
            near_end = np.zeros(len(values), dtype=bool)
            for start, stop in spans:
                inside |= (values >= start) & (values <= stop)
                near_end |= (np.abs(values - start) < slack) | (np.abs(values - stop) < slack)
            # brute force: every dense value agrees except within the stated accuracy of an end
            assert np.array_equal(inside[~near_end], dense[k, ~near_end, b])
            # the reported ends are the feasible side: each is within limits on its branch
            ends = spans.ravel()
            if ends.size:
                assert _dense_track(demo, T[k : k + 1], ends)[0, :, b].all()
                outside = np.clip(ends + np.tile([-1.0, 1.0], len(spans)) * slack, *values[[0, -1]])
                beyond = _dense_track(demo, T[k : k + 1], outside)[0, :, b]
                reached = _dense_track(demo, T[k : k + 1], outside, limits=False)[0, :, b]
                limit_ends += int(np.sum(~beyond & reached))
                reach_ends += int(np.sum(~beyond & ~reached))
    # the case has both kinds of end: a joint limit (the branch still reaches the pose just
    # beyond it, searched on the limit margin) and the reach (it does not, searched on the
    # reach margin)
    assert limit_ends > 0
    assert reach_ends > 0


def test_pinned_value_is_kept_and_the_unreachable_targets_need_the_axes(demo: Scene) -> None:
    # demo notes: mill-vise only with the track moved, seam-back only with the table turned
    at_home = {
        name: _dense(demo, demo.targets.T_world_target[k], 0, demo.external.values[:1]).any()
        for k, name in enumerate(demo.targets.names)
    }
    assert at_home["lathe-chuck"]
    assert not at_home["mill-vise"]
    choice = choose_external_value(demo, demo.targets.names.index("mill-vise"))
    # closed form: the mill target is 3.5 m along the rail, the arm reaches about 1.46 m
    assert choice.score is not None
    assert choice.values[0] > 3.5 - 1.46
    back = demo.targets.names.index("seam-back")
    assert (
        not feasible_intervals(demo, demo.targets.T_world_target[back][None], 0)
        .intervals[0][0]
        .size
    )
    choice = choose_external_value(demo, back)
    assert choice.score is not None
    assert abs(choice.values[1]) > math.radians(45.0)


def _demo_with_pins(pins: dict[str, dict[str, float]]) -> Scene:
    data = load_cell(DEMO).model_dump(mode="json")
    for target in data["targets"]:
        target["external_axes"] = pins.get(target["name"], {})
    return resolve_scene(validate_cell(data), DEMO)


def test_target_check_uses_the_external_axes() -> None:
    report = target_check_result(check_targets(_demo_with_pins({})))
    assert report.external_axis_names == ["track", "table-1"]
    assert report.external_axis_units == ["mm", "deg"]
    by_name = {t.name: t for t in report.targets}
    # demo notes: every target is reachable once the axes may move
    assert all(t.reachable for t in report.targets)
    # closed form: the mill target is 3.5 m along the rail, the arm reaches about 1.46 m
    assert by_name["mill-vise"].external_axes["track"] > 3500.0 - 1460.0
    assert {i.axis for i in by_name["seam-back"].external_intervals} == {"track", "table-1"}

    pinned = target_check_result(
        check_targets(_demo_with_pins({"mill-vise": {"track": 0.0}, "seam-back": {"table-1": 0.0}}))
    )
    by_name = {t.name: t for t in pinned.targets}
    # pinned at home they are out of reach (demo notes)
    assert not by_name["mill-vise"].reachable
    assert by_name["mill-vise"].external_pinned == ["track"]
    assert by_name["mill-vise"].external_axes["track"] == 0.0
    assert not by_name["seam-back"].reachable
    assert by_name["lathe-chuck"].reachable


def test_diagnose_cli_takes_the_longer_joint_vector(capsys: pytest.CaptureFixture[str]) -> None:
    joints = "10,-20,30,0,45,0"
    assert main(["diagnose", str(DEMO), "--joints", joints, "--json"]) in (0, 1)
    home = json.loads(capsys.readouterr().out)
    assert main(["diagnose", str(DEMO), "--joints", f"{joints},1500,45", "--json"]) in (0, 1)
    moved = json.loads(capsys.readouterr().out)
    assert home["external_axes"] == {"track": 0.0, "table-1": 0.0}  # the demo's home values
    assert moved["external_axes"] == {"track": 1500.0, "table-1": 45.0}
    shift = np.subtract(moved["tcp_world"]["position_mm"], home["tcp_world"]["position_mm"])
    np.testing.assert_allclose(shift, [1500.0, 0.0, 0.0], atol=1e-9)  # rail along x: closed form
    track = moved["external_margins"][0]
    # closed form: 1500 mm in [0, 4000] mm is 1500 mm from the lower end, 0.375 of the range
    assert track["margin"] == pytest.approx(1500.0)
    assert track["margin_fraction"] == pytest.approx(0.375)
    assert main(["diagnose", str(DEMO), "--joints", f"{joints},1500"]) == 2
    assert "expected 6 or 8 values" in capsys.readouterr().err

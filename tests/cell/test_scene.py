"""Resolution of a cell into world-frame SI arrays, and the bundled demo cell and log.

Frame compositions are checked against scipy.spatial.transform.Rotation
(``from_euler("xyz", ..., degrees=True)`` is fixed-axis X-Y-Z roll-pitch-yaw,
the URDF rpy convention) composed by hand: ``R = R1 R2``, ``p = p1 + R1 p2``.
"""

from __future__ import annotations

import copy
import csv
import dataclasses
import json
import shutil
import tomllib
import warnings
from pathlib import Path
from typing import Any

import fcl
import numpy as np
import pinocchio as pin
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.spatial.transform import Rotation

from posebridge.cell.files import load_cell
from posebridge.cell.model import CellFileError, validate_cell
from posebridge.cell.scene import resolve_scene
from posebridge.resources import data_folder

ROBOTS = data_folder("robots")


def rotation(rpy_deg: Any) -> np.ndarray:
    return Rotation.from_euler("xyz", rpy_deg, degrees=True).as_matrix()


def pose(position_mm: Any, rpy_deg: Any) -> tuple[np.ndarray, np.ndarray]:
    """Reference pose (R, p in m) from scipy."""
    return rotation(rpy_deg), np.asarray(position_mm, dtype=float) / 1000.0


def compose(
    a: tuple[np.ndarray, np.ndarray], b: tuple[np.ndarray, np.ndarray]
) -> tuple[np.ndarray, np.ndarray]:
    return a[0] @ b[0], a[1] + a[0] @ b[1]


def assert_pose(T: np.ndarray, expected: tuple[np.ndarray, np.ndarray]) -> None:
    np.testing.assert_allclose(T[:3, :3], expected[0], atol=1e-12)
    np.testing.assert_allclose(T[:3, 3], expected[1], atol=1e-12)
    np.testing.assert_array_equal(T[3], [0.0, 0.0, 0.0, 1.0])


def base_cell() -> dict[str, Any]:
    return {
        "schema_version": 1,
        "robot": {"name": "pb-arm6"},
        "base": {
            "position_mm": [100, -200, 50],
            "rpy_deg": [0, 0, 90],
            "pedestal_height_mm": 400,
            "pedestal_radius_mm": 220,
        },
        "tool": {
            "name": "gripper",
            "tcp": {"position_mm": [0, 10, 180], "rpy_deg": [0, 0, 45]},
            "capsules": [
                {"name": "body", "start_mm": [0, 0, 20], "end_mm": [0, 0, 120], "radius_mm": 50}
            ],
        },
        "floor_height_mm": -5,
        "fixtures": [
            {
                "name": "station",
                "shape": "frame",
                "position_mm": [1000, 300, 0],
                "rpy_deg": [0, 0, 30],
            },
            {
                "name": "table",
                "shape": "box",
                "parent": "station",
                "position_mm": [0, 0, 400],
                "rpy_deg": [5, -10, 20],
                "size_mm": [600, 400, 800],
            },
            {
                "name": "post",
                "shape": "cylinder",
                "parent": "table",
                "position_mm": [250, 150, 600],
                "radius_mm": 20,
                "height_mm": 400,
            },
        ],
        "keep_outs": [
            {
                "name": "fence",
                "position_mm": [-1500, 0, 1000],
                "rpy_deg": [0, 0, 10],
                "size_mm": [100, 3000, 2000],
            }
        ],
        "targets": [
            {
                "name": "pick",
                "fixture": "table",
                "position_mm": [50, -20, 440],
                "rpy_deg": [180, 0, 30],
                "approach_offset_mm": 120,
                "branch": {"elbow": "up"},
            },
            {"name": "park", "position_mm": [500, 0, 1200], "rpy_deg": [180, 0, 0]},
        ],
        "paths": [
            {
                "name": "cycle",
                "waypoints": [
                    {"joints_deg": [0, 0, 0, 0, 0, 0], "motion": "joint", "speed_percent": 40},
                    {
                        "target": "pick",
                        "approach": True,
                        "motion": "joint",
                        "speed_percent": 60,
                        "blend_mm": 50,
                    },
                    {"target": "pick", "motion": "linear", "speed_mm_s": 250},
                    {
                        "pose": {"position_mm": [700, -300, 900], "rpy_deg": [180, 0, 90]},
                        "motion": "linear",
                        "speed_mm_s": 800,
                        "blend_mm": 20,
                    },
                ],
            }
        ],
    }


@pytest.fixture(scope="module")
def scene() -> Any:
    return resolve_scene(validate_cell(base_cell()))


def test_fixture_parent_chain_matches_scipy(scene: Any) -> None:
    station = pose([1000, 300, 0], [0, 0, 30])
    table = compose(station, pose([0, 0, 400], [5, -10, 20]))
    post = compose(table, pose([250, 150, 600], [0, 0, 0]))
    assert scene.fixture_names == ("station", "table", "post")
    # scipy Rotation composition (see module docstring)
    assert_pose(scene.T_world_fixture[0], station)
    assert_pose(scene.T_world_fixture[1], table)
    assert_pose(scene.T_world_fixture[2], post)


def test_obstacle_arrays(scene: Any) -> None:
    # closed form: half extents are half the sizes, in m; frames carry no geometry
    assert scene.boxes.names == ("table",)
    np.testing.assert_allclose(scene.boxes.half_extents, [[0.3, 0.2, 0.4]])
    np.testing.assert_array_equal(scene.boxes.T_world, scene.T_world_fixture[[1]])
    assert scene.cylinders.names == ("post",)
    np.testing.assert_allclose(scene.cylinders.radius, [0.02])
    np.testing.assert_allclose(scene.cylinders.half_length, [0.2])
    np.testing.assert_array_equal(scene.cylinders.T_world, scene.T_world_fixture[[2]])
    assert scene.boxes.T_world.shape == (1, 4, 4)
    assert scene.cylinders.T_world.shape == (1, 4, 4)
    assert scene.keep_outs.names == ("fence",)
    np.testing.assert_allclose(scene.keep_outs.half_extents, [[0.05, 1.5, 1.0]])
    # scipy Rotation
    assert_pose(scene.keep_outs.T_world[0], pose([-1500, 0, 1000], [0, 0, 10]))
    assert scene.floor_height == pytest.approx(-0.005)  # closed form: mm / 1000


def test_base_and_pedestal(scene: Any) -> None:
    foot = pose([100, -200, 50], [0, 0, 90])
    # scipy Rotation: the base sits pedestal_height above the foot along the foot's z
    assert_pose(scene.T_world_base, compose(foot, (np.eye(3), np.array([0, 0, 0.4]))))
    assert scene.pedestal.names == ("pedestal",)
    assert_pose(scene.pedestal.T_world[0], compose(foot, (np.eye(3), np.array([0, 0, 0.2]))))
    np.testing.assert_allclose(scene.pedestal.radius, [0.22])
    np.testing.assert_allclose(scene.pedestal.half_length, [0.2])


def test_tool(scene: Any) -> None:
    assert scene.tool_name == "gripper"
    # scipy Rotation
    assert_pose(scene.T_flange_tool, pose([0, 10, 180], [0, 0, 45]))
    # closed form: mm / 1000
    np.testing.assert_allclose(scene.tool_capsules.start, [[0, 0, 0.02]])
    np.testing.assert_allclose(scene.tool_capsules.end, [[0, 0, 0.12]])
    np.testing.assert_allclose(scene.tool_capsules.radius, [0.05])


def test_targets_follow_their_fixtures(scene: Any) -> None:
    station = pose([1000, 300, 0], [0, 0, 30])
    table = compose(station, pose([0, 0, 400], [5, -10, 20]))
    pick = compose(table, pose([50, -20, 440], [180, 0, 30]))
    targets = scene.targets
    assert targets.names == ("pick", "park")
    assert targets.fixtures == ("table", "world")
    # scipy Rotation composition
    assert_pose(targets.T_world_target[0], pick)
    assert_pose(targets.T_world_target[1], pose([500, 0, 1200], [180, 0, 0]))
    # closed form: the approach backs off along the target's own z axis
    np.testing.assert_allclose(targets.approach_offset, [0.12, 0.0])
    assert_pose(targets.T_world_approach[0], (pick[0], pick[1] - 0.12 * pick[0][:, 2]))
    assert_pose(targets.T_world_approach[1], pose([500, 0, 1200], [180, 0, 0]))
    assert targets.branches[0] is not None
    assert targets.branches[0].elbow == "up"
    assert targets.branches[1] is None
    assert targets.index("park") == 1


def test_moving_a_parent_moves_children_and_targets() -> None:
    data = base_cell()
    data["fixtures"][0]["position_mm"] = [1200, 100, 0]
    data["fixtures"][0]["rpy_deg"] = [0, 0, -60]
    moved = resolve_scene(validate_cell(data))
    station = pose([1200, 100, 0], [0, 0, -60])
    table = compose(station, pose([0, 0, 400], [5, -10, 20]))
    # scipy Rotation composition
    assert_pose(moved.T_world_fixture[2], compose(table, pose([250, 150, 600], [0, 0, 0])))
    assert_pose(moved.targets.T_world_target[0], compose(table, pose([50, -20, 440], [180, 0, 30])))


rpy_strategy = st.tuples(*[st.floats(-180, 180, allow_nan=False)] * 3)
position_strategy = st.tuples(*[st.floats(-5000, 5000, allow_nan=False)] * 3)


@settings(derandomize=True, deadline=None, max_examples=30)
@given(st.lists(st.tuples(position_strategy, rpy_strategy), min_size=1, max_size=5))
def test_any_parent_chain_matches_scipy(chain: list[Any]) -> None:
    fixtures = [
        {
            "name": f"f{i}",
            "shape": "frame",
            "position_mm": list(position),
            "rpy_deg": list(rpy),
            **({"parent": f"f{i - 1}"} if i else {}),
        }
        for i, (position, rpy) in enumerate(chain)
    ]
    # listed leaf first, so resolution cannot rely on file order
    resolved = resolve_scene(
        validate_cell({"robot": {"name": "pb-arm6"}, "fixtures": fixtures[::-1]})
    )
    expected = (np.eye(3), np.zeros(3))
    for i, (position, rpy) in enumerate(chain):
        expected = compose(expected, pose(position, rpy))
        T = resolved.T_world_fixture[len(chain) - 1 - i]
        # scipy Rotation composition; tolerance scaled to 5 m lever arms
        np.testing.assert_allclose(T[:3, :3], expected[0], atol=1e-12)
        np.testing.assert_allclose(T[:3, 3], expected[1], atol=1e-9)


def test_paths(scene: Any) -> None:
    (path,) = scene.paths
    assert path.name == "cycle"
    assert path.sources == ("joints", "target", "target", "pose")
    np.testing.assert_array_equal(path.target_index, [-1, 0, 0, -1])
    np.testing.assert_array_equal(path.approach, [False, True, False, False])
    np.testing.assert_array_equal(path.joints_given, [True, False, False, False])
    np.testing.assert_array_equal(path.q[0], np.zeros(6))
    assert np.isnan(path.q[1:]).all()
    np.testing.assert_array_equal(path.linear, [False, False, True, True])
    # closed form: mm/s / 1000 = m/s; percentages are kept
    np.testing.assert_allclose(path.linear_speed, [np.nan, np.nan, 0.25, 0.8])
    np.testing.assert_allclose(path.speed_percent, [40, 60, np.nan, np.nan])
    np.testing.assert_allclose(path.blend_radius, [0.0, 0.05, 0.0, 0.02])
    np.testing.assert_array_equal(path.T_world_tool[1], scene.targets.T_world_approach[0])
    np.testing.assert_array_equal(path.T_world_tool[2], scene.targets.T_world_target[0])
    # scipy Rotation
    assert_pose(path.T_world_tool[3], pose([700, -300, 900], [180, 0, 90]))


def test_joint_waypoint_pose_at_zero_configuration(scene: Any) -> None:
    # Closed form from robots/pb-arm6.toml: at q = 0 every joint origin is a pure
    # translation, so the flange sits at x = 143 + 268 + 359 + 87 = 857 mm,
    # z = 188 + 277 + 597 + 97 = 1159 mm with its z axis along base x
    # (flange rpy [0, 90, 0]); the tool adds (0, 10, 180) mm turned 45 deg about
    # the flange z. Base: foot (100, -200, 50) mm turned 90 deg about z, pedestal 400 mm.
    T_base_flange = (rotation([0, 90, 0]), np.array([0.857, 0.0, 1.159]))
    T_base_tool = compose(T_base_flange, pose([0, 10, 180], [0, 0, 45]))
    T_world_base = compose(pose([100, -200, 50], [0, 0, 90]), (np.eye(3), np.array([0, 0, 0.4])))
    expected = compose(T_world_base, T_base_tool)
    np.testing.assert_allclose(scene.paths[0].T_world_tool[0][:3, :3], expected[0], atol=1e-12)
    np.testing.assert_allclose(scene.paths[0].T_world_tool[0][:3, 3], expected[1], atol=1e-12)


def test_wrong_number_of_joint_values() -> None:
    data = base_cell()
    data["paths"][0]["waypoints"][0]["joints_deg"] = [0, 0, 0, 0, 0]
    with pytest.raises(CellFileError) as caught:
        resolve_scene(validate_cell(data))
    # our own contract
    assert caught.value.problems == [
        "paths[0].waypoints[0].joints_deg: expected 6 values for robot 'pb-arm6', got 5"
    ]


def test_default_tool_and_empty_cell() -> None:
    resolved = resolve_scene(validate_cell({"robot": {"name": "pb-arm6"}}))
    # the robot's own default tool (robots/pb-arm6.toml: 120 mm along the flange z)
    np.testing.assert_allclose(resolved.T_flange_tool[:3, 3], [0, 0, 0.12])
    np.testing.assert_array_equal(resolved.T_world_base, np.eye(4))
    # our own contract: empty sets keep their documented shapes
    assert resolved.boxes.T_world.shape == (0, 4, 4)
    assert resolved.boxes.half_extents.shape == (0, 3)
    assert resolved.cylinders.radius.shape == (0,)
    assert resolved.keep_outs.T_world.shape == (0, 4, 4)
    assert resolved.pedestal.T_world.shape == (0, 4, 4)
    assert resolved.tool_capsules.start.shape == (0, 3)
    assert resolved.targets.T_world_target.shape == (0, 4, 4)
    assert resolved.T_world_fixture.shape == (0, 4, 4)
    assert resolved.paths == ()


def test_robot_file_relative_to_the_cell(tmp_path: Path) -> None:
    (tmp_path / "arms").mkdir()
    shutil.copy(ROBOTS / "pb-arm6.toml", tmp_path / "arms" / "my-arm.toml")
    cell = validate_cell({"robot": {"file": "arms/my-arm.toml"}})
    # our own contract: relative robot files are found beside the cell file
    assert resolve_scene(cell, tmp_path / "cell.json").robot.name == "pb-arm6"
    with pytest.raises(CellFileError) as caught:
        resolve_scene(cell)
    assert caught.value.problems == [
        "robot.file: relative path 'arms/my-arm.toml' needs the cell file's folder; "
        "give cell_path or an absolute path"
    ]
    with pytest.raises(CellFileError) as caught:
        resolve_scene(validate_cell({"robot": {"file": "absent.toml"}}), tmp_path / "cell.json")
    assert len(caught.value.problems) == 1
    assert caught.value.problems[0].startswith("robot.file: ")


def test_embedded_and_unknown_robots() -> None:
    text = (ROBOTS / "pb-arm6.toml").read_text()
    # our own contract: an embedded description is read like a file
    assert resolve_scene(validate_cell({"robot": {"toml": text}})).robot.dof == 6
    with pytest.raises(CellFileError) as caught:
        resolve_scene(validate_cell({"robot": {"toml": "not = [toml"}}))
    assert caught.value.problems[0].startswith("robot.toml")
    with pytest.raises(CellFileError) as caught:
        resolve_scene(validate_cell({"robot": {"name": "pb-arm99"}}))
    assert caught.value.problems[0].startswith("robot.name: unknown robot 'pb-arm99'")


# --- the bundled demo cell -------------------------------------------------------

DEMO = ROBOTS / "demo-cell.json"


def pin_tool_poses(robot: Any, T_flange_tool: np.ndarray, q_deg: np.ndarray) -> np.ndarray:
    """Tool poses in the base frame from pinocchio (reference library), via a URDF
    written from the robot's joint origins and axes."""

    def numbers(values: Any) -> str:
        return " ".join(f"{float(v):.17g}" for v in values)

    def origin(T: np.ndarray) -> str:
        with warnings.catch_warnings():
            # a pitch of exactly 90 deg (the flange) is gimbal lock; the angles
            # scipy returns still give the same matrix
            warnings.simplefilter("ignore", UserWarning)
            rpy = Rotation.from_matrix(T[:3, :3]).as_euler("xyz")
        return f'<origin xyz="{numbers(T[:3, 3])}" rpy="{numbers(rpy)}"/>'

    parts = ['<robot name="check"><link name="l0"/>']
    for i, joint in enumerate(robot.joints, start=1):
        parts.append(
            f'<link name="l{i}"/><joint name="{joint.name}" type="revolute">'
            f'<parent link="l{i - 1}"/><child link="l{i}"/>{origin(joint.origin)}'
            f'<axis xyz="{numbers(joint.axis)}"/>'
            f'<limit lower="-10" upper="10" effort="1" velocity="1"/></joint>'
        )
    T_last_tool = robot.T_link_flange @ T_flange_tool
    parts.append(
        f'<link name="tool"/><joint name="tool_joint" type="fixed"><parent link="l{robot.dof}"/>'
        f'<child link="tool"/>{origin(T_last_tool)}</joint></robot>'
    )
    model = pin.buildModelFromXML("".join(parts))
    data = model.createData()
    frame = model.getFrameId("tool")
    poses = []
    for q in np.radians(q_deg):
        pin.framesForwardKinematics(model, data, q)
        poses.append(data.oMf[frame].homogeneous.copy())
    return np.array(poses)


def test_demo_cell_loads_and_has_the_promised_content(demo_scene: Any) -> None:
    cell = demo_scene.cell
    # task contract: 8-15 targets on fixtures, 2-3 paths mixing joint and linear moves
    assert 8 <= len(cell.targets) <= 15
    assert all(target.fixture != "world" for target in cell.targets)
    assert 2 <= len(cell.paths) <= 3
    assert all(path.linear.any() and (~path.linear).any() for path in demo_scene.paths)
    assert any(path.joints_given.any() for path in demo_scene.paths)
    assert demo_scene.robot.name == "pb-arm6"
    # closed form: the base stands on a 400 mm pedestal
    np.testing.assert_allclose(demo_scene.T_world_base[:3, 3], [0.0, 0.0, 0.4])
    assert len(demo_scene.keep_outs.names) >= 1
    assert demo_scene.tool_name == "gripper-180"
    assert any(f.parent is not None for f in cell.fixtures)


def test_demo_targets_are_the_fk_of_their_documented_joint_values(
    demo_scene: Any, documented_joints: dict[str, list[float]]
) -> None:
    assert sorted(documented_joints) == sorted(demo_scene.targets.names)
    names = list(demo_scene.targets.names)
    q_deg = np.array([documented_joints[name] for name in names])
    T_base_tool = pin_tool_poses(demo_scene.robot, demo_scene.T_flange_tool, q_deg)
    # pinocchio forward kinematics (reference library); the file rounds positions
    # to 0.001 mm and angles to 0.0001 deg
    expected = demo_scene.T_world_base @ T_base_tool
    np.testing.assert_allclose(
        demo_scene.targets.T_world_target[:, :3, 3], expected[:, :3, 3], atol=2e-6
    )
    np.testing.assert_allclose(
        demo_scene.targets.T_world_target[:, :3, :3], expected[:, :3, :3], atol=1e-5
    )


def test_demo_wrist_target_is_near_straight(documented_joints: dict[str, list[float]]) -> None:
    # task contract: the wrist bend (j5, straight at 0 for pb-arm6: j4 and j6
    # axes both along x in robots/pb-arm6.toml) is within 5 deg of straight
    assert abs(documented_joints["gauge-probe"][4]) < 5.0


def test_demo_press_load_has_low_clearance(demo_scene: Any) -> None:
    k = demo_scene.targets.index("press-load")
    T_world_tool = demo_scene.targets.T_world_target[k]
    T_world_flange = T_world_tool @ np.linalg.inv(demo_scene.T_flange_tool)
    start = T_world_flange[:3, :3] @ demo_scene.tool_capsules.start[0] + T_world_flange[:3, 3]
    end = T_world_flange[:3, :3] @ demo_scene.tool_capsules.end[0] + T_world_flange[:3, 3]
    axis = (end - start) / np.linalg.norm(end - start)
    capsule = fcl.CollisionObject(
        fcl.Capsule(demo_scene.tool_capsules.radius[0], np.linalg.norm(end - start)),
        fcl.Transform(
            Rotation.align_vectors([axis], [[0, 0, 1]])[0].as_matrix(), (start + end) / 2
        ),
    )
    # the die's world pose composed with scipy from the raw file (press -> bed -> die)
    raw = {f["name"]: f for f in json.loads(DEMO.read_text())["fixtures"]}
    chain = (np.eye(3), np.zeros(3))
    for name in ("press", "press-bed", "press-die"):
        chain = compose(chain, pose(raw[name]["position_mm"], raw[name]["rpy_deg"]))
    die = fcl.CollisionObject(
        fcl.Box(*(np.array(raw["press-die"]["size_mm"]) / 1000)), fcl.Transform(chain[0], chain[1])
    )
    distance = fcl.distance(capsule, die, fcl.DistanceRequest(), fcl.DistanceResult())
    # python-fcl distance (reference library); task contract: below 30 mm, not touching
    assert 0.0 < distance < 0.030


def test_demo_cell_round_trips_through_validation() -> None:
    cell = load_cell(DEMO)
    data = copy.deepcopy(cell.model_dump(mode="json"))
    # our own contract: the demo round-trips through validation unchanged
    assert validate_cell(data) == cell


# --- the bundled demo log ---------------------------------------------------------


def test_demo_log_shows_a_jump_a_near_singularity_and_a_small_margin() -> None:
    with (ROBOTS / "demo-log.csv").open(newline="") as handle:
        rows = list(csv.reader(handle))
    # task contract: header and about 200 rows
    assert rows[0] == ["time_s", "j1", "j2", "j3", "j4", "j5", "j6"]
    values = np.array(rows[1:], dtype=float)
    assert 150 <= len(values) <= 250
    time, q = values[:, 0], values[:, 1:]
    assert np.all(np.diff(time) > 0)
    with (ROBOTS / "pb-arm6.toml").open("rb") as handle:
        joints = tomllib.load(handle)["joint"]
    limits = np.array(
        [
            [j["limits"]["min_deg"], j["limits"]["max_deg"], j["limits"]["velocity_deg_s"]]
            for j in joints
        ]
    )
    # closed form: joint speed between rows = |dq| / dt; exactly one step exceeds a limit
    speed = np.abs(np.diff(q, axis=0)) / np.diff(time)[:, None]
    assert np.count_nonzero((speed > limits[:, 2]).any(axis=1)) == 1
    # task contract: passes within 5 deg of the straight wrist (j5 = 0)
    assert np.abs(q[:, 4]).min() < 5.0
    # closed form: margin = distance to the nearer limit; one row comes within 3 deg
    margin = np.minimum(q - limits[:, 0], limits[:, 1] - q)
    assert margin.min() < 3.0
    assert margin.min() > 0.0


def _arrays_of(value: Any) -> list[np.ndarray]:
    """Every numpy array held by a scene dataclass and the dataclasses inside it."""
    if isinstance(value, np.ndarray):
        return [value]
    if isinstance(value, tuple):
        return [a for item in value for a in _arrays_of(item)]
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        return [a for f in dataclasses.fields(value) for a in _arrays_of(getattr(value, f.name))]
    return []


def test_scene_arrays_refuse_writes() -> None:
    cell = load_cell(data_folder("robots") / "demo-track-cell.json")
    scene = resolve_scene(cell, data_folder("robots") / "demo-track-cell.json")
    arrays = _arrays_of(scene)
    # the demo track cell has targets, paths, boxes, a track and a pedestal (robots/demo-track-cell.json)
    assert len(arrays) > 20
    for array in arrays:
        assert not array.flags.writeable
    with pytest.raises(ValueError, match="read-only"):
        scene.targets.T_world_target[0, 0, 3] = 0.0
    with pytest.raises(ValueError, match="read-only"):
        scene.external.values[...] = 0.0

"""Validation of the cell model.

The messages and the JSON path format (``fixtures[2].size_mm[1]: must be > 0``)
are our own contract (DEVELOPERS.md, "Errors"; cell format in README.md), so
the checks below compare exact strings against that contract.
"""

from __future__ import annotations

import copy
import math
from typing import Any

import pytest

from posebridge.cell.model import (
    MAX_FIXTURES,
    MAX_TARGETS,
    UNITS_NOTE,
    BoxFixture,
    Cell,
    CellFileError,
    CylinderFixture,
    FrameFixture,
    json_path,
    validate_cell,
)


def minimal() -> dict[str, Any]:
    """A small valid cell: one box with a target on it, one path."""
    return {
        "schema_version": 1,
        "robot": {"name": "pb-arm6"},
        "fixtures": [
            {
                "name": "table",
                "shape": "box",
                "position_mm": [800, 0, 400],
                "size_mm": [600, 600, 800],
            }
        ],
        "targets": [
            {
                "name": "pick",
                "fixture": "table",
                "position_mm": [0, 0, 440],
                "rpy_deg": [180, 0, 0],
                "approach_offset_mm": 100,
            }
        ],
        "paths": [
            {
                "name": "main",
                "waypoints": [
                    {"target": "pick", "approach": True, "motion": "joint", "speed_percent": 50},
                    {"target": "pick", "motion": "linear", "speed_mm_s": 250},
                ],
            }
        ],
    }


def problems(data: Any) -> list[str]:
    with pytest.raises(CellFileError) as caught:
        validate_cell(data)
    return caught.value.problems


def edited(path: str, value: Any) -> dict[str, Any]:
    """``minimal()`` with the value at a dotted path (list indices as numbers) replaced."""
    data = minimal()
    keys: list[Any] = [int(k) if k.isdigit() else k for k in path.split(".")]
    node: Any = data
    for key in keys[:-1]:
        node = node[key]
    node[keys[-1]] = value
    return data


def test_minimal_cell_is_valid_with_documented_defaults() -> None:
    cell = validate_cell(minimal())
    # Defaults documented in the model (our own contract).
    assert cell.schema_version == 1
    assert cell.units == UNITS_NOTE
    assert cell.base.pedestal_height_mm == 0.0
    assert cell.tool is None
    assert cell.floor_height_mm == 0.0
    assert isinstance(cell.fixtures[0], BoxFixture)
    assert cell.fixtures[0].rpy_deg == (0.0, 0.0, 0.0)
    assert cell.targets[0].branch is None
    assert cell.paths[0].waypoints[0].blend_mm == 0.0


def test_fixture_shapes_select_their_model() -> None:
    data = minimal()
    data["fixtures"] += [
        {
            "name": "post",
            "shape": "cylinder",
            "position_mm": [0, 900, 500],
            "radius_mm": 20,
            "height_mm": 1000,
        },
        {"name": "group", "shape": "frame", "position_mm": [0, 0, 0], "parent": "table"},
    ]
    cell = validate_cell(data)
    # our own contract: the "shape" field picks the fixture kind
    assert [type(f) for f in cell.fixtures] == [BoxFixture, CylinderFixture, FrameFixture]


@pytest.mark.parametrize(
    ("path", "value", "expected"),
    [
        ("fixtures.0.size_mm", [600, 0, 800], "fixtures[0].size_mm[1]: must be > 0"),
        ("fixtures.0.size_mm", [600, -1, 800], "fixtures[0].size_mm[1]: must be > 0"),
        (
            "fixtures.0.size_mm",
            [600, 800],
            "fixtures[0].size_mm: expected 3 numbers [x, y, z], got 2",
        ),
        (
            "fixtures.0.position_mm",
            [800, 0, math.nan],
            "fixtures[0].position_mm[2]: must be a finite number, got nan",
        ),
        (
            "fixtures.0.position_mm",
            [math.inf, 0, 0],
            "fixtures[0].position_mm[0]: must be a finite number, got inf",
        ),
        (
            "fixtures.0.position_mm",
            [100_001, 0, 0],
            "fixtures[0].position_mm[0]: must be <= 100000",
        ),
        (
            "fixtures.0.position_mm",
            [0, -100_001, 0],
            "fixtures[0].position_mm[1]: must be >= -100000",
        ),
        (
            "fixtures.0.position_mm",
            [0, "1", 0],
            "fixtures[0].position_mm[1]: expected a number, got string",
        ),
        (
            "fixtures.0.position_mm",
            [0, True, 0],
            "fixtures[0].position_mm[1]: expected a number, got boolean",
        ),
        ("fixtures.0.position_mm", 5, "fixtures[0].position_mm: expected an array, got number"),
        ("fixtures.0.rpy_deg", [0, 0, 361], "fixtures[0].rpy_deg[2]: must be <= 360"),
        (
            "fixtures.0.shape",
            "cone",
            "fixtures[0].shape: expected 'box', 'cylinder', 'mesh' or 'frame', got 'cone'",
        ),
        (
            "fixtures.0.name",
            " table",
            "fixtures[0].name: must be 1 to 100 characters, without control characters or leading/trailing spaces",
        ),
        (
            "fixtures.0.name",
            "ta\tble",
            "fixtures[0].name: must be 1 to 100 characters, without control characters or leading/trailing spaces",
        ),
        ("fixtures.0.name", "", "fixtures[0].name: must not be empty"),
        ("fixtures.0.name", "x" * 101, "fixtures[0].name: at most 100 characters allowed"),
        ("fixtures.0.colour", "red", "fixtures[0].colour: unknown field"),
        ("fixtures.0", 7, "fixtures[0]: expected an object, got number"),
        (
            "targets.0.branch",
            {"elbow": "sideways"},
            "targets[0].branch.elbow: expected 'up' or 'down', got 'sideways'",
        ),
        (
            "targets.0.branch",
            {"shoulder": "left"},
            "targets[0].branch.shoulder: expected 'front' or 'back', got 'left'",
        ),
        ("targets.0.approach_offset_mm", -5, "targets[0].approach_offset_mm: must be >= 0"),
        ("paths.0.waypoints.1.speed_mm_s", 0, "paths[0].waypoints[1].speed_mm_s: must be > 0"),
        (
            "paths.0.waypoints.1.speed_mm_s",
            10_001,
            "paths[0].waypoints[1].speed_mm_s: must be <= 10000",
        ),
        (
            "paths.0.waypoints.0.speed_percent",
            0,
            "paths[0].waypoints[0].speed_percent: must be > 0",
        ),
        (
            "paths.0.waypoints.0.speed_percent",
            100.5,
            "paths[0].waypoints[0].speed_percent: must be <= 100",
        ),
        ("paths.0.waypoints.0.blend_mm", -1, "paths[0].waypoints[0].blend_mm: must be >= 0"),
        (
            "paths.0.waypoints.0.motion",
            "circular",
            "paths[0].waypoints[0].motion: expected 'joint' or 'linear', got 'circular'",
        ),
        (
            "paths.0.waypoints.0.approach",
            "yes",
            "paths[0].waypoints[0].approach: expected true or false, got string",
        ),
        ("floor_height_mm", None, "floor_height_mm: expected a number, got null"),
        ("schema_version", 2, "schema_version: expected 1, got 2"),
        ("hovercraft", 1, "hovercraft: unknown field"),
        ("notes", 5, "notes: expected a string, got number"),
    ],
)
def test_field_rule_reports_json_path_and_reason(path: str, value: Any, expected: str) -> None:
    # our own contract: one problem, worded as listed
    assert problems(edited(path, value)) == [expected]


def test_missing_fields_are_named() -> None:
    data = minimal()
    del data["robot"]
    del data["fixtures"][0]["size_mm"]
    del data["fixtures"][0]["shape"]
    data["fixtures"].append({"name": "post", "shape": "cylinder", "position_mm": [0, 0, 0]})
    # our own contract: every missing field is listed, each with its path
    assert problems(data) == [
        "robot: required field missing",
        "fixtures[0].shape: required field missing ('box', 'cylinder', 'mesh' or 'frame')",
        "fixtures[1].radius_mm: required field missing",
        "fixtures[1].height_mm: required field missing",
    ]


def test_every_field_problem_is_listed_at_once() -> None:
    data = minimal()
    data["fixtures"][0]["size_mm"] = [0, 0, 800]
    data["targets"][0]["position_mm"] = [0, math.nan, 0]
    data["paths"][0]["waypoints"][1]["speed_mm_s"] = -3
    # our own contract: the first problem does not hide the others
    assert problems(data) == [
        "fixtures[0].size_mm[0]: must be > 0",
        "fixtures[0].size_mm[1]: must be > 0",
        "targets[0].position_mm[1]: must be a finite number, got nan",
        "paths[0].waypoints[1].speed_mm_s: must be > 0",
    ]


@pytest.mark.parametrize(
    ("waypoint", "expected"),
    [
        (
            {"motion": "joint", "speed_percent": 10},
            ["paths[0].waypoints[0]: needs exactly one of target, pose or joints_deg, got none"],
        ),
        (
            {
                "target": "pick",
                "joints_deg": [0, 0, 0, 0, 0, 0],
                "motion": "joint",
                "speed_percent": 10,
            },
            [
                "paths[0].waypoints[0]: needs exactly one of target, pose or joints_deg, got target and joints_deg"
            ],
        ),
        (
            {
                "pose": {"position_mm": [0, 0, 900]},
                "approach": True,
                "motion": "joint",
                "speed_percent": 10,
            },
            ["paths[0].waypoints[0].approach: only allowed on a target waypoint"],
        ),
        (
            {"target": "pick", "motion": "linear", "speed_percent": 10},
            [
                "paths[0].waypoints[0].speed_mm_s: required for a linear move",
                "paths[0].waypoints[0].speed_percent: not allowed for a linear move (use speed_mm_s)",
            ],
        ),
        (
            {"target": "pick", "motion": "joint", "speed_mm_s": 100},
            [
                "paths[0].waypoints[0].speed_percent: required for a joint move",
                "paths[0].waypoints[0].speed_mm_s: not allowed for a joint move (use speed_percent)",
            ],
        ),
        (
            {"joints_deg": [], "motion": "joint", "speed_percent": 10},
            ["paths[0].waypoints[0].joints_deg: expected at least 1 item, got 0"],
        ),
    ],
)
def test_waypoint_rules(waypoint: dict[str, Any], expected: list[str]) -> None:
    data = minimal()
    data["paths"][0]["waypoints"] = [waypoint]
    # our own contract: waypoint kinds and motion/speed pairing
    assert problems(data) == expected


@pytest.mark.parametrize(
    ("robot", "expected"),
    [
        ({}, "robot: needs exactly one of name, file or toml, got none"),
        (
            {"name": "pb-arm6", "file": "arm.toml"},
            "robot: needs exactly one of name, file or toml, got name and file",
        ),
        ({"file": "arm.step"}, "robot.file: must end in .toml or .urdf"),
        ({"toml": ""}, "robot.toml: must not be empty"),
    ],
)
def test_robot_source_rules(robot: dict[str, Any], expected: str) -> None:
    # our own contract: exactly one robot source
    assert problems(edited("robot", robot)) == [expected]


def test_robot_file_suffix_is_case_insensitive() -> None:
    # common practice, no source: file suffixes are matched without case
    assert validate_cell(edited("robot", {"file": "arms/ARM.URDF"})).robot.file == "arms/ARM.URDF"


def test_pedestal_needs_radius() -> None:
    data = edited("base", {"position_mm": [0, 0, 0], "pedestal_height_mm": 400})
    # our own contract: a pedestal with height is drawn and checked, so it needs a radius
    assert problems(data) == ["base.pedestal_radius_mm: required when pedestal_height_mm > 0"]


def test_list_caps() -> None:
    data = minimal()
    box = data["fixtures"][0]
    data["fixtures"] = [dict(box, name=f"box-{i}") for i in range(MAX_FIXTURES + 1)]
    data["targets"] = []
    data["paths"] = []
    # our own contract: at most 500 fixtures
    assert problems(data) == ["fixtures: at most 500 items allowed, got 501"]
    data = minimal()
    target = data["targets"][0]
    data["targets"] = [dict(target, name=f"t-{i}") for i in range(MAX_TARGETS + 1)]
    data["paths"] = []
    # our own contract: at most 500 targets (2000 before: their check took minutes)
    assert problems(data) == ["targets: at most 500 items allowed, got 501"]


def test_duplicate_names_per_kind() -> None:
    data = minimal()
    data["fixtures"].append(copy.deepcopy(data["fixtures"][0]))
    data["targets"].append(copy.deepcopy(data["targets"][0]))
    data["paths"].append(copy.deepcopy(data["paths"][0]))
    zone = {"name": "fence", "position_mm": [-1500, 0, 1000], "size_mm": [100, 3000, 2000]}
    data["keep_outs"] = [zone, zone]
    capsule = {"name": "body", "start_mm": [0, 0, 0], "end_mm": [0, 0, 100], "radius_mm": 40}
    data["tool"] = {
        "name": "gripper",
        "tcp": {"position_mm": [0, 0, 150]},
        "capsules": [capsule] * 2,
    }
    # our own contract: names are unique within their kind
    assert problems(data) == [
        "fixtures[1].name: duplicate name 'table' (also fixtures[0])",
        "keep_outs[1].name: duplicate name 'fence' (also keep_outs[0])",
        "targets[1].name: duplicate name 'pick' (also targets[0])",
        "paths[1].name: duplicate name 'main' (also paths[0])",
        "tool.capsules[1].name: duplicate name 'body' (also tool.capsules[0])",
    ]


def test_same_name_in_different_kinds_is_allowed() -> None:
    data = minimal()
    data["targets"][0]["name"] = "table"
    data["paths"][0]["name"] = "table"
    for waypoint in data["paths"][0]["waypoints"]:
        waypoint["target"] = "table"
    # our own contract: uniqueness is per kind
    assert validate_cell(data).targets[0].name == "table"


def test_unknown_references_with_suggestions() -> None:
    data = minimal()
    data["fixtures"].append(
        {"name": "riser", "shape": "frame", "position_mm": [0, 0, 0], "parent": "tabel"}
    )
    data["targets"].append({"name": "drop", "fixture": "shelf", "position_mm": [0, 0, 0]})
    data["paths"][0]["waypoints"].append({"target": "pik", "motion": "linear", "speed_mm_s": 100})
    # our own contract: references must resolve; a close name is suggested (difflib)
    assert problems(data) == [
        "fixtures[1].parent: unknown fixture 'tabel' (did you mean 'table'?)",
        "targets[1].fixture: unknown fixture 'shelf'",
        "paths[0].waypoints[2].target: unknown target 'pik' (did you mean 'pick'?)",
    ]


def test_world_is_reserved_and_targets_may_use_it() -> None:
    data = minimal()
    data["targets"][0]["fixture"] = "world"
    # our own contract: "world" is the world frame for targets
    assert validate_cell(data).targets[0].fixture == "world"
    data["fixtures"][0]["name"] = "world"
    # our own contract: no fixture may take the world frame's name
    assert problems(data) == ["fixtures[0].name: 'world' is reserved for the world frame"]


def test_parent_cycles_are_refused_once_each() -> None:
    def frame(name: str, parent: str) -> dict[str, Any]:
        return {"name": name, "shape": "frame", "position_mm": [0, 0, 0], "parent": parent}

    data = minimal()
    data["fixtures"] += [
        frame("a", "b"),
        frame("b", "c"),
        frame("c", "a"),
        frame("d", "d"),
        frame("e", "a"),
    ]
    # our own contract: each cycle reported once, at its first fixture, with the chain
    assert problems(data) == [
        "fixtures[1].parent: parent chain is a cycle: a -> b -> c -> a",
        "fixtures[4].parent: parent chain is a cycle: d -> d",
    ]


def test_approach_needs_an_offset() -> None:
    data = minimal()
    data["targets"][0]["approach_offset_mm"] = 0
    # our own contract: an approach waypoint backs off by the target's offset
    assert problems(data) == [
        "paths[0].waypoints[0].approach: target 'pick' has no approach_offset_mm to back off by"
    ]


def test_reference_checks_wait_for_valid_fields() -> None:
    data = minimal()
    data["targets"][0]["fixture"] = "tabel"
    data["fixtures"][0]["size_mm"] = [0, 600, 800]
    # our own contract (documented in the model): reference checks run once fields are valid
    assert problems(data) == ["fixtures[0].size_mm[0]: must be > 0"]


def test_model_validate_raises_pydantic_error_with_all_reference_problems() -> None:
    data = minimal()
    data["targets"][0]["fixture"] = "shelf"
    data["paths"][0]["waypoints"][1]["target"] = "drop"
    from pydantic import ValidationError

    with pytest.raises(ValidationError) as caught:
        Cell.model_validate(data)
    # our own contract: the API sees one error whose summary lists every reference problem
    (error,) = caught.value.errors()
    assert error["type"] == "cell_problems"
    assert error["msg"] == (
        "targets[0].fixture: unknown fixture 'shelf'; "
        "paths[0].waypoints[1].target: unknown target 'drop'"
    )


def test_top_level_not_an_object() -> None:
    # our own contract
    assert problems([1, 2]) == ["cell: expected an object, got array"]


@pytest.mark.parametrize(
    ("loc", "expected"),
    [
        ((), "cell"),
        (("robot",), "robot"),
        (("fixtures", 2, "size_mm", 1), "fixtures[2].size_mm[1]"),
        (("fixtures", 2, "box", "size_mm", 1), "fixtures[2].size_mm[1]"),
        (
            ("paths", 0, "waypoints", 3, "pose", "rpy_deg", 0),
            "paths[0].waypoints[3].pose.rpy_deg[0]",
        ),
    ],
)
def test_json_path(loc: tuple[int | str, ...], expected: str) -> None:
    # our own contract: dotted names, [index] for arrays, shape tags dropped
    assert json_path(loc) == expected


def test_cell_file_error_message_names_the_source() -> None:
    error = CellFileError(["a: one", "b: two"], source="cell.json")
    # our own contract: one problem per line, prefixed by the file
    assert str(error) == "cell.json: a: one\ncell.json: b: two"
    assert error.problems == ["a: one", "b: two"]


def test_thresholds_default_and_set_in_the_cell_file() -> None:
    # the documented defaults of QualityThresholds (common practice, no source)
    defaults = validate_cell(minimal()).thresholds
    assert (defaults.clearance_mm, defaults.limit_margin_deg, defaults.wrist_deg) == (
        25.0,
        5.0,
        10.0,
    )
    data = minimal()
    data["thresholds"] = {"clearance_mm": 40, "wrist_deg": 4}
    cell = validate_cell(data)
    # our own contract: set fields taken from the file, the others keep their defaults
    assert (cell.thresholds.clearance_mm, cell.thresholds.wrist_deg) == (40.0, 4.0)
    assert cell.thresholds.elbow_deg == defaults.elbow_deg
    # our own contract: a bad threshold is named by its JSON path
    assert problems(edited("thresholds", {"clearance_mm": -1})) == [
        "thresholds.clearance_mm: must be > 0"
    ]
    assert problems(edited("thresholds", {"clearance": 30})) == [
        "thresholds.clearance: unknown field"
    ]

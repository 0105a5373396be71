"""Tests of the posebridge robot TOML loader: bundled files and error reports."""

from __future__ import annotations

import math
import re
import tomllib
from pathlib import Path

import numpy as np
import pytest
from scipy.spatial.transform import Rotation

from posebridge.resources import data_folder
from posebridge.robot.errors import RobotDescriptionError
from posebridge.robot.library import bundled_robots
from posebridge.robot.toml_format import (
    MAX_DESCRIPTION_BYTES,
    MAX_ROBOT_JOINTS,
    load_robot_toml,
    parse_robot_toml,
)

FIXTURES = Path(__file__).parent.parent / "fixtures" / "robots"
BUNDLED_TOML = sorted(data_folder("robots").glob("*.toml"))
ORIGIN_AXIS_TOML = [
    p for p in BUNDLED_TOML if tomllib.loads(p.read_text())["robot"]["convention"] == "origin_axis"
]


def line_of(path: Path, needle: str, occurrence: int = 1) -> int:
    """1-based line number of the ``occurrence``-th line containing ``needle``."""
    hits = [n for n, line in enumerate(path.read_text().splitlines(), 1) if needle in line]
    return hits[occurrence - 1]


def location(path: Path, needle: str, occurrence: int = 1) -> str:
    """Regex for ``<file>:<line>:`` of the line holding ``needle``."""
    return re.escape(f"{path}:{line_of(path, needle, occurrence)}:")


# ----------------------------------------------------------------- bundled files


@pytest.mark.parametrize("path", BUNDLED_TOML, ids=[p.stem for p in BUNDLED_TOML])
def test_load_bundled_toml_matches_raw_values(path: Path) -> None:
    robot = load_robot_toml(path)
    raw = tomllib.loads(path.read_text())
    assert robot.name == raw["robot"]["name"]
    assert robot.kind == raw["robot"]["kind"]
    assert robot.joint_names == tuple(j["name"] for j in raw["joint"])
    assert len(robot.capsules) == len(raw.get("capsule", []))
    assert robot.notes == ()
    for joint, raw_joint in zip(robot.joints, raw["joint"], strict=True):
        limits = raw_joint["limits"]
        if raw_joint["type"] == "revolute":
            # degrees to radians: math.radians (Python standard library), not posebridge.units
            expected = [math.radians(limits[k]) for k in ("min_deg", "max_deg", "velocity_deg_s")]
            expected.append(math.radians(limits["acceleration_deg_s2"]))
        else:
            # millimetres to metres: / 1000 (SI definition)
            expected = [
                limits[k] / 1000.0
                for k in ("min_mm", "max_mm", "velocity_mm_s", "acceleration_mm_s2")
            ]
        actual = [joint.lower, joint.upper, joint.velocity_max, joint.acceleration_max]
        np.testing.assert_allclose(actual, expected, rtol=1e-15)
        assert np.linalg.norm(joint.axis) == pytest.approx(
            1.0, abs=1e-15
        )  # unit axis by definition


@pytest.mark.parametrize("path", ORIGIN_AXIS_TOML, ids=[p.stem for p in ORIGIN_AXIS_TOML])
def test_bundled_origin_axis_joints_match_raw_values(path: Path) -> None:
    """DH robots are checked against the DH product in test_dh.py."""
    raw = tomllib.loads(path.read_text())
    robot = load_robot_toml(path)
    for joint, raw_joint in zip(robot.joints, raw["joint"], strict=True):
        origin = raw_joint["origin"]
        # rpy is fixed-axis X-Y-Z: scipy Rotation.from_euler("xyz", ...) (URDF specification)
        R = Rotation.from_euler("xyz", origin["rpy_deg"], degrees=True).as_matrix()
        np.testing.assert_allclose(joint.origin[:3, :3], R, atol=1e-15)
        np.testing.assert_allclose(joint.origin[:3, 3], np.array(origin["xyz_mm"]) / 1000.0)
        np.testing.assert_allclose(joint.axis, raw_joint["axis"])


def test_bundled_library_lists_every_toml_file() -> None:
    names = {robot.name for robot in bundled_robots()}
    # the seven invented robots shipped in robots/ (common practice, no source)
    assert names == {
        "pb-arm6",
        "pb-arm6-offset",
        "pb-arm7",
        "pb-gantry3",
        "pb-planar2r",
        "pb-planar3r",
        "pb-scara4",
    }


def test_fixture_base_file_is_valid() -> None:
    robot = load_robot_toml(FIXTURES / "valid-2r.toml")
    assert robot.joint_names == ("j1", "j2")
    np.testing.assert_allclose(robot.T_link_flange[:3, 3], [0.3, 0.0, 0.0])  # 300 mm / 1000
    assert robot.notes == ()  # our own contract: a complete file has no notes


def test_missing_flange_table_is_a_note(tmp_path: Path) -> None:
    text = (FIXTURES / "valid-2r.toml").read_text(encoding="utf-8")
    start = text.index("[flange]")
    end = text.index("[[capsule]]")
    path = tmp_path / "no-flange.toml"
    path.write_text(text[:start] + text[end:], encoding="utf-8")
    robot = load_robot_toml(path)
    # our own contract: the flange falls back to the last joint's frame, and a note says so
    np.testing.assert_array_equal(robot.T_link_flange, np.eye(4))
    (note,) = robot.notes
    assert "no [flange] table" in note


# ----------------------------------------------------------------- error reports


def test_missing_limit_names_file_line_and_field() -> None:
    path = FIXTURES / "missing-limit.toml"
    with pytest.raises(
        RobotDescriptionError,
        match=location(path, "limits = { min_deg = -90")
        + r" joint\[0\]\.limits\.velocity_deg_s: missing limit 'velocity_deg_s'",
    ):
        load_robot_toml(path)


def test_non_unit_axis_names_file_line_and_field() -> None:
    path = FIXTURES / "non-unit-axis.toml"
    with pytest.raises(
        RobotDescriptionError,
        match=location(path, "axis = [0, 0, 2]")
        + r" joint\[1\]\.axis: must be a unit vector, has length 2",
    ):
        load_robot_toml(path)


def test_min_above_max_names_file_line_and_field() -> None:
    path = FIXTURES / "min-above-max.toml"
    with pytest.raises(
        RobotDescriptionError,
        match=location(path, "min_deg = 100")
        + r" joint\[0\]\.limits\.min_deg: min \(100\) must be less than max \(90\)",
    ):
        load_robot_toml(path)


def test_unknown_key_suggests_the_close_key() -> None:
    path = FIXTURES / "unknown-key.toml"
    with pytest.raises(
        RobotDescriptionError,
        match=location(path, "descripton")
        + r" robot\.descripton: unknown key 'descripton' \(did you mean 'description'\?\)",
    ):
        load_robot_toml(path)


def test_unknown_top_level_key_has_a_line() -> None:
    path = FIXTURES / "top-level-typo.toml"
    with pytest.raises(
        RobotDescriptionError,
        match=location(path, "schema_versoin")
        + r" schema_versoin: unknown key 'schema_versoin' \(did you mean 'schema_version'\?\)",
    ):
        load_robot_toml(path)


def test_wrong_unit_suffix_names_the_expected_key() -> None:
    path = FIXTURES / "wrong-unit.toml"
    with pytest.raises(RobotDescriptionError) as caught:
        load_robot_toml(path)
    line = line_of(path, "min_rad")
    assert (
        f"{path}:{line}: joint[0].limits.min_rad: unknown key 'min_rad': wrong unit suffix, "
        "expected 'min_deg'" in str(caught.value)
    )
    # the missing degree key is reported as well, on the same line
    assert f"{path}:{line}: joint[0].limits.min_deg: missing limit 'min_deg'" in str(caught.value)


@pytest.mark.parametrize(
    ("key", "expected"),
    [
        ("velocity_rad_s", "velocity_deg_s"),
        ("acceleration_rad_s2", "acceleration_deg_s2"),
        ("max", "max_deg"),
    ],
)
def test_wrong_unit_suffix_variants(key: str, expected: str) -> None:
    text = (FIXTURES / "valid-2r.toml").read_text()
    old_key = expected
    text = text.replace(f"{old_key} =", f"{key} =", 1)
    with pytest.raises(
        RobotDescriptionError,
        match=rf"edited\.toml:\d+: joint\[0\]\.limits\.{key}: unknown key '{key}': wrong unit suffix, expected '{expected}'",
    ):
        parse_robot_toml(text, "edited.toml")


def test_bad_convention_lists_the_allowed_ones() -> None:
    path = FIXTURES / "bad-convention.toml"
    with pytest.raises(
        RobotDescriptionError,
        match=location(path, "convention =")
        + r" robot\.convention: expected one of dh_standard, dh_modified, origin_axis, got 'denavit'",
    ):
        load_robot_toml(path)


def test_bad_toml_syntax_names_file_and_line() -> None:
    path = FIXTURES / "bad-syntax.toml"
    with pytest.raises(
        RobotDescriptionError, match=location(path, "[flange") + r" toml: not valid TOML: "
    ):
        load_robot_toml(path)


def test_unknown_capsule_link_lists_the_links() -> None:
    path = FIXTURES / "unknown-capsule-link.toml"
    with pytest.raises(
        RobotDescriptionError,
        match=location(path, 'link = "j3"')
        + r" capsule\[1\]\.link: unknown link 'j3'; expected 'base' or a joint name: base, j1, j2",
    ):
        load_robot_toml(path)


def test_duplicate_joint_names_point_at_the_second() -> None:
    path = FIXTURES / "duplicate-joint.toml"
    with pytest.raises(
        RobotDescriptionError,
        match=location(path, 'name = "j1"', occurrence=2)
        + r" joint\[1\]\.name: duplicate joint name 'j1' \(also joint\[0\]\)",
    ):
        load_robot_toml(path)


def test_negative_radius_names_file_line_and_field() -> None:
    path = FIXTURES / "negative-radius.toml"
    with pytest.raises(
        RobotDescriptionError,
        match=location(path, "radius_mm = -5") + r" capsule\[1\]\.radius_mm: must be > 0, got -5",
    ):
        load_robot_toml(path)


def test_several_problems_are_reported_at_once() -> None:
    path = FIXTURES / "several-problems.toml"
    with pytest.raises(RobotDescriptionError) as caught:
        load_robot_toml(path)
    problems = caught.value.problems
    capsule_link = 'link = "j3"'
    expected = [
        f"{path}:{line_of(path, 'limits = { min_deg = -90')}: joint[0].limits.velocity_deg_s: missing limit",
        f"{path}:{line_of(path, 'axis = [0, 0, 2]')}: joint[1].axis: must be a unit vector",
        f"{path}:{line_of(path, capsule_link)}: capsule[1].link: unknown link 'j3'",
        f"{path}:{line_of(path, 'radius_mm = -5')}: capsule[0].radius_mm: must be > 0",
    ]
    for start in expected:
        assert any(problem.startswith(start) for problem in problems), (start, problems)
    assert len(problems) == 4
    assert str(caught.value) == "\n".join(problems)


def test_dh_keys_refused_with_origin_axis_convention() -> None:
    text = (FIXTURES / "valid-2r.toml").read_text()
    text = text.replace(
        "axis = [0, 0, 1]",
        "axis = [0, 0, 1]\ndh = { a_mm = 0, alpha_deg = 0, d_mm = 0, theta_deg = 0 }",
        1,
    )
    with pytest.raises(
        RobotDescriptionError,
        match=r"x\.toml:\d+: joint\[0\]\.dh: not used with convention 'origin_axis'",
    ):
        parse_robot_toml(text, "x.toml")


def test_missing_dh_value_is_named() -> None:
    text = """
[robot]
name = "dh-test"
kind = "test"
convention = "dh_standard"

[[joint]]
name = "j1"
type = "revolute"
dh = { a_mm = 100, alpha_deg = 0, theta_deg = 0 }
limits = { min_deg = -90, max_deg = 90, velocity_deg_s = 90, acceleration_deg_s2 = 360 }
"""
    with pytest.raises(
        RobotDescriptionError, match=r"dh\.toml:10: joint\[0\]\.dh\.d_mm: missing DH value 'd_mm'"
    ):
        parse_robot_toml(text, "dh.toml")


def test_continuous_joint_takes_no_position_limits() -> None:
    text = (FIXTURES / "valid-2r.toml").read_text()
    text = text.replace('type = "revolute"', 'type = "revolute"\ncontinuous = true', 1)
    with pytest.raises(
        RobotDescriptionError,
        match=r"c\.toml:\d+: joint\[0\]\.limits\.min_deg: a continuous joint has no position limits",
    ):
        parse_robot_toml(text, "c.toml")
    text = text.replace("min_deg = -90, max_deg = 90, ", "", 1)
    robot = parse_robot_toml(text, "c.toml")
    # one revolution as the sampling range of a continuous joint (common practice, no source)
    assert robot.joints[0].continuous
    assert (robot.joints[0].lower, robot.joints[0].upper) == (-math.pi, math.pi)


def test_file_size_limit(tmp_path: Path) -> None:
    path = tmp_path / "huge.toml"
    path.write_text("# " + "x" * MAX_DESCRIPTION_BYTES + "\n")
    with pytest.raises(RobotDescriptionError, match=r"huge\.toml: file is \d+ bytes; .*limited to"):
        load_robot_toml(path)


def test_missing_file_and_non_utf8_file(tmp_path: Path) -> None:
    with pytest.raises(RobotDescriptionError, match=r"absent\.toml: cannot read"):
        load_robot_toml(tmp_path / "absent.toml")
    path = tmp_path / "latin1.toml"
    path.write_bytes(b'[robot]\nname = "caf\xe9"\n')
    with pytest.raises(RobotDescriptionError, match=r"latin1\.toml: not UTF-8 text"):
        load_robot_toml(path)


def test_missing_robot_table() -> None:
    with pytest.raises(RobotDescriptionError, match=r"m\.toml: robot: missing \[robot\] table"):
        parse_robot_toml("schema_version = 1\n", "m.toml")


def test_wrong_schema_version_has_a_line() -> None:
    text = (
        (FIXTURES / "valid-2r.toml").read_text().replace("schema_version = 1", "schema_version = 7")
    )
    with pytest.raises(
        RobotDescriptionError, match=r"v\.toml:2: schema_version: expected 1, got 7"
    ):
        parse_robot_toml(text, "v.toml")


def test_joint_count_cap_is_one_line_before_any_joint_is_read() -> None:
    joints = "".join(
        f'[[joint]]\nname = "j{k}"\n' for k in range(MAX_ROBOT_JOINTS + 1)
    )  # no type or limits: a file with the cap's count would list a problem per joint
    text = (
        'schema_version = 1\n[robot]\nname = "long"\nkind = "serial"\n'
        f'convention = "origin_axis"\n{joints}'
    )
    with pytest.raises(RobotDescriptionError) as raised:
        parse_robot_toml(text, "long.toml")
    # our own contract: one problem, naming the count and the cap
    assert raised.value.problems == [
        f"long.toml: joint: {MAX_ROBOT_JOINTS + 1} [[joint]] tables; a robot file has at most "
        f"{MAX_ROBOT_JOINTS} joints"
    ]
    with pytest.raises(RobotDescriptionError) as under_cap:
        parse_robot_toml(text.replace(f'[[joint]]\nname = "j{MAX_ROBOT_JOINTS}"\n', ""), "ok.toml")
    assert len(under_cap.value.problems) > 1  # at the cap the joints are read (and found wanting)

"""URDF import and export (``robot/urdf_import.py``, ``robot/urdf_export.py``), round trips.

References: pinocchio (``pin.buildModelFromXML``, ``framesForwardKinematics``) run on the
same URDF text; the TOML descriptions of the same robots; the ROS URDF specification for
the rules (rpy = fixed X-Y-Z, axis default (1, 0, 0), limit defaults).
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pinocchio as pin
import pytest

from posebridge.kinematics.fk import fk_flange, fk_frames, fk_tool
from posebridge.resources import data_folder
from posebridge.robot.errors import RobotDescriptionError
from posebridge.robot.library import bundled_robots, load_robot
from posebridge.robot.model import Robot
from posebridge.robot.urdf_export import urdf_from_robot
from posebridge.robot.urdf_import import (
    DEFAULT_ACCELERATION_PER_S,
    MAX_CHAIN_JOINTS,
    MAX_URDF_BYTES,
    MAX_URDF_ELEMENTS,
    load_robot_urdf,
    parse_robot_urdf,
)

SEED = 7321
ROBOTS = data_folder("robots")
BUNDLED_NAMES = [robot.name for robot in bundled_robots()]


# ------------------------------------------------------------------ helpers


def pin_frame_poses(urdf: str, frame: str, robot: Robot, q: np.ndarray) -> np.ndarray:
    """Poses of a URDF frame by pinocchio for joint values ``q`` (N, n) in ``robot``'s order.

    Continuous joints are (cos, sin) pairs in pinocchio's configuration vector.
    """
    model = pin.buildModelFromXML(urdf)
    data = model.createData()
    frame_id = model.getFrameId(frame)
    out = np.empty((q.shape[0], 4, 4))
    for k in range(q.shape[0]):
        config = pin.neutral(model)
        for name, value in zip(robot.joint_names, q[k], strict=True):
            joint = model.joints[model.getJointId(name)]
            if joint.nq == 2:
                config[joint.idx_q : joint.idx_q + 2] = [math.cos(value), math.sin(value)]
            else:
                config[joint.idx_q] = value
        pin.framesForwardKinematics(model, data, config)
        out[k] = data.oMf[frame_id].homogeneous
    return out


def random_q(robot: Robot, rng: np.random.Generator, count: int) -> np.ndarray:
    return rng.uniform(robot.lower, robot.upper, (count, robot.dof))


def chain_urdf(joints: str, links: list[str], extra_links: str = "") -> str:
    declared = "".join(f'<link name="{name}"/>' for name in links)
    return f'<?xml version="1.0"?>\n<robot name="test-chain">{declared}{extra_links}\n{joints}\n</robot>\n'


def joint(
    name: str,
    kind: str,
    parent: str,
    child: str,
    xyz: str = "0 0 0",
    rpy: str = "0 0 0",
    axis: str | None = "0 0 1",
    limit: str | None = 'lower="-2" upper="2" velocity="1.5" effort="10"',
    extra: str = "",
) -> str:
    parts = [
        f'<joint name="{name}" type="{kind}">',
        f'<parent link="{parent}"/><child link="{child}"/>',
        f'<origin xyz="{xyz}" rpy="{rpy}"/>',
    ]
    if axis is not None:
        parts.append(f'<axis xyz="{axis}"/>')
    if limit is not None:
        parts.append(f"<limit {limit}/>")
    parts += [extra, "</joint>"]
    return "\n".join(parts)


MIXED_CHAIN = chain_urdf(
    "\n".join(
        [
            joint(
                "mount",
                "fixed",
                "floor",
                "plate",
                "0.1 -0.2 0.3",
                "0.3 -0.2 0.1",
                axis=None,
                limit=None,
            ),
            joint("a", "revolute", "plate", "l1", "0 0 0.4", "0.1 0.2 0.3", "0 1 0"),
            joint("spacer", "fixed", "l1", "l1b", "0.05 0 0", "0 0.5 0", axis=None, limit=None),
            joint("b", "prismatic", "l1b", "l2", "0.2 0.1 0", "-0.4 0 1.2", "0 0 2"),
            joint(
                "c",
                "continuous",
                "l2",
                "l3",
                "0 0.3 0",
                "1.0 0 0",
                "1 1 0",
                'velocity="2" effort="1"',
            ),
            joint("d", "revolute", "l3", "l4", "0.1 0 0.1", "0 0 0", "-1 0 0"),
            joint(
                "tip_mount", "fixed", "l4", "tip", "0 0 0.08", "3.0 -1.0 0.5", axis=None, limit=None
            ),
        ]
    ),
    ["floor", "plate", "l1", "l1b", "l2", "l3", "l4", "tip"],
)


# ------------------------------------------------------- bundled six-axis URDFs


@pytest.mark.parametrize("name", ["pb-arm6", "pb-arm6-offset"])
def test_bundled_urdf_is_the_export_of_its_toml(name: str) -> None:
    # our own contract: the bundled URDF files are written by urdf_from_robot from the
    # TOML descriptions (DEVELOPERS.md says how to regenerate them), so they never drift
    text = (ROBOTS / f"{name}.urdf").read_text(encoding="utf-8")
    assert text == urdf_from_robot(load_robot(name))


@pytest.mark.parametrize("name", ["pb-arm6", "pb-arm6-offset"])
def test_bundled_urdf_fk_matches_toml(name: str) -> None:
    toml_robot = load_robot(name)
    to_flange = load_robot_urdf(ROBOTS / f"{name}.urdf", to_link="flange")
    to_tool = load_robot_urdf(ROBOTS / f"{name}.urdf")
    q = random_q(toml_robot, np.random.default_rng(SEED), 1000)
    # same robot described twice (TOML and URDF): same flange poses, and the file's single
    # leaf link "tool" (the default to_link) is the TOML's default tool
    np.testing.assert_allclose(fk_flange(to_flange, q), fk_flange(toml_robot, q), atol=1e-12)
    np.testing.assert_allclose(fk_flange(to_tool, q), fk_tool(toml_robot, q), atol=1e-12)


@pytest.mark.parametrize("name", ["pb-arm6", "pb-arm6-offset"])
def test_bundled_urdf_limits_names_and_capsules_match_toml(name: str) -> None:
    toml_robot = load_robot(name)
    urdf_robot = load_robot_urdf(ROBOTS / f"{name}.urdf")
    assert urdf_robot.name == name
    assert urdf_robot.kind == "urdf"
    assert urdf_robot.joint_names == toml_robot.joint_names
    for lim in ("lower", "upper", "velocity_max"):
        np.testing.assert_allclose(getattr(urdf_robot, lim), getattr(toml_robot, lim), rtol=1e-15)
    np.testing.assert_allclose(
        urdf_robot.acceleration_max, DEFAULT_ACCELERATION_PER_S * urdf_robot.velocity_max
    )
    np.testing.assert_array_equal(urdf_robot.T_flange_tool, np.eye(4))
    assert any("no acceleration limits" in note for note in urdf_robot.notes)
    # capsules: same world segments and radii at random configurations (the URDF file
    # carries them as collision cylinders, see the import's approximation note)
    assert [c.name for c in urdf_robot.capsules] == [c.name for c in toml_robot.capsules]
    q = random_q(toml_robot, np.random.default_rng(SEED + 1), 200)
    frames_toml = fk_frames(toml_robot, q)
    frames_urdf = fk_frames(urdf_robot, q)
    for mine, reference in zip(urdf_robot.capsules, toml_robot.capsules, strict=True):
        assert mine.radius == pytest.approx(reference.radius, abs=1e-15)
        for a, b in ((mine.start, reference.start), (mine.end, reference.end)):
            world_mine = frames_urdf[:, mine.link, :3, :3] @ a + frames_urdf[:, mine.link, :3, 3]
            world_ref = (
                frames_toml[:, reference.link, :3, :3] @ b + frames_toml[:, reference.link, :3, 3]
            )
            np.testing.assert_allclose(world_mine, world_ref, atol=1e-12)


def test_bundled_urdf_by_file_name_through_library() -> None:
    robot = load_robot("pb-arm6.urdf")
    assert robot.source == str(ROBOTS / "pb-arm6.urdf")
    assert robot.dof == 6


# ------------------------------------------------------------- chain and pin


def test_mixed_chain_matches_pinocchio() -> None:
    robot = parse_robot_urdf(MIXED_CHAIN, "mixed.urdf")
    assert robot.joint_names == ("a", "b", "c", "d")
    assert [j.kind for j in robot.joints] == ["revolute", "prismatic", "revolute", "revolute"]
    assert robot.continuous.tolist() == [False, False, True, False]
    assert (robot.joints[2].lower, robot.joints[2].upper) == (-math.pi, math.pi)
    # pinocchio normalises a non-unit axis too; our notes say we did
    assert any("'b': axis of length 2 normalised" in note for note in robot.notes)
    assert any("'c': axis of length 1.41421 normalised" in note for note in robot.notes)
    q = random_q(robot, np.random.default_rng(SEED), 300)
    np.testing.assert_allclose(
        fk_flange(robot, q), pin_frame_poses(MIXED_CHAIN, "tip", robot, q), atol=1e-12
    )
    frames = fk_frames(robot, q)
    for index, link in enumerate(["l1", "l2", "l3", "l4"], start=1):
        np.testing.assert_allclose(
            frames[:, index], pin_frame_poses(MIXED_CHAIN, link, robot, q), atol=1e-12
        )


def test_chosen_from_and_to_links() -> None:
    robot = parse_robot_urdf(MIXED_CHAIN, "mixed.urdf", from_link="l1", to_link="l3")
    assert robot.joint_names == ("b", "c")
    q = random_q(robot, np.random.default_rng(SEED), 50)
    full = parse_robot_urdf(MIXED_CHAIN, "mixed.urdf")
    q_full = np.zeros((50, 4))
    q_full[:, 1:3] = q
    frames = fk_frames(full, q_full)
    # pose of l3 in l1 = inverse(pose of l1) @ pose of l3, both from pinocchio on the full file
    T_l1 = pin_frame_poses(MIXED_CHAIN, "l1", full, q_full)
    T_l3 = pin_frame_poses(MIXED_CHAIN, "l3", full, q_full)
    np.testing.assert_allclose(fk_flange(robot, q), np.linalg.inv(T_l1) @ T_l3, atol=1e-12)
    np.testing.assert_allclose(frames[:, 3], T_l3, atol=1e-12)


def test_several_leaves_need_a_to_link() -> None:
    text = chain_urdf(
        joint("a", "revolute", "root", "arm")
        + joint("g1", "fixed", "arm", "finger_left", axis=None, limit=None)
        + joint("g2", "fixed", "arm", "finger_right", axis=None, limit=None),
        ["root", "arm", "finger_left", "finger_right"],
    )
    with pytest.raises(
        RobotDescriptionError,
        match=r"g\.urdf: to_link: from_link 'root' has several leaf links below it; "
        r"choose the to_link \(--to-link on the command line, to_link in a cell's robot entry "
        r"or a robot overlay\) among: finger_left, finger_right",
    ):
        parse_robot_urdf(text, "g.urdf")
    robot = parse_robot_urdf(text, "g.urdf", to_link="finger_right")
    assert robot.joint_names == ("a",)
    assert (robot.from_link, robot.to_link) == ("root", "finger_right")


def test_unknown_links_are_named_with_a_suggestion() -> None:
    with pytest.raises(
        RobotDescriptionError,
        match=r"m\.urdf: to_link: unknown link 'tipp' \(did you mean 'tip'\?\); links: floor, plate",
    ):
        parse_robot_urdf(MIXED_CHAIN, "m.urdf", to_link="tipp")
    with pytest.raises(RobotDescriptionError, match=r"m\.urdf: from_link: unknown link 'nowhere'"):
        parse_robot_urdf(MIXED_CHAIN, "m.urdf", from_link="nowhere")


def test_to_link_not_below_from_link() -> None:
    with pytest.raises(
        RobotDescriptionError, match=r"m\.urdf: to_link: to_link 'l1' is not below from_link 'l3'"
    ):
        parse_robot_urdf(MIXED_CHAIN, "m.urdf", from_link="l3", to_link="l1")


def test_chain_without_moving_joints() -> None:
    with pytest.raises(
        RobotDescriptionError,
        match=r"m\.urdf: robot: no moving joint between from_link 'l4' and to_link 'tip'",
    ):
        parse_robot_urdf(MIXED_CHAIN, "m.urdf", from_link="l4")


# ------------------------------------------------------------ refused joints


def test_closed_loop_is_refused_naming_both_joints() -> None:
    text = chain_urdf(
        joint("a", "revolute", "root", "l1")
        + joint("b", "revolute", "root", "l2")
        + joint("closing", "revolute", "l2", "l1"),
        ["root", "l1", "l2"],
    )
    with pytest.raises(
        RobotDescriptionError,
        match=r"loop\.urdf:\d+: joint\[closing\]: link 'l1' already has parent joint 'a' \(line \d+\): "
        r"closed kinematic loops are not supported",
    ):
        parse_robot_urdf(text, "loop.urdf")


@pytest.mark.parametrize("kind", ["floating", "planar"])
def test_floating_and_planar_joints_on_the_chain_are_refused(kind: str) -> None:
    text = chain_urdf(
        joint("drift", kind, "root", "l1", limit=None) + joint("a", "revolute", "l1", "l2"),
        ["root", "l1", "l2"],
    )
    with pytest.raises(
        RobotDescriptionError,
        match=rf"f\.urdf:\d+: joint\[drift\]\.type: {kind} joints are not supported in a serial arm chain",
    ):
        parse_robot_urdf(text, "f.urdf")
    # off the chain they are ignored
    robot = parse_robot_urdf(text, "f.urdf", from_link="l1")
    assert robot.joint_names == ("a",)


def test_mimic_joint_on_the_chain_is_held_at_zero() -> None:
    text = chain_urdf(
        joint("a", "revolute", "root", "l1")
        + joint(
            "b", "revolute", "l1", "l2", xyz="0 0 0.3", extra='<mimic joint="a" multiplier="1"/>'
        ),
        ["root", "l1", "l2"],
    )
    robot = parse_robot_urdf(text, "mimic.urdf")
    assert robot.joint_names == ("a",)
    assert robot.held_joints == ("b",)
    assert any("held at zero" in note and "b (mimic)" in note for note in robot.notes)
    # held at zero, joint b's frame is its origin: 0.3 m above l1 (URDF specification)
    np.testing.assert_allclose(robot.T_link_flange[:3, 3], [0, 0, 0.3])


def test_cycle_and_several_roots_are_refused() -> None:
    cycle = chain_urdf(
        joint("a", "revolute", "root", "l1")
        + joint("x", "revolute", "l2", "l3")
        + joint("y", "revolute", "l3", "l2"),
        ["root", "l1", "l2", "l3"],
    )
    with pytest.raises(
        RobotDescriptionError,
        match=r"c\.urdf: robot: links not below the root link .root. \(their joints form a cycle\): l2, l3",
    ):
        parse_robot_urdf(cycle, "c.urdf")
    two_trees = chain_urdf(
        joint("a", "revolute", "root", "l1") + joint("b", "revolute", "other", "l2"),
        ["root", "l1", "other", "l2"],
    )
    with pytest.raises(
        RobotDescriptionError, match=r"t\.urdf: robot: several root links \(root, other\)"
    ):
        parse_robot_urdf(two_trees, "t.urdf")


# ------------------------------------------------------------- joint fields


@pytest.mark.parametrize(
    ("joint_text", "message"),
    [
        (
            joint("a", "revolute", "root", "l1", limit=None),
            r"joint\[a\]\.limit: missing <limit \.\.\./>; expected lower, upper and velocity",
        ),
        (
            joint(
                "a", "revolute", "root", "l1", limit='lower="1" upper="-1" velocity="1" effort="1"'
            ),
            r"joint\[a\]\.limit\.lower: lower \(1\) must be less than upper \(-1\)",
        ),
        (
            joint("a", "prismatic", "root", "l1", limit='velocity="1" effort="1"'),
            r"joint\[a\]\.limit\.lower: lower \(0\) must be less than upper \(0\) "
            r"\(lower and upper missing: URDF default 0\)",
        ),
        (
            joint("a", "revolute", "root", "l1", limit='lower="-1" upper="1" effort="1"'),
            r"joint\[a\]\.limit\.velocity: missing; expected 1 number",
        ),
        (
            joint("a", "revolute", "root", "l1", limit='lower="-1" upper="1" velocity="0"'),
            r"joint\[a\]\.limit\.velocity: must be > 0, got 0",
        ),
        (
            joint("a", "continuous", "root", "l1", limit=None),
            r'joint\[a\]\.limit: missing <limit \.\.\./>; expected velocity="\.\.\."',
        ),
        (joint("a", "revolute", "root", "l1", axis="0 0 0"), r"joint\[a\]\.axis\.xyz: zero vector"),
        (
            joint("a", "revolute", "root", "l1", xyz="1 2"),
            r"joint\[a\]\.origin\.xyz: expected 3 finite number\(s\), got '1 2'",
        ),
        (
            joint("a", "revolute", "root", "l1", rpy="0 nan 0"),
            r"joint\[a\]\.origin\.rpy: expected 3 finite number\(s\), got '0 nan 0'",
        ),
        (
            joint("a", "revolute", "root", "l1", axis="x y z"),
            r"joint\[a\]\.axis\.xyz: expected 3 number\(s\), got 'x y z'",
        ),
        (
            joint("a", "hinge", "root", "l1"),
            r"joint\[a\]\.type: expected one of revolute, continuous",
        ),
        (
            '<joint name="a" type="revolute"><parent link="root"/><limit lower="-1" upper="1" velocity="1"/></joint>',
            r'joint\[a\]\.child: missing <child link="\.\.\."/>',
        ),
    ],
)
def test_joint_field_errors_name_file_line_and_field(joint_text: str, message: str) -> None:
    text = chain_urdf(joint_text, ["root", "l1"])
    with pytest.raises(RobotDescriptionError, match=r"j\.urdf:[3-9]: " + message):
        parse_robot_urdf(text, "j.urdf")


def test_axis_defaults_to_x() -> None:
    # URDF specification: <axis> is optional and defaults to (1, 0, 0)
    robot = parse_robot_urdf(
        chain_urdf(joint("a", "revolute", "root", "l1", axis=None), ["root", "l1"])
    )
    np.testing.assert_array_equal(robot.joints[0].axis, [1.0, 0.0, 0.0])


def test_duplicate_names_are_refused() -> None:
    text = chain_urdf(
        joint("a", "revolute", "root", "l1") + joint("a", "revolute", "l1", "l2"),
        ["root", "l1", "l2", "l1"],
    )
    with pytest.raises(RobotDescriptionError) as caught:
        parse_robot_urdf(text, "d.urdf")
    message = str(caught.value)
    assert "d.urdf:2: link[l1]: duplicate link name (first on line 2)" in message
    assert "joint[a]: duplicate joint name (first on line" in message


def test_undeclared_link_is_refused() -> None:
    text = chain_urdf(joint("a", "revolute", "root", "ghost"), ["root"])
    with pytest.raises(
        RobotDescriptionError, match=r"u\.urdf:\d+: joint\[a\]\.child: link 'ghost' is not declared"
    ):
        parse_robot_urdf(text, "u.urdf")


# ------------------------------------------------------------ geometry, notes


def test_collision_geometry_to_capsules_and_notes() -> None:
    links = """
<link name="root">
  <visual><geometry><mesh filename="package://demo_cell/meshes/base.stl"/></geometry></visual>
  <collision><origin xyz="0 0 0.1" rpy="0 0 0"/><geometry><sphere radius="0.2"/></geometry></collision>
</link>
<link name="arm">
  <collision name="upper"><origin xyz="0.1 0 0" rpy="0 1.5707963267948966 0"/>
    <geometry><cylinder radius="0.05" length="0.4"/></geometry></collision>
  <collision name="housing"><geometry><box size="0.1 0.1 0.1"/></geometry></collision>
  <collision name="grip"><origin xyz="0 0 0.3"/><geometry><capsule radius="0.03" length="0.1"/></geometry></collision>
  <collision name="shell"><geometry><mesh filename="meshes/arm.dae"/></geometry></collision>
</link>
"""
    text = (
        '<robot name="geo">'
        + links
        + joint("a", "revolute", "root", "arm", xyz="0 0 0.5")
        + "</robot>"
    )
    robot = parse_robot_urdf(text, "geo.urdf")
    by_name = {c.name: c for c in robot.capsules}
    assert set(by_name) == {"root", "upper", "grip", "housing"}
    # sphere -> zero-length capsule at the sphere centre (exact)
    np.testing.assert_allclose(by_name["root"].start, [0, 0, 0.1])
    np.testing.assert_allclose(by_name["root"].end, [0, 0, 0.1])
    assert by_name["root"].link == 0
    assert by_name["root"].radius == 0.2
    # URDF specification: a cylinder is centred on its origin along z; pitch = 90 deg turns z
    # onto x, so the 0.4 m axis runs from x = 0.1 - 0.2 to 0.1 + 0.2 (worked by hand)
    np.testing.assert_allclose(by_name["upper"].start, [-0.1, 0, 0], atol=1e-15)
    np.testing.assert_allclose(by_name["upper"].end, [0.3, 0, 0], atol=1e-15)
    assert by_name["upper"].link == 1
    # <capsule radius length>: length of the cylindrical part, centred on the collision
    # origin along its z axis (as for <cylinder>; common extension, from memory)
    np.testing.assert_allclose(by_name["grip"].start, [0, 0, 0.25])
    np.testing.assert_allclose(by_name["grip"].end, [0, 0, 0.35])
    # a 0.1 m cube: segment over one full side, radius half the face diagonal, so the
    # corners lie on the capsule (closed form: sqrt(0.05^2 + 0.05^2))
    housing = by_name["housing"]
    assert housing.radius == pytest.approx(math.hypot(0.05, 0.05), rel=1e-12)
    assert np.linalg.norm(housing.end - housing.start) == pytest.approx(0.1, rel=1e-12)
    notes = "\n".join(robot.notes)
    assert "2 mesh file(s) not found" in notes
    assert "package://demo_cell/meshes/base.stl" in notes
    assert "meshes/arm.dae" in notes
    assert "collision cylinders turned into capsules" in notes
    assert "on links: arm" in notes
    assert "collision boxes enclosed by capsules" in notes
    assert {(m.source_link, m.role, m.path) for m in robot.meshes} == {
        ("root", "visual", None),
        ("arm", "collision", None),
    }


def test_collision_on_fixed_links_goes_to_the_moving_link_frame() -> None:
    robot = parse_robot_urdf(
        MIXED_CHAIN.replace(
            '<link name="l1b"/>',
            (
                '<link name="l1b"><collision><origin xyz="0.01 0.02 0.03"/>'
                '<geometry><sphere radius="0.1"/></geometry></collision></link>'
            ),
        ),
        "m.urdf",
    )
    (capsule,) = robot.capsules
    assert capsule.link == 1
    q = random_q(robot, np.random.default_rng(SEED), 20)
    frames = fk_frames(robot, q)
    world = frames[:, 1, :3, :3] @ capsule.start + frames[:, 1, :3, 3]
    # pinocchio pose of l1b applied to the sphere centre given in l1b
    T = pin_frame_poses(MIXED_CHAIN, "l1b", robot, q)
    np.testing.assert_allclose(world, T[:, :3, :3] @ [0.01, 0.02, 0.03] + T[:, :3, 3], atol=1e-12)


def test_bad_collision_radius() -> None:
    text = (
        '<robot name="r"><link name="root"/><link name="l1">'
        '<collision><geometry><cylinder radius="-1" length="1"/></geometry></collision></link>'
        + joint("a", "revolute", "root", "l1")
        + "</robot>"
    )
    with pytest.raises(
        RobotDescriptionError,
        match=r"r\.urdf:1: link\[l1\]\.collision\[0\]\.cylinder\.radius: must be > 0",
    ):
        parse_robot_urdf(text, "r.urdf")


# ------------------------------------------------------------------ XML safety


def test_malformed_xml_names_the_line() -> None:
    text = '<robot name="x">\n<link name="a">\n</robot>\n'
    with pytest.raises(
        RobotDescriptionError, match=r"bad\.urdf:3: xml: not well-formed XML: mismatched tag"
    ):
        parse_robot_urdf(text, "bad.urdf")


def test_entity_expansion_is_refused() -> None:
    # the "billion laughs" pattern (nested entity definitions): never expanded
    text = (
        '<?xml version="1.0"?>\n<!DOCTYPE robot [<!ENTITY a "aaaaaaaaaa">'
        '<!ENTITY b "&a;&a;&a;&a;&a;&a;&a;&a;&a;&a;">]>\n<robot name="&b;"><link name="l"/></robot>'
    )
    with pytest.raises(RobotDescriptionError, match=r"bomb\.urdf: xml: document type declarations"):
        parse_robot_urdf(text, "bomb.urdf")


def test_external_entity_is_refused(tmp_path: Path) -> None:
    secret = tmp_path / "secret.txt"
    secret.write_text("do not read")
    text = f'<!DOCTYPE robot [<!ENTITY s SYSTEM "file://{secret}">]><robot name="&s;"/>'
    with pytest.raises(RobotDescriptionError, match=r"xxe\.urdf: xml: document type declarations"):
        parse_robot_urdf(text, "xxe.urdf")


def test_size_cap(tmp_path: Path) -> None:
    path = tmp_path / "big.urdf"
    path.write_text('<robot name="big">' + " " * MAX_URDF_BYTES + "</robot>")
    with pytest.raises(
        RobotDescriptionError, match=r"big\.urdf: file is \d+ bytes; .* limited to 5000000"
    ):
        load_robot_urdf(path)
    with pytest.raises(RobotDescriptionError, match=r"limited to 5000000"):
        parse_robot_urdf(path.read_text(), "big.urdf")


def test_not_a_robot_document() -> None:
    with pytest.raises(
        RobotDescriptionError, match=r"s\.urdf:1: robot: root element must be <robot>, got <sdf>"
    ):
        parse_robot_urdf('<sdf version="1.9"/>', "s.urdf")
    with pytest.raises(
        RobotDescriptionError, match=r"n\.urdf:2: robot\.name: missing name attribute"
    ):
        parse_robot_urdf(chain_urdf("", ["a"]).replace(' name="test-chain"', ""), "n.urdf")
    xacro = '<robot name="x" xmlns:xacro="http://www.ros.org/wiki/xacro"><xacro:macro name="m"/></robot>'
    with pytest.raises(RobotDescriptionError, match=r"x\.urdf:1: robot: contains xacro macros"):
        parse_robot_urdf(xacro, "x.urdf")


def test_missing_file() -> None:
    with pytest.raises(RobotDescriptionError, match=r"absent\.urdf: cannot read"):
        load_robot_urdf(Path("/nonexistent/absent.urdf"))


def test_kind_is_the_callers_choice() -> None:
    robot = load_robot_urdf(ROBOTS / "pb-arm6.urdf", kind="six_axis")
    assert robot.kind == "six_axis"


# ------------------------------------------------------------------ export


@pytest.mark.parametrize("name", BUNDLED_NAMES)
def test_export_then_import_gives_the_same_robot(name: str) -> None:
    robot = load_robot(name)
    text = urdf_from_robot(robot)
    again = parse_robot_urdf(text, "export.urdf", to_link="flange")
    assert again.name == robot.name
    assert again.joint_names == robot.joint_names
    for mine, original in zip(again.joints, robot.joints, strict=True):
        np.testing.assert_allclose(mine.origin, original.origin, atol=1e-15)
        np.testing.assert_allclose(mine.axis, original.axis, atol=1e-15)
        assert (mine.kind, mine.lower, mine.upper, mine.velocity_max) == (
            original.kind,
            original.lower,
            original.upper,
            original.velocity_max,
        )
    np.testing.assert_allclose(again.T_link_flange, robot.T_link_flange, atol=1e-15)
    assert [c.name for c in again.capsules] == [c.name for c in robot.capsules]
    for mine, original in zip(again.capsules, robot.capsules, strict=True):
        assert mine.link == original.link
        assert mine.radius == original.radius
        np.testing.assert_allclose(mine.start, original.start, atol=1e-15)
        np.testing.assert_allclose(mine.end, original.end, atol=1e-15)
    # with the default tip ("tool") the tool frame becomes the flange
    with_tool = parse_robot_urdf(text, "export.urdf")
    np.testing.assert_allclose(with_tool.T_link_flange, robot.T_link_tool, atol=1e-15)


def test_export_continuous_joint_and_pinocchio_agrees() -> None:
    robot = parse_robot_urdf(MIXED_CHAIN, "mixed.urdf")
    text = urdf_from_robot(robot)
    assert 'type="continuous"' in text
    again = parse_robot_urdf(text, "e.urdf", to_link="flange")
    assert again.continuous.tolist() == robot.continuous.tolist()
    q = random_q(robot, np.random.default_rng(SEED), 100)
    np.testing.assert_allclose(
        fk_flange(robot, q), pin_frame_poses(text, "flange", robot, q), atol=1e-12
    )


def _chain_urdf(joints: int, spheres: int = 1) -> str:
    """A serial chain of ``joints`` revolute joints, each link with ``spheres`` spheres."""
    geometry = '<collision><geometry><sphere radius="0.01"/></geometry></collision>' * spheres
    parts = ['<robot name="long">', '<link name="l0"/>']
    for i in range(1, joints + 1):
        parts.append(f'<link name="l{i}">{geometry}</link>')
        parts.append(
            f'<joint name="j{i}" type="revolute"><parent link="l{i - 1}"/><child link="l{i}"/>'
            '<origin xyz="0 0 0.01"/><axis xyz="0 0 1"/>'
            '<limit lower="-1" upper="1" velocity="1"/></joint>'
        )
    parts.append("</robot>")
    return "\n".join(parts)


def test_too_many_elements_refused_while_parsing() -> None:
    # a 4 MB chain of 16,000 joints was read whole and built before (our own contract now:
    # reading stops at element MAX_URDF_ELEMENTS + 1, on the line where that element starts)
    text = _chain_urdf(16_000)
    elements_per_joint = 4 + 6  # link, collision, geometry, sphere; joint and its 5 children
    assert len(text.encode()) < MAX_URDF_BYTES
    with pytest.raises(RobotDescriptionError) as error:
        parse_robot_urdf(text, "long.urdf")
    (problem,) = error.value.problems
    stop_line = 2 + 2 * ((MAX_URDF_ELEMENTS - 2) // elements_per_joint)
    line = int(problem.split(":")[1])
    assert abs(line - stop_line) <= 2  # closed form from the file's layout
    assert problem.endswith(
        f"xml: more than {MAX_URDF_ELEMENTS} elements; URDF files of one arm have far fewer "
        "(reading stopped here)"
    )


def test_too_many_chain_joints_refused() -> None:
    with pytest.raises(RobotDescriptionError) as error:
        parse_robot_urdf(_chain_urdf(MAX_CHAIN_JOINTS + 1), "long.urdf")
    assert error.value.problems == [
        f"long.urdf: robot: {MAX_CHAIN_JOINTS + 1} moving joints between from_link 'l0' and to_link "
        f"'l{MAX_CHAIN_JOINTS + 1}'; posebridge takes at most {MAX_CHAIN_JOINTS}"
    ]
    assert parse_robot_urdf(_chain_urdf(MAX_CHAIN_JOINTS), "long.urdf").dof == MAX_CHAIN_JOINTS


def test_chain_starts_are_the_links_above_the_end_from_the_root() -> None:
    text = _chain_urdf(4)
    robot = parse_robot_urdf(text, "long.urdf", to_link="l3")
    # our own contract: l0 -> l1 -> l2 -> l3, the from_link choices above to_link
    assert robot.chain_starts == ("l0", "l1", "l2")
    from_middle = parse_robot_urdf(text, "long.urdf", from_link="l1", to_link="l4")
    assert from_middle.chain_starts == ("l0", "l1", "l2", "l3")  # the whole tree above l4
    assert from_middle.dof == 3

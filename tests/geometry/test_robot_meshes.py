"""A URDF with meshes through the robot importer and the mesh layer: chain choice, fitted
capsules, display meshes, robot overlays.

The robot is invented and written by the test (:mod:`posebridge.bench.invented_urdf`):
six arm joints, a gripper with a prismatic finger and its mimic off the chain,
collision meshes in binary STL (one in mm with ``<mesh scale>``), visual meshes in OBJ
and COLLADA, ``package://`` and relative paths. References: pinocchio
(``buildModelFromXML``, ``framesForwardKinematics``) for every frame; trimesh reading
the same mesh files for the vertices.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pinocchio as pin
import pytest
import trimesh

from posebridge.bench.invented_urdf import ARM_JOINTS, PACKAGE, write_invented_arm
from posebridge.geometry.capsule_fit import point_segment_distances
from posebridge.geometry.mesh_cache import MeshCache
from posebridge.geometry.robot_meshes import (
    ROBOT_DISPLAY_TRIANGLES,
    load_robot_with_meshes,
    robot_display_meshes,
)
from posebridge.kinematics.fk import fk_frames
from posebridge.robot.errors import RobotDescriptionError
from posebridge.robot.library import load_robot
from posebridge.robot.model import Robot

SEED = 4107


@pytest.fixture(scope="module")
def arm_urdf(tmp_path_factory: pytest.TempPathFactory) -> Path:
    return write_invented_arm(tmp_path_factory.mktemp("package"))


@pytest.fixture(scope="module")
def cache(tmp_path_factory: pytest.TempPathFactory) -> MeshCache:
    return MeshCache(tmp_path_factory.mktemp("cache"))


@pytest.fixture(scope="module")
def arm(arm_urdf: Path, cache: MeshCache) -> Robot:
    return load_robot_with_meshes(arm_urdf, to_link="tool0", cache=cache)


def pin_poses(urdf: Path, robot: Robot, q: np.ndarray) -> tuple[pin.Model, list[pin.Data]]:
    """pinocchio's frame poses for each configuration (continuous joints as cos/sin pairs,
    every joint off the chain at zero)."""
    model = pin.buildModelFromXML(urdf.read_text())
    datas = []
    for row in q:
        config = pin.neutral(model)
        for name, value in zip(robot.joint_names, row, strict=True):
            joint = model.joints[model.getJointId(name)]
            if joint.nq == 2:
                config[joint.idx_q : joint.idx_q + 2] = [math.cos(value), math.sin(value)]
            else:
                config[joint.idx_q] = value
        data = model.createData()
        pin.framesForwardKinematics(model, data, config)
        datas.append(data)
    return model, datas


def test_several_leaves_name_the_options(arm_urdf: Path) -> None:
    with pytest.raises(
        RobotDescriptionError,
        match=r"several leaf links below it; choose the to_link \(--to-link on the command line.*"
        r"among: .*finger_left.*finger_right.*tool0",
    ):
        load_robot(arm_urdf)


def test_chosen_chain_holds_fingers_and_matches_pinocchio(arm_urdf: Path, arm: Robot) -> None:
    assert arm.joint_names == ARM_JOINTS
    assert (arm.from_link, arm.to_link) == ("base_link", "tool0")
    assert set(arm.held_joints) == {"finger_left_slide", "finger_right_slide"}
    notes = "\n".join(arm.notes)
    assert "finger_right_slide (mimic)" in notes
    assert "finger_left_slide (prismatic)" in notes
    assert "not found" not in notes
    assert "could not be read" not in notes
    rng = np.random.default_rng(SEED)
    q = rng.uniform(arm.lower, arm.upper, (20, arm.dof))
    model, datas = pin_poses(arm_urdf, arm, q)
    tool = model.getFrameId("tool0")
    ours = fk_frames(arm, q)[:, -1]
    for k, data in enumerate(datas):
        # pinocchio on the same URDF, frame tool0
        np.testing.assert_allclose(ours[k], data.oMf[tool].homogeneous, atol=1e-12)


def test_fixed_frame_and_finger_as_to_link(arm_urdf: Path) -> None:
    flange = load_robot(arm_urdf, to_link="flange")
    assert flange.joint_names == ARM_JOINTS
    finger = load_robot(arm_urdf, to_link="finger_left")
    assert finger.joint_names == (*ARM_JOINTS, "finger_left_slide")
    assert "finger_right_slide" in finger.held_joints


def test_every_mesh_vertex_and_face_inside_the_fitted_capsules_of_its_link(
    arm_urdf: Path, arm: Robot
) -> None:
    assert {fit.source_link for fit in arm.link_fits} == {
        "base_link", "turret", "upper_arm", "forearm", "wrist_a", "wrist_b", "wrist_c",
        "gripper_body", "finger_left", "finger_right",
    }  # fmt: skip
    assert all(fit.role == "collision" for fit in arm.link_fits)
    rng = np.random.default_rng(SEED + 1)
    q = rng.uniform(arm.lower, arm.upper, (3, arm.dof))
    model, datas = pin_poses(arm_urdf, arm, q)
    frames = fk_frames(arm, q)
    meshes = arm_urdf.parent.parent / "meshes"
    for fit in arm.link_fits:
        name = fit.source_link
        file = meshes / (
            f"{name}_collision_mm.stl" if name == "forearm" else f"{name}_collision.stl"
        )
        # trimesh reads the file; the forearm's is in mm with scale 0.001 in the URDF
        loaded = trimesh.load(file, force="mesh")
        # the corners and the centroid of every triangle (a split fit must hold whole faces)
        vertices = np.concatenate(
            [np.asarray(loaded.vertices), np.asarray(loaded.triangles_center)]
        ).astype(np.float64)
        if name == "forearm":
            vertices = vertices * 0.001
        capsules = [c for c in arm.capsules if c.name in fit.capsule_names]
        assert capsules
        assert fit.excess is not None
        assert fit.excess >= 1.0
        for k, data in enumerate(datas):
            T_world_link = data.oMf[model.getFrameId(name)].homogeneous  # pinocchio
            world = vertices @ T_world_link[:3, :3].T + T_world_link[:3, 3]
            inside = np.zeros(len(world), dtype=bool)
            for capsule in capsules:
                T = frames[k, capsule.link]
                a = T[:3, :3] @ capsule.start + T[:3, 3]
                b = T[:3, :3] @ capsule.end + T[:3, 3]
                # closed form: a point is in a capsule when its distance to the segment <= r
                inside |= point_segment_distances(world, a, b) <= capsule.radius + 1e-9
            assert inside.all(), f"{name}: {np.count_nonzero(~inside)} vertices outside"


def test_display_meshes_within_the_robot_budget(arm: Robot, cache: MeshCache) -> None:
    shown = robot_display_meshes(arm, cache=cache)
    assert len(shown) == 10  # one visual mesh per meshed link (common practice, no source)
    assert sum(s.mesh.triangle_count for s in shown) <= ROBOT_DISPLAY_TRIANGLES
    small = robot_display_meshes(arm, max_triangles=500, cache=cache)
    assert sum(s.mesh.triangle_count for s in small) <= 500


def test_missing_and_unreadable_meshes_are_notes(tmp_path: Path, cache: MeshCache) -> None:
    urdf = write_invented_arm(tmp_path, level=0)
    meshes = urdf.parent.parent / "meshes"
    (meshes / "wrist_a_collision.stl").unlink()
    (meshes / "wrist_b_collision.stl").write_bytes(b"solid nonsense\nthis is not an stl\n")
    robot = load_robot_with_meshes(urdf, to_link="tool0", cache=cache)
    notes = "\n".join(robot.notes)
    assert f"package://{PACKAGE}/meshes/wrist_a_collision.stl (collision of wrist_a" in notes
    assert "could not be read" in notes
    assert "wrist_b_collision.stl" in notes
    fits = {fit.source_link: fit.role for fit in robot.link_fits}
    assert fits["wrist_a"] == "visual"
    assert fits["wrist_b"] == "visual"  # fall back to visual


def test_mesh_folders_find_a_moved_package(tmp_path: Path, cache: MeshCache) -> None:
    urdf = write_invented_arm(tmp_path, level=0)
    moved = tmp_path / "elsewhere"
    moved.mkdir()
    (urdf.parent.parent / "meshes").rename(moved / "meshes")
    lost = load_robot(urdf, to_link="tool0")
    assert all(m.path is None for m in lost.meshes if "turret_visual" not in m.filename)
    lost_pkg = tmp_path / "pkgs" / PACKAGE
    lost_pkg.mkdir(parents=True)
    (moved / "meshes").rename(lost_pkg / "meshes")
    found = load_robot(urdf, to_link="tool0", mesh_folders=[tmp_path / "pkgs"])
    package_refs = [m for m in found.meshes if m.filename.startswith("package://")]
    assert package_refs
    assert all(m.path is not None for m in package_refs)


def test_no_geometry_robot_says_so() -> None:
    bare = load_robot("pb-arm6").__class__
    robot = load_robot("pb-arm6")
    assert robot.has_geometry
    assert not bare(
        robot.name, robot.kind, robot.joints, robot.T_link_flange, np.eye(4)
    ).has_geometry


OVERLAY = """
urdf = "pb_gripper_arm/urdf/pb_gripper_arm.urdf"
to_link = "tool0"
name = "my-gripper-arm"
home_deg = [0, 10, -20, 0, 30, 0]
remove_capsules = ["finger_right"]

[joint.shoulder_pan]
acceleration_deg_s2 = 250
jerk_deg_s3 = 2500
min_deg = -120
max_deg = 120

[tool]
xyz_mm = [0, 0, 150]
rpy_deg = [0, 0, 0]

[[capsule]]
name = "gripper-cover"
link = "gripper_body"
start_mm = [0, 0, 0]
end_mm = [0, 0, 80]
radius_mm = 70
replace = true
"""


def test_overlay_adds_what_urdf_lacks(arm_urdf: Path, cache: MeshCache) -> None:
    overlay = arm_urdf.parent.parent.parent / "my-arm.toml"
    overlay.write_text(OVERLAY, encoding="utf-8")
    robot = load_robot_with_meshes(overlay, cache=cache)
    assert robot.name == "my-gripper-arm"
    assert robot.to_link == "tool0"
    pan = robot.joints[0]
    # 250 deg/s^2, 2500 deg/s^3, +-120 deg in SI (unit conversion, closed form)
    assert pan.acceleration_max == pytest.approx(math.radians(250))
    assert pan.jerk_max == pytest.approx(math.radians(2500))
    assert (pan.lower, pan.upper) == (
        pytest.approx(-math.radians(120)),
        pytest.approx(math.radians(120)),
    )
    np.testing.assert_allclose(robot.T_flange_tool[:3, 3], [0, 0, 0.15])
    np.testing.assert_allclose(np.degrees(robot.home_configuration()), [0, 10, -20, 0, 30, 0])
    names = {c.name for c in robot.capsules}
    assert "gripper-cover" in names
    assert "gripper_body" not in names
    assert "finger_right" not in names
    assert "gripper_body" not in {fit.source_link for fit in robot.link_fits}
    notes = "\n".join(robot.notes)
    assert "robot overlay my-arm.toml" in notes
    assert "gives none for shoulder_lift" in notes
    # the chain chosen on the command line wins over the overlay's (then its home no longer fits)
    with pytest.raises(RobotDescriptionError, match=r"home_deg: expected 7 numbers"):
        load_robot(overlay, to_link="finger_left")


def test_overlay_problems_name_file_and_field(arm_urdf: Path) -> None:
    overlay = arm_urdf.parent.parent.parent / "bad-overlay.toml"
    overlay.write_text(
        OVERLAY.replace("min_deg = -120", "min_deg = -400").replace(
            'link = "gripper_body"', 'link = "nowhere"'
        ),
        encoding="utf-8",
    )
    with pytest.raises(RobotDescriptionError) as caught:
        load_robot(overlay)
    text = str(caught.value)
    assert "bad-overlay.toml:" in text
    assert "joint.shoulder_pan.min_deg: soft limits" in text
    assert "capsule[0].link: unknown link 'nowhere'" in text


def test_coarse_faces_are_held_whole(tmp_path: Path, cache: MeshCache) -> None:
    # boxes of 12 triangles: a split could hold the 8 corners and miss the long faces' middles
    urdf = write_invented_arm(tmp_path, level=0)
    robot = load_robot_with_meshes(urdf, to_link="tool0", cache=cache)
    upper = next(fit for fit in robot.link_fits if fit.source_link == "upper_arm")
    capsules = [c for c in robot.capsules if c.name in upper.capsule_names]
    # the middle of the upper arm box (from invented_urdf's box corners, closed form)
    centre = np.array([[0.0, -0.08, 0.26]])
    assert any(point_segment_distances(centre, c.start, c.end)[0] <= c.radius for c in capsules)
    assert upper.excess is not None
    assert upper.excess >= 1.0  # one capsule holds the hull

"""DH rows to the internal joint model: FK against the DH product written out here.

Standard convention (Spong, Hutchinson, Vidyasagar, Robot Modeling and Control, ch. 3):
``A_i = Rot_z(theta_i) Trans_z(d_i) Trans_x(a_i) Rot_x(alpha_i)``.
Modified convention (Craig, Introduction to Robotics, ch. 3):
``A_i = Rot_x(alpha_{i-1}) Trans_x(a_{i-1}) Rot_z(theta_i) Trans_z(d_i)``.
The joint variable adds to theta (revolute) or d (prismatic).
"""

from __future__ import annotations

import tomllib

import numpy as np
import pytest
from scipy.spatial.transform import Rotation

from posebridge.kinematics.fk import fk_flange, fk_frames
from posebridge.resources import data_folder
from posebridge.robot.toml_format import load_robot_toml, parse_robot_toml

SEED = 20240611


def Rz(t: float) -> np.ndarray:
    c, s = np.cos(t), np.sin(t)
    return np.array([[c, -s, 0, 0], [s, c, 0, 0], [0, 0, 1, 0], [0, 0, 0, 1.0]])


def Rx(t: float) -> np.ndarray:
    c, s = np.cos(t), np.sin(t)
    return np.array([[1.0, 0, 0, 0], [0, c, -s, 0], [0, s, c, 0], [0, 0, 0, 1]])


def Tz(d: float) -> np.ndarray:
    T = np.eye(4)
    T[2, 3] = d
    return T


def Tx(a: float) -> np.ndarray:
    T = np.eye(4)
    T[0, 3] = a
    return T


def dh_frames(rows: list[dict], prismatic: list[bool], q: np.ndarray, convention: str) -> list:
    """Frames 0..n of the DH chain (SI), the product of the A_i above."""
    frames = [np.eye(4)]
    for row, is_prismatic, qi in zip(rows, prismatic, q, strict=True):
        a, alpha = row["a_mm"] / 1000.0, np.radians(row["alpha_deg"])
        d, theta = row["d_mm"] / 1000.0, np.radians(row["theta_deg"])
        if is_prismatic:
            d += qi
        else:
            theta += qi
        if convention == "dh_standard":
            A = Rz(theta) @ Tz(d) @ Tx(a) @ Rx(alpha)  # Spong ch. 3
        else:
            A = Rx(alpha) @ Tx(a) @ Rz(theta) @ Tz(d)  # Craig ch. 3
        frames.append(frames[-1] @ A)
    return frames


def robot_text(rows: list[dict], prismatic: list[bool], convention: str, flange: dict) -> str:
    lines = [
        "[robot]",
        'name = "dh-random"',
        'kind = "test"',
        f'convention = "{convention}"',
    ]
    for i, (row, is_prismatic) in enumerate(zip(rows, prismatic, strict=True)):
        dh = ", ".join(f"{k} = {v!r}" for k, v in row.items())
        limits = (
            "min_mm = -300, max_mm = 300, velocity_mm_s = 500, acceleration_mm_s2 = 2000"
            if is_prismatic
            else "min_deg = -180, max_deg = 180, velocity_deg_s = 90, acceleration_deg_s2 = 360"
        )
        lines += [
            "[[joint]]",
            f'name = "q{i + 1}"',
            f'type = "{"prismatic" if is_prismatic else "revolute"}"',
            f"dh = {{ {dh} }}",
            f"limits = {{ {limits} }}",
        ]
    lines += [
        "[flange]",
        f"xyz_mm = {flange['xyz_mm']!r}",
        f"rpy_deg = {flange['rpy_deg']!r}",
    ]
    for i in range(len(rows)):
        lines += [
            "[[capsule]]",
            f'name = "c{i + 1}"',
            f'link = "q{i + 1}"',
            "start_mm = [10.0, -20.0, 30.0]",
            "end_mm = [-40.0, 50.0, 60.0]",
            "radius_mm = 15.0",
        ]
    return "\n".join(lines) + "\n"


def random_chain(rng: np.random.Generator, n: int) -> tuple[list[dict], list[bool], dict]:
    rows = [
        {
            "a_mm": float(rng.uniform(-500, 500)),
            "alpha_deg": float(rng.choice([-90.0, 0.0, 90.0, rng.uniform(-180, 180)])),
            "d_mm": float(rng.uniform(-500, 500)),
            "theta_deg": float(rng.uniform(-180, 180)),
        }
        for _ in range(n)
    ]
    prismatic = [bool(p) for p in rng.random(n) < 0.3]
    flange = {
        "xyz_mm": [float(v) for v in rng.uniform(-100, 100, 3)],
        "rpy_deg": [float(v) for v in rng.uniform(-180, 180, 3)],
    }
    return rows, prismatic, flange


def flange_pose(flange: dict) -> np.ndarray:
    T = np.eye(4)
    # fixed-axis X-Y-Z rpy: scipy Rotation.from_euler("xyz") (URDF specification: origin rpy about fixed X, Y, Z)
    T[:3, :3] = Rotation.from_euler("xyz", flange["rpy_deg"], degrees=True).as_matrix()
    T[:3, 3] = np.array(flange["xyz_mm"]) / 1000.0
    return T


@pytest.mark.parametrize("convention", ["dh_standard", "dh_modified"])
@pytest.mark.parametrize("n", [1, 3, 6])
def test_random_dh_chain_fk_matches_dh_product(convention: str, n: int) -> None:
    rng = np.random.default_rng(SEED + n)
    for _ in range(5):
        rows, prismatic, flange = random_chain(rng, n)
        robot = parse_robot_toml(robot_text(rows, prismatic, convention, flange), "dh.toml")
        q = np.where(
            prismatic, rng.uniform(-0.3, 0.3, (50, n)), rng.uniform(-np.pi, np.pi, (50, n))
        )
        frames = fk_frames(robot, q)
        flanges = fk_flange(robot, q)
        for k in range(q.shape[0]):
            expected = dh_frames(rows, prismatic, q[k], convention)  # DH product, Spong/Craig ch. 3
            np.testing.assert_allclose(flanges[k], expected[-1] @ flange_pose(flange), atol=1e-12)
            for i, capsule in enumerate(robot.capsules):
                # capsule points were given in DH frame i: world = (product up to i) @ point
                for mine, given in (
                    (capsule.start, [10.0, -20.0, 30.0]),
                    (capsule.end, [-40.0, 50.0, 60.0]),
                ):
                    world_expected = expected[i + 1] @ np.append(np.array(given) / 1000.0, 1.0)
                    world = frames[k, capsule.link] @ np.append(mine, 1.0)
                    np.testing.assert_allclose(world, world_expected, atol=1e-12)
                assert capsule.radius == pytest.approx(0.015)
            if convention == "dh_modified":
                # modified-DH link frames are the internal link frames one-to-one
                for i in range(n):
                    np.testing.assert_allclose(frames[k, i + 1], expected[i + 1], atol=1e-12)


@pytest.mark.parametrize("name", ["pb-arm6-offset", "pb-arm7"])
def test_bundled_dh_robots_match_dh_product(name: str) -> None:
    path = data_folder("robots") / f"{name}.toml"
    raw = tomllib.loads(path.read_text())
    rows = [joint["dh"] for joint in raw["joint"]]
    prismatic = [joint["type"] == "prismatic" for joint in raw["joint"]]
    flange = raw.get("flange", {"xyz_mm": [0, 0, 0], "rpy_deg": [0, 0, 0]})
    robot = load_robot_toml(path)
    rng = np.random.default_rng(SEED)
    q = rng.uniform(robot.lower, robot.upper, (200, robot.dof))
    flanges = fk_flange(robot, q)
    for k in range(q.shape[0]):
        expected = dh_frames(rows, prismatic, q[k], raw["robot"]["convention"])[-1]
        np.testing.assert_allclose(flanges[k], expected @ flange_pose(flange), atol=1e-12)


def test_standard_dh_zero_pose_of_pb_arm6_offset_by_hand() -> None:
    # Zero pose worked out by hand from the DH rows (Spong ch. 3 product, theta2 = -90 deg):
    # frame 6 at (172 + 652 + 97, 0, 457 + 598 + 113 + 64) mm = (921, 0, 1232) mm, its z axis
    # along base +x and its x axis along base +z.
    robot = load_robot_toml(data_folder("robots") / "pb-arm6-offset.toml")
    T = fk_flange(robot, np.zeros((1, 6)))[0]
    np.testing.assert_allclose(T[:3, 3], [0.921, 0.0, 1.232], atol=1e-12)
    np.testing.assert_allclose(T[:3, 2], [1.0, 0.0, 0.0], atol=1e-12)
    np.testing.assert_allclose(T[:3, 0], [0.0, 0.0, 1.0], atol=1e-12)

"""POST /api/fk and POST /api/ik.

References: closed forms of the planar two-link arm (links l1 = 400 mm,
l2 = 300 mm from robots/pb-planar2r.toml) and pinocchio (``pin``) run on
robots/pb-arm6.urdf, the same arm written as URDF.
"""

from __future__ import annotations

import math
import tomllib

import httpx
import numpy as np
import pinocchio as pin
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.spatial.transform import Rotation

from posebridge.api.schemas.kinematics import MAX_CONFIGURATIONS
from posebridge.resources import data_folder

pytestmark = pytest.mark.anyio

L1_MM, L2_MM = 400.0, 300.0
PLANAR_LIMITS_DEG = [(-180.0, 180.0), (-150.0, 150.0)]  # robots/pb-planar2r.toml


def _planar_tip_mm(t1_deg: float, t2_deg: float) -> tuple[float, float]:
    # closed form: x = l1 cos t1 + l2 cos(t1 + t2), y = l1 sin t1 + l2 sin(t1 + t2)
    t1, t12 = math.radians(t1_deg), math.radians(t1_deg + t2_deg)
    return L1_MM * math.cos(t1) + L2_MM * math.cos(t12), L1_MM * math.sin(t1) + L2_MM * math.sin(
        t12
    )


def _pin_arm6() -> tuple[pin.Model, pin.Data, int]:
    urdf = (data_folder("robots") / "pb-arm6.urdf").read_text(encoding="utf-8")
    model = pin.buildModelFromXML(urdf)
    return model, model.createData(), model.getFrameId("flange")


def _pin_flange(q_deg: list[float]) -> pin.SE3:
    model, data, frame = _pin_arm6()
    pin.framesForwardKinematics(model, data, np.radians(q_deg))
    return data.oMf[frame]


async def test_compute_fk_planar2r(client: httpx.AsyncClient) -> None:
    configurations = [[30.0, 45.0], [-120.0, 90.0], [0.0, 0.0], [170.0, -149.0]]
    response = await client.post(
        "/api/fk", json={"robot": "pb-planar2r", "joints_deg": configurations}
    )
    assert response.status_code == 200
    body = response.json()
    assert body["joint_units"] == ["deg", "deg"]
    assert body["frame_names"] == ["base", "j1", "j2", "flange", "tool"]
    for (t1, t2), result in zip(configurations, body["configurations"], strict=True):
        x, y = _planar_tip_mm(t1, t2)
        assert result["position_mm"] == pytest.approx([x, y, 0.0], abs=1e-9)
        # closed form: the tool's heading is t1 + t2 about z
        yaw = math.degrees(
            math.atan2(math.sin(math.radians(t1 + t2)), math.cos(math.radians(t1 + t2)))
        )
        assert result["rpy_deg"] == pytest.approx([0.0, 0.0, yaw], abs=1e-9)
        half = math.radians(t1 + t2) / 2
        w, z = math.cos(half), math.sin(half)
        sign = 1.0 if w >= 0 else -1.0
        assert result["quaternion_wxyz"] == pytest.approx([sign * w, 0.0, 0.0, sign * z], abs=1e-12)
        # Yoshikawa (1985) for a planar 2R arm: w = l1 l2 |sin t2| (l in m)
        assert result["manipulability"] == pytest.approx(
            0.4 * 0.3 * abs(math.sin(math.radians(t2))), abs=1e-12
        )
        # margin = min(q - lower, upper - q) per joint (common practice, no source)
        expected_margins = [
            min(q - lo, hi - q) for q, (lo, hi) in zip((t1, t2), PLANAR_LIMITS_DEG, strict=True)
        ]
        assert result["limit_margins_deg"] == pytest.approx(expected_margins, abs=1e-9)
        # frame origins: base, joint 1 at the base, joint 2 at the end of link 1, flange = tool = tip
        elbow = [L1_MM * math.cos(math.radians(t1)), L1_MM * math.sin(math.radians(t1)), 0.0]
        np.testing.assert_allclose(
            result["frames_position_mm"],
            [[0.0, 0.0, 0.0], [0.0, 0.0, 0.0], elbow, [x, y, 0.0], [x, y, 0.0]],
            atol=1e-9,
        )
        # capsules link1 (base to elbow) and link2 (elbow to tip), from the TOML file
        np.testing.assert_allclose(
            result["capsule_segments_mm"],
            [[[0.0, 0.0, 0.0], elbow], [elbow, [x, y, 0.0]]],
            atol=1e-9,
        )
    assert body["capsules"] == [
        {"name": "link1", "link": 1, "radius_mm": 40.0},
        {"name": "link2", "link": 2, "radius_mm": 30.0},
    ]


@settings(derandomize=True, deadline=None, max_examples=25)
@given(
    t1=st.floats(-180.0, 180.0),
    t2=st.floats(-150.0, 150.0),
)
def test_compute_fk_planar2r_property(t1: float, t2: float) -> None:
    import anyio

    from posebridge.api.app import create_app
    from posebridge.api.settings import Settings

    async def run() -> httpx.Response:
        transport = httpx.ASGITransport(app=create_app(Settings(warm_up=False)))
        async with httpx.AsyncClient(transport=transport, base_url="http://127.0.0.1") as session:
            return await session.post(
                "/api/fk", json={"robot": "pb-planar2r", "joints_deg": [t1, t2]}
            )

    response = anyio.run(run)
    assert response.status_code == 200
    x, y = _planar_tip_mm(t1, t2)  # closed form, see _planar_tip_mm
    assert response.json()["configurations"][0]["position_mm"] == pytest.approx(
        [x, y, 0.0], abs=1e-8
    )


async def test_compute_fk_arm6_matches_pinocchio(client: httpx.AsyncClient) -> None:
    rng = np.random.default_rng(7)
    with (data_folder("robots") / "pb-arm6.toml").open("rb") as handle:
        limits = [j["limits"] for j in tomllib.load(handle)["joint"]]  # the robot's own limits
    lower = np.array([lim["min_deg"] for lim in limits], dtype=float)
    upper = np.array([lim["max_deg"] for lim in limits], dtype=float)
    q_deg = rng.uniform(lower, upper, size=(6, 6)).tolist()
    flange_tool = {"position_mm": [0.0, 0.0, 0.0], "rpy_deg": [0.0, 0.0, 0.0]}
    response = await client.post(
        "/api/fk", json={"robot": "pb-arm6", "joints_deg": q_deg, "tool": flange_tool}
    )
    assert response.status_code == 200
    for q, result in zip(q_deg, response.json()["configurations"], strict=True):
        reference = _pin_flange(q)  # pinocchio on the URDF twin
        assert result["position_mm"] == pytest.approx(1000.0 * reference.translation, abs=1e-6)
        w, x, y, z = result["quaternion_wxyz"]
        quaternion = pin.Quaternion(w, x, y, z)
        np.testing.assert_allclose(quaternion.toRotationMatrix(), reference.rotation, atol=1e-9)
        expected_rpy = np.degrees(pin.rpy.matrixToRpy(reference.rotation))
        np.testing.assert_allclose(
            pin.rpy.rpyToMatrix(*np.radians(result["rpy_deg"])),
            pin.rpy.rpyToMatrix(*np.radians(expected_rpy)),
            atol=1e-9,
        )


async def test_compute_fk_default_tool_offset(client: httpx.AsyncClient) -> None:
    q = [10.0, 20.0, -30.0, 40.0, 50.0, 60.0]
    response = await client.post("/api/fk", json={"robot": "pb-arm6", "joints_deg": q})
    assert response.status_code == 200
    flange = _pin_flange(q)
    # robots/pb-arm6.toml: default tool 120 mm along the flange z axis
    expected = flange.translation + flange.rotation @ np.array([0.0, 0.0, 0.12])
    assert response.json()["configurations"][0]["position_mm"] == pytest.approx(
        1000.0 * expected, abs=1e-6
    )


async def test_compute_fk_single_configuration_is_batch_of_one(client: httpx.AsyncClient) -> None:
    single = await client.post("/api/fk", json={"robot": "pb-planar2r", "joints_deg": [30, 45]})
    batch = await client.post("/api/fk", json={"robot": "pb-planar2r", "joints_deg": [[30, 45]]})
    assert single.status_code == batch.status_code == 200
    assert single.json() == batch.json()


@pytest.mark.parametrize(
    ("body", "detail"),
    [
        (
            {"robot": "pb-planar2r", "joints_deg": [1.0, 2.0, 3.0]},
            "joints_deg[0]: expected 2 values for robot 'pb-planar2r' (j1, j2), got 3",
        ),
        (
            {"robot": "pb-planar2r", "joints_deg": [1.0, "2"]},
            "joints_deg[0][1]: Input should be a valid number",
        ),
        (
            {"robot": "pb-planar2r", "joints_deg": [1.0, 2e6]},
            "joints_deg[0][1]: Input should be less than or equal to 1000000",
        ),
        (
            {"robot": "pb-planar2r", "joints_deg": []},
            "joints_deg: Value should have at least 1 item after validation, not 0",
        ),
        (
            {"robot": "pb-planar2r", "joints_deg": [1.0, 2.0], "speed": 3},
            "speed: Extra inputs are not permitted",
        ),
        (
            {"joints_deg": [1.0, 2.0]},
            "robot: Field required",
        ),
        (
            {
                "robot": "pb-planar2r",
                "joints_deg": [1.0, 2.0],
                "tool": {"position_mm": [0, 0], "rpy_deg": [0, 0, 0]},
            },
            "tool.position_mm: List should have at least 3 items after validation, not 2",
        ),
    ],
)
async def test_compute_fk_invalid(client: httpx.AsyncClient, body: dict, detail: str) -> None:
    response = await client.post("/api/fk", json=body)
    assert response.status_code == 422
    assert response.json() == {"detail": detail}


async def test_compute_fk_non_finite(client: httpx.AsyncClient) -> None:
    # Python's JSON reader accepts NaN; the schema must refuse it
    content = b'{"robot": "pb-planar2r", "joints_deg": [NaN, 1.0]}'
    response = await client.post(
        "/api/fk", content=content, headers={"content-type": "application/json"}
    )
    assert response.status_code == 422
    assert response.json() == {"detail": "joints_deg[0][0]: Input should be a finite number"}


async def test_compute_fk_too_many_configurations(client: httpx.AsyncClient) -> None:
    body = {"robot": "pb-planar2r", "joints_deg": [[0.0, 0.0]] * (MAX_CONFIGURATIONS + 1)}
    response = await client.post("/api/fk", json=body)
    assert response.status_code == 422
    assert response.json() == {
        "detail": f"joints_deg: Value should have at most {MAX_CONFIGURATIONS} items after validation, "
        f"not {MAX_CONFIGURATIONS + 1}"
    }


async def test_compute_fk_unknown_robot(client: httpx.AsyncClient) -> None:
    response = await client.post("/api/fk", json={"robot": "pb-nothing", "joints_deg": [0.0]})
    assert response.status_code == 422
    assert response.json()["detail"].startswith("unknown robot 'pb-nothing'; bundled robots: ")


async def test_compute_ik_planar2r(client: httpx.AsyncClient) -> None:
    t1, t2 = 30.0, 70.0
    x, y = _planar_tip_mm(t1, t2)
    pose = {"position_mm": [x, y, 0.0], "rpy_deg": [0.0, 0.0, t1 + t2]}
    response = await client.post("/api/ik", json={"robot": "pb-planar2r", "pose": pose})
    assert response.status_code == 200
    body = response.json()
    # closed form (law of cosines): t2 = +-acos((x^2 + y^2 - l1^2 - l2^2) / (2 l1 l2)),
    # t1 = atan2(y, x) - atan2(l2 sin t2, l1 + l2 cos t2): two elbow branches strictly inside
    c2 = (x * x + y * y - L1_MM**2 - L2_MM**2) / (2 * L1_MM * L2_MM)
    expected = []
    for sign in (1.0, -1.0):
        e2 = sign * math.acos(c2)
        e1 = math.atan2(y, x) - math.atan2(L2_MM * math.sin(e2), L1_MM + L2_MM * math.cos(e2))
        expected.append([math.degrees(e1), math.degrees(e2)])
    if "yaw" not in body["ignored_components"]:
        # a controlled heading t1 + t2 = 100 deg keeps only the branch that has it
        expected = [
            q for q in expected if abs(math.remainder(q[0] + q[1] - (t1 + t2), 360.0)) < 1e-6
        ]
    found = sorted((s["joints_deg"] for s in body["solutions"]), key=lambda q: q[1])
    np.testing.assert_allclose(found, sorted(expected, key=lambda q: q[1]), atol=1e-6)
    # branch words as documented in kinematics/branches.py: "left" when the elbow lies left of
    # the line from the base to the tip seen from +z, i.e. cross(tip, elbow)_z > 0
    for solution in body["solutions"]:
        e1 = math.radians(solution["joints_deg"][0])
        elbow = (L1_MM * math.cos(e1), L1_MM * math.sin(e1))
        side = "left" if x * elbow[1] - y * elbow[0] > 0 else "right"
        assert solution["branch"] == side
        assert solution["branch_parts"] == {"elbow": side}  # the same word as a field
    assert body["reason"] == ""


async def test_compute_ik_arm6_solutions_reach_pose(client: httpx.AsyncClient) -> None:
    q_start = [20.0, 30.0, -40.0, 30.0, 50.0, -20.0]
    fk = await client.post("/api/fk", json={"robot": "pb-arm6", "joints_deg": q_start})
    assert fk.status_code == 200
    start = _pin_flange(q_start)
    tool = start.rotation @ np.array([0.0, 0.0, 0.12])  # robots/pb-arm6.toml default tool
    position = 1000.0 * (start.translation + tool)
    rpy = np.degrees(pin.rpy.matrixToRpy(start.rotation))
    pose = {"position_mm": position.tolist(), "rpy_deg": rpy.tolist()}
    response = await client.post("/api/ik", json={"robot": "pb-arm6", "pose": pose})
    assert response.status_code == 200
    body = response.json()
    assert body["solutions"], body["reason"]
    # every solution, run through pinocchio on the URDF twin, reaches the pose
    for solution in body["solutions"]:
        reached = _pin_flange(solution["joints_deg"])
        tip = 1000.0 * (reached.translation + reached.rotation @ np.array([0.0, 0.0, 0.12]))
        assert tip == pytest.approx(position, abs=1e-3)
        np.testing.assert_allclose(reached.rotation, start.rotation, atol=1e-6)
    # branch words as fields (our own contract, DEVELOPERS.md "Arm branches"): one word per
    # part, the sign's word (front/back, up/down, positive/negative), and the label text starts
    # with the same words
    words = {
        "shoulder": ("back", "front"),
        "elbow": ("down", "up"),
        "wrist": ("negative", "positive"),
    }
    for solution in body["solutions"]:
        parts = solution["branch_parts"]
        assert list(parts) == ["shoulder", "elbow", "wrist"]
        for part, (minus, plus) in words.items():
            if solution[part] != 0:
                assert parts[part] == (plus if solution[part] > 0 else minus)
        assert solution["branch"].startswith(", ".join(parts.values()))
    # the starting configuration is one of them (same branch, no revolution ambiguity within limits)
    assert any(np.allclose(s["joints_deg"], q_start, atol=1e-4) for s in body["solutions"])
    # smallest limit margin: per joint m = min(q - lower, upper - q) (common practice, no
    # source), the joint with the smallest m / (upper - lower) named; limits from the TOML file
    with (data_folder("robots") / "pb-arm6.toml").open("rb") as handle:
        joints = tomllib.load(handle)["joint"]
    lower = np.array([j["limits"]["min_deg"] for j in joints])
    upper = np.array([j["limits"]["max_deg"] for j in joints])
    for solution in body["solutions"]:
        q = np.array(solution["joints_deg"])
        margin = np.minimum(q - lower, upper - q)
        k = int(np.argmin(margin / (upper - lower)))
        assert solution["min_margin_deg"] == pytest.approx(margin[k], abs=1e-6)
        assert solution["min_margin_joint"] == joints[k]["name"]
        assert solution["min_margin_unit"] == "deg"


async def test_compute_ik_all_revolutions(client: httpx.AsyncClient) -> None:
    pose = {"position_mm": [900.0, 0.0, 800.0], "rpy_deg": [180.0, 0.0, 0.0]}
    body = {"robot": "pb-arm6", "pose": pose}
    nearest = (await client.post("/api/ik", json=body)).json()["solutions"]
    response = await client.post("/api/ik", json={**body, "all_revolutions": True})
    assert response.status_code == 200
    every = response.json()["solutions"]
    # j4 and j6 of pb-arm6.toml span more than one revolution: extra in-limit variants
    assert len(every) > len(nearest)
    assert all(s["revolutions"] == [0] * 6 for s in nearest if "rev" not in s["branch"])
    # our own contract: a solution's label names its extra revolutions ("j6 +1 rev")
    for solution in every:
        for k, count in enumerate(solution["revolutions"]):
            assert (f"j{k + 1} {count:+d} rev" in solution["branch"]) == (count != 0)


async def test_compute_ik_old_field_name_names_the_new_one(client: httpx.AsyncClient) -> None:
    pose = {"position_mm": [900.0, 0.0, 800.0], "rpy_deg": [180.0, 0.0, 0.0]}
    response = await client.post(
        "/api/ik", json={"robot": "pb-arm6", "pose": pose, "all_turns": True}
    )
    assert response.status_code == 422
    # our own contract: the 0.1.0 field name is refused with the new one named
    assert response.json() == {
        "detail": "request body: all_turns was renamed all_revolutions; send all_revolutions"
    }


async def test_compute_ik_out_of_reach(client: httpx.AsyncClient) -> None:
    pose = {"position_mm": [5000.0, 0.0, 0.0], "rpy_deg": [0.0, 0.0, 0.0]}
    response = await client.post("/api/ik", json={"robot": "pb-planar2r", "pose": pose})
    assert response.status_code == 200
    body = response.json()
    # 5000 mm is beyond l1 + l2 = 700 mm (closed form reach of a planar 2R arm)
    assert body["solutions"] == []
    assert body["reason"].startswith("out of reach")


async def test_compute_ik_invalid_seed(client: httpx.AsyncClient) -> None:
    pose = {"position_mm": [500.0, 0.0, 0.0], "rpy_deg": [0.0, 0.0, 0.0]}
    response = await client.post(
        "/api/ik", json={"robot": "pb-planar2r", "pose": pose, "seed_deg": [0.0]}
    )
    assert response.status_code == 422
    assert response.json() == {
        "detail": "seed_deg[0]: expected 2 values for robot 'pb-planar2r' (j1, j2), got 1"
    }


async def test_compute_ik_missing_pose(client: httpx.AsyncClient) -> None:
    response = await client.post("/api/ik", json={"robot": "pb-planar2r"})
    assert response.status_code == 422
    assert response.json() == {"detail": "pose: Field required"}


async def test_compute_fk_ik_placed_base(client: httpx.AsyncClient) -> None:
    q = [20.0, 30.0, -40.0, 30.0, 50.0, -20.0]
    base = {"position_mm": [100.0, 200.0, 400.0], "rpy_deg": [0.0, 0.0, 90.0]}
    local = await client.post("/api/fk", json={"robot": "pb-arm6", "joints_deg": q})
    placed = await client.post("/api/fk", json={"robot": "pb-arm6", "joints_deg": q, "base": base})
    assert local.status_code == placed.status_code == 200
    here = local.json()["configurations"][0]
    there = placed.json()["configurations"][0]
    # x_world = R_world_base x_base + p_world_base; R from scipy (fixed-axis xyz, degrees)
    R = Rotation.from_euler("xyz", base["rpy_deg"], degrees=True)
    assert there["position_mm"] == pytest.approx(
        R.apply(here["position_mm"]) + np.array(base["position_mm"]), abs=1e-9
    )
    np.testing.assert_allclose(
        there["frames_position_mm"],
        R.apply(here["frames_position_mm"]) + np.array(base["position_mm"]),
        atol=1e-9,
    )
    assert there["limit_margins_deg"] == here["limit_margins_deg"]
    pose = {"position_mm": there["position_mm"], "rpy_deg": there["rpy_deg"]}
    ik = await client.post("/api/ik", json={"robot": "pb-arm6", "pose": pose, "base": base})
    assert ik.status_code == 200
    # the world pose of q, solved with the same base, has q among its solutions
    assert any(np.allclose(s["joints_deg"], q, atol=1e-4) for s in ik.json()["solutions"])

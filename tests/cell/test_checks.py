"""The target check on the demo cell and on variants of it.

References: the demo notes' joint values (the targets were placed by forward kinematics
of them, checked in test_scene.py against pinocchio); python-fcl distances with
pinocchio placements (``fcl_cell``, conftest.py); an independent numerical IK search
(scipy.optimize.least_squares from many starts, pinocchio FK on robots/pb-arm6.urdf);
the documented score rule (a closed form over the reported fields); our own contract
for reasons and findings.
"""

from __future__ import annotations

import copy
import json
import re
from itertools import product
from typing import Any

import numpy as np
import pinocchio as pin
import pytest
from scipy.optimize import least_squares

from posebridge.cell.checks import REASON_ALL_COLLIDE, REASON_REQUIRED_BRANCH, check_targets
from posebridge.cell.model import validate_cell
from posebridge.cell.scene import resolve_scene
from posebridge.cell.thresholds import QualityThresholds
from posebridge.kinematics.ik.solutions import REASON_NO_WITHIN_LIMITS, REASON_OUT_OF_REACH
from posebridge.planning.path_check import check_path
from posebridge.planning.path_sampling import sample_path
from posebridge.resources import data_folder
from posebridge.results.cell import TargetCheckReport
from posebridge.results.cell_text import render_target_check
from posebridge.results.path_check import path_check_result
from posebridge.results.target_check import target_check_result

ROBOTS = data_folder("robots")
RAW = json.loads((ROBOTS / "demo-cell.json").read_text())
FCL_TOLERANCE_MM = 0.6  # python-fcl overestimates capsule distances by up to 0.5 mm


@pytest.fixture(scope="module")
def report(demo_scene) -> TargetCheckReport:
    return target_check_result(check_targets(demo_scene))


def target(report: TargetCheckReport, name: str):
    return next(t for t in report.targets if t.name == name)


def findings(report: TargetCheckReport, name: str | None, code: str) -> list[Any]:
    return [f for f in report.findings if f.target == name and f.code == code]


def branch_at(pose, joints_deg) -> Any:
    """The branch report whose joints equal ``joints_deg`` (deg) to 1e-3 deg (file rounding)."""
    found = [b for b in pose.branches if np.allclose(b.joints_deg, joints_deg, atol=1e-3)]
    assert len(found) == 1
    return found[0]


def variant(changes) -> Any:
    """A resolved copy of the demo cell after ``changes(data)`` edits its JSON data."""
    data = copy.deepcopy(RAW)
    changes(data)
    return resolve_scene(validate_cell(data))


def test_every_target_and_approach_pose_is_checked(report) -> None:
    assert [t.name for t in report.targets] == [t["name"] for t in RAW["targets"]]
    for check, raw in zip(report.targets, RAW["targets"], strict=True):
        # the cell file: an approach pose exactly where the offset is positive
        assert (check.approach is None) == (raw["approach_offset_mm"] == 0.0)
        assert check.approach_offset_mm == raw["approach_offset_mm"]
        assert check.target.kind == "target"
        # every IK branch is listed, the usable flag is the documented conjunction
        for branch in check.target.branches:
            assert branch.usable == (
                branch.within_limits and branch.collision_free and branch.matches_required_branch
            )
    assert report.reachable_count == sum(t.reachable for t in report.targets)
    severities = [f.severity for f in report.findings]
    assert severities == sorted(severities, key=["error", "warning", "info"].index)


def test_rack_high_1_is_branch_limited(report, documented_joints) -> None:
    check = target(report, "rack-high-1")
    inside = [b for b in check.target.branches if b.within_limits]
    # demo notes: within the joint limits only with the shoulder in front and the elbow up,
    # either wrist sign
    assert inside
    assert all((b.shoulder, b.elbow) == (1, 1) for b in inside)
    assert {b.wrist for b in inside} == {1, -1}
    (finding,) = findings(report, "rack-high-1", "branch-limited")
    assert finding.severity == "info"
    assert finding.message == (
        "within the joint limits only with the shoulder front and the elbow up "
        "(wrist: positive, negative)"
    )
    assert check.required_branch == "front, up"
    # the documented joint values are one of its branches
    assert branch_at(check.target, documented_joints["rack-high-1"]).within_limits


def test_gauge_probe_is_near_the_wrist_singularity(report, documented_joints) -> None:
    check = target(report, "gauge-probe")
    branch = branch_at(check.target, documented_joints["gauge-probe"])
    # demo notes: j5 = 3 deg; pb-arm6's wrist is straight at j5 = 0 (j4 and j6 both turn
    # about x in robots/pb-arm6.toml), so the wrist bend is 3 deg (closed form); the file
    # rounds target positions to 0.001 mm and angles to 0.0001 deg
    assert branch.singularity.kind == "wrist"
    assert branch.singularity.wrist_bend_deg == pytest.approx(3.0, abs=1e-3)
    warnings = [f for f in findings(report, "gauge-probe", "singularity") if f.pose == "target"]
    assert warnings
    assert all(f.severity == "warning" for f in warnings)
    assert warnings[0].value == pytest.approx(3.0, abs=1e-3)
    # threshold: wrist warning below 10 deg (common practice, no source)
    assert warnings[0].threshold == 10.0
    assert "near the wrist singularity" in warnings[0].message


@pytest.mark.parametrize("name", ["press-load", "press-unload"])
def test_press_targets_have_low_clearance(report, documented_joints, fcl_cell, name) -> None:
    distances = fcl_cell.obstacle_distances(np.radians(documented_joints[name]))
    pair, distance = min(distances.items(), key=lambda item: item[1])
    reference_mm = distance * 1000.0
    # python-fcl (reference library) at the documented joint values
    assert pair == ("gripper-body", "press-die")
    check = target(report, name)
    closest = branch_at(check.target, documented_joints[name]).closest_environment
    assert (closest.capsule, closest.other, closest.other_kind) == (
        "gripper-body",
        "press-die",
        "fixture",
    )
    assert reference_mm - FCL_TOLERANCE_MM <= closest.distance_mm <= reference_mm + 1e-6
    warnings = [f for f in findings(report, name, "clearance") if f.pose == "target"]
    assert any("gripper-body and press-die (fixture)" in f.message for f in warnings)
    found = next(f for f in warnings if "press-die" in f.message)
    assert found.value == pytest.approx(reference_mm, abs=FCL_TOLERANCE_MM)
    # threshold: clearance warning below 25 mm (common practice, no source)
    assert found.threshold == 25.0


def test_clearance_threshold_is_a_parameter(demo_scene) -> None:
    relaxed = target_check_result(check_targets(demo_scene, QualityThresholds(clearance_mm=15.0)))
    # python-fcl measures about 20 mm at press-load: above a 15 mm threshold, no warning
    assert not [f for f in findings(relaxed, "press-load", "clearance") if "press-die" in f.message]
    assert relaxed.thresholds.clearance_mm == 15.0


def test_required_branch_is_respected(report) -> None:
    check = target(report, "press-load")
    assert check.required_branch == "front, up, negative"
    for branch in check.target.branches:
        # our own contract: matches = every required part equal
        assert branch.matches_required_branch == (
            (branch.shoulder, branch.elbow, branch.wrist) == (1, 1, -1)
        )
    for pose in (check.target, check.approach):
        if pose.recommended is not None:
            chosen = pose.branches[pose.recommended]
            assert chosen.usable
            assert chosen.matches_required_branch


def test_recommended_branch_follows_the_documented_score(report) -> None:
    t = report.thresholds
    checked = 0
    for check in report.targets:
        for pose in (check.target, check.approach):
            if pose is None or pose.recommended is None:
                continue
            for branch in pose.branches:
                if not branch.usable:
                    assert branch.score is None
                    continue
                s = branch.singularity
                ratio = min(
                    s.wrist_bend_deg / t.wrist_deg,
                    s.elbow_deg / t.elbow_deg,
                    s.shoulder_mm / t.shoulder_mm,
                )
                # closed form of the documented score rule (report.score_rule)
                expected = (
                    min(max(branch.min_margin_fraction / t.score_margin_fraction, 0.0), 1.0)
                    + min(max(branch.clearance_mm / t.score_clearance_mm, 0.0), 1.0)
                    + min(max(ratio / t.score_singularity_ratio, 0.0), 1.0)
                ) / 3.0
                assert branch.score == pytest.approx(expected, abs=1e-9)
                checked += 1
            chosen = pose.branches[pose.recommended]
            assert chosen.usable
            if check.approach is None or pose is check.approach:
                continue
            # the target's pick is the best usable branch that its approach pose shares, on the
            # cell's common branch when it can be (module docstring of cell/checks.py)
            shared = {(b.shoulder, b.elbow, b.wrist) for b in check.approach.branches if b.usable}
            candidates = [
                b for b in pose.branches if b.usable and (b.shoulder, b.elbow, b.wrist) in shared
            ]
            common = [b for b in candidates if b.branch.startswith(report.consistent_branch.branch)]
            assert chosen.score == max(b.score for b in common or candidates)
    assert checked > 0


def _wrapped(values: np.ndarray) -> np.ndarray:
    return np.pi - np.mod(np.pi - values, 2.0 * np.pi)


def test_ik_branches_agree_with_an_independent_search(report, demo_scene, pin_tool) -> None:
    """Every in-limit solution of rack-low-1, found by least squares on pinocchio FK."""
    model, data, tool = pin_tool
    k = demo_scene.targets.index("rack-low-1")
    goal = np.linalg.inv(demo_scene.T_world_base) @ demo_scene.targets.T_world_target[k]

    def residual(q: np.ndarray) -> np.ndarray:
        pin.framesForwardKinematics(model, data, q)
        M = data.oMf[tool]
        return np.concatenate([M.translation - goal[:3, 3], pin.log3(goal[:3, :3].T @ M.rotation)])

    rng = np.random.default_rng(7)
    wrapped: list[np.ndarray] = []
    for _ in range(60):
        fit = least_squares(
            residual, rng.uniform(-np.pi, np.pi, 6), method="lm", xtol=1e-15, ftol=1e-15
        )
        if np.linalg.norm(fit.fun) < 1e-9:
            w = _wrapped(fit.x)
            if not any(np.abs(_wrapped(w - s)).max() < 1e-5 for s in wrapped):
                wrapped.append(w)
    # every whole-revolution variant inside the URDF's limits (closed form: q + 2 pi k)
    lower, upper = model.lowerPositionLimit, model.upperPositionLimit
    expected: list[np.ndarray] = []
    for w in wrapped:
        options = [
            [
                v + 2 * np.pi * m
                for m in (-1, 0, 1)
                if lower[j] - 1e-9 <= v + 2 * np.pi * m <= upper[j] + 1e-9
            ]
            for j, v in enumerate(w)
        ]
        for candidate in product(*options):
            if not any(np.abs(np.array(candidate) - e).max() < 1e-5 for e in expected):
                expected.append(np.array(candidate))
    ours = [
        np.radians(b.joints_deg)
        for b in target(report, "rack-low-1").target.branches
        if b.within_limits
    ]
    assert len(ours) == len(expected)
    for candidate in expected:
        assert any(np.abs(candidate - q).max() < 1e-5 for q in ours)


def test_reasons_in_their_documented_order() -> None:
    far = variant(
        lambda d: d["targets"].append(
            {"name": "far-away", "position_mm": [5000.0, 0.0, 1000.0], "rpy_deg": [180.0, 0.0, 0.0]}
        )
    )
    check = target(target_check_result(check_targets(far)), "far-away")
    # closed form: 5 m from the base is beyond pb-arm6's reach (links and tool sum to 1.8 m)
    assert check.target.reason == REASON_OUT_OF_REACH
    assert not check.reachable

    def back_only(d: dict) -> None:
        d["targets"][2]["branch"] = {"shoulder": "back"}

    check = target(target_check_result(check_targets(variant(back_only))), "rack-high-1")
    # demo notes: rack-high-1 is within limits only with the shoulder in front
    assert check.target.reason == REASON_REQUIRED_BRANCH
    message = next(
        f.message
        for f in target_check_result(check_targets(variant(back_only))).findings
        if f.target == "rack-high-1"
    )
    assert message.startswith("target not reachable: required branch unavailable: required back;")

    def boxed(d: dict) -> None:
        d["keep_outs"].append(
            {"name": "cage", "position_mm": [100.0, 850.0, 450.0], "size_mm": [700.0, 700.0, 400.0]}
        )

    check = target(target_check_result(check_targets(variant(boxed))), "rack-low-1")
    # closed form: the cage contains the rack-low-1 TCP (world about (100, 850, 455) mm)
    assert check.target.reason == REASON_ALL_COLLIDE
    assert not any(b.collision_free for b in check.target.branches if b.within_limits)


def test_outside_limits_on_every_branch() -> None:
    text = (ROBOTS / "pb-arm6.toml").read_text()
    # j1 limited to +-10 deg: the rack targets need j1 near 83 deg (front) or -97 deg (back)
    tight = re.sub(r"min_deg = -167, max_deg = 167", "min_deg = -10, max_deg = 10", text)
    assert tight != text

    def robot_tight(d: dict) -> None:
        d["robot"] = {"toml": tight}

    check = target(target_check_result(check_targets(variant(robot_tight))), "rack-low-1")
    assert check.target.reason == REASON_NO_WITHIN_LIMITS
    assert not any(b.within_limits for b in check.target.branches)


def keep_targets(names: list[str], branches: dict[str, dict] | None = None):
    def change(d: dict) -> None:
        d["targets"] = [t for t in d["targets"] if t["name"] in names]
        for t in d["targets"]:
            t.pop("branch", None)
            if branches and t["name"] in branches:
                t["branch"] = branches[t["name"]]
        d["paths"] = []

    return change


def test_consistent_branch_found() -> None:
    report = target_check_result(
        check_targets(variant(keep_targets(["rack-low-1", "rack-low-2", "gauge-probe"])))
    )
    coverage = report.consistent_branch
    assert coverage.consistent
    assert coverage.breaking_targets == []
    best = coverage.coverage[0]
    for check in report.targets:
        # the consistent branch holds a usable solution of every target and approach pose
        for pose in (check.target, check.approach):
            assert any(
                b.usable
                and (b.shoulder, b.elbow, b.wrist) == (best.shoulder, best.elbow, best.wrist)
                for b in pose.branches
            )
    (info,) = findings(report, None, "consistent-branch")
    assert coverage.branch in info.message


def test_inconsistent_branch_names_the_breaking_target() -> None:
    opposite = {"rack-low-1": {"wrist": "positive"}, "rack-low-2": {"wrist": "negative"}}
    report = target_check_result(
        check_targets(variant(keep_targets(["rack-low-1", "rack-low-2"], opposite)))
    )
    coverage = report.consistent_branch
    # our own contract: opposite required wrist signs cannot share one branch
    assert not coverage.consistent
    assert len(coverage.breaking_targets) == 1
    for row in coverage.coverage:
        assert sorted(row.targets_clear + row.targets_breaking) == ["rack-low-1", "rack-low-2"]
    (warning,) = findings(report, None, "inconsistent-branch")
    assert warning.severity == "warning"
    assert coverage.breaking_targets[0] in warning.message


def test_report_round_trips_and_renders(report) -> None:
    assert TargetCheckReport.model_validate_json(report.model_dump_json()) == report
    text = render_target_check(report)
    for check in report.targets:
        assert check.name in text
    assert f"{report.error_count} errors" in text
    assert all(line == line.rstrip() for line in text.splitlines())


def _move_reject_bin(x_mm: float, y_mm: float):
    def change(d: dict) -> None:
        (bin_,) = [f for f in d["fixtures"] if f["name"] == "reject-bin"]
        bin_["position_mm"] = [x_mm, y_mm, bin_["position_mm"][2]]

    return change


def test_demo_reject_drop_breaks_the_common_branch_until_the_bin_moves(report) -> None:
    (bin_,) = [f for f in RAW["fixtures"] if f["name"] == "reject-bin"]
    (drop,) = [t for t in RAW["targets"] if t["name"] == "reject-drop"]
    # closed form: azimuth of the target about joint 1 (base at the world origin, no rotation,
    # read from the cell file); on the front shoulder joint 1 must turn to it, and pb-arm6.toml
    # limits j1 to +-167 deg
    x = bin_["position_mm"][0] + drop["position_mm"][0]
    y = bin_["position_mm"][1] + drop["position_mm"][1]
    assert abs(np.degrees(np.arctan2(y, x))) > 167.0
    coverage = report.consistent_branch
    assert not coverage.consistent
    assert coverage.breaking_targets == ["reject-drop"]
    (check,) = [t for t in report.targets if t.name == "reject-drop"]
    assert check.usable_branches
    assert all(b.startswith("back") for b in check.usable_branches)

    # the fix the cell notes suggest: the bin round to the side (azimuth 128 deg, inside +-167)
    fixed = target_check_result(check_targets(variant(_move_reject_bin(-550.0, 700.0))))
    assert fixed.consistent_branch.consistent
    assert fixed.consistent_branch.breaking_targets == []


def test_per_target_work_is_batched(monkeypatch: pytest.MonkeyPatch) -> None:
    # a 2,000-target check took minutes: per target, every solution's branch labels were
    # matched again and the limit test re-run over all solutions. Our own contract now:
    # branch masks once per distinct branch (at most 3**3 sign triples), the same report.
    def copies(data: dict[str, Any]) -> None:
        data["targets"] = [
            dict(t, name=f"{t['name']}-{k}") for k in range(12) for t in RAW["targets"]
        ]
        data["paths"] = []

    scene = variant(copies)
    from posebridge.cell import checks

    calls = []
    real = checks.labels_match

    def counted(labels: Any, triple: Any) -> Any:
        calls.append(tuple(triple))
        return real(labels, triple)

    monkeypatch.setattr(checks, "labels_match", counted)
    report = target_check_result(check_targets(scene))
    assert len(calls) == len(set(calls)) <= 27
    single = target_check_result(check_targets(variant(lambda data: data.update(paths=[]))))
    # the same answer per target as the check of the cell with one copy of each target
    for k, check in enumerate(report.targets[: len(RAW["targets"])]):
        assert check.reachable == single.targets[k].reachable
        assert check.usable_branches == single.targets[k].usable_branches


def test_cell_thresholds_are_used_by_the_target_check() -> None:
    relaxed = variant(lambda data: data.update(thresholds={"clearance_mm": 15.0}))
    report = target_check_result(check_targets(relaxed))
    # python-fcl measures about 20 mm at press-load: above the cell's 15 mm, no warning
    assert not [f for f in findings(report, "press-load", "clearance") if "press-die" in f.message]
    # our own contract: the report states the set it used
    assert report.thresholds.clearance_mm == 15.0


def test_path_check_warns_where_the_target_check_warns(report, demo_scene, fcl_cell) -> None:
    index = [p.name for p in demo_scene.paths].index("load-press")
    path = path_check_result(check_path(demo_scene, index))
    # the cell file: waypoint 1 of load-press is the press-load target, reached by a linear move
    q = sample_path(demo_scene, index).waypoint_q[1]
    distances = fcl_cell.obstacle_distances(q)
    reference_mm = 1000.0 * min(distances.values())
    # python-fcl (reference library): about 20 mm, below the 25 mm default threshold
    # (common practice, no source) and above the 20 mm the path check used before
    assert 20.0 < reference_mm < 25.0
    near = [
        f
        for f in path.findings
        if f.kind == "low_clearance" and f.obstacle == "press-die" and f.fraction_end == 1.0
    ]
    assert near
    assert near[0].severity == "warning"
    assert near[0].segment_index == 0
    # the stretch ends at the target; its worst point is no farther than the target itself
    assert near[0].distance_mm is not None
    assert near[0].distance_mm <= reference_mm + FCL_TOLERANCE_MM
    # the target check warns at the same point with the same threshold
    assert findings(report, "press-load", "clearance")
    assert path.thresholds == report.thresholds
    assert path.clearance_warning_mm == report.thresholds.clearance_mm


def test_environment_and_self_clearance_are_reported_apart(report, demo_scene, fcl_cell) -> None:
    check = target(report, "press-load")
    best = check.target.branches[check.target.recommended]
    # our own contract: each figure is its own pair's distance, the overall one their minimum
    assert best.environment_clearance_mm == best.closest_environment.distance_mm
    assert best.self_clearance_mm == best.closest_self.distance_mm
    assert best.clearance_mm == min(best.environment_clearance_mm, best.self_clearance_mm)
    text = render_target_check(report)
    row = next(line for line in text.splitlines() if line.startswith("press-load "))
    assert "press-die" in row
    assert best.closest_self.other in row
    index = [p.name for p in demo_scene.paths].index("load-press")
    path = path_check_result(check_path(demo_scene, index))
    sampled = sample_path(demo_scene, index)
    reached = np.concatenate([s.q[s.reachable] for s in sampled.segments])
    reference = min(min(fcl_cell.obstacle_distances(q).values()) for q in reached)
    # python-fcl (reference library) on the same samples: the smallest clearance to the cell
    assert path.environment_clearance_mm == pytest.approx(reference * 1000.0, abs=FCL_TOLERANCE_MM)
    assert path.closest_environment is not None
    assert "press-die" in path.closest_environment
    assert path.self_clearance_mm is not None
    assert path.closest_self is not None
    assert path.min_clearance_mm == min(path.environment_clearance_mm, path.self_clearance_mm)


def test_repeated_findings_are_grouped_by_cause(report) -> None:
    pair = "gripper-body – press-die"
    members = [f for f in report.findings if f.code == "clearance" and f.cause == pair]
    # the demo notes: press-load and press-unload both sit about 20 mm above the press die
    assert {f.target for f in members} >= {"press-load", "press-unload"}
    (group,) = [g for g in report.finding_groups if g.code == "clearance" and g.cause == pair]
    # our own contract: the group counts its members and keeps the one with the smallest value
    assert group.count == len(members) >= 2
    assert group.worst.value == min(f.value for f in members)
    text = render_target_check(report)
    assert f"{group.count} x clearance {pair}; worst" in text
    assert text.count(f"x clearance {pair}") == 1


def test_recommended_and_common_branch_never_contradict(report) -> None:
    common = report.consistent_branch.branch
    assert common is not None
    for check in report.targets:
        recommended = check.target.recommended_branch
        if recommended is None:
            continue
        # our own contract: a target usable on the common branch is recommended on it
        if common in check.usable_branches:
            assert recommended.startswith(common)
            assert check.target.recommended_reason.endswith(
                f"same branch as {len(report.consistent_branch.coverage[0].targets_clear)} "
                f"of {len(report.targets)} targets"
            )
        else:
            assert not recommended.startswith(common)
            assert check.target.recommended_reason.endswith(
                "the cell's common branch is not usable here"
            )


def test_recommended_branch_says_why(report) -> None:
    for check in report.targets:
        for pose in (check.target, check.approach):
            if pose is not None:
                assert bool(pose.recommended_reason) == (pose.recommended is not None)
    # press-load: the required branch front, up, negative leaves one usable branch (counted here)
    press = target(report, "press-load").target
    usable = {(b.shoulder, b.elbow, b.wrist) for b in press.branches if b.usable}
    assert usable == {(1, 1, -1)}
    assert press.recommended_reason.startswith("the only usable branch")
    # reject-drop: off the common branch, chosen over the other back branch by a score term
    drop = target(report, "reject-drop").target
    chosen = drop.branches[drop.recommended]
    runner = max(
        (b for b in drop.branches if b.usable and b.wrist != chosen.wrist), key=lambda b: b.score
    )
    gains = {
        # the score terms of the documented rule (report.score_rule), closed form
        "largest smallest limit margin": min(chosen.min_margin_fraction / 0.1, 1.0)
        - min(runner.min_margin_fraction / 0.1, 1.0),
        "largest clearance": min(chosen.clearance_mm / 100.0, 1.0)
        - min(runner.clearance_mm / 100.0, 1.0),
    }
    deciding = max(gains, key=lambda k: gains[k])
    assert drop.recommended_reason.startswith(deciding)
    if deciding == "largest smallest limit margin":
        assert f"{chosen.min_margin:.1f}° on {chosen.min_margin_joint}" in drop.recommended_reason


def test_a_target_moved_off_its_fixture_is_flagged(report) -> None:
    # the demo's targets sit on their fixtures: reject-drop is the farthest, 149.06 mm above
    # the bin (target z 449.06 mm in the bin frame, bin half height 300 mm: closed form)
    assert target(report, "reject-drop").fixture_distance_mm == pytest.approx(149.06, abs=1e-6)
    assert not [f for f in report.findings if f.code == "off-fixture"]

    def drag(d: dict) -> None:
        (drop,) = [t for t in d["targets"] if t["name"] == "reject-drop"]
        drop["position_mm"][0] += 400.0

    moved = target_check_result(check_targets(variant(drag)))
    (drop,) = [t for t in RAW["targets"] if t["name"] == "reject-drop"]
    x, y, z = drop["position_mm"]
    # closed form: point to solid cylinder (radius 220 mm, half height 300 mm, bin frame)
    expected = np.hypot(np.hypot(x + 400.0, y) - 220.0, z - 300.0)
    check = target(moved, "reject-drop")
    assert check.fixture_distance_mm == pytest.approx(expected, abs=1e-6)
    (finding,) = findings(moved, "reject-drop", "off-fixture")
    assert finding.severity == "warning"
    assert finding.value == pytest.approx(expected, abs=1e-6)
    # threshold: QualityThresholds.fixture_distance_mm (common practice, no source)
    assert finding.threshold == 200.0
    assert "reject-bin" in finding.message
    relaxed = target_check_result(
        check_targets(variant(drag), QualityThresholds(fixture_distance_mm=300.0))
    )
    assert not findings(relaxed, "reject-drop", "off-fixture")

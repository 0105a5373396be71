"""Direct checks of cell/quality.py helpers that do not need a cell."""

from __future__ import annotations

import math

import numpy as np

from posebridge.cell.quality import (
    evaluate_configurations,
    full_branch_words,
    margin_thresholds,
    revolution_counts,
    singularity_thresholds,
)
from posebridge.cell.thresholds import QualityThresholds
from posebridge.robot.library import load_robot


def test_revolution_counts_follow_the_ik_rule() -> None:
    robot = load_robot("pb-arm6")
    q = np.zeros((3, robot.dof))
    q[0, 5] = np.radians(300.0)  # j6 range -355..355 deg (read from pb-arm6.toml)
    q[1, 5] = np.radians(-300.0)
    q[2, 5] = np.radians(170.0)
    q[:, 2] = np.radians(-190.0)  # j3 range -197..76 deg: less than a revolution
    counts = revolution_counts(robot, q)
    # documented rule, closed form: floor((q - centre) / 360 + 1/2) with j6's centre 0 deg:
    # 300 deg -> 1, -300 deg -> -1, 170 deg -> 0
    assert counts[:, 5].tolist() == [1, -1, 0]
    # j3's centre is -60.5 deg: floor((-190 + 60.5) / 360 + 1/2) = 0; a joint whose range is
    # within one revolution never reports one (the IK result counts the same way)
    assert counts[:, 2].tolist() == [0, 0, 0]


def test_half_revolution_twins_get_different_branch_words(demo_scene) -> None:
    robot = demo_scene.robot
    q = np.zeros((2, robot.dof))
    q[:, 2] = np.radians(30.0)  # elbow bent, away from the elbow singularity
    q[:, 4] = np.radians(30.0)  # wrist bent, away from the wrist singularity
    q[0, 5] = np.pi  # j6 range -355..355 deg, centre 0 (pb-arm6.toml): +180 and -180 deg
    q[1, 5] = -np.pi
    quality = evaluate_configurations(demo_scene, q)
    counts = revolution_counts(robot, q)
    # closed form of the rule: +-180 deg from the centre is no extra revolution either way
    assert counts[:, 5].tolist() == [0, 0]
    upper = full_branch_words(quality, 0, counts[0])
    lower = full_branch_words(quality, 1, counts[1])
    # our own contract: the twin half a revolution above the centre is named, the other not
    assert upper.endswith(", j6 +half rev")
    assert upper.removesuffix(", j6 +half rev") == lower
    assert "rev" not in lower


def test_thresholds_enter_the_checks_in_si_units() -> None:
    t = QualityThresholds(
        clearance_mm=25.0,
        score_clearance_mm=100.0,
        wrist_deg=10.0,
        elbow_deg=5.0,
        shoulder_mm=50.0,
        limit_margin_deg=5.0,
        limit_margin_mm=10.0,
    )
    # closed form: 1 mm = 1e-3 m, 1 deg = pi/180 rad (SI)
    assert t.clearance_m == 0.025
    assert t.score_clearance_m == 0.1
    assert t.shoulder_m == 0.05
    assert math.isclose(t.wrist_rad, math.pi / 18, rel_tol=1e-15)
    assert math.isclose(t.elbow_rad, math.pi / 36, rel_tol=1e-15)
    np.testing.assert_allclose(
        t.limit_margin(np.array([False, True, False])), [math.pi / 36, 0.01, math.pi / 36]
    )
    singular = singularity_thresholds(t)
    assert (singular.wrist_rad, singular.elbow_rad, singular.shoulder_m) == (
        t.wrist_rad,
        t.elbow_rad,
        t.shoulder_m,
    )
    gantry = load_robot("pb-gantry3")
    # our own contract: margin_thresholds is the thresholds' per-joint value for the robot
    np.testing.assert_array_equal(margin_thresholds(gantry, t), t.limit_margin(gantry.prismatic))

"""Direct checks of cell/quality.py helpers that do not need a cell."""

from __future__ import annotations

import numpy as np

from posebridge.cell.quality import evaluate_configurations, full_branch_words, revolution_counts
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

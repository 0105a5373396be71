"""Direct checks of cell/quality.py helpers that do not need a cell."""

from __future__ import annotations

import numpy as np

from posebridge.cell.quality import revolution_counts
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

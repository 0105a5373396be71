"""Direct checks of path sampling's building blocks: quaternion interpolation and the
required-branch labels."""

from __future__ import annotations

import numpy as np
from scipy.spatial.transform import Rotation, Slerp

from posebridge.cell.model import Branch
from posebridge.planning.path_sampling import branch_requirement, slerp


def test_slerp_matches_scipy() -> None:
    rng = np.random.default_rng(3)
    t = np.linspace(0.0, 1.0, 11)
    for _ in range(20):
        a, b = Rotation.random(2, random_state=rng).as_quat()  # scipy order x, y, z, w
        ours = slerp(np.roll(a, 1), np.roll(b, 1), t)  # ours: w, x, y, z
        # reference library run here: scipy.spatial.transform.Slerp (shorter arc)
        expected = Slerp([0.0, 1.0], Rotation.from_quat([a, b]))(t)
        angle = (Rotation.from_quat(np.roll(ours, -1, axis=1)) * expected.inv()).magnitude()
        assert np.all(angle < 1e-9)


def test_slerp_takes_the_shorter_arc() -> None:
    q = np.array([1.0, 0.0, 0.0, 0.0])
    half_turn_z = np.array([np.cos(np.pi / 4), 0.0, 0.0, np.sin(np.pi / 4)])  # 90 deg about z
    # closed form: the midpoint of 0 and 90 deg about z is 45 deg about z, also when the
    # second quaternion is given with the opposite sign (same rotation)
    expected = np.array([np.cos(np.pi / 8), 0.0, 0.0, np.sin(np.pi / 8)])
    assert np.allclose(slerp(q, half_turn_z, [0.5])[0], expected)
    assert np.allclose(slerp(q, -half_turn_z, [0.5])[0], expected)


def test_branch_requirement_uses_the_branch_words() -> None:
    # words as defined in kinematics/branches.py: front/up/positive +1, back/down/negative -1
    assert branch_requirement(None).tolist() == [0, 0, 0]
    assert branch_requirement(Branch(shoulder="back", wrist="positive")).tolist() == [-1, 0, 1]
    assert branch_requirement(Branch(elbow="down")).tolist() == [0, -1, 0]
    assert branch_requirement(Branch(shoulder="front", elbow="up", wrist="negative")).tolist() == [
        1,
        1,
        -1,
    ]

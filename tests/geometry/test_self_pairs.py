"""Self-collision pair selection: non-adjacent links, minus pairs touching in every sample.

References: counting closed forms; a triangle-inequality argument for a pair
that always overlaps; the independent segment-segment enumeration of the
``reference`` fixture (conftest.py) on the same samples.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest

from posebridge.geometry.clearance import capsule_segments_world
from posebridge.geometry.self_pairs import non_adjacent_pairs, self_collision_pairs
from posebridge.geometry.shapes import ArmCapsules
from posebridge.robot.model import Capsule


def test_non_adjacent_pairs_of_six_axis_arm(robot) -> None:
    """pb-arm6: one capsule on each of links 0..6, so C(7, 2) - 6 adjacent = 15 pairs
    (closed form); a tool capsule on link 6 adds one pair with each of links 0..4 (5)."""
    model = robot("pb-arm6")
    pairs = non_adjacent_pairs(ArmCapsules.from_robot(model))
    assert len(pairs) == 15  # closed form (docstring)
    links = ArmCapsules.from_robot(model).link
    assert np.all(np.abs(links[pairs[:, 0]] - links[pairs[:, 1]]) > 1)
    tool = Capsule("pointer", 6, np.zeros(3), np.array([0.0, 0.0, 0.1]), 0.02)
    assert len(non_adjacent_pairs(ArmCapsules.from_robot(model, [tool]))) == 20  # 15 + 5


def test_pair_in_contact_everywhere_is_left_out(robot, reference) -> None:
    """A tool sphere of radius 0.3 m at the flange origin always overlaps the forearm capsule.

    Triangle inequality (robots/pb-arm6.toml): the flange origin is 0.087 m from the wrist
    centre, which is 0.14 m beyond the forearm segment's end (0.359 vs 0.219 m along link
    4's x axis), so the axis distance is at most 0.227 m < 0.3 + 0.058 m of radii.
    Every other non-adjacent pair is kept exactly when it is apart in some
    sample (reference segment-segment enumeration on the same seeded samples).
    """
    model = robot("pb-arm6")
    arm = ArmCapsules.from_robot(model, [Capsule("ball", 6, np.zeros(3), np.zeros(3), 0.3)])
    kept = {tuple(pair) for pair in self_collision_pairs(arm, samples=300, seed=7)}
    ball = arm.names.index("ball")
    forearm = arm.names.index("forearm")
    assert (forearm, ball) not in kept  # triangle inequality (docstring)
    q = np.random.default_rng(7).uniform(model.lower, model.upper, (300, model.dof))
    segments = capsule_segments_world(arm, q, np.eye(4))
    for i, j in non_adjacent_pairs(arm):
        axis = reference.segment_segment_distance(
            segments[:, i, 0], segments[:, i, 1], segments[:, j, 0], segments[:, j, 1]
        )
        apart_somewhere = np.any(axis - arm.radius[i] - arm.radius[j] >= 0.0)
        assert ((i, j) in kept) == apart_somewhere  # reference enumeration


def test_pairs_are_reproducible_and_checked(robot) -> None:
    arm = ArmCapsules.from_robot(robot("pb-arm6"))
    first = self_collision_pairs(arm, samples=50, seed=3)
    np.testing.assert_array_equal(first, self_collision_pairs(arm, samples=50, seed=3))
    with pytest.raises(ValueError, match="samples: expected at least 1, got 0"):
        self_collision_pairs(arm, samples=0)


def test_pair_at_a_fixed_distance_is_left_out(robot) -> None:
    """pb-planar2r turns about two parallel z axes 400 mm apart. A sphere on the base at the
    first axis and a sphere on link 2 at the elbow axis stay 400 mm apart whatever the joints
    do (closed form: joint 1 turns both about the first axis, joint 2 turns the elbow sphere
    about its own centre), so their pair is left out; a sphere 300 mm out on link 2 is
    between 100 and 700 mm from the base sphere (closed form, law of cosines), so its pair
    stays in."""
    extra = [
        Capsule("base-ball", 0, np.zeros(3), np.zeros(3), 0.05),
        Capsule("elbow-ball", 2, np.zeros(3), np.zeros(3), 0.05),
        Capsule("tip-ball", 2, np.array([0.3, 0.0, 0.0]), np.array([0.3, 0.0, 0.0]), 0.05),
    ]
    model = robot("pb-planar2r")
    arm = ArmCapsules.from_robot(replace(model, capsules=tuple(model.capsules) + tuple(extra)))
    kept = {(arm.names[i], arm.names[j]) for i, j in self_collision_pairs(arm, samples=200)}
    assert ("base-ball", "elbow-ball") not in kept  # closed form (docstring)
    assert ("base-ball", "tip-ball") in kept  # closed form (docstring)

"""Which capsule pairs of an arm are checked against each other for self-collision.

Three rules, all common practice (no source):

1. Only capsules on non-adjacent links are candidates: capsules on the same
   link or on links joined by one joint (link indices differing by at most 1)
   touch by design at the joint.
2. Allowed contacts: a candidate pair whose capsules overlap (signed distance
   below ``contact_tolerance_m``) in *every* one of ``samples`` random
   in-limit configurations is taken to touch by design (for example two
   capsules around a compact wrist) and is left out. A pair that is apart in
   even one sampled configuration stays in.
3. Fixed distances: a candidate pair whose signed distance is the same (within
   ``constant_tolerance_m``) in every sampled configuration cannot be changed
   by any joint motion (say the base and a capsule centred on the shoulder
   axis, turning about the base's own axis) and is left out: it would
   otherwise be reported as the arm's smallest self-clearance in every pose,
   hiding the clearances that motion changes.

The samples are drawn uniformly in the joint-range box with a seeded
generator, so the list is reproducible.
"""

from __future__ import annotations

import numpy as np

from posebridge.geometry.clearance import capsule_segments_world
from posebridge.geometry.distance import closest_points_segment_segment
from posebridge.geometry.shapes import ArmCapsules, IntArray

__all__ = ["non_adjacent_pairs", "self_collision_pairs"]


def non_adjacent_pairs(arm: ArmCapsules) -> IntArray:
    """Capsule index pairs ``(i, j)``, ``i < j``, whose links differ by more than one joint.

    Parameters
    ----------
    arm : ArmCapsules

    Returns
    -------
    pairs : array of int64, shape (P, 2)
    """
    i, j = np.triu_indices(arm.count, k=1)
    keep = np.abs(arm.link[i] - arm.link[j]) > 1
    return np.stack([i[keep], j[keep]], axis=1).astype(np.int64)


def self_collision_pairs(
    arm: ArmCapsules,
    *,
    samples: int = 1000,
    seed: int = 0,
    contact_tolerance_m: float = 0.0,
    constant_tolerance_m: float = 1e-6,
) -> IntArray:
    """Return the capsule pairs to check for self-collision.

    Non-adjacent capsule pairs minus the pairs in contact at every sampled configuration and the
    pairs whose distance no joint motion changes (module docstring).

    Parameters
    ----------
    arm : ArmCapsules
    samples : int, keyword-only
        Random in-limit configurations used to find allowed contacts (>= 1).
    seed : int, keyword-only
        Seed of the sampler (``numpy.random.default_rng``).
    contact_tolerance_m : float, keyword-only
        Signed distance below which two capsules count as in contact, m.
    constant_tolerance_m : float, keyword-only
        Largest spread of a pair's sampled distances that counts as fixed, m.

    Returns
    -------
    pairs : array of int64, shape (P, 2)
        Pairs to check, ``i < j``, in row-major order.
    """
    if samples < 1:
        raise ValueError(f"samples: expected at least 1, got {samples}")
    candidates = non_adjacent_pairs(arm)
    if candidates.shape[0] == 0:
        return candidates
    robot = arm.robot
    rng = np.random.default_rng(seed)
    q = rng.uniform(robot.lower, robot.upper, size=(samples, robot.dof))
    segments = capsule_segments_world(arm, q, np.eye(4))
    first = segments[:, candidates[:, 0]].reshape(-1, 2, 3)
    second = segments[:, candidates[:, 1]].reshape(-1, 2, 3)
    distance, _ = closest_points_segment_segment(
        first[:, 0], first[:, 1], second[:, 0], second[:, 1]
    )
    signed = distance.reshape(samples, -1) - arm.radius[candidates].sum(axis=1)
    always_in_contact = np.all(signed < contact_tolerance_m, axis=0)
    fixed = np.ptp(signed, axis=0) <= constant_tolerance_m
    return candidates[~(always_in_contact | fixed)]

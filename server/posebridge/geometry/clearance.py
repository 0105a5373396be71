"""Batched clearance between an arm's capsules, the cell's obstacles and the arm itself.

For each joint configuration one fused numba kernel computes the link frames
(the chain product of :mod:`posebridge.kinematics.fk` with its
:func:`~posebridge.kinematics.chain_kernels.chain_step`, starting from
``T_world_base``), moves every capsule into the world, and takes the exact
minimum signed distance over the capsule-obstacle pairs allowed by
``pair_mask`` and the capsule-capsule ``self_pairs``
(:mod:`posebridge.geometry.self_pairs` chooses those). The narrow phase is
:mod:`posebridge.geometry.distance`.

Broad phase (the minimum stays exact; a pair is only skipped when a lower
bound of its distance is not below the best distance found so far):

1. sphere-sphere: every capsule has a bounding sphere (segment midpoint, half
   length plus radius), every box or cylinder one about its frame origin;
   ``|c_1 - c_2| - R_1 - R_2`` (for the floor ``c_z - h - R``). The pair with
   the smallest bound is evaluated first, then the pairs whose bound is below
   its distance in increasing order of bound, stopping at the first bound not
   below the best distance.
2. box-box: in the obstacle frame, the gap between the segment's axis-aligned
   bounding box and the obstacle's (the cylinder's enclosing box), when
   positive, minus the capsule radius.

Batches below :data:`posebridge.kinematics.fk.PARALLEL_THRESHOLD` run on one
thread (thread start-up dominates there); larger ones in chunks of
:data:`_CHUNK` configurations on all numba threads.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import cached_property

import numba as nb
import numpy as np
import numpy.typing as npt

from posebridge.geometry.distance import _capsule_capsule, _capsule_obstacle, _obstacle_record
from posebridge.geometry.mesh_bvh import _capsule_mesh
from posebridge.geometry.shapes import (
    FLOOR,
    MESH,
    ArmCapsules,
    GeometryInputError,
    IntArray,
    ObstacleSet,
    default_pair_mask,
)
from posebridge.kinematics.chain_kernels import chain_step
from posebridge.kinematics.fk import PARALLEL_THRESHOLD, check_configurations, fk_frames
from posebridge.transforms import TransformError, check_transform
from posebridge.units import BoolArray, FloatArray

__all__ = [
    "ClearanceResult",
    "ClearanceScene",
    "ObstacleClearanceResult",
    "capsule_segments_world",
    "clearance_batch",
    "clearance_per_obstacle_batch",
    "collision_batch",
]

_CHUNK = 256
"""Configurations per parallel work item (each item allocates its scratch once)."""


@dataclass(frozen=True)
class ClearanceResult:
    """Minimum clearance per configuration.

    Attributes
    ----------
    distance : array, shape (N,)
        Minimum signed distance, m (negative: penetration depth);
        ``inf`` when there is no pair to check.
    capsule : array of int64, shape (N,)
        Capsule index of the closest pair (``-1`` when there is none).
    other : array of int64, shape (N,)
        Obstacle index, or the second capsule index when ``is_self``.
    is_self : array of bool, shape (N,)
        The closest pair is a capsule-capsule (self) pair.
    witness : array, shape (N, 2, 3)
        Closest points in the world, ``capsule``'s then the other shape's,
        ``|witness[:, 0] - witness[:, 1]| = |distance|`` (on the surfaces
        unless in penetration, see :mod:`posebridge.geometry.distance`; NaN
        when there is no pair).
    """

    distance: FloatArray
    capsule: IntArray
    other: IntArray
    is_self: BoolArray
    witness: FloatArray


@dataclass(frozen=True)
class ObstacleClearanceResult:
    """Clearance to each obstacle and to the arm itself, per configuration.

    Attributes
    ----------
    distance : array, shape (N, k)
        Minimum signed distance of the arm to each obstacle, m (``inf`` where
        ``pair_mask`` excludes every capsule from that obstacle).
    in_collision : array of bool, shape (N, k)
        ``distance < threshold_m``.
    self_distance : array, shape (N,)
        Minimum signed distance over the self pairs, m (``inf`` with none).
    self_collision : array of bool, shape (N,)
        ``self_distance < threshold_m``.
    """

    distance: FloatArray
    in_collision: BoolArray
    self_distance: FloatArray
    self_collision: BoolArray


# --- kernels ------------------------------------------------------------------------------
#
# The drivers unpack the input tuples once per chunk and the per-configuration
# code passes plain arrays or values: array references bound inside the hot
# loops would each cost an atomic reference count update.


@nb.njit(cache=True, inline="always")
def _place(R, p, lo, hi, order, start, end, centre, A, B, C):
    """World end points ``A``, ``B`` and sphere centres ``C`` of capsules ``order[lo:hi]`` on frame ``[R | p]``."""
    for idx in range(lo, hi):
        c = order[idx]
        for r in range(3):
            R0 = R[r, 0]
            R1 = R[r, 1]
            R2 = R[r, 2]
            A[c, r] = R0 * start[c, 0] + R1 * start[c, 1] + R2 * start[c, 2] + p[r]
            B[c, r] = R0 * end[c, 0] + R1 * end[c, 1] + R2 * end[c, 2] + p[r]
            C[c, r] = R0 * centre[c, 0] + R1 * centre[c, 1] + R2 * centre[c, 2] + p[r]


@nb.njit(cache=True, inline="always")
def _capsules_world(
    qk, table, prismatic, R_wb, p_wb, order, offsets, start, end, centre, work, A, B, C
):
    """Link frames from ``T_world_base`` (the chain product of kinematics/fk.py), capsules into the world.

    Writes ``A``, ``B`` (segment end points) and ``C`` (bounding-sphere
    centres), shape (m, 3); capsules ``order[offsets[i]:offsets[i + 1]]``
    ride on link ``i``. ``work`` is ``(R, p, R_next, p_next)`` scratch.
    """
    R, p, R_next, p_next = work
    R[:, :] = R_wb
    p[:] = p_wb
    _place(R, p, offsets[0], offsets[1], order, start, end, centre, A, B, C)
    for j in range(offsets.shape[0] - 2):
        chain_step(R, p, table[j], prismatic[j], qk[j], R_next, p_next)
        R[:, :] = R_next
        p[:] = p_next
        _place(R, p, offsets[j + 1], offsets[j + 2], order, start, end, centre, A, B, C)


@nb.njit(cache=True, inline="always")
def _sphere_bound(c, o, C, cap_bound, kind, centre, params, obs_bound):
    """Bound 1: capsule ``c``'s bounding sphere against obstacle ``o``'s sphere (or the floor)."""
    if kind[o] == FLOOR:
        return C[c, 2] - params[o, 0] - cap_bound[c]
    d0 = C[c, 0] - centre[o, 0]
    d1 = C[c, 1] - centre[o, 1]
    d2 = C[c, 2] - centre[o, 2]
    return math.sqrt(d0 * d0 + d1 * d1 + d2 * d2) - cap_bound[c] - obs_bound[o]


@nb.njit(cache=True)
def _mesh_box_bound(c, o, C, cap_bound, rotation, translation, params, half):
    """Bound 1 of a mesh: capsule ``c``'s bounding sphere against the mesh's bounding box.

    The box in the mesh frame has centre ``params[o]`` and half extents
    ``half[o]``; much tighter than its bounding sphere for a large box-like
    mesh such as a machine housing. The sphere centre's *signed* distance to
    the box is used: the mesh lies inside its box and distances are
    1-Lipschitz, so even the penetration estimate of a capsule deep inside
    the mesh (:mod:`posebridge.geometry.mesh_bvh`) is not below the bound.
    """
    v0 = C[c, 0] - translation[o, 0]
    v1 = C[c, 1] - translation[o, 1]
    v2 = C[c, 2] - translation[o, 2]
    outside = 0.0
    inside = -math.inf
    for r in range(3):
        local = rotation[o, 0, r] * v0 + rotation[o, 1, r] * v1 + rotation[o, 2, r] * v2
        excess = abs(local - params[o, r]) - half[o, r]
        inside = max(inside, excess)
        if excess > 0.0:
            outside += excess * excess
    return math.sqrt(outside) + min(inside, 0.0) - cap_bound[c]


@nb.njit(cache=True, inline="always")
def _self_bound(i, j, C, cap_bound):
    """Bound of a self pair: the two bounding spheres."""
    d0 = C[i, 0] - C[j, 0]
    d1 = C[i, 1] - C[j, 1]
    d2 = C[i, 2] - C[j, 2]
    return math.sqrt(d0 * d0 + d1 * d1 + d2 * d2) - cap_bound[i] - cap_bound[j]


@nb.njit(cache=True, inline="always")
def _obstacle_pair(
    c,
    o,
    A,
    B,
    radius,
    kind,
    rotation,
    translation,
    params,
    mesh_index,
    meshes,
    needed_below,
    first_only,
    stack,
):
    """Exact capsule ``c`` - obstacle ``o`` signed distance and world witness points.

    A lower bound not below ``needed_below`` may stand in for the distance
    (see :func:`posebridge.geometry.distance._segment_obstacle`); with
    ``first_only`` any value below ``needed_below`` may stand in for a mesh's
    (:func:`posebridge.geometry.mesh_bvh._segment_mesh`).
    """
    kind_o, R, t, prm = _obstacle_record(o, kind, rotation, translation, params)
    if kind_o == MESH:
        return _capsule_mesh(
            (A[c, 0], A[c, 1], A[c, 2]),
            (B[c, 0], B[c, 1], B[c, 2]),
            radius[c],
            R,
            t,
            mesh_index[o],
            meshes,
            needed_below,
            first_only,
            stack,
        )
    return _capsule_obstacle(
        (A[c, 0], A[c, 1], A[c, 2]),
        (B[c, 0], B[c, 1], B[c, 2]),
        radius[c],
        kind_o,
        R,
        t,
        prm,
        needed_below,
    )


@nb.njit(cache=True, inline="always")
def _self_pair(i, j, A, B, radius):
    """Exact capsule ``i`` - capsule ``j`` signed distance and world witness points."""
    return _capsule_capsule(
        (A[i, 0], A[i, 1], A[i, 2]),
        (B[i, 0], B[i, 1], B[i, 2]),
        radius[i],
        (A[j, 0], A[j, 1], A[j, 2]),
        (B[j, 0], B[j, 1], B[j, 2]),
        radius[j],
    )


@nb.njit(cache=True, inline="always")
def _scratch(m, total, stack_size):
    work = (np.empty((3, 3)), np.empty(3), np.empty((3, 3)), np.empty(3))
    return (
        work,
        np.empty((m, 3)),
        np.empty((m, 3)),
        np.empty((m, 3)),
        np.empty(total),
        np.empty(total, dtype=np.int64),
        (np.empty(stack_size, dtype=np.int64), np.empty(stack_size)),
    )


@nb.njit(cache=True)
def _minimum_range(lo, hi, q, chain, caps, obs, mask, pairs, out):
    """Minimum over all checked pairs for configurations ``lo..hi-1``; writes those rows of ``out``."""
    table, prismatic, R_wb, p_wb, order, offsets = chain
    start, end, radius, centre, cap_bound = caps
    kind, rotation, translation, params, obs_bound, obs_centre, mesh_index, stack_size = obs[:8]
    obs_half = obs[8]
    meshes = obs[9:]
    distance, first, second, is_self, witness = out
    m, n_obs = mask.shape
    n_pairs = pairs.shape[0]
    n_capsule_pairs = m * n_obs
    total = n_capsule_pairs + n_pairs
    work, A, B, C, bounds, candidates, stack = _scratch(m, total, stack_size)
    for k in range(lo, hi):
        _capsules_world(
            q[k], table, prismatic, R_wb, p_wb, order, offsets, start, end, centre, work, A, B, C
        )
        # Bound 1 of every pair (index c * n_obs + o, then self pairs); the smallest goes first.
        seed = -1
        seed_bound = math.inf
        for c in range(m):
            for o in range(n_obs):
                value = math.inf
                if mask[c, o]:
                    value = _sphere_bound(c, o, C, cap_bound, kind, obs_centre, params, obs_bound)
                    if kind[o] == MESH:
                        value = _mesh_box_bound(
                            c, o, C, cap_bound, rotation, translation, params, obs_half
                        )
                bounds[c * n_obs + o] = value
                if value < seed_bound:
                    seed_bound = value
                    seed = c * n_obs + o
        for pi in range(n_pairs):
            value = _self_bound(pairs[pi, 0], pairs[pi, 1], C, cap_bound)
            bounds[n_capsule_pairs + pi] = value
            if value < seed_bound:
                seed_bound = value
                seed = n_capsule_pairs + pi
        # Then the pairs whose bound is below the best distance, by increasing bound.
        best = math.inf
        best_first = -1
        best_second = -1
        best_self = False
        w0 = (math.nan, math.nan, math.nan)
        w1 = (math.nan, math.nan, math.nan)
        count = 0
        if seed >= 0:
            candidates[0] = seed
            count = 1
        step = 0
        while step < count:
            idx = candidates[step]
            step += 1
            if bounds[idx] >= best:
                break
            if idx < n_capsule_pairs:
                c = idx // n_obs
                o = idx - c * n_obs
                d, wa, wb = _obstacle_pair(
                    c,
                    o,
                    A,
                    B,
                    radius,
                    kind,
                    rotation,
                    translation,
                    params,
                    mesh_index,
                    meshes,
                    best,
                    False,
                    stack,
                )
                i = c
                j = o
                self_pair = False
            else:
                i = pairs[idx - n_capsule_pairs, 0]
                j = pairs[idx - n_capsule_pairs, 1]
                d, wa, wb = _self_pair(i, j, A, B, radius)
                self_pair = True
            if d < best:
                best = d
                best_first = i
                best_second = j
                best_self = self_pair
                w0 = wa
                w1 = wb
            if step == 1:
                # After the seed: insertion-sort the pairs whose bound is below its distance.
                for other in range(total):
                    value = bounds[other]
                    if other == seed or value >= best:
                        continue
                    slot = count
                    while slot > 1 and bounds[candidates[slot - 1]] > value:
                        candidates[slot] = candidates[slot - 1]
                        slot -= 1
                    candidates[slot] = other
                    count += 1
        distance[k] = best
        first[k] = best_first
        second[k] = best_second
        is_self[k] = best_self
        for r in range(3):
            witness[k, 0, r] = w0[r]
            witness[k, 1, r] = w1[r]


@nb.njit(cache=True)
def _minimum_serial(q, chain, caps, obs, mask, pairs, out):
    _minimum_range(0, q.shape[0], q, chain, caps, obs, mask, pairs, out)


@nb.njit(cache=True, parallel=True)
def _minimum_parallel(q, chain, caps, obs, mask, pairs, out):
    n = q.shape[0]
    for chunk in nb.prange((n + _CHUNK - 1) // _CHUNK):
        lo = chunk * _CHUNK
        _minimum_range(lo, min(lo + _CHUNK, n), q, chain, caps, obs, mask, pairs, out)


@nb.njit(cache=True)
def _per_obstacle_range(lo, hi, q, chain, caps, obs, mask, pairs, out):
    """Minimum per obstacle and over the self pairs for configurations ``lo..hi-1``."""
    table, prismatic, R_wb, p_wb, order, offsets = chain
    start, end, radius, centre, cap_bound = caps
    kind, rotation, translation, params, obs_bound, obs_centre, mesh_index, stack_size = obs[:8]
    obs_half = obs[8]
    meshes = obs[9:]
    distance, self_distance = out
    m, n_obs = mask.shape
    work, A, B, C, bounds, _, stack = _scratch(m, m, stack_size)
    for k in range(lo, hi):
        _capsules_world(
            q[k], table, prismatic, R_wb, p_wb, order, offsets, start, end, centre, work, A, B, C
        )
        for o in range(n_obs):
            # The capsule with the smallest bound first, then the others whose bound is below.
            seed = -1
            seed_bound = math.inf
            for c in range(m):
                value = math.inf
                if mask[c, o]:
                    value = _sphere_bound(c, o, C, cap_bound, kind, obs_centre, params, obs_bound)
                    if kind[o] == MESH:
                        value = _mesh_box_bound(
                            c, o, C, cap_bound, rotation, translation, params, obs_half
                        )
                bounds[c] = value
                if value < seed_bound:
                    seed_bound = value
                    seed = c
            best = math.inf
            if seed >= 0:
                best = _obstacle_pair(
                    seed,
                    o,
                    A,
                    B,
                    radius,
                    kind,
                    rotation,
                    translation,
                    params,
                    mesh_index,
                    meshes,
                    math.inf,
                    False,
                    stack,
                )[0]
            for c in range(m):
                if c != seed and bounds[c] < best:
                    d = _obstacle_pair(
                        c,
                        o,
                        A,
                        B,
                        radius,
                        kind,
                        rotation,
                        translation,
                        params,
                        mesh_index,
                        meshes,
                        best,
                        False,
                        stack,
                    )[0]
                    if d < best:
                        best = d
            distance[k, o] = best
        best = math.inf
        for pi in range(pairs.shape[0]):
            i = pairs[pi, 0]
            j = pairs[pi, 1]
            if _self_bound(i, j, C, cap_bound) < best:
                d = _self_pair(i, j, A, B, radius)[0]
                if d < best:
                    best = d
        self_distance[k] = best


@nb.njit(cache=True)
def _per_obstacle_serial(q, chain, caps, obs, mask, pairs, out):
    _per_obstacle_range(0, q.shape[0], q, chain, caps, obs, mask, pairs, out)


@nb.njit(cache=True, parallel=True)
def _per_obstacle_parallel(q, chain, caps, obs, mask, pairs, out):
    n = q.shape[0]
    for chunk in nb.prange((n + _CHUNK - 1) // _CHUNK):
        lo = chunk * _CHUNK
        _per_obstacle_range(lo, min(lo + _CHUNK, n), q, chain, caps, obs, mask, pairs, out)


@nb.njit(cache=True)
def _collision_range(lo, hi, q, chain, caps, obs, mask, pairs, threshold, out):
    """Whether any checked pair is closer than ``threshold``, for configurations ``lo..hi-1``.

    A configuration's pairs are visited until the first one below the threshold.
    """
    table, prismatic, R_wb, p_wb, order, offsets = chain
    start, end, radius, centre, cap_bound = caps
    kind, rotation, translation, params, obs_bound, obs_centre, mesh_index, stack_size = obs[:8]
    obs_half = obs[8]
    meshes = obs[9:]
    m, n_obs = mask.shape
    work, A, B, C, _, _, stack = _scratch(m, 0, stack_size)
    for k in range(lo, hi):
        _capsules_world(
            q[k], table, prismatic, R_wb, p_wb, order, offsets, start, end, centre, work, A, B, C
        )
        hit = False
        for c in range(m):
            for o in range(n_obs):
                if (
                    not hit
                    and mask[c, o]
                    and _sphere_bound(c, o, C, cap_bound, kind, obs_centre, params, obs_bound)
                    < threshold
                    and (
                        kind[o] != MESH
                        or _mesh_box_bound(
                            c, o, C, cap_bound, rotation, translation, params, obs_half
                        )
                        < threshold
                    )
                ):
                    d = _obstacle_pair(
                        c,
                        o,
                        A,
                        B,
                        radius,
                        kind,
                        rotation,
                        translation,
                        params,
                        mesh_index,
                        meshes,
                        threshold,
                        True,
                        stack,
                    )[0]
                    hit = d < threshold
        for pi in range(pairs.shape[0]):
            i = pairs[pi, 0]
            j = pairs[pi, 1]
            if not hit and _self_bound(i, j, C, cap_bound) < threshold:
                hit = _self_pair(i, j, A, B, radius)[0] < threshold
        out[k] = hit


@nb.njit(cache=True)
def _collision_serial(q, chain, caps, obs, mask, pairs, threshold, out):
    _collision_range(0, q.shape[0], q, chain, caps, obs, mask, pairs, threshold, out)


@nb.njit(cache=True, parallel=True)
def _collision_parallel(q, chain, caps, obs, mask, pairs, threshold, out):
    n = q.shape[0]
    for chunk in nb.prange((n + _CHUNK - 1) // _CHUNK):
        lo = chunk * _CHUNK
        _collision_range(lo, min(lo + _CHUNK, n), q, chain, caps, obs, mask, pairs, threshold, out)


# --- Python API ---------------------------------------------------------------------------


def _check_pairs(self_pairs: npt.ArrayLike, m: int) -> IntArray:
    raw = np.asarray(self_pairs)
    if raw.size == 0:
        return np.empty((0, 2), dtype=np.int64)
    if raw.ndim != 2 or raw.shape[1] != 2:
        raise GeometryInputError(f"self_pairs: expected shape (P, 2), got {raw.shape}")
    pairs = np.ascontiguousarray(raw, dtype=np.int64)
    if not np.array_equal(pairs, raw):
        raise GeometryInputError("self_pairs: expected integer capsule indices")
    if pairs.min() < 0 or pairs.max() >= m or np.any(pairs[:, 0] == pairs[:, 1]):
        raise GeometryInputError(
            f"self_pairs: expected pairs of two different capsule indices in 0..{m - 1}"
        )
    return pairs


@dataclass(frozen=True, eq=False)
class ClearanceScene:
    """Everything a clearance query holds fixed: the arm, the obstacles, the base pose and the pairs.

    Build it once with :meth:`build` and query many configuration batches.

    Attributes
    ----------
    arm : ArmCapsules
    obstacles : ObstacleSet
    T_world_base : array, shape (4, 4)
        Robot base pose in the world.
    self_pairs : array of int64, shape (P, 2)
        Capsule index pairs checked against each other.
    pair_mask : array of bool, shape (m, k)
        ``pair_mask[c, o]``: capsule ``c`` is checked against obstacle ``o``.
    """

    arm: ArmCapsules
    obstacles: ObstacleSet
    T_world_base: FloatArray
    self_pairs: IntArray
    pair_mask: BoolArray

    @classmethod
    def build(
        cls,
        arm: ArmCapsules,
        obstacles: ObstacleSet,
        T_world_base: npt.ArrayLike,
        *,
        self_pairs: npt.ArrayLike,
        pair_mask: npt.ArrayLike | None = None,
    ) -> ClearanceScene:
        """Validate and assemble a scene.

        Parameters
        ----------
        arm : ArmCapsules
        obstacles : ObstacleSet
        T_world_base : array-like, shape (4, 4)
        self_pairs : array-like of int, shape (P, 2), keyword-only
            From :func:`posebridge.geometry.self_pairs.self_collision_pairs`;
            an empty array for no self check.
        pair_mask : array-like of bool, shape (m, k), optional, keyword-only
            :func:`posebridge.geometry.shapes.default_pair_mask` if omitted.

        Returns
        -------
        ClearanceScene
        """
        try:
            pose = check_transform(T_world_base)
        except TransformError as e:
            raise GeometryInputError(f"T_world_base: {e}") from e
        if pose.shape != (4, 4):
            raise GeometryInputError(f"T_world_base: expected shape (4, 4), got {pose.shape}")
        if pair_mask is None:
            mask = default_pair_mask(arm, obstacles)
        else:
            mask = np.ascontiguousarray(pair_mask, dtype=bool)
            if mask.shape != (arm.count, obstacles.count):
                raise GeometryInputError(
                    f"pair_mask: expected shape ({arm.count}, {obstacles.count}) "
                    f"(capsules, obstacles), got {mask.shape}"
                )
        return cls(
            arm=arm,
            obstacles=obstacles,
            T_world_base=pose,
            self_pairs=_check_pairs(self_pairs, arm.count),
            pair_mask=mask,
        )

    def with_base(self, T_world_base: FloatArray) -> ClearanceScene:
        """Return this scene with the robot base at ``T_world_base`` (shape (4, 4), not checked).

        The arm's and the obstacles' kernel inputs are shared with this scene, so many
        base poses against one obstacle set cost one preparation.
        """
        pose = np.array(T_world_base, dtype=np.float64)
        moved = ClearanceScene(self.arm, self.obstacles, pose, self.self_pairs, self.pair_mask)
        chain, caps, obs = self._kernel_inputs
        assert isinstance(chain, tuple)
        placed = (
            *chain[:2],
            np.ascontiguousarray(pose[:3, :3]),
            np.ascontiguousarray(pose[:3, 3]),
            *chain[4:],
        )
        moved.__dict__["_kernel_inputs"] = (placed, caps, obs)  # the cached property, filled
        return moved

    @cached_property
    def _kernel_inputs(self) -> tuple[object, object, object]:
        """``(chain, caps, obs)`` tuples in the layout the kernels read."""
        arm = self.arm
        robot = arm.robot
        order = np.argsort(arm.link, kind="stable").astype(np.int64)
        n_links = int(arm.link.max(initial=0))
        offsets = np.searchsorted(arm.link[order], np.arange(n_links + 2)).astype(np.int64)
        chain = (
            robot.motion_table,
            robot.prismatic,
            np.ascontiguousarray(self.T_world_base[:3, :3]),
            np.ascontiguousarray(self.T_world_base[:3, 3]),
            order,
            offsets,
        )
        caps = (arm.start, arm.end, arm.radius, arm.bound_centre, arm.bound_radius)
        obstacles = self.obstacles
        table = obstacles.mesh_table
        obs = (
            obstacles.kind,
            obstacles.rotation,
            obstacles.translation,
            obstacles.params,
            obstacles.bound_radius,
            obstacles.bound_centre,
            obstacles.mesh_index,
            table.stack_size,
            obstacles.bound_half_extents,
            *table.kernel_inputs,
        )
        return chain, caps, obs


def clearance_batch(scene: ClearanceScene, q: npt.ArrayLike) -> ClearanceResult:
    """Exact minimum signed distance of the arm to the obstacles and to itself.

    Forward kinematics of the link frames, the capsule-obstacle pairs of
    ``scene.pair_mask`` and the ``scene.self_pairs`` fused in one kernel;
    broad phase and methods in the module docstring.

    Parameters
    ----------
    scene : ClearanceScene
    q : array-like, shape (N, n)
        Joint values, rad or m.

    Returns
    -------
    ClearanceResult
        Arrays of shape (N,) and witness points (N, 2, 3).
    """
    q = check_configurations(scene.arm.robot, q)
    n = q.shape[0]
    out = (
        np.empty(n),
        np.empty(n, dtype=np.int64),
        np.empty(n, dtype=np.int64),
        np.empty(n, dtype=bool),
        np.empty((n, 2, 3)),
    )
    chain, caps, obs = scene._kernel_inputs
    kernel = _minimum_parallel if n >= PARALLEL_THRESHOLD else _minimum_serial
    kernel(q, chain, caps, obs, scene.pair_mask, scene.self_pairs, out)
    return ClearanceResult(
        distance=out[0], capsule=out[1], other=out[2], is_self=out[3], witness=out[4]
    )


def clearance_per_obstacle_batch(
    scene: ClearanceScene, q: npt.ArrayLike, *, threshold_m: float = 0.0
) -> ObstacleClearanceResult:
    """Exact minimum signed distance of the arm to each obstacle, and to itself.

    Parameters
    ----------
    scene : ClearanceScene
    q : array-like, shape (N, n)
    threshold_m : float, keyword-only
        A distance below this counts as a collision, m (0: penetration only).

    Returns
    -------
    ObstacleClearanceResult
        ``distance`` and ``in_collision`` of shape (N, k), self results (N,).
    """
    q = check_configurations(scene.arm.robot, q)
    n = q.shape[0]
    out = (np.empty((n, scene.obstacles.count)), np.empty(n))
    chain, caps, obs = scene._kernel_inputs
    kernel = _per_obstacle_parallel if n >= PARALLEL_THRESHOLD else _per_obstacle_serial
    kernel(q, chain, caps, obs, scene.pair_mask, scene.self_pairs, out)
    return ObstacleClearanceResult(
        distance=out[0],
        in_collision=out[0] < threshold_m,
        self_distance=out[1],
        self_collision=out[1] < threshold_m,
    )


def collision_batch(
    scene: ClearanceScene, q: npt.ArrayLike, *, threshold_m: float = 0.0
) -> BoolArray:
    """Whether any checked pair is closer than ``threshold_m``; stops at the first such pair.

    The collision check for planners: the same pairs and distances as
    :func:`clearance_batch`, but a configuration's work ends at the first
    pair below the threshold, and pairs whose lower bound is not below it are
    never evaluated.

    Parameters
    ----------
    scene : ClearanceScene
    q : array-like, shape (N, n)
    threshold_m : float, keyword-only
        m (0: penetration only; a positive value keeps a safety margin).

    Returns
    -------
    colliding : array of bool, shape (N,)
    """
    if not np.isfinite(threshold_m):
        raise GeometryInputError(f"threshold_m: expected a finite value, got {threshold_m!r}")
    q = check_configurations(scene.arm.robot, q)
    out = np.empty(q.shape[0], dtype=bool)
    chain, caps, obs = scene._kernel_inputs
    kernel = _collision_parallel if q.shape[0] >= PARALLEL_THRESHOLD else _collision_serial
    kernel(q, chain, caps, obs, scene.pair_mask, scene.self_pairs, float(threshold_m), out)
    return out


def capsule_segments_world(
    arm: ArmCapsules, q: npt.ArrayLike, T_world_base: npt.ArrayLike
) -> FloatArray:
    """Capsule segment end points in the world (for drawing, self-pair sampling and tests).

    ``x_world = T_world_base @ T_base_link(q) @ x_link`` with
    :func:`posebridge.kinematics.fk.fk_frames`.

    Parameters
    ----------
    arm : ArmCapsules
    q : array-like, shape (N, n)
    T_world_base : array-like, shape (4, 4)

    Returns
    -------
    segments : array, shape (N, m, 2, 3)
        Start and end point of each capsule's segment, m.
    """
    try:
        pose = check_transform(T_world_base)
    except TransformError as e:
        raise GeometryInputError(f"T_world_base: {e}") from e
    frames = pose @ fk_frames(arm.robot, q)[:, arm.link]
    R = frames[..., :3, :3]
    p = frames[..., :3, 3]
    start = np.einsum("nmij,mj->nmi", R, arm.start) + p
    end = np.einsum("nmij,mj->nmi", R, arm.end) + p
    return np.stack([start, end], axis=2)

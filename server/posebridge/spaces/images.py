"""Images between the two spaces: Cartesian waypoints and segments in joint space, joint points in the cell.

Waypoint image
    Every inverse-kinematics solution of a tool pose
    (:func:`posebridge.kinematics.ik.solve_ik_all` with ``all_revolutions=True``:
    every branch and every in-limit revolution of joints whose range exceeds
    one revolution), projected on the chosen joints, with its branch label.

Segment image
    A straight Cartesian segment between two tool poses is sampled at
    ``samples`` equal steps: positions linearly, orientations by spherical
    linear interpolation of the rotations (slerp, Shoemake 1985, "Animating
    rotation with quaternion curves", SIGGRAPH; ``scipy.spatial.transform.Slerp``).
    Every sample is solved as above (in-limit solutions only). A curve
    collects the solutions of one branch with the same revolutions at consecutive
    samples; it breaks where that branch has no in-limit solution (out of
    reach or outside the limits), where the branch labels change (a
    singular sample has undefined labels), or where a joint jumps by more
    than ``max_step_fraction`` of its range between two samples (a
    discontinuity of the solver's branch). Where a branch has several
    solutions at one sample (redundant arms), the one nearest the curve's
    last point continues it and the others start curves of their own.

Cartesian image of a joint point
    Forward kinematics of the configuration: the tool pose, every link
    frame and every collision capsule in the world
    (:func:`posebridge.kinematics.fk.fk_frames`,
    :func:`posebridge.geometry.clearance.capsule_segments_world`).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import numpy.typing as npt
from scipy.spatial.transform import Rotation, Slerp

from posebridge.arrays import Int8Array, Int16Array
from posebridge.geometry.clearance import capsule_segments_world
from posebridge.geometry.shapes import ArmCapsules
from posebridge.kinematics.fk import check_configurations, fk_frames
from posebridge.kinematics.ik import solve_ik_all
from posebridge.kinematics.ik.solutions import IkSolutions
from posebridge.robot.model import Robot
from posebridge.spaces.errors import SpacesInputError
from posebridge.transforms import check_transform, invert_transform
from posebridge.units import BoolArray, FloatArray

__all__ = [
    "CartesianImage",
    "SegmentCurve",
    "SegmentImage",
    "WaypointImages",
    "cartesian_image",
    "sample_segment",
    "segment_image",
    "waypoint_images",
]

MAX_SEGMENT_SAMPLES = 2048
"""Largest number of samples along one segment."""

IntArray = npt.NDArray[np.int64]


def _check_joints(robot: Robot, joints: Sequence[int]) -> tuple[int, ...]:
    chosen = tuple(int(j) for j in joints)
    if not chosen or len(set(chosen)) != len(chosen) or not all(0 <= j < robot.dof for j in chosen):
        raise SpacesInputError(
            f"joints: expected distinct indices in 0..{robot.dof - 1} for robot {robot.name!r}, "
            f"got {list(joints)}"
        )
    return chosen


def _base_world(T_world_base: npt.ArrayLike | None) -> FloatArray:
    return np.eye(4) if T_world_base is None else invert_transform(check_transform(T_world_base))


def _poses(T_world_tool: npt.ArrayLike, field: str) -> FloatArray:
    T = check_transform(T_world_tool)
    if T.ndim != 3:
        raise SpacesInputError(f"{field}: expected shape (N, 4, 4), got {T.shape}")
    return T


@dataclass(frozen=True, eq=False)
class WaypointImages:
    """The IK solutions of ``W`` waypoints, flat over all solutions ``S`` (SI units).

    Attributes
    ----------
    joints : tuple of int, length d
        Chosen joints (0-based).
    waypoint : array of int64, shape (S,)
        Waypoint each solution belongs to.
    q : array, shape (S, n)
        Full joint solutions, rad or m.
    points : array, shape (S, d)
        ``q`` on the chosen joints: the image points.
    within_limits : array of bool, shape (S,)
    shoulder, elbow, wrist : array of int8, shape (S,)
        Branch labels (:class:`posebridge.kinematics.ik.solutions.IkSolutions`).
    revolutions : array of int16, shape (S, n)
        Whole extra revolutions per joint.
    labels : tuple of str, length S
        Branch in plain words, e.g. ``"front, up, positive, j6 +1 rev"``.
    reason : tuple of str, length W
        ``""`` where a waypoint has an in-limit solution, else why not.
    """

    joints: tuple[int, ...]
    waypoint: IntArray
    q: FloatArray
    points: FloatArray
    within_limits: BoolArray
    shoulder: Int8Array
    elbow: Int8Array
    wrist: Int8Array
    revolutions: Int16Array
    labels: tuple[str, ...]
    reason: tuple[str, ...]


def waypoint_images(
    robot: Robot,
    T_world_tool: npt.ArrayLike,
    joints: Sequence[int],
    *,
    T_world_base: npt.ArrayLike | None = None,
    T_flange_tool: npt.ArrayLike | None = None,
) -> WaypointImages:
    """Every IK solution (all branches, all in-limit revolutions) of each waypoint, on the chosen joints.

    Solutions outside the joint limits are kept and flagged (``within_limits``),
    so a view can show where a branch leaves the limit box.

    Parameters
    ----------
    robot : Robot
    T_world_tool : array-like, shape (W, 4, 4)
        Tool poses in the world, m.
    joints : sequence of int
        Joints to project on (0-based), e.g. the two axes of a joint map.
    T_world_base : array-like, shape (4, 4), optional
        Robot base in the world; identity if omitted.
    T_flange_tool : array-like, shape (4, 4), optional
        Tool in the flange frame; the robot's default tool if omitted.

    Returns
    -------
    WaypointImages
    """
    chosen = _check_joints(robot, joints)
    T = _poses(T_world_tool, "T_world_tool")
    solutions = solve_ik_all(
        robot, _base_world(T_world_base) @ T, T_flange_tool=T_flange_tool, all_revolutions=True
    )
    pose, slot = np.nonzero(solutions.valid)
    q = solutions.q[pose, slot]
    return WaypointImages(
        joints=chosen,
        waypoint=pose.astype(np.int64),
        q=q,
        points=q[:, list(chosen)],
        within_limits=solutions.within_limits[pose, slot],
        shoulder=solutions.shoulder[pose, slot],
        elbow=solutions.elbow[pose, slot],
        wrist=solutions.wrist[pose, slot],
        revolutions=solutions.revolutions[pose, slot],
        labels=tuple(
            solutions.branch_label(int(i), int(m)) for i, m in zip(pose, slot, strict=True)
        ),
        reason=solutions.reason,
    )


@dataclass(frozen=True, eq=False)
class SegmentCurve:
    """One continuous curve of a segment's image: one branch, one set of revolutions.

    Attributes
    ----------
    label : str
        Branch in plain words.
    shoulder, elbow, wrist : int
        Branch labels (+1, -1 or 0).
    revolutions : array of int16, shape (n,)
    sample : array of int64, shape (K,)
        Indices of the segment samples on this curve (consecutive).
    s : array, shape (K,)
        Segment parameter of those samples, 0 (start) to 1 (end).
    q : array, shape (K, n)
    points : array, shape (K, d)
        ``q`` on the chosen joints.
    """

    label: str
    shoulder: int
    elbow: int
    wrist: int
    revolutions: Int16Array
    sample: IntArray
    s: FloatArray
    q: FloatArray
    points: FloatArray


@dataclass(frozen=True, eq=False)
class SegmentImage:
    """The image in joint space of a straight Cartesian segment.

    Attributes
    ----------
    joints : tuple of int, length d
    s : array, shape (K,)
        Segment parameter of every sample, ``k / (K - 1)``.
    T_world_tool : array, shape (K, 4, 4)
        The sampled tool poses (linear positions, slerp orientations).
    reachable : array of bool, shape (K,)
        Some in-limit solution exists at the sample.
    curves : tuple of SegmentCurve
        In order of their first sample, then of the branch order of the solver.
    """

    joints: tuple[int, ...]
    s: FloatArray
    T_world_tool: FloatArray
    reachable: BoolArray
    curves: tuple[SegmentCurve, ...]


def sample_segment(T_world_start: FloatArray, T_world_end: FloatArray, samples: int) -> FloatArray:
    """Tool poses along a straight segment: linear position, slerp orientation (module docstring).

    Returns
    -------
    T_world_tool : array, shape (samples, 4, 4)
    """
    s = np.linspace(0.0, 1.0, samples)
    rotations = Rotation.from_matrix(np.stack([T_world_start[:3, :3], T_world_end[:3, :3]]))
    T = np.zeros((samples, 4, 4))
    T[:, :3, :3] = Slerp([0.0, 1.0], rotations)(s).as_matrix()
    T[:, :3, 3] = (1.0 - s)[:, None] * T_world_start[:3, 3] + s[:, None] * T_world_end[:3, 3]
    T[:, 3, 3] = 1.0
    return T


def _trace_curves(
    solutions: IkSolutions, max_step: FloatArray
) -> list[tuple[tuple[int, ...], list[tuple[int, int]]]]:
    """Link in-limit solutions of consecutive samples into curves of equal branch key.

    Returns ``(key, [(sample, slot), ...])`` per curve; the key is
    ``(shoulder, elbow, wrist, *revolutions)``.
    """
    ok = solutions.valid & solutions.within_limits
    finished: list[tuple[tuple[int, ...], list[tuple[int, int]]]] = []
    open_curves: list[tuple[tuple[int, ...], list[tuple[int, int]]]] = []
    for k in range(solutions.n_poses):
        still_open = []
        unclaimed = [int(m) for m in np.flatnonzero(ok[k])]
        for key, members in open_curves:
            last_sample, last_slot = members[-1]
            last = solutions.q[last_sample, last_slot]
            best = None
            best_jump = np.inf
            for m in unclaimed:
                if _key(solutions, k, m) != key:
                    continue
                step = np.abs(solutions.q[k, m] - last)
                jump = float(np.max(step / max_step))
                if jump <= 1.0 and jump < best_jump:
                    best, best_jump = m, jump
            if best is None:
                finished.append((key, members))
            else:
                unclaimed.remove(best)
                members.append((k, best))
                still_open.append((key, members))
        for m in unclaimed:
            still_open.append((_key(solutions, k, m), [(k, m)]))
        open_curves = still_open
    finished.extend(open_curves)
    finished.sort(key=lambda curve: curve[1][0])
    return finished


def _key(solutions: IkSolutions, k: int, m: int) -> tuple[int, ...]:
    return (
        int(solutions.shoulder[k, m]),
        int(solutions.elbow[k, m]),
        int(solutions.wrist[k, m]),
        *(int(t) for t in solutions.revolutions[k, m]),
    )


def segment_image(
    robot: Robot,
    T_world_start: npt.ArrayLike,
    T_world_end: npt.ArrayLike,
    joints: Sequence[int],
    *,
    samples: int = 64,
    T_world_base: npt.ArrayLike | None = None,
    T_flange_tool: npt.ArrayLike | None = None,
    max_step_fraction: float = 0.25,
) -> SegmentImage:
    """Return the curves a straight Cartesian segment traces in joint space, one per branch (module docstring).

    Parameters
    ----------
    robot : Robot
    T_world_start, T_world_end : array-like, shape (4, 4)
        Tool poses at the segment's ends, in the world.
    joints : sequence of int
        Joints to project on (0-based).
    samples : int, keyword-only
        Samples along the segment, 2..2048, ends included.
    T_world_base, T_flange_tool : array-like, shape (4, 4), optional
        As :func:`waypoint_images`.
    max_step_fraction : float, keyword-only
        Largest joint change between neighbouring samples of one curve, as
        a fraction of the joint's range (one revolution for continuous joints).

    Returns
    -------
    SegmentImage
    """
    chosen = _check_joints(robot, joints)
    if (
        isinstance(samples, bool)
        or not isinstance(samples, int)
        or not 2 <= samples <= MAX_SEGMENT_SAMPLES
    ):
        raise SpacesInputError(
            f"samples: expected an integer in 2..{MAX_SEGMENT_SAMPLES}, got {samples!r}"
        )
    if not 0.0 < max_step_fraction <= 1.0:
        raise SpacesInputError(
            f"max_step_fraction: expected a value in (0, 1], got {max_step_fraction!r}"
        )
    start = _poses(np.asarray(T_world_start, dtype=np.float64)[None], "T_world_start")[0]
    end = _poses(np.asarray(T_world_end, dtype=np.float64)[None], "T_world_end")[0]
    T = sample_segment(start, end, samples)
    solutions = solve_ik_all(
        robot, _base_world(T_world_base) @ T, T_flange_tool=T_flange_tool, all_revolutions=True
    )
    span = np.where(robot.continuous, 2.0 * np.pi, robot.upper - robot.lower)
    s = np.linspace(0.0, 1.0, samples)
    curves = []
    for key, members in _trace_curves(solutions, max_step_fraction * span):
        sample = np.array([k for k, _ in members], dtype=np.int64)
        q = np.stack([solutions.q[k, m] for k, m in members])
        first_sample, first_slot = members[0]
        curves.append(
            SegmentCurve(
                label=solutions.branch_label(first_sample, first_slot),
                shoulder=key[0],
                elbow=key[1],
                wrist=key[2],
                revolutions=np.array(key[3:], dtype=np.int16),
                sample=sample,
                s=s[sample],
                q=q,
                points=q[:, list(chosen)],
            )
        )
    return SegmentImage(
        joints=chosen,
        s=s,
        T_world_tool=T,
        reachable=np.any(solutions.valid & solutions.within_limits, axis=1),
        curves=tuple(curves),
    )


@dataclass(frozen=True, eq=False)
class CartesianImage:
    """Where joint configurations put the arm in the cell (SI units, world frame).

    Attributes
    ----------
    T_world_tool : array, shape (N, 4, 4)
    T_world_frames : array, shape (N, n + 3, 4, 4)
        Base, links 1..n, flange, tool.
    capsule_segments : array, shape (N, m, 2, 3)
        Start and end point of every collision capsule's segment, m.
    capsule_radius : array, shape (m,)
    capsule_names : tuple of str, length m
    """

    T_world_tool: FloatArray
    T_world_frames: FloatArray
    capsule_segments: FloatArray
    capsule_radius: FloatArray
    capsule_names: tuple[str, ...]


def cartesian_image(
    arm: ArmCapsules,
    q: npt.ArrayLike,
    *,
    T_world_base: npt.ArrayLike | None = None,
    T_flange_tool: npt.ArrayLike | None = None,
) -> CartesianImage:
    """Tool pose, link frames and capsules in the world for joint configurations.

    ``T_world_x = T_world_base @ T_base_x(q)`` by forward kinematics.

    Parameters
    ----------
    arm : ArmCapsules
        The robot's capsules with the tool's (e.g.
        :func:`posebridge.cell.clearance.cell_arm`).
    q : array-like, shape (N, n)
        Joint values, rad or m.
    T_world_base : array-like, shape (4, 4), optional
    T_flange_tool : array-like, shape (4, 4), optional
        Tool in the flange frame; the robot's default tool if omitted.

    Returns
    -------
    CartesianImage
    """
    q = check_configurations(arm.robot, q)
    world_base = np.eye(4) if T_world_base is None else check_transform(T_world_base)
    frames = world_base @ fk_frames(arm.robot, q, T_flange_tool)
    return CartesianImage(
        T_world_tool=frames[:, -1].copy(),
        T_world_frames=frames,
        capsule_segments=capsule_segments_world(arm, q, world_base),
        capsule_radius=arm.radius.copy(),
        capsule_names=arm.names,
    )

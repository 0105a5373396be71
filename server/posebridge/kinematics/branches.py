"""Arm branch labels in plain words, for any arm and any joint configuration.

An inverse-kinematics pose usually has several joint solutions. They are told
apart by three labels (values +1, -1, or 0 where the label does not apply or
is undefined because the arm is exactly singular there):

Six- and seven-axis arms (label scheme ``"arm"``). The *arm plane* contains
the first axis and is perpendicular to the second (shoulder) axis; it turns
with joint 1. Its *forward* direction is the direction of ``a2 x a1`` (second
axis cross first axis), flipped if needed so that the wrist point lies in
front at the all-zero configuration; its *up* direction is the first axis,
flipped if needed so that the shoulder lies above the base origin. Points
are projected into this plane.

* **shoulder**: ``front`` (+1) when the wrist point lies in front of the first
  axis, ``back`` (-1) when it lies behind it; 0 when it is on the first axis
  (in the plane through the first axis parallel to the second).
* **elbow**: ``up`` (+1) when the elbow lies on the upper side of the line from
  the shoulder to the wrist centre, seen with the arm reaching forward (for a
  back shoulder the plane is viewed from the other side); precisely, when the
  turn shoulder -> wrist centre -> elbow is counter-clockwise in that view.
  ``down`` (-1) on the lower side; 0 when the elbow is stretched or folded
  (shoulder, elbow and wrist centre in line).
* **wrist**: ``positive`` (+1) or ``negative`` (-1) is the sign of the wrist
  bend joint (joint 5 of a six-axis arm, joint 6 of the seven-axis arm),
  measured from the straight wrist (the value where the axes before and after
  it are parallel, 0 for usual descriptions); 0 when the wrist is straight
  (the wrist singularity).

The shoulder point is the origin of joint 2, the elbow point the origin of
joint 3 (six axes) or joint 4 (seven axes), the wrist centre the point of the
wrist bend axis nearest the axis before it and the wrist point the point of
the wrist bend axis nearest the axis after it. For a spherical wrist both are
where the wrist axes meet. For an offset wrist whose bend axis meets the last
axis away from the axis before it (arms whose second, third and fourth axes
are parallel, :mod:`posebridge.kinematics.ik.analytic.offset_wrist`), the
wrist point is where front and back part: the two solutions of joint 1 put
it on either side of the first axis, while the wrist centre turns with
joint 4 and can change sides between the two wrist solutions.

Planar arms and SCARA (label scheme ``"planar"``, first two axes parallel):
only the elbow is labelled, ``left`` (+1) when the elbow lies to the left of
the line from the first axis to the end of the second link (origin of joint
3, or the flange of a two-link arm), seen from the side the first axis points
to; ``right`` (-1) otherwise; 0 when stretched or folded.

Other arms (gantries) have no branches (scheme ``"none"``, all labels 0).

"Undefined" uses the small tolerances :data:`LABEL_TOLERANCE_M` (distance of
the wrist point from the first axis, of the elbow from the shoulder-wrist
line) and :data:`LABEL_TOLERANCE_RAD` (wrist bend from straight).
"""

from __future__ import annotations

import weakref
from dataclasses import dataclass

import numba as nb
import numpy as np
import numpy.typing as npt

from posebridge.arrays import Int8Array
from posebridge.kinematics.fk import KinematicsInputError, check_configurations, fk_frames
from posebridge.robot.model import Robot
from posebridge.units import BoolArray, FloatArray

__all__ = [
    "BRANCH_LABELS",
    "BRANCH_WORDS",
    "LABEL_TOLERANCE_M",
    "LABEL_TOLERANCE_RAD",
    "ArmPlanePoints",
    "BranchGeometry",
    "arm_plane_points",
    "branch_geometry",
    "branch_part_words",
    "branch_parts",
    "branch_words",
    "elbow_label",
    "label_branches",
    "labels_match",
    "part_word",
    "shoulder_label",
    "wrist_label",
]

BRANCH_WORDS = {
    "shoulder": {1: "front", -1: "back", 0: "shoulder on axis 1"},
    "elbow": {1: "up", -1: "down", 0: "elbow in line"},
    "planar": {1: "left", -1: "right", 0: "elbow in line"},
    "wrist": {1: "positive", -1: "negative", 0: "wrist straight"},
}
"""The one branch vocabulary: the word of each label value per part (``"planar"``: the
elbow of planar arms and SCARA). Every text and every parsed word uses these."""

BRANCH_LABELS = {
    part: {word: value for value, word in BRANCH_WORDS[part].items() if value != 0}
    for part in ("shoulder", "elbow", "wrist")
}
"""Label value of each word a cell file may require, per part: ``{"shoulder": {"front": 1,
"back": -1}, "elbow": {"up": 1, "down": -1}, "wrist": {"positive": 1, "negative": -1}}``."""


def part_word(scheme: str, part: str, label: int) -> str:
    """Return the word of one branch part: ``part_word("arm", "wrist", -1) == "negative"``.

    ``part`` is ``"shoulder"``, ``"elbow"`` or ``"wrist"``; planar arms name the
    elbow ``left``/``right``.

    >>> part_word("planar", "elbow", 1)
    'left'
    """
    table = "planar" if scheme == "planar" and part == "elbow" else part
    return BRANCH_WORDS[table][int(label)]


def branch_part_words(scheme: str, shoulder: int, elbow: int, wrist: int) -> dict[str, str]:
    """Return the word of each part a label scheme names.

    All three for ``"arm"``, the elbow for ``"planar"``, none for ``"none"``: the fields the
    page reads instead of a label text.

    >>> branch_part_words("arm", 1, -1, 1)
    {'shoulder': 'front', 'elbow': 'down', 'wrist': 'positive'}
    >>> branch_part_words("planar", 0, -1, 0)
    {'elbow': 'right'}
    """
    labels = {"shoulder": shoulder, "elbow": elbow, "wrist": wrist}
    parts = {"arm": ("shoulder", "elbow", "wrist"), "planar": ("elbow",)}.get(scheme, ())
    return {part: part_word(scheme, part, labels[part]) for part in parts}


def branch_parts(scheme: str, shoulder: int, elbow: int, wrist: int) -> list[str]:
    """Return the words of a branch under a label scheme.

    Three for ``"arm"``, the elbow's for ``"planar"``, none for ``"none"``.
    """
    return list(branch_part_words(scheme, shoulder, elbow, wrist).values())


def branch_words(scheme: str, shoulder: int, elbow: int, wrist: int) -> str:
    """Plain words of a branch: ``"front, up, positive"``, ``"left"`` or ``"single branch"``.

    >>> branch_words("arm", 1, -1, 1)
    'front, down, positive'
    """
    return ", ".join(branch_parts(scheme, shoulder, elbow, wrist)) or "single branch"


LABEL_TOLERANCE_M = 1e-7
"""Distances (m) below this make the shoulder or elbow label undefined (0).

Larger than rounding: near a stretched elbow the closed-form elbow angle comes
from ``sqrt(1 - cos^2)``, which turns a rounding error of 1e-16 in the cosine
into about 1e-8 in the sine."""

LABEL_TOLERANCE_RAD = 1e-9
"""A wrist bend within this angle (rad) of 0 or pi makes the wrist label undefined (0)."""

_PARALLEL_TOLERANCE = 1e-9
_SIDE_TOLERANCE_M = 1e-6


@nb.njit(cache=True, inline="always")
def shoulder_label(forward_distance):
    """Shoulder label from the wrist centre's forward distance from axis 1 (m)."""
    if forward_distance > LABEL_TOLERANCE_M:
        return np.int8(1)
    if forward_distance < -LABEL_TOLERANCE_M:
        return np.int8(-1)
    return np.int8(0)


@nb.njit(cache=True, inline="always")
def elbow_label(side, cross, reach):
    """Elbow label from the 2-D cross product ``(wrist - shoulder) x (elbow - shoulder)``.

    ``side`` is +1 or -1 (the viewing side), ``reach`` the shoulder-to-wrist
    distance (m); ``|cross| / reach`` is the elbow's distance from that line.
    """
    if np.abs(cross) <= LABEL_TOLERANCE_M * reach or reach <= LABEL_TOLERANCE_M:
        return np.int8(0)
    return np.int8(1) if side * cross > 0.0 else np.int8(-1)


@nb.njit(cache=True, inline="always")
def wrist_label(bend_value, straight_value):
    """Wrist label: sign of the bend ``bend_value - straight_value`` wrapped to (-pi, pi].

    0 within :data:`LABEL_TOLERANCE_RAD` of a straight wrist (bend 0 or pi,
    where the axes before and after the bend joint are parallel).
    """
    d = bend_value - straight_value
    if d <= -np.pi or d > np.pi:
        d -= 2.0 * np.pi * np.ceil((d - np.pi) * (0.5 / np.pi))
    if d > LABEL_TOLERANCE_RAD and d < np.pi - LABEL_TOLERANCE_RAD:
        return np.int8(1)
    if d < -LABEL_TOLERANCE_RAD and d > LABEL_TOLERANCE_RAD - np.pi:
        return np.int8(-1)
    return np.int8(0)


REVOLUTION_TIE = 1e-9
"""An offset within this many revolutions of an exact half revolution counts as that half."""


@nb.njit(cache=True, inline="always")
def centred_revolution(offset_rad):
    """Whole revolutions in an angle offset from a window centre, rounded half toward zero.

    ``k = sign(x) floor(|x| + 1/2)`` with ``x = offset_rad / 2 pi``, an exact half (within
    :data:`REVOLUTION_TIE`) rounded toward zero: the window of revolution 0 is the closed
    ``[centre - pi, centre + pi]``, so an offset of exactly +-180 deg is no extra revolution
    and +-540 deg is one (common practice, no source).
    """
    x = offset_rad * (0.5 / np.pi)
    k = int(np.floor(np.abs(x) + 0.5 - REVOLUTION_TIE))
    return k if x >= 0.0 else -k


def centred_revolutions(offset_rad: npt.ArrayLike) -> FloatArray:
    """:func:`centred_revolution` of every offset (rad), any shape; NaN stays NaN."""
    x = np.asarray(offset_rad, dtype=np.float64) * (0.5 / np.pi)
    return np.sign(x) * np.floor(np.abs(x) + 0.5 - REVOLUTION_TIE)


@nb.njit(cache=True)
def _arm_labels(forward_distance, cross, reach, bend, straight, shoulder, elbow, wrist):
    for k in range(forward_distance.shape[0]):
        shoulder[k] = shoulder_label(forward_distance[k])
        side = 1.0 if shoulder[k] == 0 else float(shoulder[k])
        elbow[k] = elbow_label(side, cross[k], reach[k])
        wrist[k] = wrist_label(bend[k], straight)


@nb.njit(cache=True)
def _planar_labels(cross, reach, elbow):
    for k in range(cross.shape[0]):
        elbow[k] = elbow_label(1.0, cross[k], reach[k])


@dataclass(frozen=True)
class BranchGeometry:
    """What the branch labels of one robot are measured on (see module docstring).

    Attributes
    ----------
    scheme : str
        ``"arm"``, ``"planar"`` or ``"none"``.
    shoulder_joint, elbow_joint, wrist_joint : int
        0-based joint indices of the shoulder, elbow and wrist bend joints
        (-1 where not used).
    forward_sign : float
        +1 or -1: the arm plane's forward direction is ``forward_sign * (a2 x a1)``.
    up_sign : float
        +1 or -1: the up direction is ``up_sign * a1``.
    wrist_straight : float
        Value of the wrist bend joint with a straight wrist, rad, in (-pi/2, pi/2].
    """

    scheme: str
    shoulder_joint: int = -1
    elbow_joint: int = -1
    wrist_joint: int = -1
    forward_sign: float = 1.0
    up_sign: float = 1.0
    wrist_straight: float = 0.0


def _axes_and_origins(robot: Robot, frames: FloatArray) -> tuple[FloatArray, FloatArray]:
    """Joint axes and joint origins in the base frame, shapes (N, n, 3) each."""
    n = robot.dof
    R = frames[:, 1 : n + 1, :3, :3]
    axes = np.einsum("knij,nj->kni", R, robot.axes)
    return axes, frames[:, 1 : n + 1, :3, 3]


def _nearest_point_on_line(
    p: FloatArray, a: FloatArray, other_p: FloatArray, other_a: FloatArray, fallback: FloatArray
) -> FloatArray:
    """Point of line (p, a) nearest line (other_p, other_a), shape (N, 3); ``fallback`` if parallel."""
    b = np.einsum("ki,ki->k", a, other_a)
    w = p - other_p
    d = np.einsum("ki,ki->k", a, w)
    e = np.einsum("ki,ki->k", other_a, w)
    denominator = 1.0 - b * b
    parallel = denominator < _PARALLEL_TOLERANCE
    t = np.where(parallel, 0.0, (b * e - d) / np.where(parallel, 1.0, denominator))
    return np.where(parallel[:, None], fallback, p + t[:, None] * a)


def _unit(v: FloatArray) -> FloatArray:
    norm = np.linalg.norm(v, axis=-1, keepdims=True)
    return v / np.where(norm > 0.0, norm, 1.0)


def _arm_points(
    robot: Robot, geometry: BranchGeometry, q: FloatArray
) -> tuple[FloatArray, FloatArray, FloatArray, FloatArray, FloatArray, FloatArray, FloatArray]:
    """Axis-1 point and direction, shoulder axis, shoulder, elbow, wrist-centre and wrist points."""
    axes, origins = _axes_and_origins(robot, fk_frames(robot, q))
    wj = geometry.wrist_joint
    wrist_centre = _nearest_point_on_line(
        origins[:, wj], axes[:, wj], origins[:, wj - 1], axes[:, wj - 1], origins[:, wj]
    )
    wrist_point = _nearest_point_on_line(
        origins[:, wj], axes[:, wj], origins[:, wj + 1], axes[:, wj + 1], wrist_centre
    )
    return (
        origins[:, 0],
        axes[:, 0],
        axes[:, geometry.shoulder_joint],
        origins[:, geometry.shoulder_joint],
        origins[:, geometry.elbow_joint],
        wrist_centre,
        wrist_point,
    )


@dataclass(frozen=True, eq=False)
class ArmPlanePoints:
    """Shoulder, elbow, wrist centre and wrist point in arm-plane coordinates (forward, up), m.

    Attributes
    ----------
    shoulder, elbow, wrist_centre, wrist_point : arrays, shape (N, 2)
        Points projected into the arm plane, measured from axis 1 along the
        forward and up directions (module docstring).
    """

    shoulder: FloatArray
    elbow: FloatArray
    wrist_centre: FloatArray
    wrist_point: FloatArray


def arm_plane_points(
    robot: Robot, q: npt.ArrayLike, geometry: BranchGeometry | None = None
) -> ArmPlanePoints:
    """Shoulder, elbow, wrist centre and wrist point of six- and seven-axis arms in the arm plane.

    Parameters
    ----------
    robot : Robot
        An arm of the ``"arm"`` label scheme.
    q : array-like, shape (N, n)
    geometry : BranchGeometry, optional
        ``branch_geometry(robot)``, computed if omitted.

    Returns
    -------
    ArmPlanePoints
    """
    q = check_configurations(robot, q)
    geometry = branch_geometry(robot) if geometry is None else geometry
    if geometry.scheme != "arm":
        raise KinematicsInputError(
            f"robot {robot.name!r}: shoulder, elbow and wrist centre are defined for six- and "
            f"seven-axis arms only (label scheme {geometry.scheme!r})"
        )
    p1, a1, a2, s, e, w, wp = _arm_points(robot, geometry, q)
    forward = geometry.forward_sign * _unit(np.cross(a2, a1))
    up = geometry.up_sign * a1

    def plane(point: FloatArray) -> FloatArray:
        d = point - p1
        return np.stack([np.einsum("ki,ki->k", d, forward), np.einsum("ki,ki->k", d, up)], axis=1)

    return ArmPlanePoints(plane(s), plane(e), plane(w), plane(wp))


_GEOMETRIES: weakref.WeakKeyDictionary[Robot, BranchGeometry] = weakref.WeakKeyDictionary()
"""Branch geometry per robot object. Robots are immutable, so it is worked out (one
forward kinematics at the zero configuration) once and kept while the robot lives."""


def branch_geometry(robot: Robot) -> BranchGeometry:
    """Label scheme, joints and direction signs of a robot's branch labels.

    Six- and seven-axis all-revolute arms whose second axis is not parallel to
    the first use the ``"arm"`` scheme; arms whose first two joints are
    revolute with parallel axes the ``"planar"`` scheme; all others ``"none"``.
    The signs are fixed at the all-zero configuration (module docstring).
    Worked out once per robot object.
    """
    geometry = _GEOMETRIES.get(robot)
    if geometry is None:
        geometry = _branch_geometry(robot)
        _GEOMETRIES[robot] = geometry
    return geometry


def _branch_geometry(robot: Robot) -> BranchGeometry:
    """:func:`branch_geometry`, worked out."""
    n = robot.dof
    if n < 2 or robot.prismatic[0] or robot.prismatic[1]:
        return BranchGeometry("none")
    zero = np.zeros((1, n))
    axes, _origins = _axes_and_origins(robot, fk_frames(robot, zero))
    a1, a2 = axes[0, 0], axes[0, 1]
    sine_12 = float(np.linalg.norm(np.cross(a1, a2)))
    if n in (6, 7) and not np.any(robot.prismatic) and sine_12 > _PARALLEL_TOLERANCE:
        elbow_joint, wrist_joint = (2, 4) if n == 6 else (3, 5)
        provisional = BranchGeometry("arm", 1, elbow_joint, wrist_joint)
        p1, _, _, shoulder, _, _, wrist_point = _arm_points(robot, provisional, zero)
        forward = _unit(np.cross(a2, a1))
        ahead = float((wrist_point[0] - p1[0]) @ forward)
        above = float(shoulder[0] @ a1)
        a_before, a_bend, a_after = axes[0, wrist_joint - 1 : wrist_joint + 2]
        bend_at_zero = np.arctan2(np.cross(a_before, a_after) @ a_bend, a_before @ a_after)
        straight = -bend_at_zero - np.pi * np.round(-bend_at_zero / np.pi)
        if straight <= -np.pi / 2:
            straight += np.pi
        return BranchGeometry(
            "arm",
            1,
            elbow_joint,
            wrist_joint,
            forward_sign=-1.0 if ahead < -_SIDE_TOLERANCE_M else 1.0,
            up_sign=-1.0 if above < -_SIDE_TOLERANCE_M else 1.0,
            wrist_straight=float(straight),
        )
    if sine_12 <= _PARALLEL_TOLERANCE:
        return BranchGeometry("planar", elbow_joint=1)
    return BranchGeometry("none")


def label_branches(robot: Robot, q: npt.ArrayLike) -> tuple[Int8Array, Int8Array, Int8Array]:
    """Shoulder, elbow and wrist labels of joint configurations.

    Definitions in the module docstring; computed from the joint axes and
    origins of forward kinematics (:func:`posebridge.kinematics.fk.fk_frames`).

    Parameters
    ----------
    robot : Robot
    q : array-like, shape (N, n)
        Joint values, rad or m.

    Returns
    -------
    shoulder, elbow, wrist : arrays of int8, shape (N,)
        +1, -1, or 0 where not applicable or undefined.
    """
    q = check_configurations(robot, q)
    N = q.shape[0]
    geometry = branch_geometry(robot)
    shoulder = np.zeros(N, dtype=np.int8)
    elbow = np.zeros(N, dtype=np.int8)
    wrist = np.zeros(N, dtype=np.int8)
    if geometry.scheme == "arm":
        points = arm_plane_points(robot, q, geometry)
        s2, e2, w2 = points.shoulder, points.elbow, points.wrist_centre
        reach_vector = w2 - s2
        elbow_vector = e2 - s2
        cross = reach_vector[:, 0] * elbow_vector[:, 1] - reach_vector[:, 1] * elbow_vector[:, 0]
        reach = np.linalg.norm(reach_vector, axis=1)
        _arm_labels(
            np.ascontiguousarray(points.wrist_point[:, 0]),
            cross,
            reach,
            np.ascontiguousarray(q[:, geometry.wrist_joint]),
            geometry.wrist_straight,
            shoulder,
            elbow,
            wrist,
        )
    elif geometry.scheme == "planar":
        frames = fk_frames(robot, q)
        axes, origins = _axes_and_origins(robot, frames)
        end = origins[:, 2] if robot.dof >= 3 else frames[:, robot.dof + 1, :3, 3]
        a1 = axes[:, 0]
        reach_vector = end - origins[:, 0]
        elbow_vector = origins[:, 1] - origins[:, 0]
        cross = np.einsum("ki,ki->k", np.cross(reach_vector, elbow_vector), a1)
        in_plane = reach_vector - np.einsum("ki,ki->k", reach_vector, a1)[:, None] * a1
        reach = np.linalg.norm(in_plane, axis=1)
        _planar_labels(cross, reach, elbow)
    return shoulder, elbow, wrist


def labels_match(labels: npt.ArrayLike, required: npt.ArrayLike) -> BoolArray:
    """Branch labels that satisfy a required branch; a 0 on either side matches either sign.

    Parameters
    ----------
    labels, required : array-like of int, shapes broadcasting to (..., 3)
        ``[shoulder, elbow, wrist]`` label values (+1, -1, 0; module docstring).

    Returns
    -------
    match : array of bool, the broadcast shape without its last axis
    """
    labels = np.asarray(labels)
    required = np.asarray(required)
    return np.all((required == 0) | (labels == 0) | (labels == required), axis=-1)

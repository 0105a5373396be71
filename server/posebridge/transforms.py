"""Rotations and homogeneous transforms, batch-first.

Conventions (see DEVELOPERS.md):

* Rotation matrices have shape ``(..., 3, 3)``, homogeneous transforms
  ``(..., 4, 4)``. ``T_a_b`` is the pose of frame b expressed in frame a.
* Roll-pitch-yaw is rotation about fixed X (roll), then fixed Y (pitch), then
  fixed Z (yaw): ``R = Rz(yaw) @ Ry(pitch) @ Rx(roll)``. This is the URDF
  ``rpy`` convention and scipy's ``Rotation.from_euler("xyz", ...)``.
  Output ranges: pitch in [-pi/2, pi/2], roll and yaw in (-pi, pi]. At gimbal
  lock (|pitch| = pi/2) roll is set to 0 and the whole turn about Z goes to yaw.
* Quaternions are ``[w, x, y, z]`` (scalar first), unit length; outputs are
  made canonical with ``w >= 0``.
* Rotation vectors are ``angle * unit_axis`` with angle in [0, pi].

Every angle-taking or angle-returning function has a keyword-only
``degrees=`` flag; the default is radians.
"""

from __future__ import annotations

import numpy as np
import numpy.typing as npt

from posebridge.errors import InputError
from posebridge.units import FloatArray, deg_from_rad, rad_from_deg

__all__ = [
    "TransformError",
    "check_rotation_matrix",
    "check_transform",
    "invert_transform",
    "quaternion_from_rotation_matrix",
    "rotation_matrix_about_axis",
    "rotation_matrix_about_y",
    "rotation_matrix_about_z",
    "rotation_matrix_from_quaternion",
    "rotation_matrix_from_rotation_vector",
    "rotation_matrix_from_rpy",
    "rotation_vector_from_rotation_matrix",
    "rpy_from_rotation_matrix",
    "transform_from_position_rpy",
    "transform_from_rotation_translation",
    "transform_points",
]

_ORTHONORMAL_TOLERANCE = 1e-6
_GIMBAL_TOLERANCE = 1e-9


class TransformError(InputError):
    """An input array is not a valid rotation or transform."""


def _as_float_array(value: npt.ArrayLike, trailing: tuple[int, ...], name: str) -> FloatArray:
    array = np.asarray(value, dtype=np.float64)
    if array.ndim < len(trailing) or array.shape[array.ndim - len(trailing) :] != trailing:
        expected = "(..., " + ", ".join(str(d) for d in trailing) + ")"
        raise TransformError(f"{name}: expected shape {expected}, got {array.shape}")
    if not np.all(np.isfinite(array)):
        raise TransformError(f"{name}: contains NaN or infinite values")
    return array


def check_rotation_matrix(
    R: npt.ArrayLike, *, tolerance: float = _ORTHONORMAL_TOLERANCE
) -> FloatArray:
    """Validate rotation matrices and return them as float64.

    Parameters
    ----------
    R : array-like, shape (..., 3, 3)
    tolerance : float
        Largest accepted deviation of ``R @ R.T`` from identity and of
        ``det(R)`` from 1.

    Returns
    -------
    R : array, shape (..., 3, 3)
    """
    R = _as_float_array(R, (3, 3), "rotation matrix")
    deviation = np.abs(R @ np.swapaxes(R, -1, -2) - np.eye(3)).max(initial=0.0)
    if deviation > tolerance:
        raise TransformError(
            f"rotation matrix: not orthonormal (max |R R^T - I| = {deviation:.3g} > {tolerance:g})"
        )
    if np.any(np.linalg.det(R) < 0.0):
        raise TransformError("rotation matrix: determinant is -1 (a reflection, not a rotation)")
    return R


def check_transform(T: npt.ArrayLike, *, tolerance: float = _ORTHONORMAL_TOLERANCE) -> FloatArray:
    """Validate homogeneous transforms and return them as float64.

    Parameters
    ----------
    T : array-like, shape (..., 4, 4)

    Returns
    -------
    T : array, shape (..., 4, 4)
    """
    T = _as_float_array(T, (4, 4), "transform")
    check_rotation_matrix(T[..., :3, :3], tolerance=tolerance)
    if np.abs(T[..., 3, :] - np.array([0.0, 0.0, 0.0, 1.0])).max(initial=0.0) > tolerance:
        raise TransformError("transform: last row must be [0, 0, 0, 1]")
    return T


def rotation_matrix_about_axis(axis: npt.ArrayLike, angle: npt.ArrayLike) -> FloatArray:
    """Rotation by ``angle`` about a unit ``axis`` (Rodrigues' formula).

    ``R = I + sin(a) K + (1 - cos(a)) K^2`` with ``K`` the cross-product
    matrix of the axis (Lynch & Park, Modern Robotics, eq. 3.51).

    Parameters
    ----------
    axis : array-like, shape (..., 3)
        Unit vectors; broadcast against ``angle``.
    angle : array-like, shape (...)
        Radians.

    Returns
    -------
    R : array, shape (..., 3, 3)
    """
    axis = np.asarray(axis, dtype=np.float64)
    angle = np.asarray(angle, dtype=np.float64)
    x, y, z = axis[..., 0], axis[..., 1], axis[..., 2]
    s = np.sin(angle)
    c = np.cos(angle)
    t = 1.0 - c
    x, y, z, s, c, t = np.broadcast_arrays(x, y, z, s, c, t)
    R = np.empty((*x.shape, 3, 3))
    R[..., 0, 0] = c + t * x * x
    R[..., 0, 1] = t * x * y - s * z
    R[..., 0, 2] = t * x * z + s * y
    R[..., 1, 0] = t * x * y + s * z
    R[..., 1, 1] = c + t * y * y
    R[..., 1, 2] = t * y * z - s * x
    R[..., 2, 0] = t * x * z - s * y
    R[..., 2, 1] = t * y * z + s * x
    R[..., 2, 2] = c + t * z * z
    return R


def _elementary_rotation(angle: npt.ArrayLike, axis: int) -> FloatArray:
    """Return the rotation by ``angle`` about coordinate axis ``axis`` (0 x, 1 y, 2 z).

    With ``i, j`` the next two axes in cyclic order: ``R[i, i] = R[j, j] = c``,
    ``R[j, i] = s``, ``R[i, j] = -s``, ``R[axis, axis] = 1``, all else exactly 0;
    shape (..., 3, 3).
    """
    angle = np.asarray(angle, dtype=np.float64)
    c, s = np.cos(angle), np.sin(angle)
    i, j = (axis + 1) % 3, (axis + 2) % 3
    R = np.zeros((*angle.shape, 3, 3))
    R[..., i, i], R[..., j, j], R[..., j, i], R[..., i, j], R[..., axis, axis] = c, c, s, -s, 1.0
    return R


def rotation_matrix_about_z(angle: npt.ArrayLike) -> FloatArray:
    """Rotation by ``angle`` about the z axis, ``Rz = [[c, -s, 0], [s, c, 0], [0, 0, 1]]``.

    The elementary rotation (Lynch & Park, Modern Robotics, sec. 3.2.1),
    written out so that the zeros and the one are exact.

    Parameters
    ----------
    angle : array-like, shape (...)
        Radians.

    Returns
    -------
    R : array, shape (..., 3, 3)
    """
    return _elementary_rotation(angle, 2)


def rotation_matrix_about_y(angle: npt.ArrayLike) -> FloatArray:
    """Rotation by ``angle`` about the y axis, ``Ry = [[c, 0, s], [0, 1, 0], [-s, 0, c]]``.

    As :func:`rotation_matrix_about_z` (same reference, shapes and exact zeros).
    """
    return _elementary_rotation(angle, 1)


def rotation_matrix_from_rpy(rpy: npt.ArrayLike, *, degrees: bool = False) -> FloatArray:
    """Rotation matrix from fixed-axis X-Y-Z roll-pitch-yaw.

    ``R = Rz(yaw) @ Ry(pitch) @ Rx(roll)`` (URDF specification, ``origin rpy``).

    Parameters
    ----------
    rpy : array-like, shape (..., 3)
        ``[roll, pitch, yaw]``.
    degrees : bool, keyword-only
        Angles are in degrees.

    Returns
    -------
    R : array, shape (..., 3, 3)
    """
    rpy = _as_float_array(rpy, (3,), "rpy")
    if degrees:
        rpy = rad_from_deg(rpy)
    cr, cp, cy = np.cos(rpy[..., 0]), np.cos(rpy[..., 1]), np.cos(rpy[..., 2])
    sr, sp, sy = np.sin(rpy[..., 0]), np.sin(rpy[..., 1]), np.sin(rpy[..., 2])
    R = np.empty((*rpy.shape[:-1], 3, 3))
    R[..., 0, 0] = cy * cp
    R[..., 0, 1] = cy * sp * sr - sy * cr
    R[..., 0, 2] = cy * sp * cr + sy * sr
    R[..., 1, 0] = sy * cp
    R[..., 1, 1] = sy * sp * sr + cy * cr
    R[..., 1, 2] = sy * sp * cr - cy * sr
    R[..., 2, 0] = -sp
    R[..., 2, 1] = cp * sr
    R[..., 2, 2] = cp * cr
    return R


def rpy_from_rotation_matrix(R: npt.ArrayLike, *, degrees: bool = False) -> FloatArray:
    """Fixed-axis X-Y-Z roll-pitch-yaw of rotation matrices.

    Inverse of :func:`rotation_matrix_from_rpy`. Pitch is in [-pi/2, pi/2],
    roll and yaw in (-pi, pi]. At gimbal lock (|pitch| = pi/2, where only
    yaw - roll or yaw + roll is defined) roll is set to 0.

    Parameters
    ----------
    R : array-like, shape (..., 3, 3)
    degrees : bool, keyword-only
        Return degrees.

    Returns
    -------
    rpy : array, shape (..., 3)
    """
    R = _as_float_array(R, (3, 3), "rotation matrix")
    sin_pitch = np.clip(-R[..., 2, 0], -1.0, 1.0)
    cos_pitch = np.hypot(R[..., 0, 0], R[..., 1, 0])
    pitch = np.arctan2(sin_pitch, cos_pitch)
    locked = cos_pitch < _GIMBAL_TOLERANCE
    roll = np.where(locked, 0.0, np.arctan2(R[..., 2, 1], R[..., 2, 2]))
    # At pitch = +pi/2: R[0,1] = -sin(yaw - roll), R[1,1] = cos(yaw - roll); with
    # roll = 0 the yaw follows from the second column. At pitch = -pi/2 the
    # same rows give yaw + roll, again yaw with roll = 0.
    yaw_locked = np.arctan2(-R[..., 0, 1], R[..., 1, 1])
    yaw = np.where(locked, yaw_locked, np.arctan2(R[..., 1, 0], R[..., 0, 0]))
    rpy = np.stack([roll, pitch, yaw], axis=-1)
    rpy = np.where(rpy <= -np.pi, rpy + 2.0 * np.pi, rpy)
    return deg_from_rad(rpy) if degrees else rpy


def quaternion_from_rotation_matrix(R: npt.ArrayLike) -> FloatArray:
    """Return unit quaternions ``[w, x, y, z]`` of rotation matrices, with ``w >= 0``.

    Uses the largest-diagonal branch selection of Shepperd (1978), "Quaternion
    from rotation matrix", J. Guidance and Control 1(3), which stays accurate
    near 180-degree rotations.

    Parameters
    ----------
    R : array-like, shape (..., 3, 3)

    Returns
    -------
    quaternion : array, shape (..., 4)
    """
    R = _as_float_array(R, (3, 3), "rotation matrix")
    batch = R.shape[:-2]
    m = R.reshape(-1, 3, 3)
    trace = m[:, 0, 0] + m[:, 1, 1] + m[:, 2, 2]
    candidates = np.stack([trace, m[:, 0, 0], m[:, 1, 1], m[:, 2, 2]], axis=-1)
    branch = np.argmax(candidates, axis=-1)
    q = np.empty((m.shape[0], 4))
    for index in range(4):
        sel = branch == index
        if not np.any(sel):
            continue
        r = m[sel]
        if index == 0:
            s = 2.0 * np.sqrt(1.0 + trace[sel])
            q[sel] = np.stack(
                [
                    0.25 * s,
                    (r[:, 2, 1] - r[:, 1, 2]) / s,
                    (r[:, 0, 2] - r[:, 2, 0]) / s,
                    (r[:, 1, 0] - r[:, 0, 1]) / s,
                ],
                axis=-1,
            )
        else:
            i = index - 1
            j = (i + 1) % 3
            k = (i + 2) % 3
            s = 2.0 * np.sqrt(np.maximum(1.0 + r[:, i, i] - r[:, j, j] - r[:, k, k], 0.0))
            vec = np.empty((r.shape[0], 3))
            vec[:, i] = 0.25 * s
            vec[:, j] = (r[:, j, i] + r[:, i, j]) / s
            vec[:, k] = (r[:, k, i] + r[:, i, k]) / s
            w = (r[:, k, j] - r[:, j, k]) / s
            q[sel] = np.concatenate([w[:, None], vec], axis=-1)
    q /= np.linalg.norm(q, axis=-1, keepdims=True)
    q = np.where(q[:, :1] < 0.0, -q, q)
    return q.reshape((*batch, 4))


def rotation_matrix_from_quaternion(quaternion: npt.ArrayLike) -> FloatArray:
    """Rotation matrices of quaternions ``[w, x, y, z]``.

    Inputs are normalised first; ``q`` and ``-q`` give the same matrix. A
    zero quaternion is refused.

    Parameters
    ----------
    quaternion : array-like, shape (..., 4)

    Returns
    -------
    R : array, shape (..., 3, 3)
    """
    q = _as_float_array(quaternion, (4,), "quaternion")
    norm = np.linalg.norm(q, axis=-1, keepdims=True)
    if np.any(norm < 1e-12):
        raise TransformError("quaternion: zero length, cannot be normalised")
    w, x, y, z = np.moveaxis(q / norm, -1, 0)
    R = np.empty((*q.shape[:-1], 3, 3))
    R[..., 0, 0] = 1.0 - 2.0 * (y * y + z * z)
    R[..., 0, 1] = 2.0 * (x * y - z * w)
    R[..., 0, 2] = 2.0 * (x * z + y * w)
    R[..., 1, 0] = 2.0 * (x * y + z * w)
    R[..., 1, 1] = 1.0 - 2.0 * (x * x + z * z)
    R[..., 1, 2] = 2.0 * (y * z - x * w)
    R[..., 2, 0] = 2.0 * (x * z - y * w)
    R[..., 2, 1] = 2.0 * (y * z + x * w)
    R[..., 2, 2] = 1.0 - 2.0 * (x * x + y * y)
    return R


def rotation_vector_from_rotation_matrix(R: npt.ArrayLike, *, degrees: bool = False) -> FloatArray:
    """Rotation vectors (axis times angle, angle in [0, pi]) of rotation matrices.

    Computed through the quaternion, ``angle = 2 atan2(|v|, w)``, which is
    accurate at small angles and near pi (matrix logarithm, Lynch & Park,
    Modern Robotics, sec. 3.2.3.3).

    Parameters
    ----------
    R : array-like, shape (..., 3, 3)
    degrees : bool, keyword-only
        Return the vector's length in degrees.

    Returns
    -------
    rotation_vector : array, shape (..., 3)
    """
    q = quaternion_from_rotation_matrix(R)
    vec = q[..., 1:]
    sin_half = np.linalg.norm(vec, axis=-1)
    angle = 2.0 * np.arctan2(sin_half, q[..., 0])
    # angle / sin(angle/2) -> 2 as angle -> 0
    safe = sin_half > 1e-12
    scale = np.where(safe, angle / np.where(safe, sin_half, 1.0), 2.0)
    rotvec = vec * scale[..., None]
    return deg_from_rad(rotvec) if degrees else rotvec


def rotation_matrix_from_rotation_vector(
    rotation_vector: npt.ArrayLike, *, degrees: bool = False
) -> FloatArray:
    """Rotation matrices of rotation vectors (matrix exponential, Rodrigues).

    Parameters
    ----------
    rotation_vector : array-like, shape (..., 3)
        Axis times angle.
    degrees : bool, keyword-only
        The vector's length is in degrees.

    Returns
    -------
    R : array, shape (..., 3, 3)
    """
    v = _as_float_array(rotation_vector, (3,), "rotation vector")
    if degrees:
        v = rad_from_deg(v)
    angle = np.linalg.norm(v, axis=-1)
    safe = angle > 1e-15
    axis = np.where(safe[..., None], v / np.where(safe, angle, 1.0)[..., None], [0.0, 0.0, 1.0])
    return rotation_matrix_about_axis(axis, angle)


def transform_from_rotation_translation(R: npt.ArrayLike, p: npt.ArrayLike) -> FloatArray:
    """Homogeneous transforms from rotations and translations.

    Parameters
    ----------
    R : array-like, shape (..., 3, 3)
    p : array-like, shape (..., 3)
        Broadcast against ``R``'s batch shape.

    Returns
    -------
    T : array, shape (..., 4, 4)
    """
    R = np.asarray(R, dtype=np.float64)
    p = np.asarray(p, dtype=np.float64)
    batch = np.broadcast_shapes(R.shape[:-2], p.shape[:-1])
    T = np.zeros((*batch, 4, 4))
    T[..., :3, :3] = R
    T[..., :3, 3] = p
    T[..., 3, 3] = 1.0
    return T


def transform_from_position_rpy(
    position: npt.ArrayLike, rpy: npt.ArrayLike, *, degrees: bool = False
) -> FloatArray:
    """Homogeneous transforms from positions and fixed-axis X-Y-Z roll-pitch-yaw.

    Parameters
    ----------
    position : array-like, shape (..., 3)
    rpy : array-like, shape (..., 3)
    degrees : bool, keyword-only
        ``rpy`` is in degrees.

    Returns
    -------
    T : array, shape (..., 4, 4)
    """
    return transform_from_rotation_translation(
        rotation_matrix_from_rpy(rpy, degrees=degrees), position
    )


def invert_transform(T: npt.ArrayLike) -> FloatArray:
    """Inverse of rigid transforms: ``[R^T, -R^T p; 0, 1]``.

    Parameters
    ----------
    T : array-like, shape (..., 4, 4)

    Returns
    -------
    T_inv : array, shape (..., 4, 4)
    """
    T = np.asarray(T, dtype=np.float64)
    Rt = np.swapaxes(T[..., :3, :3], -1, -2)
    p = T[..., :3, 3]
    return transform_from_rotation_translation(Rt, -np.einsum("...ij,...j->...i", Rt, p))


def transform_points(T: npt.ArrayLike, points: npt.ArrayLike) -> FloatArray:
    """Apply transforms to points: ``R @ x + p``.

    Parameters
    ----------
    T : array-like, shape (..., 4, 4)
    points : array-like, shape (..., 3)
        Broadcast against ``T``'s batch shape.

    Returns
    -------
    transformed : array, shape (..., 3)
    """
    T = np.asarray(T, dtype=np.float64)
    points = np.asarray(points, dtype=np.float64)
    return np.einsum("...ij,...j->...i", T[..., :3, :3], points) + T[..., :3, 3]

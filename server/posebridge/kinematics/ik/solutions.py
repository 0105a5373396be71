"""The result of inverse kinematics, shared by every IK solver (analytic and numerical).

For ``N`` target poses a solver returns :class:`IkSolutions` with ``M``
solution slots per pose. Every slot holds one joint configuration (or NaN when
empty), whether it reaches the pose within the requested tolerance
(``valid``), whether it is inside the joint limits, its arm branch labels and
the whole extra revolutions of joints whose range exceeds one revolution. How
raw candidates become these slots (revolution variants, limit flags, order)
is :mod:`posebridge.kinematics.ik.finishing`.

Branch label values (see :mod:`posebridge.kinematics.branches` for the
definitions in words): ``+1`` front / up (left for planar arms) / positive,
``-1`` back / down (right) / negative, ``0`` not applicable or undefined
(singular).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

from posebridge.arrays import BoolArray, FloatArray, Int8Array, Int16Array
from posebridge.kinematics.branches import branch_parts

__all__ = [
    "LABEL_SCHEMES",
    "REASON_CODES",
    "REASON_NO_WITHIN_LIMITS",
    "REASON_ORIENTATION",
    "REASON_OUT_OF_REACH",
    "IkSolutions",
    "reasons_from_codes",
]

REASON_OUT_OF_REACH = "out of reach"
REASON_ORIENTATION = "orientation not reachable"
REASON_NO_WITHIN_LIMITS = "outside joint limits on every branch"
REASON_CODES = ("", REASON_OUT_OF_REACH, REASON_ORIENTATION, REASON_NO_WITHIN_LIMITS)
"""Reason text by code: 0 solved, 1 out of reach, 2 orientation not reachable,
3 valid only outside the joint limits. Kernels write codes, :func:`reasons_from_codes`
turns them into text."""
_REASON_TEXTS = np.array(REASON_CODES, dtype=object)
_REASON_TEXTS.flags.writeable = False


LABEL_SCHEMES = ("arm", "planar", "none")
"""``"arm"``: shoulder front/back, elbow up/down, wrist positive/negative (six- and
seven-axis arms); ``"planar"``: elbow left/right only (planar arms, SCARA);
``"none"``: no branches (gantry)."""


@dataclass(frozen=True, eq=False)
class IkSolutions:
    """All IK solutions for N target poses, M solution slots per pose (SI units).

    Attributes
    ----------
    q : array, shape (N, M, n)
        Joint values (rad or m); NaN in empty slots.
    valid : array of bool, shape (N, M)
        The slot holds a solution that reaches the pose within tolerance (on
        the controlled pose components, see ``ignored_components``).
    within_limits : array of bool, shape (N, M)
        The solution is inside every joint's position limits (False for empty
        slots).
    shoulder : array of int8, shape (N, M)
        +1 front, -1 back, 0 not applicable or undefined (singular).
    elbow : array of int8, shape (N, M)
        +1 up, -1 down (planar arms and SCARA: +1 left, -1 right), 0 not
        applicable or undefined.
    wrist : array of int8, shape (N, M)
        +1 positive, -1 negative, 0 not applicable or singular.
    revolutions : array of int16, shape (N, M, n)
        Whole extra revolutions (multiples of 2 pi) added to joints whose range
        exceeds one revolution, relative to the value wrapped to (-pi, pi].
    reason : tuple of str, length N
        ``""`` where a valid solution within limits exists, otherwise why not:
        ``"out of reach"``, ``"orientation not reachable"``, ``"outside joint
        limits on every branch"`` or a solver-specific explanation.
    ignored_components : tuple of str
        Pose components the arm does not control (from ``"x", "y", "z",
        "roll", "pitch", "yaw"``), e.g. ``("z", "roll", "pitch")`` for a
        planar 2R arm in the x-y plane.
    method : str
        Solver and published method, e.g. ``"analytic: ortho-parallel,
        Brandstötter et al. 2014"``.
    joint_names : tuple of str
        Joint names for labels; ``j1..jn`` when empty.
    label_scheme : str
        One of :data:`LABEL_SCHEMES`; decides the words of :meth:`branch_label`.
    """

    q: FloatArray
    valid: BoolArray
    within_limits: BoolArray
    shoulder: Int8Array
    elbow: Int8Array
    wrist: Int8Array
    revolutions: Int16Array
    reason: tuple[str, ...]
    ignored_components: tuple[str, ...]
    method: str
    joint_names: tuple[str, ...] = ()
    label_scheme: str = "arm"

    def __post_init__(self) -> None:
        """Check that every array has the shape of ``q``'s slots, (N, M) or (N, M, n)."""
        if self.q.ndim != 3:
            raise ValueError(f"IkSolutions.q: expected shape (N, M, n), got {self.q.shape}")
        N, M, n = self.q.shape
        for name in ("valid", "within_limits", "shoulder", "elbow", "wrist"):
            shape = getattr(self, name).shape
            if shape != (N, M):
                raise ValueError(f"IkSolutions.{name}: expected shape {(N, M)}, got {shape}")
        if self.revolutions.shape != (N, M, n):
            raise ValueError(
                f"IkSolutions.revolutions: expected shape {(N, M, n)}, got {self.revolutions.shape}"
            )
        if len(self.reason) != N:
            raise ValueError(f"IkSolutions.reason: expected {N} entries, got {len(self.reason)}")
        if self.joint_names and len(self.joint_names) != n:
            raise ValueError(
                f"IkSolutions.joint_names: expected {n} names, got {len(self.joint_names)}"
            )
        if self.label_scheme not in LABEL_SCHEMES:
            raise ValueError(
                f"IkSolutions.label_scheme: expected one of {LABEL_SCHEMES}, got {self.label_scheme!r}"
            )

    @property
    def n_poses(self) -> int:
        """Number of target poses ``N``."""
        return int(self.q.shape[0])

    @property
    def n_slots(self) -> int:
        """Number of solution slots per pose ``M``."""
        return int(self.q.shape[1])

    def branch_label(self, i: int, m: int) -> str:
        """Plain-words branch of slot ``m`` of pose ``i``.

        Examples: ``"front, up, positive"``, ``"back, down, negative, j6 +1 rev"``,
        ``"left"`` (planar arm), ``"c -1 rev"`` or ``"single branch"`` (gantry).
        Empty slots give ``""``.
        """
        if not np.all(np.isfinite(self.q[i, m])):
            return ""
        words = branch_parts(
            self.label_scheme, self.shoulder[i, m], self.elbow[i, m], self.wrist[i, m]
        )
        names = self.joint_names or tuple(f"j{k + 1}" for k in range(self.q.shape[2]))
        for k, count in enumerate(self.revolutions[i, m]):
            if count != 0:
                words.append(f"{names[k]} {int(count):+d} rev")
        return ", ".join(words) if words else "single branch"

    def valid_solutions(self, i: int) -> list[int]:
        """Slot indices ``m`` of pose ``i`` that hold a valid solution, in stored order."""
        return [int(m) for m in np.flatnonzero(self.valid[i])]


def reasons_from_codes(codes: npt.NDArray[np.int8]) -> tuple[str, ...]:
    """Reason texts of :data:`REASON_CODES` for an array of codes, shape (N,)."""
    if not np.any(codes):
        return ("",) * codes.shape[0]
    return tuple(_REASON_TEXTS[codes].tolist())

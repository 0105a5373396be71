"""The one family of input errors: what counts as the user's fault.

Every domain error caused by the input (a file, a request, a command-line value)
subclasses :class:`InputError`, one subclass per area (robot descriptions,
kinematics, geometry, cells, joint logs, planning, time scaling, spaces, reports,
comments, server settings, command-line values). Each front door catches the
base class once: the command line exits with 2 and prints the message, the HTTP
API answers :attr:`InputError.http_status` (422) with ``{"detail": ...}``, the
job runner marks the job failed with the message. Anything else is an internal
error.

This module is a leaf: it imports nothing of posebridge.
"""

from __future__ import annotations

import math
from typing import ClassVar

__all__ = ["InputError", "check_positive"]


class InputError(ValueError):
    """Bad input: a value, file or request the user can correct; the message says how.

    Subclasses may hold their findings in other attributes; ``detail`` is the
    message the HTTP API sends.
    """

    http_status: ClassVar[int] = 422
    """HTTP status of this error at the API (422 Unprocessable Content, RFC 9110 15.5.21)."""

    @property
    def detail(self) -> str:
        """The message the HTTP API sends (subclasses with several findings join them)."""
        return str(self)


def check_positive(
    name: str,
    value: float,
    error: type[InputError],
    *,
    allow_zero: bool = False,
    allow_inf: bool = False,
) -> float:
    """``value`` as a float if it is a positive finite number, else ``error`` naming ``name``.

    ``allow_zero`` also accepts 0 (a finite number >= 0), ``allow_inf`` also
    accepts +infinity (no limit).

    >>> check_positive("speed_m_s", 0.5, InputError)
    0.5
    >>> check_positive("speed_m_s", 0.0, InputError)
    Traceback (most recent call last):
    ...
    posebridge.errors.InputError: speed_m_s: expected a positive finite number, got 0.0
    """
    number = float(value)
    ok = not math.isnan(number) and (math.isfinite(number) or (allow_inf and number > 0.0))
    ok = ok and (number > 0.0 or (allow_zero and number == 0.0))
    if not ok:
        if allow_zero:
            expected = "a finite number >= 0"
        elif allow_inf:
            expected = "a positive number or infinity"
        else:
            expected = "a positive finite number"
        raise error(f"{name}: expected {expected}, got {value!r}")
    return number

"""The warning thresholds and score references of the quality checks, in boundary units.

:class:`QualityThresholds` is part of the cell file (its ``thresholds`` table)
and of the requests that override it, and every result of a check repeats the
set it was run with. Its fields are in millimetres and degrees because they
are the cell file's; this is where they enter the computation: the checks read
them in SI units only, through the properties ending in ``_m``/``_rad`` and
:meth:`QualityThresholds.limit_margin` (and
:func:`posebridge.cell.quality.singularity_thresholds`,
:func:`posebridge.cell.quality.margin_thresholds` built on them).
"""

from __future__ import annotations

import numpy as np
from pydantic import BaseModel, ConfigDict, Field

from posebridge.units import BoolArray, FloatArray, joints_si_from_user, m_from_mm, rad_from_deg

__all__ = ["QualityThresholds"]


class QualityThresholds(BaseModel):
    """The warning thresholds and score references of the checks.

    They are parameters of the checks and part of every result.
    """

    model_config = ConfigDict(extra="forbid", frozen=True, allow_inf_nan=False)

    # common practice, no source
    limit_margin_deg: float = Field(
        default=5.0, gt=0, description="Warn when a revolute joint is closer than this to a limit."
    )
    # common practice, no source
    limit_margin_mm: float = Field(
        default=10.0,
        gt=0,
        description="Warn when a prismatic joint is closer than this to a limit.",
    )
    # common practice, no source
    clearance_mm: float = Field(
        default=25.0, gt=0, description="Warn when the arm or tool is closer than this to anything."
    )
    # common practice, no source
    wrist_deg: float = Field(
        default=10.0, gt=0, description="Near the wrist singularity: wrist bend from straight."
    )
    # common practice, no source
    elbow_deg: float = Field(
        default=5.0, gt=0, description="Near the elbow singularity: elbow from stretched or folded."
    )
    # common practice, no source
    shoulder_mm: float = Field(
        default=50.0,
        gt=0,
        description="Near the shoulder singularity: wrist centre from the plane through axis 1 "
        "parallel to axis 2.",
    )
    # common practice, no source
    score_margin_fraction: float = Field(
        default=0.10,
        gt=0,
        le=0.5,
        description="Branch score: a limit margin of this fraction of the joint's range counts in full.",
    )
    # common practice, no source
    score_clearance_mm: float = Field(
        default=100.0, gt=0, description="Branch score: this clearance counts in full."
    )
    # common practice, no source
    score_singularity_ratio: float = Field(
        default=3.0,
        ge=1,
        description="Branch score: this multiple of the singularity thresholds counts in full.",
    )
    # common practice, no source: a drop or pick point sits within a hand's width of its part
    fixture_distance_mm: float = Field(
        default=200.0,
        gt=0,
        description="Target check: warn when a target's TCP point is farther than this from "
        "the solid of the fixture it belongs to (moved off its fixture).",
    )

    # --- the same thresholds in SI units, for the computation ------------------------------

    @property
    def clearance_m(self) -> float:
        """:attr:`clearance_mm` in metres."""
        return float(m_from_mm(self.clearance_mm))

    @property
    def score_clearance_m(self) -> float:
        """:attr:`score_clearance_mm` in metres."""
        return float(m_from_mm(self.score_clearance_mm))

    @property
    def wrist_rad(self) -> float:
        """:attr:`wrist_deg` in radians."""
        return float(rad_from_deg(self.wrist_deg))

    @property
    def elbow_rad(self) -> float:
        """:attr:`elbow_deg` in radians."""
        return float(rad_from_deg(self.elbow_deg))

    @property
    def shoulder_m(self) -> float:
        """:attr:`shoulder_mm` in metres."""
        return float(m_from_mm(self.shoulder_mm))

    def limit_margin(self, prismatic: BoolArray) -> FloatArray:
        """Limit-margin warning threshold per joint, rad or m, shape (n,).

        Parameters
        ----------
        prismatic : array of bool, shape (n,)
            :attr:`limit_margin_mm` for these joints, :attr:`limit_margin_deg` for the others.
        """
        values = np.where(prismatic, self.limit_margin_mm, self.limit_margin_deg)
        return joints_si_from_user(values, prismatic)

"""The arm-state answer (mm, deg) built from :class:`~posebridge.cell.arm_state.ArmStateData`."""

from __future__ import annotations

import numpy as np
from pydantic import BaseModel, ConfigDict, Field

from posebridge.cell.arm_state import ArmStateData
from posebridge.cell.quality import full_branch_words, revolution_counts
from posebridge.cell.thresholds import QualityThresholds
from posebridge.results.cell import JointMargin, PartKind, SingularityProximity
from posebridge.results.quality import joint_margins_model, singularity_model
from posebridge.units import joint_unit_labels, joints_user_from_si, mm_from_m

__all__ = ["ArmContact", "ArmState", "arm_state_result"]


class _Result(BaseModel):
    model_config = ConfigDict(extra="forbid")


class ArmContact(_Result):
    """One arm capsule closer than the clearance threshold to an obstacle or another capsule."""

    capsule: str = Field(description="Arm or tool capsule.")
    other: str = Field(description="Obstacle name, or the second capsule for a self pair.")
    other_kind: PartKind
    distance_mm: float = Field(description="Signed distance; negative is the penetration depth.")


class ArmState(_Result):
    """The arm's state at one joint configuration in the cell (numbers; the page words them)."""

    joint_names: list[str]
    joint_units: list[str]
    joints_deg: list[float] = Field(
        description="Joint values: degrees for revolute joints, millimetres for prismatic joints."
    )
    branch: str
    within_limits: bool
    limits: list[JointMargin] = Field(description="Per joint: value, limits and signed margin.")
    clearance_mm: float | None = Field(description="Smallest signed distance; null if none.")
    collision_free: bool
    contacts: list[ArmContact] = Field(
        description="Every obstacle and the self pair closer than thresholds.clearance_mm, "
        "nearest first."
    )
    singularity: SingularityProximity | None = Field(description="null for non-arm robots.")
    thresholds: QualityThresholds


def arm_state_result(data: ArmStateData) -> ArmState:
    """Build the boundary model (mm, deg) of :func:`posebridge.cell.arm_state.arm_state`'s answer."""
    quality = data.quality
    robot = quality.robot
    q = quality.q
    clearance = float(mm_from_m(quality.clearance[0]))
    return ArmState(
        joint_names=list(robot.joint_names),
        joint_units=joint_unit_labels(robot.prismatic),
        joints_deg=joints_user_from_si(q[0], robot.prismatic).tolist(),
        branch=full_branch_words(quality, 0, revolution_counts(robot, q)[0]),
        within_limits=bool(quality.within_limits[0]),
        limits=joint_margins_model(quality, 0),
        clearance_mm=clearance if np.isfinite(clearance) else None,
        collision_free=bool(quality.collision_free[0]),
        contacts=[
            ArmContact(
                capsule=contact.capsule,
                other=contact.other,
                other_kind=contact.other_kind,  # type: ignore[arg-type]  # a PartKind word
                distance_mm=float(mm_from_m(contact.distance_m)),
            )
            for contact in data.contacts
        ],
        singularity=singularity_model(quality, 0),
        thresholds=quality.thresholds,
    )

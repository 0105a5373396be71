"""Builder of the pose diagnosis result from :class:`~posebridge.cell.pose_diagnosis.PoseDiagnosisData`.

:func:`pose_diagnosis_result` turns the SI diagnosis of one configuration into
:class:`~posebridge.results.cell.PoseDiagnosis` (mm, deg) and adds its
findings: the quality findings of the configuration, ``at-target`` when the TCP
is within :data:`AT_TARGET_MM` and :data:`AT_TARGET_DEG` of a target pose, and
the missing-geometry warning.
"""

from __future__ import annotations

import math

import numpy as np

from posebridge.cell.pose_diagnosis import PoseDiagnosisData, overall_pair
from posebridge.cell.quality import full_branch_words, revolution_counts
from posebridge.cell.scene import Scene
from posebridge.results.cell import (
    Finding,
    JointMargin,
    NearTarget,
    ObjectDistance,
    PoseDiagnosis,
    PoseFrame,
)
from posebridge.results.external_axes import external_user_from_si
from posebridge.results.quality import (
    branch_report,
    closest_pair_model,
    geometry_findings,
    joint_margins_model,
    quality_findings,
    singularity_model,
)
from posebridge.transforms import quaternion_from_rotation_matrix, rpy_from_rotation_matrix
from posebridge.units import (
    FloatArray,
    deg_from_rad,
    joint_unit_labels,
    joints_user_from_si,
    mm_from_m,
)

__all__ = [
    "AT_TARGET_DEG",
    "AT_TARGET_MM",
    "SEVERITY_ORDER",
    "finite_mm",
    "pose_diagnosis_result",
]

AT_TARGET_MM = 1.0
AT_TARGET_DEG = 1.0
"""A TCP within both of these of a target pose is reported as at that target."""

SEVERITY_ORDER = {"error": 0, "warning": 1, "info": 2}
"""Findings are listed errors first, then warnings, then info."""


def finite_mm(distance_m: float) -> float | None:
    """Return a distance in mm, None where nothing was checked (infinite)."""
    value = float(mm_from_m(distance_m))
    return value if math.isfinite(value) else None


def _frame(T: FloatArray) -> PoseFrame:
    """Return a pose (4, 4), m, as position mm, rpy deg and quaternion."""
    return PoseFrame(
        position_mm=mm_from_m(T[:3, 3]).tolist(),
        rpy_deg=rpy_from_rotation_matrix(T[:3, :3], degrees=True).tolist(),
        quaternion_wxyz=quaternion_from_rotation_matrix(T[:3, :3]).tolist(),
    )


def _external_margins(scene: Scene) -> list[JointMargin]:
    """Limit margins of the external axes at the scene's values, boundary units."""
    external = scene.external
    values = external_user_from_si(external, external.values)
    lower = external_user_from_si(external, external.lower)
    upper = external_user_from_si(external, external.upper)
    margins = []
    for i, name in enumerate(external.names):
        below, above = values[i] - lower[i], upper[i] - values[i]
        margin = float(min(below, above))
        margins.append(
            JointMargin(
                joint=name,
                unit=external.units[i],
                value=float(values[i]),
                lower=float(lower[i]),
                upper=float(upper[i]),
                margin=margin,
                margin_fraction=margin / float(upper[i] - lower[i]),
                nearer_limit="lower" if below <= above else "upper",
            )
        )
    return margins


def pose_diagnosis_result(data: PoseDiagnosisData) -> PoseDiagnosis:
    """Build the boundary model (mm, deg) of one configuration's diagnosis, with its findings.

    Parameters
    ----------
    data : PoseDiagnosisData
        From :func:`posebridge.cell.pose_diagnosis.diagnose_pose`.

    Returns
    -------
    PoseDiagnosis
    """
    scene = data.scene
    robot = scene.robot
    quality = data.quality
    branches = []
    if data.branches is not None:
        for row, revolutions in enumerate(data.revolutions):
            branches.append(
                branch_report(
                    data.branches,
                    row,
                    branch=full_branch_words(data.branches, row, revolutions),
                    revolutions=revolutions,
                )
            )
    near = data.nearest_targets
    nearest = [
        NearTarget(
            name=name,
            pose=kind,  # type: ignore[arg-type]  # target or approach
            distance_mm=float(mm_from_m(distance)),
            angle_deg=float(angle),
        )
        for name, kind, distance, angle in zip(
            near.names,
            near.kinds,
            near.distance_m,
            np.linalg.norm(deg_from_rad(near.rotation_rad), axis=1),
            strict=True,
        )
    ]
    findings = quality_findings(quality, 0)
    if nearest and nearest[0].distance_mm <= AT_TARGET_MM and nearest[0].angle_deg <= AT_TARGET_DEG:
        findings.append(
            Finding(
                severity="info",
                code="at-target",
                target=nearest[0].name,
                pose=nearest[0].pose,
                message=f"the TCP is at {nearest[0].pose} {nearest[0].name!r} "
                f"({nearest[0].distance_mm:.2f} mm, {nearest[0].angle_deg:.2f} deg)",
            )
        )
    objects = data.closest_objects
    margins = quality.margins
    joint = int(margins.min_joint[0])
    q = quality.q
    return PoseDiagnosis(
        robot=robot.name,
        tool=scene.tool_name,
        joint_names=list(robot.joint_names),
        joint_units=joint_unit_labels(robot.prismatic),
        joints_deg=joints_user_from_si(q[0], robot.prismatic).tolist(),
        tcp_world=_frame(quality.T_world_tool[0]),
        tcp_base=_frame(quality.T_base_tool[0]),
        branch=full_branch_words(quality, 0, revolution_counts(robot, q)[0]),
        shoulder=int(quality.shoulder[0]),
        elbow=int(quality.elbow[0]),
        wrist=int(quality.wrist[0]),
        within_limits=bool(quality.within_limits[0]),
        margins=joint_margins_model(quality, 0),
        min_margin_joint=robot.joint_names[joint] if joint >= 0 else None,
        min_margin_fraction=float(margins.min_fraction[0]) if joint >= 0 else None,
        manipulability=float(quality.manipulability[0]),
        position_manipulability=float(quality.manipulability[0]),
        full_manipulability=(
            None if quality.full_manipulability is None else float(quality.full_manipulability[0])
        ),
        singularity=singularity_model(quality, 0),
        clearance_mm=finite_mm(quality.clearance[0]),
        environment_clearance_mm=finite_mm(quality.environment.distance[0]),
        self_clearance_mm=finite_mm(quality.self_clearance.distance[0]),
        collision_free=bool(quality.collision_free[0]),
        closest=closest_pair_model(overall_pair(quality, 0), 0),
        closest_environment=closest_pair_model(quality.environment, 0),
        closest_self=closest_pair_model(quality.self_clearance, 0),
        closest_objects=[
            ObjectDistance(
                name=name,
                kind=kind,  # type: ignore[arg-type]  # one of the PartKind words
                distance_mm=float(mm_from_m(distance)),
            )
            for name, kind, distance in zip(
                objects.names, objects.kinds, objects.distance_m, strict=True
            )
        ],
        nearest_targets=nearest,
        branches=branches,
        input_branch=data.input_branch,
        findings=sorted(
            findings + geometry_findings(robot), key=lambda f: SEVERITY_ORDER[f.severity]
        ),
        robot_geometry_missing=robot.geometry_missing,
        external_axes=dict(
            zip(
                scene.external.names,
                external_user_from_si(scene.external, scene.external.values).tolist(),
                strict=True,
            )
        ),
        external_margins=_external_margins(scene),
    )

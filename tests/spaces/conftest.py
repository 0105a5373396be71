"""Fixtures of the spaces tests: a pinocchio reference of pb-arm6 (FK, TCP Jacobian, collision cylinders).

Built from robots/pb-arm6.urdf (the same kinematics as robots/pb-arm6.toml, written as
a URDF with its own link frames), so the reference shares no code with posebridge.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
import pinocchio as pin
import pytest

from posebridge.resources import data_folder


class PinArm:
    """pb-arm6 in pinocchio with a "tcp" frame at ``T_flange_tool`` on the flange."""

    def __init__(self, T_flange_tool: np.ndarray) -> None:
        self.xml = (data_folder("robots") / "pb-arm6.urdf").read_text(encoding="utf-8")
        self.model = pin.buildModelFromXML(self.xml)
        flange = self.model.getFrameId("flange")
        parent = self.model.frames[flange]
        self.tcp = self.model.addFrame(
            pin.Frame(
                "tcp",
                parent.parentJoint,
                flange,
                parent.placement * pin.SE3(np.asarray(T_flange_tool, dtype=float)),
                pin.FrameType.OP_FRAME,
            )
        )
        self.data = self.model.createData()
        self.geometry = pin.buildGeomFromUrdfString(
            self.model, self.xml, pin.GeometryType.COLLISION
        )
        self.geometry_data = pin.GeometryData(self.geometry)

    def tool_poses(self, q: np.ndarray) -> np.ndarray:
        """TCP poses in the base frame, shape (N, 4, 4)."""
        out = np.empty((q.shape[0], 4, 4))
        for k, row in enumerate(q):
            pin.framesForwardKinematics(self.model, self.data, row)
            out[k] = self.data.oMf[self.tcp].homogeneous
        return out

    def translational_manipulability(self, q: np.ndarray) -> np.ndarray:
        """sqrt(det(J_v J_v^T)) of the TCP's world-aligned linear Jacobian rows, shape (N,)."""
        out = np.empty(q.shape[0])
        for k, row in enumerate(q):
            J = pin.computeFrameJacobian(
                self.model, self.data, row, self.tcp, pin.ReferenceFrame.LOCAL_WORLD_ALIGNED
            )[:3]
            out[k] = np.sqrt(max(np.linalg.det(J @ J.T), 0.0))
        return out

    def collision_segments(self, q: np.ndarray) -> np.ndarray:
        """Axis end points of the URDF collision cylinders in the base frame, shape (N, m, 2, 3)."""
        count = len(self.geometry.geometryObjects)
        out = np.empty((q.shape[0], count, 2, 3))
        for k, row in enumerate(q):
            pin.framesForwardKinematics(self.model, self.data, row)
            pin.updateGeometryPlacements(self.model, self.data, self.geometry, self.geometry_data)
            for g, placement in enumerate(self.geometry_data.oMg):
                half = self.geometry.geometryObjects[g].geometry.halfLength
                axis = placement.rotation[:, 2] * half
                out[k, g, 0] = placement.translation - axis
                out[k, g, 1] = placement.translation + axis
        return out


@pytest.fixture(scope="session")
def pin_arm() -> Callable[[np.ndarray], PinArm]:
    """Factory of the pinocchio pb-arm6 reference for a given tool: ``pin_arm(T_flange_tool)``."""
    return PinArm

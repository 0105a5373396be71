"""Fixtures of the cell tests: the demo cell, its documented joint values, and a python-fcl
reference of the arm's clearance placed by pinocchio.

The reference (:class:`FclCell`) never calls posebridge's kinematics or geometry: link
placements come from pinocchio on robots/pb-arm6.urdf (whose collision cylinders are the
capsules of robots/pb-arm6.toml, written as URDF cylinders: segment along the local z
axis, length between the cap centres), distances from python-fcl (``fcl.distance`` per
capsule-obstacle pair). Only the cell's resolved shapes (Scene arrays) are read as data.
"""

from __future__ import annotations

import re
from collections.abc import Iterator
from dataclasses import dataclass
from typing import Any

import fcl
import numpy as np
import pinocchio as pin
import pytest
from scipy.spatial.transform import Rotation

from posebridge.cell.files import load_cell
from posebridge.cell.scene import Scene, resolve_scene
from posebridge.resources import data_folder

ROBOTS = data_folder("robots")
DEMO_CELL = ROBOTS / "demo-cell.json"
DEMO_LOG = ROBOTS / "demo-log.csv"


@pytest.fixture(scope="session")
def demo_scene() -> Scene:
    return resolve_scene(load_cell(DEMO_CELL), DEMO_CELL)


@pytest.fixture(scope="session")
def documented_joints(demo_scene: Scene) -> dict[str, list[float]]:
    """Joint values (deg) the demo notes give for each target: ``name: [j1, ..., j6]``."""
    found = re.findall(r"([a-z0-9-]+): \[([-0-9., ]+)\]", demo_scene.cell.notes)
    return {name: [float(v) for v in values.split(",")] for name, values in found}


@pytest.fixture
def pin_tool(demo_scene: Scene) -> tuple[Any, Any, int]:
    """pinocchio model of robots/pb-arm6.urdf with the cell's tool frame added:
    ``(model, data, tool frame id)``."""
    model = pin.buildModelFromUrdf(str(ROBOTS / "pb-arm6.urdf"))
    flange_id = model.getFrameId("flange")
    flange = model.frames[flange_id]
    T = demo_scene.T_flange_tool
    tool = model.addFrame(
        pin.Frame(
            "tool",
            flange.parentJoint,
            flange_id,
            flange.placement * pin.SE3(T[:3, :3], T[:3, 3]),
            pin.FrameType.OP_FRAME,
        )
    )
    return model, model.createData(), tool


def _capsule_object(start: np.ndarray, end: np.ndarray, radius: float) -> fcl.CollisionObject:
    axis = end - start
    length = float(np.linalg.norm(axis))
    rotation = Rotation.align_vectors([axis / length], [[0.0, 0.0, 1.0]])[0].as_matrix()
    return fcl.CollisionObject(
        fcl.Capsule(radius, length), fcl.Transform(rotation, 0.5 * (start + end))
    )


@dataclass
class Capsule:
    name: str
    start: np.ndarray
    end: np.ndarray
    radius: float
    on_base: bool


class FclCell:
    """python-fcl distances between the demo arm (pinocchio placements) and the cell."""

    def __init__(self, scene: Scene) -> None:
        assert scene.robot.name == "pb-arm6"
        urdf = str(ROBOTS / "pb-arm6.urdf")
        self.scene = scene
        self.model = pin.buildModelFromUrdf(urdf)
        self.geometry = pin.buildGeomFromUrdf(self.model, urdf, pin.GeometryType.COLLISION)
        self.data = self.model.createData()
        self.geometry_data = pin.GeometryData(self.geometry)
        self.flange = self.model.getFrameId("flange")
        # the URDF lists its collision cylinders in the TOML's capsule order
        self.names = [capsule.name for capsule in scene.robot.capsules]
        radii = [g.geometry.radius for g in self.geometry.geometryObjects]
        np.testing.assert_allclose(radii, [c.radius for c in scene.robot.capsules], atol=1e-12)
        self.obstacles: list[tuple[str, Any]] = []
        for names, T, half in (
            (scene.boxes.names, scene.boxes.T_world, scene.boxes.half_extents),
            (scene.keep_outs.names, scene.keep_outs.T_world, scene.keep_outs.half_extents),
        ):
            for name, pose, h in zip(names, T, half, strict=True):
                self.obstacles.append((name, self._object(fcl.Box(*(2.0 * h)), pose)))
        for cylinders in (scene.cylinders, scene.pedestal):
            for name, pose, radius, half in zip(
                cylinders.names,
                cylinders.T_world,
                cylinders.radius,
                cylinders.half_length,
                strict=True,
            ):
                self.obstacles.append((name, self._object(fcl.Cylinder(radius, 2 * half), pose)))
        # the floor as a 100 m x 100 m x 10 m box whose top face is the floor plane
        floor = np.eye(4)
        floor[2, 3] = scene.floor_height - 5.0
        self.obstacles.append(("floor", self._object(fcl.Box(100.0, 100.0, 10.0), floor)))

    @staticmethod
    def _object(geometry: Any, T: np.ndarray) -> fcl.CollisionObject:
        return fcl.CollisionObject(geometry, fcl.Transform(T[:3, :3], T[:3, 3]))

    def capsules(self, q: np.ndarray) -> Iterator[Capsule]:
        """Arm and tool capsules in the world at joint values ``q`` (rad), pinocchio placements."""
        pin.framesForwardKinematics(self.model, self.data, q)
        pin.updateGeometryPlacements(self.model, self.data, self.geometry, self.geometry_data)
        base = self.scene.T_world_base
        for name, obj, placement in zip(
            self.names, self.geometry.geometryObjects, self.geometry_data.oMg, strict=True
        ):
            half = obj.geometry.halfLength
            T = base @ placement.homogeneous
            yield Capsule(
                name,
                T[:3, :3] @ [0.0, 0.0, -half] + T[:3, 3],
                T[:3, :3] @ [0.0, 0.0, half] + T[:3, 3],
                float(obj.geometry.radius),
                obj.parentJoint == 0,
            )
        T_flange = base @ self.data.oMf[self.flange].homogeneous
        tool = self.scene.tool_capsules
        for name, start, end, radius in zip(
            tool.names, tool.start, tool.end, tool.radius, strict=True
        ):
            yield Capsule(
                name,
                T_flange[:3, :3] @ start + T_flange[:3, 3],
                T_flange[:3, :3] @ end + T_flange[:3, 3],
                float(radius),
                False,
            )

    def obstacle_distances(self, q: np.ndarray) -> dict[tuple[str, str], float]:
        """``fcl.distance`` of every checked capsule-obstacle pair, m.

        The robot's base capsule stands on the pedestal and the floor and is not
        checked against them (the documented pair rule of posebridge.cell.clearance).
        """
        request = fcl.DistanceRequest()
        out = {}
        for capsule in self.capsules(q):
            obj = _capsule_object(capsule.start, capsule.end, capsule.radius)
            for name, obstacle in self.obstacles:
                if capsule.on_base and name in ("floor", *self.scene.pedestal.names):
                    continue
                distance = fcl.distance(obj, obstacle, request, fcl.DistanceResult())
                out[(capsule.name, name)] = distance
        return out

    def capsule_distance(self, q: np.ndarray, first: str, second: str) -> float:
        """``fcl.distance`` between two of the arm's capsules, m."""
        found = {c.name: c for c in self.capsules(q)}
        a, b = (found[first], found[second])
        return fcl.distance(
            _capsule_object(a.start, a.end, a.radius),
            _capsule_object(b.start, b.end, b.radius),
            fcl.DistanceRequest(),
            fcl.DistanceResult(),
        )


@pytest.fixture(scope="session")
def fcl_cell(demo_scene: Scene) -> FclCell:
    return FclCell(demo_scene)

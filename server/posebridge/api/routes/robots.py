"""The bundled robot library and robot model descriptions."""

from __future__ import annotations

from typing import Annotated

from fastapi import APIRouter, Query

from posebridge.api.auth import ReviewRoleDep
from posebridge.api.deps import RobotsDep, SettingsDep
from posebridge.api.json_body import StrictJsonRoute
from posebridge.api.schemas.errors import error_responses
from posebridge.geometry.mesh_cache import MeshCache
from posebridge.geometry.robot_meshes import robot_display_meshes
from posebridge.results.robots import (
    RobotDescriptionResult,
    RobotImportReport,
    RobotList,
    RobotMeshesResult,
    robot_description_result,
    robot_import_report,
    robot_meshes_result,
    robot_summary_from_bundled,
)
from posebridge.robot.library import bundled_robots

__all__ = ["router"]

router = APIRouter(prefix="/api/robots", tags=["robots"], route_class=StrictJsonRoute)


@router.get("", summary="List the bundled robots")
def list_robots(settings: SettingsDep) -> RobotList:
    """Every bundled robot description, sorted by name, and the robot the page opens with."""
    return RobotList(
        robots=[robot_summary_from_bundled(bundled) for bundled in bundled_robots()],
        default_robot=settings.robot,
    )


@router.get("/model", summary="Describe one robot", responses=error_responses(403, 422))
def read_robot_model(
    robots: RobotsDep,
    role: ReviewRoleDep,
    robot: Annotated[
        str,
        Query(min_length=1, max_length=1000, description="Bundled robot name or .toml/.urdf path."),
    ],
) -> RobotDescriptionResult:
    """Joints with limits and units, default tool, home configuration and drawing bounds."""
    return robot_description_result(robots.get(robot, paths_allowed=role == "owner"), robot)


@router.get(
    "/describe", summary="What an import made of a robot", responses=error_responses(403, 422)
)
def describe_robot(
    robots: RobotsDep,
    role: ReviewRoleDep,
    robot: Annotated[
        str,
        Query(min_length=1, max_length=1000, description="Bundled robot name or .toml/.urdf path."),
    ],
) -> RobotImportReport:
    """Describe the robot as `posebridge describe --json` does.

    Chain, joints and limits, assumed values, meshes found and missing, capsules (fitted ones with
    their excess over the meshes' hull), notes.
    """
    return robot_import_report(robots.get(robot, paths_allowed=role == "owner"), robot)


@router.get("/meshes", summary="A robot's meshes for drawing", responses=error_responses(403, 422))
def read_robot_meshes(
    robots: RobotsDep,
    role: ReviewRoleDep,
    robot: Annotated[
        str,
        Query(min_length=1, max_length=1000, description="Bundled robot name or .toml/.urdf path."),
    ],
) -> RobotMeshesResult:
    """Return the robot's visual meshes decimated for drawing, in their link frames.

    Visual meshes (collision meshes of links without) decimated to 60 000 triangles for the whole
    robot; pose them with the FK answer's frames. Empty for robots without mesh files.
    """
    model = robots.get(robot, paths_allowed=role == "owner")
    cache = MeshCache.default() if model.meshes else None
    return robot_meshes_result(model, robot, robot_display_meshes(model, cache=cache))

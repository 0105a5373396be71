"""The FastAPI application: API routers, the page, its static files and plotly.js.

Nothing is fetched from outside this server: plotly.js is served from the
installed plotly package, so the page works with the network off.
"""

from __future__ import annotations

from collections.abc import AsyncIterator
from contextlib import asynccontextmanager
from importlib.metadata import version
from importlib.resources import files
from pathlib import Path

from fastapi import FastAPI, Request
from fastapi.responses import FileResponse, HTMLResponse
from fastapi.staticfiles import StaticFiles
from fastapi.templating import Jinja2Templates

from posebridge.api.errors import install_error_handlers
from posebridge.api.robot_cache import RobotCache
from posebridge.api.routes import health, kinematics, robots
from posebridge.api.schemas.kinematics import fk_result, ik_result
from posebridge.api.settings import Settings, get_settings
from posebridge.kinematics.fk import fk_tool
from posebridge.kinematics.ik import solve_ik_all
from posebridge.resources import data_folder

__all__ = ["create_app", "plotly_script_path"]


def plotly_script_path() -> Path:
    """plotly.min.js of the installed plotly package."""
    return Path(str(files("plotly") / "package_data" / "plotly.min.js"))


def _warm_up(cache: RobotCache, robot_spec: str) -> None:
    """Run FK and IK once on the opening robot so numba kernels are compiled before the first request."""
    robot = cache.get(robot_spec)
    q = robot.mid_configuration()[None, :]
    fk_result(robot, q)
    ik_result(robot, solve_ik_all(robot, fk_tool(robot, q), seed=q[0]))


def create_app(settings: Settings | None = None) -> FastAPI:
    """Build the posebridge ASGI application.

    Parameters
    ----------
    settings : Settings, optional
        What to serve; :func:`posebridge.api.settings.get_settings` if omitted.
    """
    settings = settings or get_settings()
    robot_cache = RobotCache(
        size=settings.robot_cache_size, paths_allowed=settings.robot_paths_allowed
    )

    @asynccontextmanager
    async def lifespan(_: FastAPI) -> AsyncIterator[None]:
        if settings.warm_up:
            _warm_up(robot_cache, settings.robot)
        yield

    app = FastAPI(
        title="posebridge",
        version=version("posebridge"),
        summary="One robot cell in Cartesian and joint space, linked by forward and inverse kinematics.",
        description=(
            "Lengths are millimetres and angles degrees at this interface; prismatic joint "
            "values are millimetres. Orientations are roll, pitch, yaw about fixed X, Y, Z "
            "(R = Rz(yaw) Ry(pitch) Rx(roll)); quaternions are [w, x, y, z]. "
            "posebridge is a kinematic planning aid, not a safety function."
        ),
        lifespan=lifespan,
    )
    app.state.settings = settings
    app.state.robots = robot_cache
    install_error_handlers(app)
    for module in (health, robots, kinematics):
        app.include_router(module.router)

    templates = Jinja2Templates(directory=data_folder("templates"))
    plotly_script = plotly_script_path()
    app.mount("/static", StaticFiles(directory=data_folder("static")), name="static")

    @app.get("/vendor/plotly.min.js", include_in_schema=False)
    def plotly_js() -> FileResponse:
        return FileResponse(plotly_script, media_type="text/javascript")

    @app.get("/", include_in_schema=False, response_class=HTMLResponse)
    def page(request: Request) -> HTMLResponse:
        return templates.TemplateResponse(
            request,
            "index.html",
            {"default_robot": settings.robot, "version": app.version},
        )

    return app

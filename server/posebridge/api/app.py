"""The FastAPI application: API routers, the page, its static files and plotly.js.

Nothing is fetched from outside this server: the page's plotly.js is the partial bundle kept
in ``static/vendor`` (:data:`PAGE_PLOTLY_BUNDLE`), so the page works with the network off.
"""

from __future__ import annotations

import hashlib
from collections.abc import AsyncIterator, Awaitable, Callable
from contextlib import asynccontextmanager, suppress
from email.utils import formatdate
from importlib.metadata import version
from pathlib import Path
from typing import Any

from fastapi import FastAPI, Request
from fastapi.openapi.utils import get_openapi
from fastapi.responses import HTMLResponse, JSONResponse, Response
from fastapi.staticfiles import StaticFiles
from fastapi.templating import Jinja2Templates

from posebridge.api.auth import install_review_access
from posebridge.api.cell_store import CellStore
from posebridge.api.errors import install_error_handlers
from posebridge.api.guard import RequestGuardMiddleware, content_security_policy
from posebridge.api.jobs import JobManager
from posebridge.api.lanes import ReviewerLane
from posebridge.api.methods import MethodsMiddleware
from posebridge.api.page_modules import page_modules
from posebridge.api.plotly_assets import plotly_assets
from posebridge.api.robot_cache import RobotCache
from posebridge.api.routes import (
    cells,
    checks,
    health,
    jobs,
    kinematics,
    maps,
    placement,
    reviews,
    robots,
)
from posebridge.api.settings import Settings, get_settings
from posebridge.api.warmup import KernelWarmUp, WarmStep
from posebridge.cell.checks import check_targets
from posebridge.cell.model import CellFileError
from posebridge.compile_hint import COMPILE_HINT
from posebridge.errors import InputError
from posebridge.kinematics.warm import warm_kinematics
from posebridge.resources import data_folder
from posebridge.spaces.joint_map import joint_map

__all__ = ["PAGE_PLOTLY_BUNDLE", "create_app", "plotly_script_path"]

_JOB_INPUT_ERRORS = (InputError,)
"""Errors of a job that are the request's fault (:mod:`posebridge.errors`): their message
is the job's detail."""


PAGE_PLOTLY_BUNDLE = "plotly-gl3d.min.js"
"""The page's charting script in ``static/vendor``: plotly.js's pre-built partial bundle of 2D
scatter and 3D traces (npm ``plotly.js-gl3d-dist-min``, the plotly.js version the plotly
package ships; static/vendor/README.md). The page draws grids as server pictures, so it needs
no heatmap trace; the review report keeps the full bundle of the plotly package."""


def plotly_script_path() -> Path:
    """Return the path of the page's plotly.js (:data:`PAGE_PLOTLY_BUNDLE`)."""
    return data_folder("static") / "vendor" / PAGE_PLOTLY_BUNDLE


def _warm_up_steps(cache: RobotCache, robot_spec: str, cells: CellStore) -> list[WarmStep]:
    """Return the warm-up steps in the order the page needs them.

    The kinematics kernels of the served robot and the cell's robot first (the page's first
    answers), then a tiny joint map and the target check, so numba kernels are loaded before they
    are asked for.
    """

    def kinematics() -> None:
        for robot in (cache.get(robot_spec, paths_allowed=True), cells.read().scene.robot):
            warm_kinematics(robot)

    def clearance() -> None:
        snapshot = cells.read()
        robot = snapshot.scene.robot
        joint_map(snapshot.clearance, [0, 1], robot.home_configuration(), resolution=2)

    def target_check() -> None:
        snapshot = cells.read()
        if snapshot.scene.targets.names:
            check_targets(snapshot.scene)

    return [
        WarmStep("forward and inverse kinematics", kinematics),
        WarmStep("clearance and joint maps", clearance),
        WarmStep("target check", target_check),
    ]


_ROBOT_FILE_PATTERN = r"(?i)\.(toml|urdf)/*$"


def _served_robots(app: FastAPI) -> list[str]:
    """Robot names every asker may use: the bundled ones and the cell's robot."""
    robots: RobotCache = app.state.robots
    with suppress(CellFileError):  # a cell that cannot be read now serves no robot
        cells.cell_robot_spec(app.state.cells.read(), robots)
    return robots.served_names()


def _with_robot_names(
    document: dict[str, Any], names: list[str], paths_allowed: bool
) -> dict[str, Any]:
    """Limit the robot fields of ``document`` to ``names``.

    Applies to the robot fields of the kinematics requests and the robot model query (and, where
    robot files are read, .toml/.urdf paths).
    """
    served: dict[str, Any] = {"type": "string", "enum": names}
    if paths_allowed:
        path = {
            "type": "string",
            "minLength": 1,
            "maxLength": 1000,
            "pattern": _ROBOT_FILE_PATTERN,
            "description": "A robot file on the serving machine (the owner only).",
        }
        served = {"anyOf": [served, path]}
    for model in ("FkRequest", "IkRequest"):
        field = document["components"]["schemas"][model]["properties"]["robot"]
        document["components"]["schemas"][model]["properties"]["robot"] = {
            "title": field.get("title", "Robot"),
            "description": field.get("description", ""),
            **served,
        }
    for route in ("/api/robots/model", "/api/robots/describe", "/api/robots/meshes"):
        for parameter in document["paths"][route]["get"]["parameters"]:
            if parameter["name"] == "robot":
                parameter["schema"] = {"title": "Robot", **served}
    return document


def _limit_request_size(app: FastAPI, limit: int) -> None:
    """Refuse request bodies larger than ``limit`` bytes (by their Content-Length) with 413."""

    @app.middleware("http")
    async def limit_size(
        request: Request, call_next: Callable[[Request], Awaitable[Response]]
    ) -> Response:
        length = request.headers.get("content-length", "")
        if length.isdigit() and int(length) > limit:
            return JSONResponse(
                status_code=413,
                content={
                    "detail": f"request body: {int(length)} bytes is more than this server "
                    f"accepts ({limit} bytes)"
                },
            )
        return await call_next(request)


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
            warm = KernelWarmUp(_warm_up_steps(robot_cache, settings.robot, app.state.cells))
            app.state.warmup = warm
            warm.run_first()  # FIRST_STEPS before the address answers (none: warmup.py)
            warm.start_rest()  # in the page's order, behind, reported by GET /api/health
        yield
        app.state.jobs.close()
        app.state.reviewer_lane.close()

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
    app.state.cells = CellStore(settings.cell_path)
    app.state.reviewer_lane = ReviewerLane(
        settings.cell_path, robot_cache_size=settings.robot_cache_size
    )
    app.state.warmup = KernelWarmUp(())
    app.state.warmup.run_first()  # nothing to load: ready
    app.state.jobs = JobManager(
        expected_errors=_JOB_INPUT_ERRORS, reviewer_pause=app.state.reviewer_lane.yield_to_owner
    )
    install_error_handlers(app)
    app.add_middleware(MethodsMiddleware, dashboard=app)
    _limit_request_size(app, settings.max_request_bytes)
    install_review_access(app)
    # added last, so it runs first: Host, Origin and body type before any role is decided
    app.add_middleware(RequestGuardMiddleware, dashboard=app)
    routers = [
        health.router,
        robots.router,
        kinematics.router,
        cells.router,
        checks.router,
        maps.router,
        placement.router,
        jobs.router,
        reviews.router,
    ]
    for router in routers:
        app.include_router(router)

    def openapi_document() -> dict[str, Any]:
        """Return the OpenAPI document, built afresh: robot names are the ones served now."""
        document = get_openapi(
            title=app.title,
            version=app.version,
            summary=app.summary,
            description=app.description,
            routes=app.routes,
        )
        return _with_robot_names(document, _served_robots(app), settings.robot_paths_allowed)

    app.openapi = openapi_document  # type: ignore[method-assign]

    templates = Jinja2Templates(directory=data_folder("templates"))
    plotly_script = plotly_script_path()
    plotly = plotly_assets(plotly_script)
    app.state.content_security_policy = content_security_policy(plotly.style_attribute_hashes)
    app.mount("/static", StaticFiles(directory=data_folder("static")), name="static")

    # the vendored file unchanged after the compile hint, with a file's validators
    plotly_page_script = COMPILE_HINT.encode("ascii") + plotly_script.read_bytes()
    plotly_script_headers = {
        "last-modified": formatdate(plotly_script.stat().st_mtime, usegmt=True),
        "etag": f'"{hashlib.sha256(plotly_page_script).hexdigest()[:32]}"',
    }
    modules = page_modules(data_folder("static"))

    @app.get("/vendor/plotly.min.js", include_in_schema=False)
    def plotly_js() -> Response:
        return Response(
            plotly_page_script, media_type="text/javascript", headers=plotly_script_headers
        )

    @app.get("/vendor/plotly.css", include_in_schema=False)
    def plotly_css() -> Response:
        return Response(plotly.global_css, media_type="text/css")

    @app.get("/vendor/plotly-bundled.css", include_in_schema=False)
    def plotly_bundled_css() -> Response:
        return Response(plotly.bundled_css, media_type="text/css")

    @app.get("/", include_in_schema=False, response_class=HTMLResponse)
    def page(request: Request) -> HTMLResponse:
        return templates.TemplateResponse(
            request,
            "index.html",
            {
                "default_robot": settings.robot,
                "version": app.version,
                "plotly_bundled_style_id": plotly.bundled_style_id,
                "page_modules": modules,
            },
        )

    return app

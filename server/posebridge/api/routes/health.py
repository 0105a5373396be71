"""Liveness of the server."""

from __future__ import annotations

from importlib.metadata import version

from fastapi import APIRouter, Request

from posebridge.api.json_body import StrictJsonRoute
from posebridge.api.schemas.health import HealthResult

__all__ = ["router"]

router = APIRouter(prefix="/api/health", tags=["health"], route_class=StrictJsonRoute)


@router.get("", summary="Server is up")
async def read_health(request: Request) -> HealthResult:
    """Answer as soon as the server accepts requests, with the kernel loading progress.

    Runs on the event loop: no worker thread needed, so it answers while worker threads are busy;
    tells how far the loading of the numerical kernels is (posebridge.api.warmup).
    """
    warm = request.app.state.warmup
    return HealthResult(
        status="ok",
        version=version("posebridge"),
        kernels_ready=warm.ready,
        kernels_done=warm.done,
        kernels_total=warm.total,
        kernels_current=warm.current,
    )

"""GET /api/health."""

from __future__ import annotations

from importlib.metadata import version

import httpx
import pytest

pytestmark = pytest.mark.anyio


async def test_read_health(client: httpx.AsyncClient) -> None:
    response = await client.get("/api/health")
    assert response.status_code == 200
    # the installed distribution's metadata is the outside record of the version
    assert response.json() == {
        "status": "ok",
        "version": version("posebridge"),
        # the test app loads no kernels at start (warm_up off): nothing pending
        "kernels_ready": True,
        "kernels_done": 0,
        "kernels_total": 0,
        "kernels_current": None,
    }


async def test_read_unknown_route_not_found(client: httpx.AsyncClient) -> None:
    response = await client.get("/api/no-such-thing")
    assert response.status_code == 404
    assert response.json() == {"detail": "Not Found"}

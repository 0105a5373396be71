"""HTTP test fixtures: an app per test and an httpx client talking to it in process."""

from __future__ import annotations

import asyncio
from collections.abc import AsyncIterator, Awaitable, Callable
from typing import Any

import httpx
import pytest
from fastapi import FastAPI

from posebridge.api.app import create_app
from posebridge.api.settings import Settings


@pytest.fixture
def anyio_backend() -> str:
    return "asyncio"


@pytest.fixture
def make_app() -> Callable[..., FastAPI]:
    """Build an app with settings overrides; kernels are not warmed up."""

    def build(**overrides: object) -> FastAPI:
        return create_app(Settings(warm_up=False, **overrides))  # type: ignore[arg-type]

    return build


@pytest.fixture
async def client(make_app: Callable[..., FastAPI]) -> AsyncIterator[httpx.AsyncClient]:
    """A client of a fresh app with default settings."""
    transport = httpx.ASGITransport(app=make_app())
    async with httpx.AsyncClient(transport=transport, base_url="http://127.0.0.1") as session:
        yield session


@pytest.fixture
def job_finished(
    client: httpx.AsyncClient,
) -> Callable[[str], Awaitable[dict[str, Any]]]:
    """Poll ``GET /api/jobs/{id}`` of ``client`` until the job is no longer queued or
    running; returns its last status.

    The 10-minute cap only ends a hung test: on a loaded machine a job's first run includes
    kernel compilation, which has taken minutes.
    """

    async def finished(job_id: str) -> dict[str, Any]:
        for _ in range(6000):
            status: dict[str, Any] = (await client.get(f"/api/jobs/{job_id}")).json()
            if status["state"] not in ("queued", "running"):
                return status
            await asyncio.sleep(0.1)
        raise AssertionError("job did not finish in 10 minutes")

    return finished

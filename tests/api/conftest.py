"""HTTP test fixtures: an app per test and an httpx client talking to it in process."""

from __future__ import annotations

from collections.abc import AsyncIterator, Callable

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
    async with httpx.AsyncClient(transport=transport, base_url="http://testserver") as session:
        yield session

"""Serving: loopback-only by default, in-process background server for tests and bench."""

from __future__ import annotations

from importlib.metadata import version
from pathlib import Path

import httpx
import pytest

from posebridge.api.server import ServerConfigError, background_server, is_loopback, run_server
from posebridge.api.settings import Settings


@pytest.mark.parametrize(
    ("host", "loopback"),
    [
        # RFC 1122 sec. 3.2.1.3 and RFC 4291 sec. 2.5.3: 127.0.0.0/8 and ::1 are loopback
        ("127.0.0.1", True),
        ("127.3.2.1", True),
        ("::1", True),
        ("[::1]", True),
        ("localhost", True),
        ("0.0.0.0", False),
        ("192.168.1.20", False),
        ("::", False),
        ("example.invalid", False),
    ],
)
def test_is_loopback(host: str, loopback: bool) -> None:
    assert is_loopback(host) is loopback


def test_run_server_non_loopback_refused() -> None:
    with pytest.raises(ServerConfigError) as caught:
        run_server("0.0.0.0", 0)
    assert str(caught.value) == (
        "host: '0.0.0.0' is not a loopback address; the dashboard would be reachable from other "
        "machines. Use 127.0.0.1 (default), or --share to serve a read-only review on purpose"
    )


def test_run_server_missing_cell(tmp_path: Path) -> None:
    missing = tmp_path / "cell.json"
    with pytest.raises(ServerConfigError) as caught:
        run_server("127.0.0.1", 0, missing)
    assert str(caught.value) == f"cell: no such file {str(missing)!r}"


def test_background_server_non_loopback_refused() -> None:
    with pytest.raises(ServerConfigError) as caught, background_server(host="0.0.0.0"):
        pass
    assert str(caught.value) == "host: background servers bind loopback only, got '0.0.0.0'"


def test_read_health_over_loopback() -> None:
    with background_server(Settings(warm_up=False)) as url:
        assert url.startswith("http://127.0.0.1:")
        response = httpx.get(url + "api/health", timeout=10)
        page = httpx.get(url, timeout=10)
        script = httpx.get(url + "vendor/plotly.min.js", timeout=10)
    assert response.status_code == 200
    body = response.json()
    assert (body["status"], body["version"]) == ("ok", version("posebridge"))
    assert body["kernels_ready"] is True  # warm_up off: nothing to load (our own contract)
    assert page.status_code == 200
    assert 'src="/vendor/plotly.min.js"' in page.text
    assert script.status_code == 200
    assert script.headers["content-type"].startswith("text/javascript")

"""Serving the app with uvicorn: ``posebridge serve`` and in-process servers for tests and bench.

The server binds the loopback interface by default. Any other address makes
the dashboard reachable from other machines, so it is refused unless the
caller asks to share explicitly. A shared server makes a fresh review token,
prints the review link once and keeps only the token's digest: other
machines then need the link and get read-only access (:mod:`posebridge.api.auth`).
"""

from __future__ import annotations

import ipaddress
import socket
import threading
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Any

import uvicorn

from posebridge.api.app import create_app
from posebridge.api.auth import enable_review_sharing
from posebridge.api.settings import Settings
from posebridge.errors import InputError
from posebridge.review.access import new_review_token, review_link

__all__ = [
    "ServerConfigError",
    "background_server",
    "check_host",
    "host_settings",
    "is_loopback",
    "run_server",
]

_START_TIMEOUT_S = 60.0


class ServerConfigError(InputError):
    """The server cannot be started as asked (address, port, files)."""


def is_loopback(host: str) -> bool:
    """Whether ``host`` names this machine only (``localhost``, 127.0.0.0/8, ``::1``)."""
    if host.lower() == "localhost":
        return True
    try:
        return ipaddress.ip_address(host.strip("[]")).is_loopback
    except ValueError:
        return False


def _bind(host: str, port: int) -> socket.socket:
    """Return a listening-ready TCP socket bound to ``host:port`` (port 0 picks a free port)."""
    try:
        family, kind, proto, _, address = socket.getaddrinfo(
            host.strip("[]"), port, type=socket.SOCK_STREAM
        )[0]
        sock = socket.socket(family, kind, proto)
        sock.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
        sock.bind(address)
    except OSError as error:
        raise ServerConfigError(
            f"cannot listen on {host}:{port}: {error.strerror or error}"
        ) from error
    sock.set_inheritable(True)
    return sock


def _url(host: str, sock: socket.socket) -> str:
    port = sock.getsockname()[1]
    shown = f"[{host.strip('[]')}]" if ":" in host else host
    return f"http://{shown}:{port}/"


def _uvicorn_server(
    settings: Settings, log_level: str, review_token: str | None = None
) -> uvicorn.Server:
    app = create_app(settings)
    if review_token is not None:
        enable_review_sharing(app, review_token)
    # the peer address decides who is the owner: never take it from forwarding headers
    config = uvicorn.Config(app, log_level=log_level, lifespan="on", proxy_headers=False)
    return uvicorn.Server(config)


def _review_base_url(host: str, sock: socket.socket) -> str:
    """Return the page URL to give reviewers: the machine's name when bound to every interface."""
    if host.strip("[]") in ("0.0.0.0", "::", ""):
        return f"http://{socket.gethostname()}:{sock.getsockname()[1]}/"
    return _url(host, sock)


def host_settings(host: str) -> dict[str, Any]:
    """Return the ``host_names`` and ``ip_hosts`` settings of a server bound to ``host``.

    The bound name itself, and for every interface (``0.0.0.0``, ``::``) the machine's names and any
    IP address (:mod:`posebridge.api.guard`).
    """
    bare = host.strip("[]").lower()
    if bare in ("0.0.0.0", "::", ""):
        names = {socket.gethostname().lower(), socket.getfqdn().lower()}
        return {"host_names": tuple(sorted(names)), "ip_hosts": True}
    return {"host_names": (bare,), "ip_hosts": False}


def check_host(host: str, *, share: bool) -> None:
    """Refuse a non-loopback ``host`` unless the dashboard is shared on purpose.

    Raises
    ------
    ServerConfigError
    """
    if not share and not is_loopback(host):
        raise ServerConfigError(
            f"host: {host!r} is not a loopback address; the dashboard would be reachable from "
            "other machines. Use 127.0.0.1 (default), or --share to serve a read-only review on purpose"
        )


def run_server(
    host: str = "127.0.0.1",
    port: int = 8000,
    cell_path: Path | None = None,
    *,
    robot: str = "pb-arm6",
    share: bool = False,
    log_level: str = "warning",
) -> None:
    """Serve the dashboard until interrupted; prints the URL and opens nothing.

    Parameters
    ----------
    host : str
        Address to bind; loopback only unless ``share``.
    port : int
        TCP port; 0 picks a free one.
    cell_path : Path, optional
        Cell file to open.
    robot : str
        Robot the page opens with (bundled name or .toml/.urdf path).
    share : bool
        Allow a non-loopback ``host`` for a read-only review: a fresh review
        token is made and the review link printed once. Robot files are then
        not read from paths sent by the page.
    log_level : str
        uvicorn log level.

    Raises
    ------
    ServerConfigError
        Non-loopback host without ``share``, missing cell file, or the
        address cannot be bound.
    """
    check_host(host, share=share)
    if cell_path is not None and not Path(cell_path).is_file():
        raise ServerConfigError(f"cell: no such file {str(cell_path)!r}")
    settings = Settings(
        robot=robot, cell_path=cell_path, robot_paths_allowed=not share, **host_settings(host)
    )
    review_token = new_review_token() if share else None
    sock = _bind(host, port)
    print(
        "posebridge is starting: loading its numerical kernels (compiled on the first start "
        "after installing: minutes on a slow machine, progress below; a second afterwards) ...",
        flush=True,
    )
    server = _uvicorn_server(settings, log_level, review_token)
    thread = _start_in_thread(server, sock, timeout_s=None)
    print(f"posebridge is serving on {_url(host, sock)}  (Ctrl+C stops it)", flush=True)
    if review_token is not None:
        print(
            "shared for a read-only review; give reviewers this link (shown only now, "
            "a new one at every start):",
            flush=True,
        )
        print(f"  {review_link(_review_base_url(host, sock), review_token)}", flush=True)
    try:
        while thread.is_alive():
            thread.join(0.5)
    except KeyboardInterrupt:
        server.should_exit = True
        thread.join(timeout=10)
    finally:
        sock.close()


def _start_in_thread(
    server: uvicorn.Server, sock: socket.socket, *, timeout_s: float | None
) -> threading.Thread:
    """Run ``server`` on ``sock`` in a daemon thread and wait until it accepts requests.

    Raises
    ------
    ServerConfigError
        The server stopped before it started, or did not start within ``timeout_s``.
    """
    thread = threading.Thread(
        target=server.run, kwargs={"sockets": [sock]}, name="posebridge-server", daemon=True
    )
    thread.start()
    waited = 0.0
    while not server.started:
        if not thread.is_alive() or (timeout_s is not None and waited > timeout_s):
            server.should_exit = True
            raise ServerConfigError("the server did not start (see the messages above)")
        thread.join(0.05)
        waited += 0.05
    return thread


@contextmanager
def background_server(
    settings: Settings | None = None, *, host: str = "127.0.0.1", review_token: str | None = None
) -> Iterator[str]:
    """Run the app on a free loopback port in a thread; yields its base URL (ending in ``/``).

    For tests and ``posebridge bench``. The server stops when the block ends.
    With ``review_token`` the app is shared for review with that token.

    Raises
    ------
    ServerConfigError
        ``host`` is not a loopback address, or the server did not start.
    """
    if not is_loopback(host):
        raise ServerConfigError(f"host: background servers bind loopback only, got {host!r}")
    sock = _bind(host, 0)
    server = _uvicorn_server(settings or Settings(), "warning", review_token)
    try:
        thread = _start_in_thread(server, sock, timeout_s=_START_TIMEOUT_S)
        try:
            yield _url(host, sock)
        finally:
            server.should_exit = True
            thread.join(timeout=10)
    finally:
        sock.close()

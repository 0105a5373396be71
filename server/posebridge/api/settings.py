"""Server settings: one immutable object, built on first use, never at import."""

from __future__ import annotations

from functools import cache
from pathlib import Path

from pydantic import BaseModel, ConfigDict, Field

__all__ = ["Settings", "get_settings"]


class Settings(BaseModel):
    """What one running posebridge server serves and allows.

    Attributes
    ----------
    robot : str
        Robot the page opens with: a bundled name or a .toml/.urdf path.
    cell_path : Path or None
        Cell file the server was started with, if any.
    robot_cache_size : int
        Loaded robots kept in memory (least recently used are dropped).
    robot_paths_allowed : bool
        Requests may name robot files by path; off when the server is shared
        beyond this machine, so remote viewers cannot make it read local files.
    warm_up : bool
        Compile and run the kinematics kernels once at start-up, so the first
        request from the page is as fast as the rest.
    max_request_bytes : int
        Largest request body accepted (HTTP 413 beyond); a cell file may be
        up to 20 MB.
    host_names : tuple of str
        Names the ``Host`` header may give besides ``127.0.0.1``,
        ``localhost`` and ``[::1]``: the address the server was started on
        (``--host``), and the machine's names when shared on every interface
        (:mod:`posebridge.api.guard`).
    ip_hosts : bool
        Also accept any IP address as the ``Host`` (a server shared on every
        interface, ``0.0.0.0`` or ``::``).
    """

    model_config = ConfigDict(frozen=True, extra="forbid")

    robot: str = Field(default="pb-arm6", min_length=1, max_length=1000)
    cell_path: Path | None = None
    robot_cache_size: int = Field(default=8, ge=1, le=256)
    robot_paths_allowed: bool = True
    warm_up: bool = True
    max_request_bytes: int = Field(default=21_000_000, ge=1_000, le=1_000_000_000)
    host_names: tuple[str, ...] = Field(default=(), max_length=16)
    ip_hosts: bool = False


@cache
def get_settings() -> Settings:
    """Return the default settings, built once on first call."""
    return Settings()

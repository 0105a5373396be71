"""Liveness answer."""

from __future__ import annotations

from pydantic import BaseModel, ConfigDict, Field

__all__ = ["HealthResult"]


class HealthResult(BaseModel):
    """Answer of the liveness check."""

    model_config = ConfigDict(extra="forbid")

    status: str
    version: str
    kernels_ready: bool = Field(
        default=True,
        description="Every numerical kernel is loaded; false while the first start after "
        "installing still compiles some in the background (requests that need them wait).",
    )
    kernels_done: int = Field(default=0, description="Warm-up steps finished.")
    kernels_total: int = Field(default=0, description="Warm-up steps in all.")
    kernels_current: str | None = Field(
        default=None, description="The step running now, e.g. 'target check'."
    )

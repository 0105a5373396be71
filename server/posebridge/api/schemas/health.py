"""Liveness answer."""

from __future__ import annotations

from pydantic import BaseModel, ConfigDict

__all__ = ["HealthResult"]


# Answer of the liveness check.
class HealthResult(BaseModel):
    model_config = ConfigDict(extra="forbid")

    status: str
    version: str

"""Liveness and readiness bodies."""

from __future__ import annotations

from pydantic import BaseModel, Field

from service.api.registry import Refusal

__all__ = ["HealthLive", "HealthReady"]


class HealthLive(BaseModel):
    """The process answers."""

    status: str = Field(examples=["alive"])


class HealthReady(BaseModel):
    """Ready when the store is readable and at least one series is loaded."""

    ready: bool
    store_readable: bool
    series_loaded: int
    serving: dict[str, str] = Field(
        default_factory=dict,
        description="Version served for each series.",
        examples=[{"desk-a": "v0003"}],
    )
    refused: list[Refusal] = Field(
        description="Versions refused at load: series, version and a short reason."
    )
    last_reload: str | None
    store_error: str | None = None

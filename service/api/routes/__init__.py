"""One router per resource, all under ``/v1``."""

from __future__ import annotations

from fastapi import APIRouter

from service.api.routes import admin, batch, capacity, forecast, health, metrics, series

__all__ = ["ROUTERS"]

#: Routers in the order they appear in the OpenAPI document.
ROUTERS: tuple[APIRouter, ...] = (
    health.router,
    series.router,
    forecast.router,
    batch.router,
    capacity.router,
    admin.router,
    metrics.router,
)

"""Liveness and readiness (no token needed: probes cannot always send one)."""

from __future__ import annotations

import asyncio

from fastapi import APIRouter, Response

from service.api.deps import RegistryDep
from service.api.schemas import HealthLive, HealthReady

__all__ = ["router"]

router = APIRouter(prefix="/v1/health", tags=["health"])


@router.get("/live", summary="The process answers")
async def live() -> HealthLive:
    """Always ``alive`` while the process can answer HTTP at all."""
    return HealthLive(status="alive")


@router.get(
    "/ready",
    summary="Ready to answer forecasts",
    response_model=HealthReady,
    responses={503: {"model": HealthReady, "description": "Not ready (same body, ready false)."}},
)
async def ready(registry: RegistryDep, response: Response) -> HealthReady:
    """Ready when the store can be listed now and at least one series is loaded.

    ``serving`` names the version of every served series. Versions refused at load (damaged
    files) are listed with a short reason; the series keep serving their previous version, so a
    refusal alone does not make the service unready.
    """
    store_error = await asyncio.to_thread(registry.check_store)
    served = registry.snapshot()
    body = HealthReady(
        ready=store_error is None and len(served) > 0,
        store_readable=store_error is None,
        series_loaded=len(served),
        serving={name: served[name].version for name in sorted(served)},
        refused=registry.refusals,
        last_reload=registry.last_reload,
        store_error=store_error,
    )
    response.status_code = 200 if body.ready else 503
    return body

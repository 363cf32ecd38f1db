"""Liveness and readiness (no token needed: probes cannot always send one)."""

from __future__ import annotations

import asyncio
from dataclasses import asdict

from fastapi import APIRouter
from fastapi.responses import JSONResponse

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
async def ready(registry: RegistryDep) -> JSONResponse:
    """Ready when the store can be listed now and at least one series is loaded.

    Versions refused at load (damaged files) are listed; the series keep serving their previous
    version, so a refusal alone does not make the service unready.
    """
    store_error = await asyncio.to_thread(registry.check_store)
    loaded = len(registry.snapshot())
    body = HealthReady.model_validate(
        {
            "ready": store_error is None and loaded > 0,
            "store_readable": store_error is None,
            "series_loaded": loaded,
            "refused": [asdict(r) for r in registry.refusals],
            "last_reload": registry.last_reload,
            "store_error": store_error,
        }
    )
    return JSONResponse(body.model_dump(), status_code=200 if body.ready else 503)

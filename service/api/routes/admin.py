"""Admin calls (bearer admin token): reload the store now."""

from __future__ import annotations

import asyncio
from dataclasses import asdict

from fastapi import APIRouter
from fastapi.responses import JSONResponse

from service.api.deps import AdminAccess, RegistryDep
from service.api.schemas import ErrorResponse, ReloadResponse

__all__ = ["router"]

router = APIRouter(
    prefix="/v1/admin",
    tags=["admin"],
    dependencies=[AdminAccess],
    responses={
        401: {"model": ErrorResponse, "description": "No bearer token was given."},
        403: {"model": ErrorResponse, "description": "Wrong token, or admin calls are disabled."},
    },
)


@router.post(
    "/reload",
    summary="Load newly published versions now",
    response_model=ReloadResponse,
    responses={503: {"model": ReloadResponse, "description": "The store cannot be listed."}},
)
async def reload(registry: RegistryDep) -> JSONResponse:
    """Load every series' current version that is not served yet, and swap it in atomically.

    A version that fails to load is refused and listed; the series keeps its previous version.
    Refused versions are tried again on every call (the periodic watcher tries them only once).
    """
    report = await asyncio.to_thread(registry.reload)
    body = ReloadResponse.model_validate(asdict(report))
    return JSONResponse(body.model_dump(), status_code=503 if report.store_error else 200)

"""Admin calls (bearer admin token): reload the store now."""

from __future__ import annotations

import asyncio

from fastapi import APIRouter, Response

from service.api.deps import AdminAccess, RegistryDep
from service.api.registry import ReloadReport
from service.api.schemas import error_responses

__all__ = ["router"]

router = APIRouter(
    prefix="/v1/admin",
    tags=["admin"],
    dependencies=[AdminAccess],
    responses=error_responses(401, 403),
)


@router.post(
    "/reload",
    summary="Load newly published versions now",
    response_model=ReloadReport,
    responses={503: {"model": ReloadReport, "description": "The store cannot be listed."}},
)
async def reload(registry: RegistryDep, response: Response) -> ReloadReport:
    """Load every series' current version that is not served yet, and swap it in atomically.

    A version that fails to load is refused and listed; the series keeps its previous version.
    Refused versions are tried again on every call (the periodic watcher tries them only once).
    """
    report = await asyncio.to_thread(registry.reload)
    response.status_code = 503 if report.store_error else 200
    return report

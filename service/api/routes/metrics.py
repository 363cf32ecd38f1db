"""Prometheus metrics (text exposition format 0.0.4)."""

from __future__ import annotations

from fastapi import APIRouter
from fastapi.responses import PlainTextResponse

from service.api.deps import MetricsDep, ReadAccess, RegistryDep, WorkDep
from service.api.schemas import error_responses
from service.api.telemetry import render

__all__ = ["router"]

router = APIRouter(
    prefix="/v1/metrics",
    tags=["metrics"],
    dependencies=[ReadAccess],
    # Errors are JSON although the route answers Prometheus text; documented as such.
    responses=error_responses(401, 403),
)


class PrometheusResponse(PlainTextResponse):
    """Text exposition format 0.0.4."""

    media_type = "text/plain; version=0.0.4; charset=utf-8"


@router.get(
    "",
    summary="Prometheus metrics",
    response_class=PrometheusResponse,
    responses={200: {"content": {"text/plain; version=0.0.4; charset=utf-8": {}}}},
)
async def metrics(metrics: MetricsDep, registry: RegistryDep, work: WorkDep) -> PrometheusResponse:
    """Request counts and latency histograms per route template; served and refused versions;
    the work pool (jobs started, running, waiting, refused and abandoned)."""
    return PrometheusResponse(render(metrics, registry, work))

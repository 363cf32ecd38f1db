"""Prometheus metrics (text exposition format 0.0.4)."""

from __future__ import annotations

from fastapi import APIRouter
from fastapi.responses import PlainTextResponse

from service.api.deps import MetricsDep, ReadAccess, RegistryDep
from service.api.schemas import ErrorResponse
from service.api.telemetry import render

__all__ = ["router"]

router = APIRouter(
    prefix="/v1/metrics",
    tags=["metrics"],
    dependencies=[ReadAccess],
    responses={
        401: {"model": ErrorResponse, "description": "A read token is configured and missing."},
        403: {"model": ErrorResponse, "description": "The token given is not valid."},
    },
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
async def metrics(metrics: MetricsDep, registry: RegistryDep) -> PrometheusResponse:
    """Request counts and latency histograms per route template; served and refused versions."""
    return PrometheusResponse(render(metrics, registry))

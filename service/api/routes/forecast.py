"""Predictive counts for one series: explicit windows (POST) or a range cut into bands (GET)."""

from __future__ import annotations

from typing import Annotated

from fastapi import APIRouter, Header, Query
from fastapi.responses import JSONResponse, Response

from service.api.deps import ReadAccess, RegistryDep, SettingsDep
from service.api.errors import ApiError
from service.api.forecasting import answer, range_index, served_version, window_index
from service.api.schemas import BandsQuery, ErrorResponse, ForecastRequest, ForecastResponse
from service.queries.forecast import CAUTION, forecast_csv

__all__ = ["router"]

_ERRORS: dict[int | str, dict[str, object]] = {
    401: {"model": ErrorResponse, "description": "A read token is configured and missing."},
    403: {"model": ErrorResponse, "description": "The token given is not valid."},
    404: {"model": ErrorResponse, "description": "No such series is served."},
    413: {"model": ErrorResponse, "description": "The request body is too large."},
    422: {
        "model": ErrorResponse,
        "description": "A field is invalid: the body names it, the value and what is allowed.",
    },
}

router = APIRouter(
    prefix="/v1/series/{series}",
    tags=["forecast"],
    dependencies=[ReadAccess],
    responses=_ERRORS,
)


@router.post("/forecast", summary="Predictive counts for windows", response_model=ForecastResponse)
async def forecast(
    series: str, body: ForecastRequest, registry: RegistryDep, settings: SettingsDep
) -> JSONResponse:
    """Per window: mean, sd, central intervals, exact quantiles, P(N = 0), P(N >= k).

    Times without a UTC offset are read in ``tz``; results are given in the series' own zone. With
    ``total`` the distribution of the sum over all (non-overlapping) windows is added, computed
    from the same posterior draws, so it is consistent with the windows.
    """
    stored = served_version(registry, series)  # one version for the whole request
    starts, ends = window_index(body.windows, tz=body.tz, max_windows=settings.max_windows)
    doc = await answer(
        stored,
        starts,
        ends,
        levels=body.levels,
        quantiles=body.quantiles,
        at_least=body.at_least,
        total=body.total,
        horizon_days=settings.max_horizon_days,
        windows=[w.model_dump() for w in body.windows],
    )
    # The document is built by service.queries.forecast; returned as is, it skips a second validation.
    return JSONResponse(doc)


def _wants_csv(accept: str | None) -> bool:
    """Content negotiation between JSON (default) and CSV, honouring q-values."""
    if not accept:
        return False
    offers: list[tuple[float, int, str]] = []
    for position, part in enumerate(accept.split(",")):
        media, *params = (p.strip() for p in part.split(";"))
        q = 1.0
        for param in params:
            name, _, value = param.partition("=")
            if name.strip().lower() == "q":
                try:
                    q = float(value)
                except ValueError:
                    q = 0.0
        if q > 0:
            offers.append((-q, position, media.lower()))
    for _, _, media in sorted(offers):
        if media in ("application/json", "application/*", "*/*"):
            return False
        if media in ("text/csv", "text/*"):
            return True
    raise ApiError(
        406,
        "not_acceptable",
        f"cannot answer in any of the media types accepted ({accept[:100]!r})",
        field="Accept",
        value=accept,
        allowed="application/json (default) or text/csv",
    )


@router.get(
    "/bands",
    summary="Bands over a range, for plotting",
    response_model=ForecastResponse,
    responses={
        200: {"content": {"text/csv": {"schema": {"type": "string"}}}},
        406: {"model": ErrorResponse, "description": "Neither JSON nor CSV is acceptable."},
    },
)
async def bands(
    series: str,
    query: Annotated[BandsQuery, Query()],
    registry: RegistryDep,
    settings: SettingsDep,
    accept: Annotated[str | None, Header()] = None,
) -> Response:
    """The range ``[start, end)`` cut into windows of ``step``, one row of bands per window.

    JSON by default; CSV (one row per window, flat columns) with ``Accept: text/csv``.
    """
    csv = _wants_csv(accept)
    stored = served_version(registry, series)
    starts, ends = range_index(
        query.start, query.end, query.step, tz=query.tz, max_windows=settings.max_windows
    )
    doc = await answer(
        stored,
        starts,
        ends,
        levels=query.levels,
        quantiles=query.quantiles,
        at_least=query.at_least,
        total=False,
        horizon_days=settings.max_horizon_days,
    )
    if csv:
        return Response(
            forecast_csv(doc),
            media_type="text/csv; charset=utf-8",
            headers={
                "Content-Disposition": f'inline; filename="{stored.series}-{stored.version}.csv"',
                "X-Model-Version": stored.version,
                "X-Caution": CAUTION,
            },
        )
    return JSONResponse(doc)

"""Predictive counts for one series: explicit windows (POST) or a range cut into bands (GET)."""

from __future__ import annotations

from typing import Annotated, Any

from fastapi import Query

from service.api.deps import SeriesCall, SeriesCallDep, series_router
from service.api.forecasting import ForecastPlan, Windows, answer, read_range, window_index
from service.api.media import csv_response, json_response, table_route
from service.api.schemas import BandsQuery, ForecastRequest, ForecastResponse
from service.queries.forecast import CAUTION, forecast_csv

__all__ = ["router"]

router = series_router("forecast")


async def _answer(call: SeriesCall, plan: ForecastPlan, *, field: str) -> Any:
    """Admit ``plan`` to the work budget, answer it, and render it as the client asked."""
    call.work.admit(plan.cells, field=field)
    horizon = call.settings.max_horizon_days
    doc = await answer(call.work, plan, horizon_days=horizon, deadline=call.deadline)
    if call.csv:
        text = forecast_csv(doc.model_dump(exclude_unset=True))
        return csv_response(text, call.stored, caution=CAUTION, name="forecast")
    return json_response(doc, call.stored)


@table_route(router.post, "/forecast", "Predictive counts for windows", ForecastResponse)
async def forecast(body: ForecastRequest, call: SeriesCallDep) -> Any:
    """Per window: mean, sd, central intervals, exact quantiles, P(N = 0), P(N >= k).

    Times without a UTC offset are read in ``tz``; results are given in the series' own zone. With
    ``total`` the distribution of the sum over all (non-overlapping) windows is added, computed
    from the same posterior draws, so it is consistent with the windows. JSON by default, plain
    CSV with ``Accept: text/csv``.
    """
    limit = call.settings.max_windows
    starts, ends = window_index(body.windows, tz=body.tz, max_windows=limit)
    given = [w.model_dump() for w in body.windows]
    plan = ForecastPlan.of(call.stored, Windows(starts, ends, given=given), body)
    return await _answer(call, plan, field="windows")


@table_route(router.get, "/bands", "Bands over a range, for plotting", ForecastResponse)
async def bands(query: Annotated[BandsQuery, Query()], call: SeriesCallDep) -> Any:
    """The range ``[start, end)`` cut into windows of ``step``, one row of bands per window.

    JSON by default; plain CSV (one row per window, flat columns) with ``Accept: text/csv``.
    With ``total=true`` the distribution of the sum over the range is added.
    """
    limit = call.settings.max_windows
    span = read_range(query.start, query.end, query.step, tz=query.tz, max_windows=limit)
    plan = ForecastPlan.of(call.stored, Windows(span=span), query)
    return await _answer(call, plan, field="step")

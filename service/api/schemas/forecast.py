"""Forecast requests (explicit windows, or a range cut into bands) and the forecast document."""

from __future__ import annotations

from typing import Any

from pydantic import ConfigDict, Field

from models.prediction.windows import ForecastRow
from service.api.schemas.common import (
    STEP_PATTERN,
    Instant,
    Level,
    QueryBool,
    RequestModel,
    Threshold,
    Zone,
    typed_model,
)
from service.queries.forecast import ForecastDocument

__all__ = [
    "BandsQuery",
    "ForecastOptions",
    "ForecastRequest",
    "ForecastResponse",
    "SummaryOptions",
    "WindowIn",
    "WindowResult",
]


class WindowIn(RequestModel):
    """One window ``[start, end)``; the end must be after the start."""

    start: Instant
    end: Instant


class SummaryOptions(RequestModel):
    """Which intervals and quantiles to report for each window."""

    levels: list[Level] = Field(
        default=[0.8, 0.95],
        max_length=10,
        description="Central interval levels, each strictly between 0 and 1.",
    )
    quantiles: list[Level] = Field(
        default_factory=list,
        max_length=20,
        description="Quantile levels, each strictly between 0 and 1 (exact, from the mixture CDF).",
    )


class ForecastOptions(SummaryOptions):
    """What to report for each window (shared by forecasts, bands and batch items)."""

    at_least: list[Threshold] = Field(
        default_factory=list,
        max_length=20,
        description="Thresholds k for the probability P(N >= k).",
    )


_FORECAST_EXAMPLE: Any = {
    "windows": [
        {"start": "2026-03-09T09:00", "end": "2026-03-09T09:30"},
        {"start": "2026-03-09T09:30", "end": "2026-03-09T10:00"},
    ],
    "tz": "America/Chicago",
    "levels": [0.8, 0.95],
    "quantiles": [0.5, 0.9],
    "at_least": [10],
    "total": True,
}

_TOTAL = "Also give the total over all windows (they must not overlap)."


class ForecastRequest(ForecastOptions):
    """Predictive counts for one series over one or many windows."""

    model_config = ConfigDict(
        extra="forbid", strict=True, json_schema_extra={"examples": [_FORECAST_EXAMPLE]}
    )

    windows: list[WindowIn] = Field(min_length=1, description="Windows [start, end).")
    tz: Zone | None = None
    total: bool = Field(False, description=_TOTAL)


class BandsQuery(ForecastOptions):
    """A range cut into windows of ``step``, for plotting bands (query parameters).

    Query strings carry text, so numbers are read from it; a boolean is only ``true`` or
    ``false``.
    """

    model_config = ConfigDict(extra="forbid", strict=False)

    start: Instant
    end: Instant
    step: str = Field(
        "1h",
        pattern=STEP_PATTERN,
        description="Window length: whole minutes, hours or days, e.g. 15min, 1h, 1d.",
        examples=["1h"],
    )
    tz: Zone | None = None
    total: QueryBool = Field(False, description=_TOTAL)


#: One window's predictive distribution: derived from the library's one row type.
WindowResult = typed_model(ForecastRow)
#: The forecast document of :mod:`service.queries.forecast`.
ForecastResponse = typed_model(ForecastDocument)

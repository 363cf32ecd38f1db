"""Request and response shapes of the HTTP API (separate classes for each direction).

Requests forbid unknown fields so a misspelt option fails loudly instead of being ignored. Times
travel as ISO 8601 strings and are parsed by :func:`models.prediction.windows.parse_instant`, the same parser
the CLI uses; the pattern below only keeps out what is plainly not a date-time.
"""

from __future__ import annotations

from typing import Annotated, Any

from pydantic import BaseModel, ConfigDict, Field, SkipValidation, model_validator

__all__ = [
    "BandsQuery",
    "BatchItem",
    "BatchRecord",
    "BatchRequest",
    "DiagnosticsSummary",
    "ErrorResponse",
    "ForecastRequest",
    "ForecastResponse",
    "HealthLive",
    "HealthReady",
    "History",
    "LoadedVersion",
    "Problem",
    "Refusal",
    "ReloadResponse",
    "SeriesDetail",
    "SeriesList",
    "SeriesSummary",
    "WindowIn",
    "WindowResult",
]

#: ISO 8601 date or date-time, optional fraction and offset (``Z``, ``+05:30``, ``-0300``).
INSTANT_PATTERN = (
    r"^[0-9]{4}-[0-9]{2}-[0-9]{2}"
    r"([T ][0-9]{2}:[0-9]{2}(:[0-9]{2}(\.[0-9]{1,9})?)?)?"
    r"(Z|[+-][0-9]{2}:?[0-9]{2})?$"
)
#: Window step: a whole number of minutes, hours or days.
STEP_PATTERN = r"^[1-9][0-9]{0,5}(min|h|d)$"
INSTANT_ALLOWED = (
    "an ISO 8601 date-time with a UTC offset (2026-03-09T09:00-06:00), or a local time "
    "(2026-03-09T09:00) together with an IANA zone in 'tz'"
)

Level = Annotated[float, Field(gt=0.0, lt=1.0)]
Threshold = Annotated[int, Field(ge=0, le=1_000_000_000)]
Instant = Annotated[
    str,
    Field(
        min_length=10,
        max_length=40,
        pattern=INSTANT_PATTERN,
        description=INSTANT_ALLOWED,
        examples=["2026-03-09T09:00-06:00"],
    ),
]
Zone = Annotated[
    str,
    Field(
        min_length=1,
        max_length=64,
        description="IANA zone for times given without an offset, e.g. America/Chicago.",
        examples=["America/Chicago"],
    ),
]


class _Request(BaseModel):
    model_config = ConfigDict(extra="forbid")


class WindowIn(_Request):
    """One window ``[start, end)``."""

    start: Instant
    end: Instant


class _Options(_Request):
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


class ForecastRequest(_Options):
    """Predictive counts for one series over one or many windows."""

    model_config = ConfigDict(extra="forbid", json_schema_extra={"examples": [_FORECAST_EXAMPLE]})

    windows: list[WindowIn] = Field(min_length=1, description="Windows [start, end).")
    tz: Zone | None = None
    total: bool = Field(
        False, description="Also give the total over all windows (they must not overlap)."
    )


class BandsQuery(_Options):
    """A range cut into windows of ``step``, for plotting bands."""

    start: Instant
    end: Instant
    step: str = Field(
        "1h",
        pattern=STEP_PATTERN,
        description="Window length: whole minutes, hours or days, e.g. 15min, 1h, 1d.",
        examples=["1h"],
    )
    tz: Zone | None = None


class BatchItem(_Options):
    """One series and its windows: either ``windows`` or ``start`` + ``end`` (+ ``step``)."""

    model_config = ConfigDict(
        extra="forbid",
        json_schema_extra={
            "examples": [
                {
                    "id": "desk-a/monday",
                    "series": "desk-a",
                    "start": "2026-03-09T00:00",
                    "end": "2026-03-10T00:00",
                    "step": "1h",
                    "tz": "America/Chicago",
                }
            ]
        },
    )

    id: str | None = Field(None, max_length=128, description="Echoed in the result record.")
    series: str = Field(min_length=1, max_length=64)
    windows: list[WindowIn] | None = Field(None, min_length=1)
    start: Instant | None = None
    end: Instant | None = None
    step: str | None = Field(None, pattern=STEP_PATTERN)
    tz: Zone | None = None
    total: bool = False

    @model_validator(mode="after")
    def _one_way_of_giving_windows(self) -> BatchItem:
        ranged = self.start is not None or self.end is not None or self.step is not None
        if self.windows is not None and ranged:
            raise ValueError("give either windows or start/end/step, not both")
        if self.windows is None and (self.start is None or self.end is None):
            raise ValueError("give windows, or start and end (and optionally step)")
        return self


class BatchRequest(_Request):
    """Many series x windows; answered as NDJSON, one record per item, in order.

    Items are checked one by one while streaming, so a bad item becomes an error record and the
    rest of the batch is still answered.
    """

    model_config = ConfigDict(
        extra="forbid",
        json_schema_extra={
            "examples": [
                {
                    "items": [
                        {
                            "series": "desk-a",
                            "start": "2026-03-09",
                            "end": "2026-03-10",
                            "step": "1h",
                            "tz": "America/Chicago",
                        },
                        {
                            "series": "desk-b",
                            "windows": [
                                {"start": "2026-03-09T09:00-06:00", "end": "2026-03-09T12:00-06:00"}
                            ],
                        },
                    ]
                }
            ]
        },
    )

    # Validated item by item in the route (see the class docstring); documented as BatchItem.
    items: SkipValidation[list[BatchItem]] = Field(description="The items, answered in order.")


# ------------------------------------------------------------------------------------ responses
class WindowResult(BaseModel):
    """Predictive count distribution of one window."""

    start: str = Field(examples=["2026-03-09T09:00:00-05:00"])
    end: str = Field(examples=["2026-03-09T09:30:00-05:00"])
    mean: float = Field(description="Predictive mean count.")
    sd: float = Field(description="Predictive standard deviation.")
    p_zero: float = Field(description="P(N = 0).")
    intervals: dict[str, list[int]] = Field(
        description="Level -> [low, high], both inclusive (central, at least the level).",
        examples=[{"0.8": [12, 25], "0.95": [9, 29]}],
    )
    quantiles: dict[str, int] = Field(examples=[{"0.5": 18}])
    at_least: dict[str, float] | None = Field(
        None, description="k -> P(N >= k); present when thresholds were asked for."
    )


class ForecastResponse(BaseModel):
    """Forecast document: the same shape as ``ratecast forecast --format json``."""

    series: str
    model_version: str
    tz: str = Field(description="Zone of the series; window times are given in it.")
    windows: list[WindowResult]
    total: WindowResult | None = Field(
        None, description="Total over all windows, from the same draws (when asked for)."
    )
    caution: str


class Problem(BaseModel):
    """One thing wrong with a request."""

    field: str | None
    value: Any = None
    message: str
    allowed: str | None = None


class ErrorResponse(BaseModel):
    """Every error has this body."""

    model_config = ConfigDict(
        json_schema_extra={
            "examples": [
                {
                    "status": 422,
                    "code": "invalid_input",
                    "message": "time 2026-03-09 09:00:00 has no UTC offset and no zone was given; "
                    "add an offset (e.g. 2026-03-09T09:00-03:00) or a zone",
                    "field": "windows[0].start",
                    "value": "2026-03-09T09:00",
                    "allowed": INSTANT_ALLOWED,
                    "problems": [],
                }
            ]
        }
    )

    status: int
    code: str
    message: str
    field: str | None = None
    value: Any = None
    allowed: str | None = None
    problems: list[Problem] = Field(default_factory=list)


class BatchRecord(BaseModel):
    """One NDJSON line of a batch answer."""

    index: int
    id: str | None = None
    series: str | None = None
    ok: bool
    result: ForecastResponse | None = None
    error: ErrorResponse | None = None


class DiagnosticsSummary(BaseModel):
    """Sampler diagnostics recorded when the version was fitted."""

    ok: bool
    max_r_hat: float | None = None
    min_ess_bulk: float | None = None
    divergences: int | None = None
    problems: list[str] = Field(default_factory=list)


class History(BaseModel):
    """History the version was fitted on (local dates of the series' zone)."""

    first_day: str = Field(examples=["2025-03-03"])
    end_day: str = Field(description="Day after the last history day.", examples=["2026-03-02"])
    days: int


class SeriesSummary(BaseModel):
    """A published series as currently served."""

    series: str = Field(examples=["desk-a"])
    model_version: str = Field(examples=["v0003"])
    tz: str = Field(examples=["America/Chicago"])
    bin_minutes: int
    history: History
    forecast_until: str = Field(description="Latest window end allowed (local date, exclusive).")
    fitted_at: str | None = Field(None, description="When the version was published (UTC).")
    draws: int
    diagnostics: DiagnosticsSummary | None = None


class SeriesList(BaseModel):
    """All series currently served."""

    count: int
    series: list[SeriesSummary]


class SeriesDetail(SeriesSummary):
    """One series in detail: the summary plus its manifest's description of the fit."""

    versions: list[str] = Field(description="All complete versions in the store, oldest first.")
    loaded_at: str
    opening_hours: str | None = None
    spec: dict[str, Any] | None = None
    data: dict[str, Any] | None = None
    fit: dict[str, Any] | None = None
    packages: dict[str, str] | None = None


class Refusal(BaseModel):
    """A version the service would not load; the previous one (if any) keeps serving."""

    series: str
    version: str | None
    reason: str
    at: str


class HealthLive(BaseModel):
    """The process answers."""

    status: str = Field(examples=["alive"])


class HealthReady(BaseModel):
    """Ready when the store is readable and at least one series is loaded."""

    ready: bool
    store_readable: bool
    series_loaded: int
    refused: list[Refusal]
    last_reload: str | None
    store_error: str | None = None


class LoadedVersion(BaseModel):
    """A series whose served version changed in a reload."""

    series: str
    version: str
    previous: str | None


class ReloadResponse(BaseModel):
    """What a reload changed."""

    loaded: list[LoadedVersion]
    unchanged: int
    removed: list[str]
    refused: list[Refusal]
    store_error: str | None = None

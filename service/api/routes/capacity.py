"""Capacity for one series: staffing per interval, and the intraday update of a forecast.

Both answers are built by :mod:`service.cli.capacity`, the same code as ``ratecast staff`` and
``ratecast update``, so the CLI and the API give the same numbers. Staffing answers carry the
caution of :data:`models.capacity.staffing.STAFFING_CAUTION`.
"""

from __future__ import annotations

from functools import partial
from typing import Any, Literal

import anyio.to_thread
import pandas as pd
from fastapi import APIRouter
from fastapi.responses import JSONResponse
from pydantic import BaseModel, ConfigDict, Field

from models.capacity.staffing import STAFFING_CAUTION, ServiceTarget
from models.prediction.windows import parse_instant
from service.api.deps import ReadAccess, RegistryDep, SettingsDep
from service.api.errors import ApiError, field_errors
from service.api.forecasting import check_tz, forecast_until, range_index, served_version
from service.api.schemas import (
    INSTANT_ALLOWED,
    ErrorResponse,
    Instant,
    Level,
    WindowIn,
    Zone,
)
from service.queries.capacity import staffing_document, update_document

__all__ = [
    "IntradayRequest",
    "IntradayResponse",
    "ObservedWindow",
    "StaffingRequest",
    "StaffingResponse",
    "router",
]

router = APIRouter(
    prefix="/v1/series/{series}",
    tags=["capacity"],
    dependencies=[ReadAccess],
    responses={
        401: {"model": ErrorResponse, "description": "A read token is configured and missing."},
        403: {"model": ErrorResponse, "description": "The token given is not valid."},
        404: {"model": ErrorResponse, "description": "No such series is served."},
        413: {"model": ErrorResponse, "description": "The request body is too large."},
        422: {
            "model": ErrorResponse,
            "description": "A field is invalid: the body names it, the value and what is allowed.",
        },
    },
)


# ------------------------------------------------------------------------------------ requests
class _Request(BaseModel):
    model_config = ConfigDict(extra="forbid")


class StaffingRequest(_Request):
    """A plan ``[start, end)`` cut into intervals, and the service-level goal."""

    model_config = ConfigDict(
        extra="forbid",
        json_schema_extra={
            "examples": [
                {
                    "start": "2026-03-09T08:00",
                    "end": "2026-03-09T18:00",
                    "step": "30min",
                    "tz": "America/Chicago",
                    "handle_time_seconds": 240,
                    "answer_within_seconds": 20,
                    "share": 0.8,
                    "meet_probability": 0.9,
                    "shrinkage": 0.3,
                }
            ]
        },
    )

    start: Instant
    end: Instant
    step: Literal["15min", "30min", "1h"] = Field("30min", description="Plan interval length.")
    tz: Zone | None = None
    handle_time_seconds: float = Field(gt=0, le=86_400, description="Mean handle time.")
    answer_within_seconds: float = Field(ge=0, le=86_400, description="Target answer time T.")
    share: float = Field(gt=0, lt=1, description="Share of callers to answer within T.")
    patience_seconds: float | None = Field(
        None, gt=0, le=86_400, description="Mean patience if callers hang up (Erlang A)."
    )
    meet_probability: float = Field(
        0.9,
        gt=0,
        lt=1,
        description="Probability of meeting the target over the predictive arrival count.",
    )
    shrinkage: float = Field(0.0, ge=0, lt=1, description="Share of paid time off the queue.")
    min_agents: int = Field(1, ge=0, le=100_000, description="Floor where calls can arrive.")
    agents: list[int] | None = Field(
        None,
        min_length=1,
        description="A staffing to evaluate: one number for all intervals, or one per interval.",
    )


class ObservedWindow(WindowIn):
    """A window of today and the arrivals counted in it."""

    count: int = Field(ge=0, le=1_000_000_000)


class IntradayRequest(_Request):
    """Today's observed counts, and the windows to forecast again."""

    observed: list[ObservedWindow] = Field(min_length=1, description="Today's observed windows.")
    start: Instant
    end: Instant
    step: str | None = Field(
        None, pattern=r"^[1-9][0-9]{0,5}(min|h|d)$", description="Window length (default: one)."
    )
    tz: Zone | None = None
    levels: list[Level] = Field(default=[0.8, 0.95], max_length=10)
    quantiles: list[Level] = Field(default_factory=list, max_length=20)
    seed: int | None = Field(None, ge=0, le=2**32 - 1, description="Default: the version's seed.")


# ------------------------------------------------------------------------------------ responses
class _Policy(BaseModel):
    agents: int
    scheduled: int = Field(description="Agents to pay for: agents / (1 - shrinkage), rounded up.")
    expected_service_level: float
    miss_probability: float = Field(description="P(service level below target).")


class _Interval(BaseModel):
    start: str
    end: str
    mean_arrivals: float
    quantile_arrivals: int = Field(description="Exact meet_probability-quantile of the count.")
    mean_load_erlangs: float
    plug_in: _Policy = Field(description="Agents for the predictive mean count.")
    assured: _Policy = Field(description="Agents meeting the target with meet_probability.")
    given: _Policy | None = None


class _Day(BaseModel):
    day: str
    mean_arrivals: float
    plug_in_hours: float
    assured_hours: float
    plug_in_paid_hours: float
    assured_paid_hours: float


class StaffingResponse(BaseModel):
    """Staffing document: the same shape as ``ratecast staff --format json``."""

    series: str
    model_version: str
    tz: str
    target: dict[str, Any]
    meet_probability: float
    shrinkage: float
    min_agents: int
    intervals: list[_Interval]
    days: list[_Day]
    definitions: dict[str, str]
    caution: str = Field(examples=[STAFFING_CAUTION])


class _Updated(BaseModel):
    start: str
    end: str
    mean: float
    sd: float
    p_zero: float
    intervals: dict[str, list[int]]
    quantiles: dict[str, int]
    before: dict[str, float] = Field(description="Mean and sd before the update.")


class IntradayResponse(BaseModel):
    """Updated forecast: the same shape as ``ratecast update --format json``."""

    series: str
    model_version: str
    tz: str
    day: str
    observed_total: int
    expected_before: float
    effective_sample_size: float
    draws: int
    latent_today: dict[str, float] | None
    windows: list[_Updated]
    caution: str


# ------------------------------------------------------------------------------------ routes
def _observed(
    observed: list[ObservedWindow], *, tz: str | None, max_windows: int
) -> tuple[pd.DatetimeIndex, pd.DatetimeIndex, list[int]]:
    if len(observed) > max_windows:
        raise ApiError(
            422,
            "too_many_windows",
            f"{len(observed)} observed windows; at most {max_windows} are allowed",
            field="observed",
            value=len(observed),
            allowed=f"at most {max_windows} windows (RATECAST_MAX_WINDOWS)",
        )
    stamps: dict[str, list[pd.Timestamp]] = {"start": [], "end": []}
    for i, window in enumerate(observed):
        for name in ("start", "end"):
            text = getattr(window, name)
            with field_errors(f"observed[{i}].{name}", text, allowed=INSTANT_ALLOWED):
                stamps[name].append(parse_instant(text, tz=tz).tz_convert("UTC"))
    return (
        pd.DatetimeIndex(stamps["start"]),
        pd.DatetimeIndex(stamps["end"]),
        [w.count for w in observed],
    )


@router.post(
    "/staffing", summary="Agents per interval for a service level", response_model=StaffingResponse
)
async def staffing(
    series: str, body: StaffingRequest, registry: RegistryDep, settings: SettingsDep
) -> JSONResponse:
    """Per interval: agents for the predictive mean (plug-in), agents meeting the target with
    probability ``meet_probability`` over the predictive arrival count (assured), and for each the
    expected service level and the probability of missing the target; day totals in agent-hours.

    Figures are advisory: see ``caution`` in the answer.
    """
    stored = served_version(registry, series)
    starts, ends = range_index(
        body.start, body.end, body.step, tz=body.tz, max_windows=settings.max_windows
    )
    if body.agents is not None and len(body.agents) not in (1, len(starts)):
        raise ApiError(
            422,
            "invalid_input",
            f"{len(body.agents)} agent counts for {len(starts)} intervals",
            field="agents",
            value=body.agents,
            allowed=f"one number, or one per interval ({len(starts)})",
        )
    target = ServiceTarget(
        handle_time=body.handle_time_seconds,
        answer_within=body.answer_within_seconds,
        share=body.share,
        patience=body.patience_seconds,
    )
    compute = partial(
        staffing_document,
        stored,
        starts,
        ends,
        target=target,
        meet_probability=body.meet_probability,
        shrinkage=body.shrinkage,
        min_agents=body.min_agents,
        agents=body.agents,
        horizon_days=settings.max_horizon_days,
    )
    calendar = stored.posterior.calendar
    allowed = (
        f"a plan from {calendar.first_day} to {forecast_until(stored, settings.max_horizon_days)} "
        f"({calendar.tz})"
    )
    try:
        with field_errors("end", body.end, allowed=allowed):
            doc = await anyio.to_thread.run_sync(compute)
    except ApiError as exc:
        if exc.message.startswith("agents"):  # the staffing given is below the load
            exc.field, exc.value = "agents", body.agents
            exc.allowed = "more agents than the offered load, or a patience_seconds (Erlang A)"
        raise
    return JSONResponse(doc)


@router.post(
    "/intraday",
    summary="Update today's forecast from today's counts",
    response_model=IntradayResponse,
)
async def intraday(
    series: str, body: IntradayRequest, registry: RegistryDep, settings: SettingsDep
) -> JSONResponse:
    """Re-forecast windows of today and later days from the counts observed so far today.

    Each posterior draw is weighted by how well it explains today's counts and today's latent
    level is drawn from its exact conditional, so a busy morning raises the afternoon.
    """
    stored = served_version(registry, series)
    check_tz(body.tz)
    o_starts, o_ends, counts = _observed(
        body.observed, tz=body.tz, max_windows=settings.max_windows
    )
    starts, ends = range_index(
        body.start, body.end, body.step, tz=body.tz, max_windows=settings.max_windows
    )
    compute = partial(
        update_document,
        stored,
        o_starts,
        o_ends,
        counts,
        starts,
        ends,
        levels=body.levels,
        quantiles=body.quantiles,
        seed=body.seed,
        horizon_days=settings.max_horizon_days,
    )
    allowed = (
        "observed windows within one local day after the history, not overlapping; forecast "
        "windows from that day on"
    )
    with field_errors("observed", None, allowed=allowed):
        doc = await anyio.to_thread.run_sync(compute)
    return JSONResponse(doc)

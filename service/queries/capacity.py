"""Capacity queries shared by the CLI and the API: staffing and intraday-update documents.

:func:`staffing_document` and :func:`update_document` are the single implementation behind
``ratecast staff``/``ratecast update`` and the capacity routes of the HTTP API, so both give the
same numbers. Every staffing document carries :data:`models.capacity.staffing.STAFFING_CAUTION`.
The document shapes are the ``TypedDict`` classes below; the API's response schemas are derived
from them.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Callable, Mapping, Sequence
from pathlib import Path
from typing import Any, NotRequired, TypedDict

import numpy as np
import pandas as pd

from models.capacity.staffing import (
    STAFFING_CAUTION,
    ServiceTarget,
    evaluate_staffing,
    staff_intervals,
)
from models.exceptions import InputError
from models.prediction.intraday import update_forecast
from models.prediction.mixture import summarise
from models.prediction.windows import (
    MAX_HORIZON_DAYS,
    Forecast,
    ForecastRow,
    expected_counts,
)
from models.store import StoredVersion
from service.queries.forecast import CAUTION, document_csv, flat_row
from service.queries.windows import Range, parse_range, parse_time, range_windows

__all__ = [
    "PLAN_STEPS",
    "StaffingDocument",
    "UpdateDocument",
    "plan_windows",
    "read_observed",
    "staffing_csv",
    "staffing_document",
    "update_csv",
    "update_document",
    "update_range",
]

#: Interval lengths a staffing plan may use, in minutes (steady-state queue formulas are read
#: interval by interval; much longer intervals hide the peaks inside them).
PLAN_STEPS = (15, 30, 60)


class Policy(TypedDict):
    """A staffing of one interval and how it fares."""

    agents: int
    scheduled: int
    expected_service_level: float
    miss_probability: float


class StaffingInterval(TypedDict):
    """One plan interval: arrivals, load, and the plug-in, assured (and given) staffing.

    ``quantile_arrivals`` is the exact ``meet_probability``-quantile of the interval's count;
    ``scheduled`` is agents to pay for, ``agents / (1 - shrinkage)`` rounded up.
    """

    start: str
    end: str
    mean_arrivals: float
    quantile_arrivals: int
    mean_load_erlangs: float
    plug_in: Policy
    assured: Policy
    given: NotRequired[Policy]


class StaffingTarget(TypedDict):
    """The service-level goal a plan was made for."""

    handle_time_seconds: float
    answer_within_seconds: float
    share: float
    patience_seconds: float | None
    queue: str


class StaffingDocument(TypedDict):
    """Staffing document: the same shape for ``ratecast staff --format json`` and the API."""

    series: str
    model_version: str
    degraded: bool
    tz: str
    target: StaffingTarget
    meet_probability: float
    shrinkage: float
    min_agents: int
    intervals: list[StaffingInterval]
    days: list[dict[str, Any]]  # the fields of models.capacity.staffing.DayTotal, per day
    definitions: dict[str, str]
    caution: str


class MeanSd(TypedDict):
    """Predictive mean and standard deviation."""

    mean: float
    sd: float


class UpdatedRow(ForecastRow):
    """A forecast row after the intraday update; ``before`` is its mean and sd before it."""

    before: MeanSd


class UpdateDocument(TypedDict):
    """Updated forecast: the same shape for ``ratecast update --format json`` and the API."""

    series: str
    model_version: str
    degraded: bool
    tz: str
    day: str
    observed_total: int
    expected_before: float
    effective_sample_size: float
    draws: int
    latent_today: MeanSd | None
    windows: list[UpdatedRow]
    caution: str


def plan_windows(
    start: str, end: str, *, step: str, tz: str
) -> tuple[pd.DatetimeIndex, pd.DatetimeIndex]:
    """Plan intervals cutting ``[start, end)`` by ``step`` (15min, 30min or 1h)."""
    return range_windows(start, end, step, tz=tz, steps_minutes=PLAN_STEPS)


def update_range(
    start: str | dt.datetime | None,
    end: str | dt.datetime | None,
    step: str | pd.Timedelta | None,
    *,
    observed_ends: pd.DatetimeIndex,
    tz: str | None,
    zone: str,
    bin_minutes: int,
) -> Range:
    """The windows an intraday update answers, with the defaults of ``ratecast update``.

    ``start`` defaults to the end of the observations, ``end`` to the local midnight (in the
    series' ``zone``) after ``start``, and ``step`` to one model bin; times without an offset
    are local to ``tz``.
    """
    if len(observed_ends) == 0:
        raise InputError("no observed windows given; give at least one", field="observed")
    first = parse_time(start, tz=tz, field="start") if start is not None else observed_ends.max()
    if end is None:
        day = first.tz_convert(zone).date() + dt.timedelta(days=1)
        end = pd.Timestamp(day).tz_localize(zone, nonexistent="shift_forward", ambiguous=True)
    return parse_range(first, end, step or pd.Timedelta(minutes=bin_minutes), tz=tz)


def _carry_on() -> None:
    """The default checkpoint: nothing stops the work."""


def _labels(starts: pd.DatetimeIndex, ends: pd.DatetimeIndex, tz: str) -> list[tuple[str, str]]:
    local_starts, local_ends = starts.tz_convert(tz), ends.tz_convert(tz)
    return [(a.isoformat(), b.isoformat()) for a, b in zip(local_starts, local_ends, strict=True)]


def staffing_document(
    stored: StoredVersion,
    starts: pd.DatetimeIndex,
    ends: pd.DatetimeIndex,
    *,
    target: ServiceTarget,
    meet_probability: float,
    shrinkage: float = 0.0,
    min_agents: int = 1,
    agents: Sequence[int] | None = None,
    horizon_days: int = MAX_HORIZON_DAYS,
    checkpoint: Callable[[], None] = _carry_on,
) -> dict[str, Any]:
    """The staffing document (shaped as :class:`StaffingDocument`) for plan intervals
    ``[starts[i], ends[i])``.

    ``agents`` (one number for all intervals, or one per interval) adds how that staffing fares;
    an error about it carries ``field="agents"``. ``checkpoint`` is called between the phases
    (a caller abandoning the work raises from it).
    """
    posterior = stored.posterior
    tz = posterior.calendar.tz
    lam = expected_counts(posterior, starts, ends, horizon_days=horizon_days)
    checkpoint()
    seconds = ((ends - starts) / pd.Timedelta(seconds=1)).to_numpy(dtype=np.float64)
    days = [d.isoformat() for d in starts.tz_convert(tz).date]
    plan = staff_intervals(
        lam,
        interval_seconds=seconds,
        target=target,
        meet_probability=meet_probability,
        shrinkage=shrinkage,
        min_agents=min_agents,
        day=days,
    )
    rows = plan.rows(_labels(starts, ends, tz))
    if agents is not None:
        checkpoint()
        try:
            given = evaluate_staffing(
                lam,
                np.asarray(agents if len(agents) != 1 else agents[0]),
                interval_seconds=seconds,
                target=target,
            )
        except InputError as exc:
            exc.locate("agents", list(agents))
            raise
        paid = plan.scheduled(given.agents)
        for i, row in enumerate(rows):
            row["given"] = {
                "agents": int(given.agents[i]),
                "scheduled": int(paid[i]),
                "expected_service_level": float(given.expected_service_level[i]),
                "miss_probability": float(given.miss_probability[i]),
            }
    doc: dict[str, Any] = {
        "series": stored.series,
        "model_version": stored.version,
        "degraded": stored.degraded,
        "tz": tz,
        "target": {
            "handle_time_seconds": target.handle_time,
            "answer_within_seconds": target.answer_within,
            "share": target.share,
            "patience_seconds": target.patience,
            "queue": "Erlang C" if target.patience is None else "Erlang A",
        },
        "meet_probability": plan.meet_probability,
        "shrinkage": plan.shrinkage,
        "min_agents": min_agents,
        "intervals": rows,
        "days": [vars(total) for total in plan.day_totals()],
        "definitions": {
            "plug_in": "agents for the predictive mean count (forecast uncertainty ignored)",
            "assured": (
                f"fewest agents meeting the target with probability >= {plan.meet_probability:g} "
                "over the predictive distribution of the interval's arrival count"
            ),
            "miss_probability": "probability that the interval's service level is below target",
            "scheduled": "agents to pay for: agents / (1 - shrinkage), rounded up",
        },
        "caution": STAFFING_CAUTION,
    }
    return doc


def update_document(
    stored: StoredVersion,
    observed_starts: pd.DatetimeIndex,
    observed_ends: pd.DatetimeIndex,
    observed_counts: Sequence[int] | np.ndarray,
    starts: pd.DatetimeIndex,
    ends: pd.DatetimeIndex,
    *,
    levels: Sequence[float] = (0.8, 0.95),
    quantiles: Sequence[float] = (),
    seed: int | None = None,
    horizon_days: int = MAX_HORIZON_DAYS,
    checkpoint: Callable[[], None] = _carry_on,
) -> dict[str, Any]:
    """The forecast document for windows, updated by today's observed counts (shaped as
    :class:`UpdateDocument`).

    ``checkpoint`` is called between the phases (a caller abandoning the work raises from it).
    """
    posterior = stored.posterior
    tz = posterior.calendar.tz
    result = update_forecast(
        posterior,
        observed_starts,
        observed_ends,
        observed_counts,
        starts,
        ends,
        seed=seed,
        horizon_days=horizon_days,
    )
    checkpoint()
    summary = summarise(result.lam, levels=tuple(levels), quantiles=tuple(quantiles))
    checkpoint()
    before = summarise(
        expected_counts(posterior, starts, ends, horizon_days=horizon_days), levels=()
    )
    rows: list[dict[str, Any]] = [
        {**row, "before": {"mean": float(before.mean[i]), "sd": float(before.sd[i])}}
        for i, row in enumerate(Forecast(starts=starts, ends=ends, summary=summary, tz=tz).rows())
    ]
    latent = None
    if result.latent is not None:
        latent = {"mean": float(result.latent.mean()), "sd": float(result.latent.std())}
    doc: dict[str, Any] = {
        "series": stored.series,
        "model_version": stored.version,
        "degraded": stored.degraded,
        "tz": tz,
        "day": result.day.isoformat(),
        "observed_total": result.observed_total,
        "expected_before": result.expected_before,
        "effective_sample_size": result.effective_sample_size,
        "draws": int(result.lam.shape[0]),
        "latent_today": latent,
        "windows": rows,
        "caution": CAUTION,
    }
    return doc


def staffing_csv(doc: Mapping[str, Any], *, caution_column: bool = False) -> str:
    """Plain CSV of a plan, one row per interval, columns named after the JSON keys
    (``plug_in_agents``, ``assured_scheduled``, ``given_miss_probability``...).

    Nothing but the header and the rows: the caution travels beside it (an HTTP header in the
    API, the last column with ``caution_column`` on the command line), never as a comment line
    that CSV readers would take for data.
    """
    rows = [flat_row(row) for row in doc["intervals"]]
    return document_csv(rows, doc, caution_column=caution_column)


def update_csv(doc: Mapping[str, Any], *, caution_column: bool = False) -> str:
    """Plain CSV of an updated forecast, one row per window (``before_mean``, ``before_sd``)."""
    return document_csv(
        [flat_row(row) for row in doc["windows"]], doc, caution_column=caution_column
    )


def read_observed(
    path: str | Path, *, tz: str, bin_minutes: int
) -> tuple[pd.DatetimeIndex, pd.DatetimeIndex, np.ndarray]:
    """Observed windows from a CSV/Parquet file with columns ``start``, ``count`` and optional
    ``end`` (default: ``start`` plus one model bin)."""
    from models.ratemodel.binning import parse_timestamps, read_table

    table = read_table(path)
    missing = [c for c in ("start", "count") if c not in table.columns]
    if missing:
        raise InputError(
            f"observed-counts file has no column {missing[0]!r}; columns: "
            f"{', '.join(map(str, table.columns))} (need start,count and optionally end)"
        )
    starts = parse_timestamps(table["start"], tz=tz, column="start")
    if "end" in table.columns:
        ends = parse_timestamps(table["end"], tz=tz, column="end")
    else:
        ends = starts + pd.Timedelta(minutes=bin_minutes)
    counts = pd.to_numeric(table["count"], errors="coerce").to_numpy(dtype=np.float64)
    return starts, ends, counts

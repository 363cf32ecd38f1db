"""From validated request fields to a planned answer, and the answer computed in the work pool.

Nothing here predicts: ranges are read and cut by :mod:`service.queries.windows` and documents
built by :mod:`service.queries`, exactly as the CLI does, so both give the same numbers. What this
module adds is the edge: each failure names the request field, configured limits and the work
budget are applied before any work (:class:`ForecastPlan` knows its cost), and answers are
computed in the :class:`~service.api.work.WorkPool`.
"""

from __future__ import annotations

import datetime as dt
import functools
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Any

import pandas as pd
from pydantic import BaseModel

from models.ratemodel.binning import check_zone
from models.store import StoredVersion
from service.api.errors import ApiError, field_errors
from service.api.registry import Registry
from service.api.schemas import INSTANT_ALLOWED, ForecastResponse, WindowIn
from service.api.work import Job, WorkPool, range_cells, window_cells
from service.queries.forecast import forecast_document
from service.queries.windows import Range, parse_range, parse_time

__all__ = [
    "ForecastPlan",
    "Windows",
    "answer",
    "check_tz",
    "checked",
    "compute",
    "forecast_until",
    "read_range",
    "served_version",
    "window_index",
]


def served_version(registry: Registry, series: str) -> StoredVersion:
    """The version served for ``series``; grab it once and answer the whole request from it."""
    with field_errors("series", series, allowed="1-64 lowercase letters, digits, '.', '_' or '-'"):
        return registry.get(series)


def check_tz(tz: str | None, *, field: str = "tz") -> None:
    """Refuse an unknown zone even when every time carries an offset (strict input)."""
    if tz is not None:
        with field_errors(field, tz, allowed="an IANA zone name such as America/Chicago"):
            check_zone(tz)


def forecast_until(stored: StoredVersion, horizon_days: int) -> dt.date:
    """Latest window end the service answers for (local date, exclusive)."""
    return stored.posterior.history_end + dt.timedelta(days=horizon_days)


def _too_many(field: str, count: int, limit: int) -> ApiError:
    return ApiError(
        422,
        "too_many_windows",
        f"{count} windows requested; at most {limit} are allowed in one request",
        field=field,
        value=count,
        allowed=f"at most {limit} windows (RATECAST_MAX_WINDOWS); split the request",
    )


def window_index(
    windows: Sequence[WindowIn], *, tz: str | None, max_windows: int, field: str = "windows"
) -> tuple[pd.DatetimeIndex, pd.DatetimeIndex]:
    """Starts and ends of explicit windows, each time parsed with its field named."""
    if len(windows) > max_windows:
        raise _too_many(field, len(windows), max_windows)
    check_tz(tz)
    stamps: dict[str, list[pd.Timestamp]] = {"start": [], "end": []}
    for i, window in enumerate(windows):
        for name, text in (("start", window.start), ("end", window.end)):
            where = f"{field}[{i}].{name}"
            with field_errors(where, text, allowed=INSTANT_ALLOWED):
                stamps[name].append(parse_time(text, tz=tz, field=where))
    return pd.DatetimeIndex(stamps["start"]), pd.DatetimeIndex(stamps["end"])


def read_range(
    start: str | dt.datetime,
    end: str | dt.datetime,
    step: str | pd.Timedelta | None,
    *,
    tz: str | None,
    max_windows: int,
    steps_minutes: Sequence[int] | None = None,
) -> Range:
    """The range ``[start, end)`` by ``step``, checked (times, step, window count) but not cut."""
    check_tz(tz)
    with field_errors("end", end, allowed=INSTANT_ALLOWED):
        span = parse_range(start, end, step, tz=tz, steps_minutes=steps_minutes)
    return checked(span, max_windows=max_windows)


def checked(span: Range, *, max_windows: int) -> Range:
    """``span`` if it ends after it starts and gives at most ``max_windows`` windows."""
    if span.end <= span.start:
        with field_errors("end", span.end.isoformat()):
            span.windows()  # raises the error naming the end
    if span.count() > max_windows:
        raise _too_many("step", span.count(), max_windows)
    return span


@dataclass(frozen=True)
class Windows:
    """The windows of a request: explicit ``starts``/``ends``, or a ``span`` cut when answered.

    ``given`` holds the request's own windows, so an error about window ``i`` can show it.
    """

    starts: pd.DatetimeIndex | None = None
    ends: pd.DatetimeIndex | None = None
    span: Range | None = None
    given: Sequence[Any] | None = None

    def cells(self, stored: StoredVersion) -> int:
        """Estimated bin-draws of answering these windows from ``stored``."""
        bin_minutes, draws = stored.posterior.calendar.bin_minutes, stored.posterior.n_draws
        if self.span is not None:
            span = self.span
            return range_cells(
                span.start, span.end, span.step, bin_minutes=bin_minutes, draws=draws
            )
        assert self.starts is not None and self.ends is not None
        return window_cells(self.starts, self.ends, bin_minutes=bin_minutes, draws=draws)

    def cut(self) -> tuple[pd.DatetimeIndex, pd.DatetimeIndex]:
        """Starts and ends (a span is cut now; its window count was checked when it was read)."""
        if self.span is not None:
            return self.span.windows()
        assert self.starts is not None and self.ends is not None
        return self.starts, self.ends


@dataclass(frozen=True)
class ForecastPlan:
    """Everything needed to answer one forecast: the version, the windows, what to report."""

    stored: StoredVersion
    windows: Windows
    levels: Sequence[float]
    quantiles: Sequence[float]
    at_least: Sequence[int]
    total: bool

    @classmethod
    def of(cls, stored: StoredVersion, windows: Windows, options: Any) -> ForecastPlan:
        """The plan for ``options`` (a request with ``levels``, ``quantiles``, ``at_least``,
        ``total``: a forecast body, a bands query or a batch item)."""
        return cls(
            stored,
            windows,
            levels=options.levels,
            quantiles=options.quantiles,
            at_least=options.at_least,
            total=options.total,
        )

    @functools.cached_property
    def cells(self) -> int:
        """Estimated bin-draws of the answer (estimated once: the budget and the pool ask)."""
        return self.windows.cells(self.stored)

    def compute(self, job: Job, *, horizon_days: int) -> BaseModel:
        """The forecast document (as its response model); runs in the work pool."""
        starts, ends = self.windows.cut()
        doc = forecast_document(
            self.stored,
            starts,
            ends,
            levels=self.levels,
            quantiles=self.quantiles,
            at_least=self.at_least,
            total=self.total,
            horizon_days=horizon_days,
        )
        job.check()
        return ForecastResponse.model_validate(doc)

    def allowed(self, horizon_days: int) -> str:
        """What windows this version answers, for error messages."""
        calendar = self.stored.posterior.calendar
        return (
            f"windows from {calendar.first_day} to {forecast_until(self.stored, horizon_days)} "
            f"({calendar.tz}), each ending after it starts"
            + ("; for a total, windows that do not overlap" if self.total else "")
        )


async def compute(
    pool: WorkPool,
    work: Callable[[Job], Any],
    *,
    cells: int,
    deadline: float,
    field: str,
    value: Any = None,
    allowed: str | None = None,
    windows: Sequence[Any] | None = None,
) -> Any:
    """Run ``work`` in ``pool``; library errors name ``field`` (or the window they are about)."""
    with field_errors(field, value, allowed=allowed, windows=windows):
        return await pool.run(work, cells=cells, deadline=deadline)


async def answer(
    pool: WorkPool, plan: ForecastPlan, *, horizon_days: int, deadline: float
) -> BaseModel:
    """The forecast for ``plan``, computed in ``pool`` after the budget admitted it."""
    return await compute(  # type: ignore[no-any-return]
        pool,
        lambda job: plan.compute(job, horizon_days=horizon_days),
        cells=plan.cells,
        deadline=deadline,
        field="windows",
        allowed=plan.allowed(horizon_days),
        windows=plan.windows.given,
    )

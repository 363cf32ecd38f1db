"""From validated request fields to the forecast document of :mod:`service.queries.forecast`.

Nothing here predicts: times are parsed by :mod:`models.prediction.windows`, windows cut by its
``split_range``, and the document built by :func:`service.queries.forecast.forecast_document`, exactly as the
CLI does, so both give the same numbers. What this module adds is the edge: each failure names the
request field, configured limits are applied before any large allocation, and large requests are
computed off the event loop.
"""

from __future__ import annotations

import datetime as dt
import math
from collections.abc import Sequence
from functools import partial
from typing import Any

import anyio.to_thread
import pandas as pd

from models.prediction.windows import parse_instant, parse_step, split_range
from models.ratemodel.binning import check_zone
from models.store import StoredVersion
from service.api.errors import ApiError, field_errors
from service.api.registry import Registry
from service.api.schemas import INSTANT_ALLOWED, WindowIn
from service.queries.forecast import forecast_document

__all__ = [
    "HEAVY_WINDOWS",
    "answer",
    "check_tz",
    "forecast_until",
    "range_index",
    "served_version",
    "window_index",
]

#: Requests with more windows than this are computed in a worker thread: the event loop stays free
#: for health probes and small calls. Smaller ones run inline, which is measurably faster.
HEAVY_WINDOWS = 48


def served_version(registry: Registry, series: str) -> StoredVersion:
    """The version served for ``series``; grab it once and answer the whole request from it."""
    with field_errors("series", series, allowed="1-64 lowercase letters, digits, '.', '_' or '-'"):
        return registry.get(series)


def check_tz(tz: str | None, *, field: str = "tz") -> None:
    """Refuse an unknown zone even when every time carries an offset (strict input)."""
    if tz is not None:
        with field_errors(field, tz, allowed="an IANA zone name such as America/Chicago"):
            check_zone(tz)


def _instant(text: str, *, tz: str | None, field: str) -> pd.Timestamp:
    with field_errors(field, text, allowed=INSTANT_ALLOWED):
        stamp = parse_instant(text, tz=tz)
    try:
        # One zone and unit for all windows; the library compares nanosecond instants.
        return stamp.tz_convert("UTC").as_unit("ns")
    except (ValueError, OverflowError) as exc:
        raise ApiError(
            422,
            "invalid_input",
            f"time {text!r} is outside the range this service can represent",
            field=field,
            value=text,
            allowed="dates between 1678 and 2261",
        ) from exc


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
    windows: Sequence[WindowIn], *, tz: str | None, max_windows: int
) -> tuple[pd.DatetimeIndex, pd.DatetimeIndex]:
    """Starts and ends of explicit windows, each time parsed with its field named."""
    if len(windows) > max_windows:
        raise _too_many("windows", len(windows), max_windows)
    check_tz(tz)
    starts = [_instant(w.start, tz=tz, field=f"windows[{i}].start") for i, w in enumerate(windows)]
    ends = [_instant(w.end, tz=tz, field=f"windows[{i}].end") for i, w in enumerate(windows)]
    return pd.DatetimeIndex(starts), pd.DatetimeIndex(ends)


def range_index(
    start: str, end: str, step: str | None, *, tz: str | None, max_windows: int
) -> tuple[pd.DatetimeIndex, pd.DatetimeIndex]:
    """Windows cutting ``[start, end)`` by ``step`` (one window if ``step`` is None)."""
    check_tz(tz)
    first = _instant(start, tz=tz, field="start")
    last = _instant(end, tz=tz, field="end")
    width = None
    if step is not None:
        with field_errors("step", step, allowed="a whole number of minutes, e.g. 15min, 1h, 1d"):
            width = parse_step(step)
        if last > first:
            # Counted before the windows exist, so a tiny step cannot allocate millions of them.
            count = math.ceil((last - first) / width)
            if count > max_windows:
                raise _too_many("step", count, max_windows)
    with field_errors("end", end, allowed="an end after the start"):
        return split_range(first, last, width)


def forecast_until(stored: StoredVersion, horizon_days: int) -> dt.date:
    """Latest window end the service answers for (local date, exclusive)."""
    return stored.posterior.history_end + dt.timedelta(days=horizon_days)


async def answer(
    stored: StoredVersion,
    starts: pd.DatetimeIndex,
    ends: pd.DatetimeIndex,
    *,
    levels: Sequence[float],
    quantiles: Sequence[float],
    at_least: Sequence[int],
    total: bool,
    horizon_days: int,
    windows: Sequence[Any] | None = None,
) -> dict[str, Any]:
    """The forecast document for ``stored`` (one grabbed version) and the given windows."""
    compute = partial(
        forecast_document,
        stored,
        starts,
        ends,
        levels=levels,
        quantiles=quantiles,
        at_least=at_least,
        total=total,
        horizon_days=horizon_days,
    )
    calendar = stored.posterior.calendar
    allowed = (
        f"windows from {calendar.first_day} to {forecast_until(stored, horizon_days)} "
        f"({calendar.tz}), each ending after it starts"
        + ("; for a total, windows that do not overlap" if total else "")
    )
    with field_errors("windows", None, allowed=allowed, windows=windows):
        if len(starts) > HEAVY_WINDOWS:
            return await anyio.to_thread.run_sync(compute)
        return compute()

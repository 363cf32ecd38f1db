"""Capacity queries shared by the CLI and the API: staffing and intraday-update documents.

:func:`staffing_document` and :func:`update_document` are the single implementation behind
``ratecast staff``/``ratecast update`` and the capacity routes of the HTTP API, so both give the
same numbers. Every staffing document carries :data:`models.capacity.staffing.STAFFING_CAUTION`.
"""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from models.capacity.staffing import (
    STAFFING_CAUTION,
    ServiceTarget,
    evaluate_staffing,
    staff_intervals,
)
from models.exceptions import InputError, WindowError
from models.prediction.intraday import update_forecast
from models.prediction.mixture import summarise
from models.prediction.windows import (
    MAX_HORIZON_DAYS,
    Forecast,
    expected_counts,
    parse_instant,
    parse_step,
    split_range,
)
from models.store import StoredVersion
from service.queries.forecast import CAUTION

__all__ = ["PLAN_STEPS", "plan_windows", "read_observed", "staffing_document", "update_document"]

#: Interval lengths a staffing plan may use, in minutes (steady-state queue formulas are read
#: interval by interval; much longer intervals hide the peaks inside them).
PLAN_STEPS = (15, 30, 60)


def plan_windows(
    start: str, end: str, *, step: str, tz: str
) -> tuple[pd.DatetimeIndex, pd.DatetimeIndex]:
    """Plan intervals cutting ``[start, end)`` by ``step`` (15min, 30min or 1h)."""
    width = parse_step(step)
    minutes = int(width / pd.Timedelta(minutes=1))
    if minutes not in PLAN_STEPS:
        raise WindowError(
            f"plan step {step!r} is not allowed; allowed: {', '.join(f'{m}min' for m in PLAN_STEPS)}"
        )
    return split_range(parse_instant(start, tz=tz), parse_instant(end, tz=tz), width)


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
) -> dict[str, Any]:
    """The staffing document for plan intervals ``[starts[i], ends[i])``.

    ``agents`` (one number for all intervals, or one per interval) adds how that staffing fares.
    """
    posterior = stored.posterior
    tz = posterior.calendar.tz
    lam = expected_counts(posterior, starts, ends, horizon_days=horizon_days)
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
        given = evaluate_staffing(
            lam,
            np.asarray(agents if len(agents) != 1 else agents[0]),
            interval_seconds=seconds,
            target=target,
        )
        paid = plan.scheduled(given.agents)
        for i, row in enumerate(rows):
            row["given"] = {
                "agents": int(given.agents[i]),
                "scheduled": int(paid[i]),
                "expected_service_level": float(given.expected_service_level[i]),
                "miss_probability": float(given.miss_probability[i]),
            }
    return {
        "series": stored.series,
        "model_version": stored.version,
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
) -> dict[str, Any]:
    """The forecast document for windows, updated by today's observed counts."""
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
    summary = summarise(result.lam, levels=tuple(levels), quantiles=tuple(quantiles))
    rows = Forecast(starts=starts, ends=ends, summary=summary, tz=tz).rows()
    before = summarise(
        expected_counts(posterior, starts, ends, horizon_days=horizon_days), levels=()
    )
    for i, row in enumerate(rows):
        row["before"] = {"mean": float(before.mean[i]), "sd": float(before.sd[i])}
    latent = None
    if result.latent is not None:
        latent = {"mean": float(result.latent.mean()), "sd": float(result.latent.std())}
    return {
        "series": stored.series,
        "model_version": stored.version,
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

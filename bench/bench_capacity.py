"""Staffing a 7-day plan at 15-minute intervals from 4,000 posterior draws; intraday; simulation.

Target (issue 5): staffing the plan (plug-in and assured agents, with the expected service level
and miss probability of both) <= 2 s. The forecast draws (``expected_counts``) are timed apart.
Also printed: the same plan with callers who hang up (Erlang A), an intraday update of the rest of
a day, and 100 simulated arrival streams of a day. Figures only, no pass/fail.

Run: ``python bench/bench_capacity.py``.
"""

from __future__ import annotations

import datetime as dt
import statistics
import time
from collections.abc import Callable
from typing import Any

import numpy as np
import pandas as pd

from models.capacity.staffing import ServiceTarget, StaffingPlan, staff_intervals
from models.prediction.intraday import update_forecast
from models.prediction.posterior import CompactPosterior
from models.prediction.simulate import simulate_arrivals
from models.prediction.windows import expected_counts, split_range
from models.ratemodel.design import Calendar
from models.ratemodel.spec import ModelSpec

TZ = "America/Chicago"
DRAWS = 4000
HISTORY_DAYS = 182
FIRST_DAY = dt.date(2025, 9, 1)


def posterior() -> CompactPosterior:
    """4,000 draws at 15-minute bins shaped like a real fit of a mid-sized queue (random)."""
    rng = np.random.default_rng(5)
    spec = ModelSpec(bin_minutes=15)
    hours = np.arange(96) / 4.0
    # About 40 calls per 15 minutes at the midday peak, a few overnight.
    shape = np.log(8.0) + 2.9 * np.exp(-0.5 * ((hours - 12.5) / 3.5) ** 2)
    week = shape[None, None, :] + np.array([0.0, 0.05, 0.02, 0.0, 0.15, -0.5, -0.7])[None, :, None]
    week = week + rng.normal(0, 0.04, (DRAWS, 7, 96))
    return CompactPosterior(
        week_log_rate=week.astype(np.float32),
        trend=rng.normal(0.1, 0.05, DRAWS).astype(np.float32),
        holiday_effect=np.zeros(DRAWS, np.float32),
        latent=rng.normal(0, 0.1, (DRAWS, HISTORY_DAYS)).astype(np.float32),
        latent_rho=rng.uniform(0.5, 0.7, DRAWS).astype(np.float32),
        latent_sd=rng.uniform(0.08, 0.12, DRAWS).astype(np.float32),
        calendar=Calendar(TZ, 15, FIRST_DAY, FIRST_DAY + dt.timedelta(days=HISTORY_DAYS // 2)),
        spec=spec,
        opening=None,
        seed=11,
    )


def timed(run: Callable[[], Any], repeats: int) -> tuple[float, Any]:
    """Median wall time of ``repeats`` runs (seconds) and the last result."""
    times = []
    result = None
    for _ in range(repeats):
        started = time.perf_counter()
        result = run()
        times.append(time.perf_counter() - started)
    return statistics.median(times), result


def main() -> None:
    post = posterior()
    first = pd.Timestamp(post.history_end).tz_localize(TZ)
    starts, ends = split_range(first, first + pd.Timedelta(days=7), pd.Timedelta(minutes=15))
    seconds_draws, lam = timed(lambda: expected_counts(post, starts, ends), 3)
    print(f"plan: {len(starts)} intervals of 15 min x {lam.shape[0]} draws")
    print(f"forecast draws (expected_counts): {seconds_draws:.3f} s")

    erlang_c = ServiceTarget(handle_time=300, answer_within=20, share=0.8)
    erlang_a = ServiceTarget(handle_time=300, answer_within=20, share=0.8, patience=120)
    days = [d.isoformat() for d in starts.tz_convert(TZ).date]
    for name, target in (("Erlang C", erlang_c), ("Erlang A", erlang_a)):

        def plan_week(target: ServiceTarget = target) -> StaffingPlan:
            return staff_intervals(
                lam,
                interval_seconds=900,
                target=target,
                meet_probability=0.9,
                shrinkage=0.3,
                day=days,
            )

        seconds, plan = timed(plan_week, 3)
        totals = plan.day_totals()
        plug = sum(t.plug_in_paid_hours for t in totals)
        sure = sum(t.assured_paid_hours for t in totals)
        print(
            f"staffing, {name}: {seconds:.3f} s, {seconds + seconds_draws:.3f} s with the forecast "
            f"draws (target <= 2 s); paid agent-hours for the week: "
            f"plug-in {plug:.0f}, assured p=0.9 {sure:.0f}; mean miss probability plug-in "
            f"{plan.plug_in.miss_probability.mean():.3f}, assured "
            f"{plan.assured.miss_probability.mean():.3f}"
        )

    morning = split_range(first, first + pd.Timedelta(hours=11), pd.Timedelta(minutes=15))
    observed = np.random.default_rng(1).poisson(expected_counts(post, *morning).mean(axis=0) * 1.2)
    rest = split_range(
        first + pd.Timedelta(hours=11), first + pd.Timedelta(days=1), pd.Timedelta(minutes=15)
    )
    seconds, _ = timed(lambda: update_forecast(post, *morning, observed, *rest, seed=1), 3)
    print(f"intraday update (44 observed bins, 52 windows, {DRAWS} draws): {seconds:.3f} s")

    seconds, arrivals = timed(
        lambda: simulate_arrivals(
            post, first, first + pd.Timedelta(days=1), replicates=100, seed=1
        ),
        3,
    )
    print(f"simulate 100 day-long streams: {seconds:.3f} s ({len(arrivals.times)} arrivals)")


if __name__ == "__main__":
    main()

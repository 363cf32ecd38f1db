"""Query speed and artefact size: one 3-hour window, 168 hourly windows, 10,000 windows.

Targets (issues 2 and 16): single 3-hour window <= 1 ms in-process; 10,000 windows answered
(summaries and the JSON-ready rows) <= 1 s; compact draws a few MB per series. Uses a posterior
of 2,000 draws shaped like a real fit (random, not fitted).
"""

from __future__ import annotations

import datetime as dt
import statistics
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd

from models.prediction.posterior import CompactPosterior
from models.prediction.windows import expected_counts, forecast
from models.ratemodel.design import Calendar
from models.ratemodel.spec import ModelSpec
from models.store import FileStore

TZ = "America/Chicago"


def posterior(draws: int = 2000, days: int = 182, *, negbin: bool = False) -> CompactPosterior:
    rng = np.random.default_rng(3)
    spec = ModelSpec(observation="negbin" if negbin else "poisson")
    hours = np.arange(24)
    week = np.log(3.0) + 1.5 * np.exp(-0.5 * ((hours - 13) / 4.0) ** 2)
    week = week[None, None, :] + rng.normal(0, 0.03, (draws, 7, 24))
    return CompactPosterior(
        week_log_rate=week.astype(np.float32),
        trend=rng.normal(0.1, 0.05, draws).astype(np.float32),
        holiday_effect=np.zeros(draws, np.float32),
        latent=rng.normal(0, 0.1, (draws, days)).astype(np.float32),
        latent_rho=rng.uniform(0.5, 0.7, draws).astype(np.float32),
        latent_sd=rng.uniform(0.08, 0.12, draws).astype(np.float32),
        calendar=Calendar(TZ, 60, dt.date(2025, 1, 6), dt.date(2025, 4, 7)),
        spec=spec,
        opening=None,
        seed=1,
        dispersion=rng.uniform(5.0, 40.0, (draws, 24)).astype(np.float32) if negbin else None,
    )


def timed(fn, repeats: int) -> float:  # type: ignore[no-untyped-def]
    fn()
    runs = []
    for _ in range(repeats):
        started = time.perf_counter()
        fn()
        runs.append(time.perf_counter() - started)
    return statistics.median(runs)


def main() -> None:
    post = posterior()
    start = pd.Timestamp(post.history_end).tz_localize(TZ) + pd.Timedelta(days=2, hours=9)
    one = pd.DatetimeIndex([start]), pd.DatetimeIndex([start + pd.Timedelta(hours=3)])
    week_starts = pd.date_range(start, periods=168, freq="1h")
    week = week_starts, week_starts + pd.Timedelta(hours=1)
    many_starts = start + pd.to_timedelta(np.arange(10_000) * 37, unit="min")
    many = pd.DatetimeIndex(many_starts), pd.DatetimeIndex(many_starts + pd.Timedelta(hours=3))
    kwargs = {"levels": (0.8, 0.95), "quantiles": (0.05, 0.5, 0.95), "at_least": (10,)}
    print(f"posterior: {post.n_draws} draws, {post.n_days} history days")
    for label, (s, e), repeats in (
        ("one 3-hour window", one, 200),
        ("168 hourly windows", week, 20),
        ("10,000 3-hour windows", many, 3),
    ):
        integral = timed(lambda s=s, e=e: expected_counts(post, s, e), repeats)
        total = timed(lambda s=s, e=e: forecast(post, s, e, **kwargs), repeats)
        answer = timed(lambda s=s, e=e: forecast(post, s, e, **kwargs).rows(), repeats)
        print(
            f"{label:>24}: forecast {total * 1e3:9.2f} ms (window integrals {integral * 1e3:8.2f} ms, "
            f"mixture summaries {max(total - integral, 0) * 1e3:8.2f} ms); with the rows "
            f"{answer * 1e3:9.2f} ms"
        )
    # Negative binomial bins: the first query of a bin computes its gamma noise (2,000 quantiles);
    # later queries of the same bins read it from the version's cache.
    nb = posterior(negbin=True)
    started = time.perf_counter()
    forecast(nb, *week, **kwargs)
    cold = time.perf_counter() - started
    warm = timed(lambda: forecast(nb, *week, **kwargs), 20)
    print(
        f"{'168 hourly windows, NB':>24}: forecast {cold * 1e3:9.2f} ms first time, "
        f"{warm * 1e3:.2f} ms once the bins' noise is cached"
    )
    with tempfile.TemporaryDirectory() as folder:
        stored = FileStore(folder).publish("bench", post, manifest={})
        size = (Path(folder) / "bench" / "versions" / stored.version / "draws.npz").stat().st_size
        print(
            f"compact draws per series (float32, {post.n_draws} draws, {post.n_days} days): "
            f"{size / 1e6:.2f} MB"
        )


if __name__ == "__main__":
    main()

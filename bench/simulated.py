"""Simulated hourly histories of known shape, for benchmarks only (never for correctness claims)."""

from __future__ import annotations

import datetime as dt

import numpy as np

from models.ratemodel.binning import BinnedSeries, bin_grid, local_features

TZ = "America/Chicago"


def hourly_history(
    weeks: int, *, seed: int = 1, first_day: dt.date = dt.date(2025, 1, 6)
) -> BinnedSeries:
    """``weeks`` of hourly counts: weekly shape, a slow trend and an AR(1) daily deviation."""
    rng = np.random.default_rng(seed)
    end = first_day + dt.timedelta(weeks=weeks)
    grid = bin_grid(first_day, end, tz=TZ, bin_minutes=60)
    dow, slot, day, _ = local_features(grid, tz=TZ, bin_minutes=60)
    k = (day - np.datetime64(first_day)).astype(int)
    latent = np.zeros(k.max() + 1)
    for i in range(1, len(latent)):
        latent[i] = 0.6 * latent[i - 1] + 0.1 * rng.standard_normal()
    shape = 1.5 * np.exp(-0.5 * ((slot - 13) / 4.0) ** 2) + np.where(dow >= 5, -0.5, 0.0)
    log_rate = np.log(3.0) + shape + 0.1 * k / 365.25 + latent[k]
    counts = rng.poisson(np.exp(log_rate))
    return BinnedSeries(grid, counts, np.ones(len(grid)), TZ, 60, first_day, end)

"""A real default fit, small, passes the diagnostics gate and is published without force."""

from __future__ import annotations

import datetime as dt

import numpy as np
import pandas as pd
import pytest

from models.fitting.options import FitOptions
from models.fitting.publish import fit_and_publish
from models.fitting.verdict import is_degraded
from models.prediction.windows import forecast
from models.ratemodel.binning import BinnedSeries, bin_grid, local_features
from models.ratemodel.spec import ModelSpec
from models.store import MemoryStore
from service.defaults import (
    DEFAULT_LATENT_BY_WEEKDAY,
    DEFAULT_OBSERVATION,
    DEFAULT_UNUSUAL_DAYS,
    resolve_day_choices,
    resolve_observation,
)

pytestmark = pytest.mark.slow
TZ = "Europe/Dublin"
FIRST = dt.date(2026, 6, 1)
DAYS = 14


def true_rate(starts: pd.DatetimeIndex) -> np.ndarray:
    """Arrivals per hour: 10 at midday on weekdays, fewer at night and at weekends."""
    dow, _, _, minute = local_features(starts, tz=TZ, bin_minutes=60)
    hour = minute / 60.0
    return 10.0 * np.exp(-0.9 + 1.2 * np.exp(-0.5 * ((hour - 13) / 4) ** 2) - 0.3 * (dow >= 5))


@pytest.fixture(scope="module")
def published():  # type: ignore[no-untyped-def]
    grid = bin_grid(FIRST, FIRST + dt.timedelta(days=DAYS), tz=TZ, bin_minutes=60)
    counts = np.random.default_rng(2026).poisson(true_rate(grid))
    binned = BinnedSeries(
        grid, counts, np.ones(len(grid)), TZ, 60, FIRST, FIRST + dt.timedelta(days=DAYS)
    )
    # What `ratecast fit` builds by default (service/cli/common.py model_spec): negative
    # binomial bins, trend, daily latent (for hourly bins: unusual days kept, one latent scale);
    # default sampling settings, no force.
    unusual_days, by_weekday = resolve_day_choices(
        DEFAULT_UNUSUAL_DAYS, DEFAULT_LATENT_BY_WEEKDAY, bin_minutes=60, latent=True, joint=False
    )
    spec = ModelSpec(
        observation=resolve_observation(DEFAULT_OBSERVATION, bin_minutes=60, latent=True),
        trend=True,
        latent_daily=True,
        unusual_days=unusual_days,
        latent_by_weekday=by_weekday,
    )
    store = MemoryStore()
    outcome = fit_and_publish(
        binned, spec, store=store, series="small", options=FitOptions(progressbar=False)
    )
    return outcome, store


def test_the_default_fit_passes_the_gate_first_time(published) -> None:
    outcome, store = published
    assert outcome.fit.diagnostics.ok, outcome.fit.diagnostics.problems
    assert outcome.retry is None and len(outcome.attempts) == 1
    assert outcome.fit.diagnostics.divergences == 0
    manifest = store.load("small").manifest
    assert manifest["fit"]["degraded"] is False and not is_degraded(manifest)
    # Hourly bins keep every day by default; the manifest says none was left out.
    assert manifest["data"]["unusual_days_left_out"] == []


def test_its_forecast_brackets_the_known_rate(published) -> None:
    # Truth: the simulated rate, integrated over each of the next 7 days (common practice, no
    # source: a Poisson process with a known rate has that expected count).
    _, store = published
    posterior = store.load("small").posterior
    start = pd.Timestamp(FIRST + dt.timedelta(days=DAYS)).tz_localize(TZ)
    starts = pd.DatetimeIndex([start + pd.Timedelta(days=i) for i in range(7)]).tz_convert("UTC")
    ends = starts + pd.Timedelta(days=1)
    truth = np.array(
        [
            true_rate(pd.date_range(a, b, freq="60min", inclusive="left")).sum()
            for a, b in zip(starts, ends, strict=True)
        ]
    )
    result = forecast(posterior, starts, ends, levels=(0.95,))
    lo, hi = result.summary.intervals[0.95]
    assert np.all((truth >= lo) & (truth <= hi))
    assert np.all(np.abs(result.summary.mean - truth) < 0.15 * truth)

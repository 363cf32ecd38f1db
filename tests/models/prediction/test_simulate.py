"""Arrival streams from the posterior process: counts, times, files.

References:
- Counts in [a, b) of a time-inhomogeneous Poisson process are Poisson(integral of the rate)
  (../shared/REFERENCE_VALUES.md, "Time-inhomogeneous Poisson process"); over posterior draws
  the count is the mixture that models.prediction.windows.forecast summarises exactly.
- Time-rescaling: given n arrivals, Lambda(t_i) / Lambda(end) are i.i.d. uniform; checked with
  scipy.stats.kstest against an integrated rate computed here from the weekly table through
  zoneinfo (independent of the project's bin grid).
- Lewis & Shedler, Naval Research Logistics Quarterly 26(3):403-413 (1979), for the method.
"""

from __future__ import annotations

import datetime as dt
from zoneinfo import ZoneInfo

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from models.exceptions import InputError, WindowError
from models.prediction.simulate import simulate_arrivals, write_arrivals
from models.prediction.windows import forecast
from models.ratemodel.binning import OpeningHours
from tests.conftest import synthetic_posterior

TZ = "America/Chicago"


def local(text: str) -> pd.Timestamp:
    return pd.Timestamp(text, tz=TZ)


def integrated_rate(table: np.ndarray, start: pd.Timestamp, moments: np.ndarray) -> np.ndarray:
    """Integral of the hourly table's rate from ``start`` to each moment (UTC ns), walking the
    absolute hours and reading the rate off the local wall clock with zoneinfo."""
    zone = ZoneInfo(TZ)
    s = start.value / 1e9
    top = float(moments.max()) / 1e9
    cuts = [s, *np.arange(np.ceil(s / 3600) * 3600, top, 3600), top]
    edges = np.unique(np.asarray(cuts))
    rates = np.array(
        [
            table[
                dt.datetime.fromtimestamp(a, zone).weekday(),
                dt.datetime.fromtimestamp(a, zone).hour,
            ]
            / 3600.0
            for a in edges[:-1]
        ]
    )
    cumulative = np.concatenate([[0.0], np.cumsum(rates * np.diff(edges))])
    t = moments / 1e9
    piece = np.clip(np.searchsorted(edges, t, side="right") - 1, 0, len(rates) - 1)
    return cumulative[piece] + rates[piece] * (t - edges[piece])


class TestCounts:
    def test_mean_and_variance_match_the_predictive_distribution(self, weekly_table):
        # Draws differ through the latent level of a future day, so the count is overdispersed.
        posterior = synthetic_posterior(
            weekly_table, draws=400, latent_rho=0.6, latent_sd=0.3, latent_last=0.2
        )
        start, end = local("2026-03-03T09:10"), local("2026-03-03T12:20")
        arrivals = simulate_arrivals(posterior, start, end, replicates=4000, seed=1)
        counts = arrivals.counts().astype(float)
        predicted = forecast(posterior, pd.DatetimeIndex([start]), pd.DatetimeIndex([end])).summary
        mean, var = float(predicted.mean[0]), float(predicted.sd[0] ** 2)
        n = counts.size
        assert abs(counts.mean() - mean) < 4 * np.sqrt(var / n)
        # Standard error of a sample variance: sqrt((m4 - var^2) / n), m4 from the sample.
        m4 = np.mean((counts - counts.mean()) ** 4)
        assert abs(counts.var(ddof=1) - var) < 4 * np.sqrt((m4 - var**2) / n)
        assert var > 1.5 * mean  # the check above is about more than Poisson scatter

    def test_each_replicate_keeps_its_draw(self, weekly_table):
        posterior = synthetic_posterior(weekly_table, draws=30)
        arrivals = simulate_arrivals(
            posterior, local("2026-03-03T09:00"), local("2026-03-03T10:00"), replicates=50, seed=3
        )
        assert arrivals.replicate_draws.shape == (50,)
        np.testing.assert_array_equal(arrivals.draw, arrivals.replicate_draws[arrivals.replicate])
        assert np.all(np.diff(arrivals.replicate) >= 0)


class TestTimes:
    def test_times_pass_ks_against_the_integrated_rate_across_a_clock_change(self, weekly_table):
        # Sunday 2026-03-08 in Chicago has 23 hours; the latent level scales the whole day, so
        # the rescaled times of every draw follow the table's shape.
        posterior = synthetic_posterior(
            weekly_table, draws=50, latent_rho=0.5, latent_sd=0.3, n_days=28
        )
        start, end = local("2026-03-08T00:30"), local("2026-03-08T14:45")
        arrivals = simulate_arrivals(posterior, start, end, replicates=80, seed=7)
        assert arrivals.times.min() >= start and arrivals.times.max() < end
        moments = arrivals.times.as_unit("ns").asi8.astype(float)
        total = integrated_rate(weekly_table, start, np.array([float(end.value)]))[0]
        rescaled = integrated_rate(weekly_table, start, moments) / total
        assert len(rescaled) > 2000
        assert stats.kstest(rescaled, "uniform").pvalue > 0.01

    def test_uniform_shape_would_fail_the_same_check(self, weekly_table):
        # The KS check above can fail: against a constant rate the hump is plainly rejected.
        posterior = synthetic_posterior(weekly_table, draws=5)
        start, end = local("2026-03-03T06:00"), local("2026-03-03T20:00")
        arrivals = simulate_arrivals(posterior, start, end, replicates=20, seed=8)
        moments = arrivals.times.as_unit("ns").asi8
        flat = (moments - start.value) / (end.value - start.value)
        assert stats.kstest(flat, "uniform").pvalue < 1e-6

    def test_same_seed_same_stream(self, weekly_table):
        posterior = synthetic_posterior(weekly_table, draws=5)
        window = (local("2026-03-03T09:00"), local("2026-03-03T11:00"))
        a = simulate_arrivals(posterior, *window, replicates=3, seed=4)
        b = simulate_arrivals(posterior, *window, replicates=3, seed=4)
        c = simulate_arrivals(posterior, *window, replicates=3, seed=5)
        assert a.times.equals(b.times)
        assert not a.times.equals(c.times)


class TestClosedTime:
    HOURS = OpeningHours.parse("Mon-Fri 06:30-21:00; Sat-Sun 08:00-18:00")

    def open_at(self, times: pd.DatetimeIndex) -> np.ndarray:
        clock = times.tz_convert(TZ)
        minute = np.asarray(clock.hour * 60 + clock.minute)
        weekday = np.asarray(clock.day_of_week) < 5
        return np.where(
            weekday, (minute >= 390) & (minute < 1260), (minute >= 480) & (minute < 1080)
        )

    def test_100_replicates_over_a_week_with_closed_hours(self, weekly_table):
        # The demo failure: closed bins integrated to -1e-13 and numpy's Poisson refused them.
        posterior = synthetic_posterior(
            weekly_table,
            draws=200,
            opening=self.HOURS,
            latent_rho=0.6,
            latent_sd=0.3,
            dispersion=6.0,
        )
        start, end = local("2026-03-02T00:00"), local("2026-03-09T00:00")
        arrivals = simulate_arrivals(posterior, start, end, replicates=100, seed=2)
        assert arrivals.counts().size == 100
        assert arrivals.counts().min() > 0
        assert self.open_at(arrivals.times).all()  # never an arrival in closed time

    def test_the_open_half_of_a_bin_gets_all_its_arrivals(self, weekly_table):
        # The 06:00 bin opens at 06:30: every arrival of 06:00-07:00 lies in 06:30-07:00, and
        # their number is Poisson(rate x 30 min) (REFERENCE_VALUES.md, "Time-inhomogeneous
        # Poisson process"): mean within 4 standard errors.
        posterior = synthetic_posterior(weekly_table, opening=self.HOURS)
        start, end = local("2026-03-02T06:00"), local("2026-03-02T07:00")
        arrivals = simulate_arrivals(posterior, start, end, replicates=4000, seed=5)
        assert arrivals.times.min() >= local("2026-03-02T06:30")
        mu = weekly_table[0, 6] * 0.5
        assert abs(arrivals.counts().mean() - mu) < 4 * np.sqrt(mu / 4000)

    def test_an_overnight_desk_across_the_end_of_dst_is_simulated_and_written(self, tmp_path):
        # Saturday 31 October to Sunday 1 November 2026 in Chicago: the night 18:00-08:00 lasts
        # 15 hours and 01:00-02:00 happens twice (common practice, no source). The repeated hour
        # used to break the output (a local floor there is ambiguous).
        posterior = synthetic_posterior(
            np.full((7, 24), 4.0),
            opening=OpeningHours.parse("daily 18:00-08:00"),
            first_day=dt.date(2026, 10, 1),
            n_days=28,
        )
        start, end = local("2026-10-31T12:00"), local("2026-11-01T12:00")
        arrivals = simulate_arrivals(posterior, start, end, replicates=400, seed=4)
        mu = 4.0 * 15  # Poisson(rate x open hours): mean within 4 standard errors
        assert abs(arrivals.counts().mean() - mu) < 4 * np.sqrt(mu / 400)
        frame = pd.read_csv(write_arrivals(arrivals, tmp_path / "night.csv"))
        repeated = frame["timestamp"][frame["timestamp"].str.startswith("2026-11-01T01:")]
        assert {text[-6:] for text in repeated} == {"-05:00", "-06:00"}
        clock = pd.DatetimeIndex(arrivals.times).tz_convert(TZ)
        minute = np.asarray(clock.hour * 60 + clock.minute)
        assert np.all((minute >= 18 * 60) | (minute < 8 * 60))


class TestFiles:
    def test_csv_has_iso_times_with_offsets(self, weekly_table, tmp_path):
        posterior = synthetic_posterior(weekly_table, draws=5)
        arrivals = simulate_arrivals(
            posterior, local("2026-03-07T22:00"), local("2026-03-08T10:00"), replicates=20, seed=1
        )
        path = write_arrivals(arrivals, tmp_path / "out" / "arrivals.csv")
        table = pd.read_csv(path)
        assert list(table.columns) == ["replicate", "draw", "timestamp"]
        assert len(table) == len(arrivals.times)
        # Offsets change from -06:00 to -05:00 at 02:00 local on 2026-03-08.
        assert set(table["timestamp"].str[-6:]) == {"-06:00", "-05:00"}
        parsed = pd.to_datetime(table["timestamp"], format="ISO8601", utc=True)
        expected = arrivals.times.floor("us")
        assert (pd.DatetimeIndex(parsed) == expected).all()

    def test_parquet_round_trip(self, weekly_table, tmp_path):
        posterior = synthetic_posterior(weekly_table, draws=5)
        arrivals = simulate_arrivals(
            posterior, local("2026-03-03T09:00"), local("2026-03-03T10:00"), replicates=2, seed=1
        )
        table = pd.read_parquet(write_arrivals(arrivals, tmp_path / "a.parquet"))
        assert (pd.DatetimeIndex(table["timestamp"]) == arrivals.times.floor("us")).all()
        assert table["replicate"].tolist() == arrivals.replicate.tolist()


class TestBadInputs:
    @pytest.fixture
    def posterior(self, weekly_table):
        return synthetic_posterior(weekly_table, draws=5)

    @pytest.mark.parametrize("replicates", [0, -3, 2.5, True])
    def test_replicates(self, posterior, replicates):
        with pytest.raises(InputError, match="replicates"):
            simulate_arrivals(
                posterior,
                local("2026-03-03T09:00"),
                local("2026-03-03T10:00"),
                replicates=replicates,
            )

    def test_too_many_replicates_for_a_long_window(self, posterior):
        with pytest.raises(InputError, match="fewer replicates"):
            simulate_arrivals(
                posterior, local("2026-03-03T00:00"), local("2026-04-03T00:00"), replicates=30_000
            )

    def test_reversed_window(self, posterior):
        with pytest.raises(WindowError, match="not after its start"):
            simulate_arrivals(posterior, local("2026-03-03T10:00"), local("2026-03-03T09:00"))

    def test_naive_window(self, posterior):
        with pytest.raises(WindowError, match="offset or zone"):
            simulate_arrivals(
                posterior, pd.Timestamp("2026-03-03T09:00"), pd.Timestamp("2026-03-03T10:00")
            )

    def test_beyond_the_horizon(self, posterior):
        with pytest.raises(WindowError, match="beyond the forecast horizon"):
            simulate_arrivals(
                posterior, local("2027-09-01T09:00"), local("2027-09-01T10:00"), replicates=1
            )

    def test_unknown_file_type(self, posterior, tmp_path):
        arrivals = simulate_arrivals(
            posterior, local("2026-03-03T09:00"), local("2026-03-03T10:00")
        )
        with pytest.raises(InputError, match=r"\.csv or \.parquet"):
            write_arrivals(arrivals, tmp_path / "a.json")

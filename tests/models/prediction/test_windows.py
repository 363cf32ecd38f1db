"""Window expectations and predictive summaries from a compact posterior (no PyMC)."""

from __future__ import annotations

import datetime as dt
import itertools
from zoneinfo import ZoneInfo

import numpy as np
import pandas as pd
import pytest
from scipy import integrate, stats

from models.exceptions import WindowError
from models.prediction.windows import (
    expected_counts,
    forecast,
    iso_local,
    parse_instant,
    parse_step,
    split_range,
)
from models.ratemodel.binning import OpeningHours
from tests.conftest import synthetic_posterior

CHICAGO = "America/Chicago"


def reference_integral(table: np.ndarray, start: str, end: str, tz: str = CHICAGO) -> float:
    """∫ λ(t) dt in arrivals, by scipy.integrate.quad over each UTC hour, with λ looked up from
    the local wall clock through zoneinfo: independent of the project's bin grid."""
    zone = ZoneInfo(tz)
    a = dt.datetime.fromisoformat(start).timestamp()
    b = dt.datetime.fromisoformat(end).timestamp()

    def rate_per_second(t: float) -> float:
        local = dt.datetime.fromtimestamp(t, zone)
        return float(table[local.weekday(), local.hour]) / 3600.0

    cuts = np.unique(np.concatenate([[a, b], np.arange(np.ceil(a / 3600) * 3600, b, 3600)]))
    return sum(
        integrate.quad(rate_per_second, lo, hi, limit=200)[0] for lo, hi in itertools.pairwise(cuts)
    )


def windows(*pairs: tuple[str, str]) -> tuple[pd.DatetimeIndex, pd.DatetimeIndex]:
    return (
        pd.DatetimeIndex([pd.Timestamp(a).tz_convert("UTC") for a, _ in pairs]),
        pd.DatetimeIndex([pd.Timestamp(b).tz_convert("UTC") for _, b in pairs]),
    )


class TestExpectedCounts:
    # Reference: scipy.integrate.quad of our own rate function (general-purpose library).
    @pytest.mark.parametrize(
        ("start", "end"),
        [
            ("2026-03-02T09:00-06:00", "2026-03-02T09:30-06:00"),  # half an hour
            ("2026-03-02T09:10-06:00", "2026-03-02T12:47-06:00"),  # partial bins both ends
            ("2026-03-07T22:15-06:00", "2026-03-08T05:40-05:00"),  # across midnight and DST start
            ("2026-03-06T00:00-06:00", "2026-03-10T00:00-05:00"),  # several days
        ],
    )
    def test_matches_quad_of_the_rate_function(self, weekly_table, start, end) -> None:
        posterior = synthetic_posterior(weekly_table)
        lam = expected_counts(posterior, *windows((start, end)))
        assert lam.shape == (1, 1)
        assert lam[0, 0] == pytest.approx(reference_integral(weekly_table, start, end), rel=1e-6)

    def test_fall_back_day_counts_its_25th_hour(self, weekly_table) -> None:
        # Sunday 1 November 2026 has 25 hours in Chicago (common practice, no source).
        start, end = "2026-11-01T00:00-05:00", "2026-11-02T00:00-06:00"
        posterior = synthetic_posterior(weekly_table, first_day=dt.date(2026, 10, 1), n_days=30)
        lam = expected_counts(posterior, *windows((start, end)))[0, 0]
        assert lam == pytest.approx(reference_integral(weekly_table, start, end), rel=1e-6)
        assert lam == pytest.approx(weekly_table[6].sum() + weekly_table[6, 1], rel=1e-6)

    def test_many_windows_in_any_order_equal_one_by_one(self, weekly_table) -> None:
        posterior = synthetic_posterior(weekly_table, draws=3)
        pairs = [
            ("2026-03-03T10:00-06:00", "2026-03-03T11:00-06:00"),
            ("2026-03-01T08:00-06:00", "2026-03-01T08:45-06:00"),
            ("2026-06-01T08:00-05:00", "2026-06-01T09:00-05:00"),
        ]
        together = expected_counts(posterior, *windows(*pairs))
        alone = np.hstack([expected_counts(posterior, *windows(p)) for p in pairs])
        np.testing.assert_allclose(together, alone, rtol=1e-9)

    def test_closed_hours_forecast_zero(self, weekly_table) -> None:
        posterior = synthetic_posterior(
            weekly_table, opening=OpeningHours.parse("Mon-Fri 08:30-17:00")
        )
        lam = expected_counts(
            posterior,
            *windows(
                ("2026-03-07T09:00-06:00", "2026-03-07T12:00-06:00"),  # Saturday: closed
                ("2026-03-02T08:00-06:00", "2026-03-02T10:00-06:00"),  # opens 08:30
            ),
        )
        assert lam[0, 0] == 0.0
        assert lam[0, 1] == pytest.approx(0.5 * weekly_table[0, 8] + weekly_table[0, 9])

    def test_trend_scales_the_rate(self, weekly_table) -> None:
        # log λ grows by `trend` per 365.25 days from the trend origin (the middle of history).
        posterior = synthetic_posterior(weekly_table, trend=0.3)
        origin = posterior.calendar.trend_origin
        later = origin + dt.timedelta(days=365 + 28)  # same weekday... checked below
        start = pd.Timestamp(later).tz_localize(CHICAGO) + pd.Timedelta(hours=10)
        lam = expected_counts(
            posterior, pd.DatetimeIndex([start]), pd.DatetimeIndex([start + pd.Timedelta(hours=1)])
        )[0, 0]
        years = (later - origin).days / 365.25
        assert lam == pytest.approx(
            weekly_table[later.weekday(), 10] * np.exp(0.3 * years), rel=1e-5
        )

    def test_future_latent_path_follows_the_ar1_law(self, weekly_table) -> None:
        # AR(1) k steps ahead of z0: mean rho^k z0, variance sd^2 (1 - rho^(2k)) / (1 - rho^2)
        # (standard AR(1) algebra, e.g. Hamilton, Time Series Analysis, ch. 3 [from memory]).
        rho, sd, z0, draws = 0.7, 0.2, 0.4, 40_000
        posterior = synthetic_posterior(
            np.ones((7, 24)), draws=draws, latent_rho=rho, latent_sd=sd, latent_last=z0
        )
        k = 3
        day = posterior.history_end + dt.timedelta(days=k - 1)
        start = pd.Timestamp(day).tz_localize(CHICAGO) + pd.Timedelta(hours=12)
        lam = expected_counts(
            posterior, pd.DatetimeIndex([start]), pd.DatetimeIndex([start + pd.Timedelta(hours=1)])
        )[:, 0]
        z = np.log(lam)
        mean, var = rho**k * z0, sd**2 * (1 - rho ** (2 * k)) / (1 - rho**2)
        assert z.mean() == pytest.approx(mean, abs=4 * np.sqrt(var / draws))
        assert z.var() == pytest.approx(var, rel=0.03)

    def test_future_path_is_the_same_whatever_the_query_reaches(self, weekly_table) -> None:
        posterior = synthetic_posterior(weekly_table, draws=50, latent_rho=0.5, latent_sd=0.3)
        start = pd.Timestamp(posterior.history_end).tz_localize(CHICAGO) + pd.Timedelta(hours=9)
        one = expected_counts(
            posterior, pd.DatetimeIndex([start]), pd.DatetimeIndex([start + pd.Timedelta(hours=1)])
        )
        starts = pd.DatetimeIndex([start, start + pd.Timedelta(days=30)])
        two = expected_counts(posterior, starts, starts + pd.Timedelta(hours=1))
        np.testing.assert_array_equal(one[:, 0], two[:, 0])


class TestForecast:
    def test_degenerate_posterior_gives_scipy_poisson(self, weekly_table) -> None:
        # Reference: scipy.stats.poisson with mean from scipy.integrate.quad.
        start, end = "2026-03-07T22:15-06:00", "2026-03-08T05:40-05:00"
        mu = reference_integral(weekly_table, start, end)
        posterior = synthetic_posterior(weekly_table, draws=4)
        result = forecast(
            posterior,
            *windows((start, end)),
            levels=(0.8, 0.95),
            quantiles=(0.05, 0.5, 0.95),
            at_least=(1, 5, 12),
        )
        row = result.rows()[0]
        assert row["mean"] == pytest.approx(mu, rel=1e-6)
        assert row["sd"] == pytest.approx(np.sqrt(mu), rel=1e-6)
        assert row["p_zero"] == pytest.approx(stats.poisson.pmf(0, mu), rel=1e-6)
        for q in (0.05, 0.5, 0.95):
            assert row["quantiles"][f"{q:g}"] == stats.poisson.ppf(q, mu)
        assert row["intervals"]["0.8"] == [stats.poisson.ppf(0.1, mu), stats.poisson.ppf(0.9, mu)]
        for k in (1, 5, 12):
            assert row["at_least"][str(k)] == pytest.approx(stats.poisson.sf(k - 1, mu), rel=1e-6)

    def test_total_equals_the_sum_of_parts_per_draw(self, weekly_table) -> None:
        posterior = synthetic_posterior(weekly_table, draws=200, latent_rho=0.6, latent_sd=0.3)
        start = pd.Timestamp(posterior.history_end).tz_localize(CHICAGO) + pd.Timedelta(hours=8)
        starts, ends = split_range(start, start + pd.Timedelta(hours=4), pd.Timedelta("1h"))
        result = forecast(posterior, starts, ends, total=True)
        total = result.total_row()
        assert total is not None
        assert total["mean"] == pytest.approx(sum(r["mean"] for r in result.rows()), rel=1e-6)
        # Latent days correlate the windows: the total's variance exceeds the sum of variances.
        assert total["sd"] ** 2 > sum(r["sd"] ** 2 for r in result.rows())

    def test_total_of_overlapping_windows_is_refused(self, weekly_table) -> None:
        posterior = synthetic_posterior(weekly_table)
        with pytest.raises(ValueError, match="overlap"):
            forecast(
                posterior,
                *windows(
                    ("2026-03-02T09:00-06:00", "2026-03-02T11:00-06:00"),
                    ("2026-03-02T10:00-06:00", "2026-03-02T12:00-06:00"),
                ),
                total=True,
            )


class TestWindowErrors:
    def test_reversed_window(self, weekly_table) -> None:
        with pytest.raises(WindowError, match=r"window 0: end .* not after start"):
            expected_counts(
                synthetic_posterior(weekly_table),
                *windows(("2026-03-02T10:00-06:00", "2026-03-02T09:00-06:00")),
            )

    def test_before_history(self, weekly_table) -> None:
        with pytest.raises(WindowError, match="before the history"):
            expected_counts(
                synthetic_posterior(weekly_table),
                *windows(("2025-03-02T10:00-06:00", "2025-03-02T11:00-06:00")),
            )

    def test_beyond_horizon(self, weekly_table) -> None:
        with pytest.raises(WindowError, match="horizon of 10 days"):
            expected_counts(
                synthetic_posterior(weekly_table),
                *windows(("2026-04-20T10:00-05:00", "2026-04-20T11:00-05:00")),
                horizon_days=10,
            )

    def test_naive_time_without_zone(self) -> None:
        with pytest.raises(WindowError, match="no UTC offset"):
            parse_instant("2026-03-02T10:00")

    def test_nonexistent_local_time(self) -> None:
        with pytest.raises(WindowError, match="does not exist"):
            parse_instant("2026-03-08T02:30", tz=CHICAGO)

    @pytest.mark.parametrize("text", ["0min", "-1h", "90s", "soon"])
    def test_bad_step(self, text: str) -> None:
        with pytest.raises(WindowError, match="step"):
            parse_step(text)

    def test_split_range_last_window_may_be_short(self) -> None:
        a = parse_instant("2026-03-02T09:00", tz=CHICAGO)
        starts, ends = split_range(a, a + pd.Timedelta(minutes=70), parse_step("30min"))
        assert [(e - s).seconds // 60 for s, e in zip(starts, ends, strict=True)] == [30, 30, 10]


class TestDerivedArrayCache:
    def test_cache_is_bounded_and_answers_stay_the_same(self, weekly_table) -> None:
        from models.prediction import posterior as posterior_module

        start = pd.Timestamp("2026-03-02T09:00-06:00")
        one = pd.DatetimeIndex([start]), pd.DatetimeIndex([start + pd.Timedelta(hours=2)])
        first = synthetic_posterior(weekly_table, draws=3)
        before = expected_counts(first, *one)
        others = [synthetic_posterior(weekly_table, draws=3, seed=s) for s in range(40)]
        for other in others:
            expected_counts(other, *one)
        assert len(posterior_module._cache) <= posterior_module.CACHED_VERSIONS
        # The first posterior's arrays were evicted and are rebuilt to the same answer.
        np.testing.assert_array_equal(expected_counts(first, *one), before)


def shaped_reference(
    table: np.ndarray,
    start: str,
    end: str,
    *,
    annual: np.ndarray | None = None,
    within: dict[dt.date, np.ndarray] | None = None,
    tz: str = CHICAGO,
) -> float:
    """As :func:`reference_integral`, with the annual season and within-day shape computed here
    from their definitions (phase = days since 1970-01-01 / 365.2425; shape
    sqrt(2) cos(pi k (h + 1/2) / 24)) through datetime and math, not the project's bases."""
    zone = ZoneInfo(tz)
    a = dt.datetime.fromisoformat(start).timestamp()
    b = dt.datetime.fromisoformat(end).timestamp()

    def rate_per_second(t: float) -> float:
        local = dt.datetime.fromtimestamp(t, zone)
        log_rate = np.log(table[local.weekday(), local.hour])
        if annual is not None:
            u = (local.date() - dt.date(1970, 1, 1)).days / 365.2425
            for k in range(1, len(annual) // 2 + 1):
                log_rate += annual[2 * k - 2] * np.sin(2 * np.pi * k * u)
                log_rate += annual[2 * k - 1] * np.cos(2 * np.pi * k * u)
        if within is not None and local.date() in within:
            for k, w in enumerate(within[local.date()], start=1):
                log_rate += w * np.sqrt(2) * np.cos(np.pi * k * (local.hour + 0.5) / 24)
        return float(np.exp(log_rate)) / 3600.0

    cuts = np.unique(np.concatenate([[a, b], np.arange(np.ceil(a / 3600) * 3600, b, 3600)]))
    return sum(
        integrate.quad(rate_per_second, lo, hi, limit=200)[0] for lo, hi in itertools.pairwise(cuts)
    )


class TestSeasonAndShape:
    # Reference: scipy.integrate.quad of the rate written out from the model's definitions.
    @pytest.mark.parametrize(
        ("start", "end"),
        [
            ("2026-02-10T09:10-06:00", "2026-02-10T12:47-06:00"),
            ("2026-03-07T22:15-06:00", "2026-03-08T05:40-05:00"),  # across DST start
            ("2026-08-20T00:00-05:00", "2026-08-23T00:00-05:00"),  # far from history
        ],
    )
    def test_annual_season_matches_quad(self, weekly_table, start, end) -> None:
        annual = np.array([0.2, -0.1, 0.05, 0.03])
        posterior = synthetic_posterior(weekly_table, annual=annual)
        lam = expected_counts(posterior, *windows((start, end)))[0, 0]
        assert lam == pytest.approx(
            shaped_reference(weekly_table, start, end, annual=annual), rel=1e-6
        )

    def test_history_day_shape_matches_quad(self, weekly_table) -> None:
        first, n_days = dt.date(2026, 2, 2), 28
        weights = np.zeros((n_days, 2))
        weights[8] = (0.4, -0.2)  # 2026-02-10
        weights[9] = (-0.3, 0.1)
        posterior = synthetic_posterior(
            weekly_table, within_day=weights, within_day_sd=np.array([0.3, 0.1])
        )
        start, end = "2026-02-10T06:30-06:00", "2026-02-11T14:15-06:00"
        lam = expected_counts(posterior, *windows((start, end)))[0, 0]
        shapes = {
            first + dt.timedelta(days=8): weights[8],
            first + dt.timedelta(days=9): weights[9],
        }
        assert lam == pytest.approx(
            shaped_reference(weekly_table, start, end, within=shapes), rel=1e-6
        )

    def test_future_shape_weights_follow_their_prior(self) -> None:
        # log λ of hour h on a future day is sum_k w_k g_k(h), w_k ~ N(0, sd_k) independently:
        # variance sum_k sd_k^2 g_k(h)^2 (normal algebra, common practice, no source).
        sd, draws = np.array([0.3, 0.1]), 40_000
        posterior = synthetic_posterior(np.ones((7, 24)), draws=draws, within_day_sd=sd)
        day = posterior.history_end + dt.timedelta(days=2)
        hours = [7, 19]
        starts = pd.DatetimeIndex(
            [pd.Timestamp(day).tz_localize(CHICAGO) + pd.Timedelta(hours=h) for h in hours]
        )
        z = np.log(expected_counts(posterior, starts, starts + pd.Timedelta(hours=1)))
        for j, h in enumerate(hours):
            g = np.sqrt(2) * np.cos(np.pi * np.arange(1, 3) * (h + 0.5) / 24)
            var = float(np.sum(sd**2 * g**2))
            assert z[:, j].mean() == pytest.approx(0.0, abs=4 * np.sqrt(var / draws))
            assert z[:, j].var() == pytest.approx(var, rel=0.03)
        # Morning and evening of one day move against each other through the first cosine.
        assert np.corrcoef(z[:, 0], z[:, 1])[0, 1] < -0.5

    def test_future_shape_is_the_same_in_every_query(self) -> None:
        posterior = synthetic_posterior(
            np.ones((7, 24)), draws=20, within_day_sd=np.array([0.3, 0.2, 0.1])
        )
        start = pd.Timestamp(posterior.history_end).tz_localize(CHICAGO) + pd.Timedelta(days=3)
        one = expected_counts(
            posterior, pd.DatetimeIndex([start]), pd.DatetimeIndex([start + pd.Timedelta(hours=1)])
        )
        wide = pd.DatetimeIndex([start - pd.Timedelta(days=2), start])
        two = expected_counts(posterior, wide, wide + pd.Timedelta(hours=1))
        np.testing.assert_array_equal(one[:, 0], two[:, 1])

    def test_terms_survive_serialisation_and_bad_shapes_are_refused(self, weekly_table) -> None:
        from models.exceptions import CorruptArtefact
        from models.prediction.posterior import CompactPosterior

        posterior = synthetic_posterior(
            weekly_table, draws=4, annual=np.array([0.1, 0.2]), within_day_sd=np.array([0.3])
        )
        again = CompactPosterior.from_bytes(posterior.to_bytes(), posterior.meta())
        np.testing.assert_array_equal(again.annual, posterior.annual)
        np.testing.assert_array_equal(again.within_day, posterior.within_day)
        np.testing.assert_array_equal(again.within_day_sd, posterior.within_day_sd)
        import dataclasses

        broken = dataclasses.replace(posterior, within_day=posterior.within_day[:, :5])
        with pytest.raises(CorruptArtefact, match="within_day has shape"):
            broken.check_shapes()
        stray = dataclasses.replace(posterior, spec=posterior.spec.with_(annual_harmonics=0))
        with pytest.raises(CorruptArtefact, match="annual is present"):
            stray.check_shapes()


def open_reference_integral(
    table: np.ndarray, hours: OpeningHours, start: str, end: str, tz: str = CHICAGO
) -> float:
    """∫ λ(t) 1[open at t] dt by scipy.integrate.quad over every UTC quarter-hour, the rate and
    the open/closed state both read off the local wall clock through zoneinfo (the rate of an
    hour applies to its open minutes: rate x open minutes, by hand). Independent of the bins."""
    zone = ZoneInfo(tz)
    a = dt.datetime.fromisoformat(start).timestamp()
    b = dt.datetime.fromisoformat(end).timestamp()

    def rate_per_second(t: float) -> float:
        local = dt.datetime.fromtimestamp(t, zone)
        minute = local.hour * 60 + local.minute + local.second / 60
        is_open = any(lo <= minute < hi for lo, hi in hours.spans[local.weekday()])
        return float(table[local.weekday(), local.hour]) / 3600.0 if is_open else 0.0

    cuts = np.unique(np.concatenate([[a, b], np.arange(np.ceil(a / 900) * 900, b, 900)]))
    return sum(
        integrate.quad(rate_per_second, lo, hi, limit=200)[0] for lo, hi in itertools.pairwise(cuts)
    )


class TestOpenPartOfABin:
    """A bin the opening hours cut carries its rate on its open minutes only."""

    HOURS = OpeningHours.parse("Mon-Fri 06:30-21:00; Sat-Sun 08:00-18:00")

    def test_window_wholly_in_the_closed_half_hour_has_mean_zero_and_p0_one(
        self, weekly_table
    ) -> None:
        posterior = synthetic_posterior(weekly_table, draws=50, opening=self.HOURS)
        result = forecast(posterior, *windows(("2026-03-02T06:00-06:00", "2026-03-02T06:30-06:00")))
        assert result.summary.mean[0] == 0.0
        assert result.summary.p_zero[0] == 1.0
        assert result.summary.intervals[0.95][1][0] == 0

    def test_closed_half_hour_against_the_hand_integral(self, weekly_table) -> None:
        # By hand: the 06:00 bin is open 30 minutes, at weekly_table[Mon, 6] arrivals per hour.
        # The window 06:00-06:45 holds 15 open minutes, 06:15-07:00 all 30, 06:00-06:30 none.
        posterior = synthetic_posterior(weekly_table, opening=self.HOURS)
        rate = weekly_table[0, 6]
        lam = expected_counts(
            posterior,
            *windows(
                ("2026-03-02T06:00-06:00", "2026-03-02T06:45-06:00"),
                ("2026-03-02T06:15-06:00", "2026-03-02T07:00-06:00"),
                ("2026-03-02T06:00-06:00", "2026-03-02T06:30-06:00"),
                ("2026-03-02T06:40-06:00", "2026-03-02T06:50-06:00"),
            ),
        )[0]
        np.testing.assert_allclose(lam, [rate * 15 / 60, rate * 30 / 60, 0.0, rate * 10 / 60])
        # The same by scipy.integrate.quad of rate x open indicator (independent of the bins).
        assert lam[0] == pytest.approx(
            open_reference_integral(
                weekly_table, self.HOURS, "2026-03-02T06:00-06:00", "2026-03-02T06:45-06:00"
            ),
            rel=1e-6,
        )

    def test_straddling_window_p0_is_the_poisson_of_its_open_part(self, weekly_table) -> None:
        # One draw: the count is Poisson(rate x 15/60), checked against scipy.stats.poisson
        # (rel 1e-6: the stored rates are float32).
        posterior = synthetic_posterior(weekly_table, opening=self.HOURS)
        result = forecast(posterior, *windows(("2026-03-02T05:00-06:00", "2026-03-02T06:45-06:00")))
        mu = weekly_table[0, 6] * 15 / 60
        assert result.summary.p_zero[0] == pytest.approx(stats.poisson.pmf(0, mu), rel=1e-6)

    @pytest.mark.parametrize(
        ("start", "end"),
        [
            ("2026-03-02T06:10-06:00", "2026-03-02T08:20-06:00"),  # starts before the opening
            ("2026-03-02T06:40-06:00", "2026-03-02T07:10-06:00"),
            ("2026-03-06T21:05-06:00", "2026-03-07T07:55-06:00"),  # Fri close to Sat opening
            ("2026-03-07T17:20-06:00", "2026-03-08T08:50-05:00"),  # across the start of DST
        ],
    )
    def test_partial_bins_match_quad_of_rate_times_open(self, weekly_table, start, end) -> None:
        hours = OpeningHours.parse("Mon-Fri 06:30-21:15; Sat-Sun 07:45-17:30")
        posterior = synthetic_posterior(weekly_table, opening=hours)
        lam = expected_counts(posterior, *windows((start, end)))[0, 0]
        assert lam == pytest.approx(
            open_reference_integral(weekly_table, hours, start, end), rel=1e-6
        )

    def test_a_week_of_closed_bins_never_integrates_below_zero(self) -> None:
        # The demo failure: closed bins summed to -1.4e-14 and the mixture refused the window.
        rng = np.random.default_rng(3)
        table = np.exp(rng.normal(1.5, 1.0, (7, 48)))
        posterior = synthetic_posterior(
            table,
            bin_minutes=30,
            draws=200,
            opening=self.HOURS,
            latent_rho=0.6,
            latent_sd=0.3,
            latent_last=0.2,
            dispersion=8.0,
        )
        for step in ("15min", "30min", "1h"):
            starts, ends = split_range(
                pd.Timestamp("2026-03-02T00:00", tz=CHICAGO),
                pd.Timestamp("2026-03-09T00:00", tz=CHICAGO),
                parse_step(step),
            )
            lam = expected_counts(posterior, starts, ends)
            assert lam.min() >= 0.0
            local = starts.tz_convert(CHICAGO)
            minute = local.hour * 60 + local.minute
            weekday = local.day_of_week < 5
            closed = np.where(weekday, minute < 6 * 60, minute < 8 * 60)
            assert np.all(lam[:, closed] == 0.0)  # exactly zero, not a rounding residue
            assert forecast(posterior, starts, ends).summary.p_zero[closed].min() == 1.0

    def test_always_open_is_the_same_as_no_opening_hours(self, weekly_table) -> None:
        pairs = [("2026-03-02T05:10-06:00", "2026-03-04T08:20-06:00")]
        always = synthetic_posterior(weekly_table, opening=OpeningHours.parse("always"))
        plain = synthetic_posterior(weekly_table)
        np.testing.assert_array_equal(
            expected_counts(always, *windows(*pairs)), expected_counts(plain, *windows(*pairs))
        )


class TestOvernightHours:
    # US daylight saving 2026: starts Sun 8 March 02:00, ends Sun 1 November 02:00 (common
    # practice, no source; the reference integral reads the clock through zoneinfo).
    HOURS = OpeningHours.parse("Sat 18:00-08:00")
    FLAT = np.full((7, 24), 6.0)

    def test_night_across_the_start_of_dst_has_13_open_hours(self) -> None:
        posterior = synthetic_posterior(self.FLAT, opening=self.HOURS)
        start, end = "2026-03-07T18:00-06:00", "2026-03-08T08:00-05:00"
        lam = expected_counts(posterior, *windows((start, end)))[0, 0]
        assert lam == pytest.approx(6.0 * 13)  # 18:00 to 08:00 is 13 hours that night
        assert lam == pytest.approx(
            open_reference_integral(self.FLAT, self.HOURS, start, end), rel=1e-6
        )

    def test_night_across_the_end_of_dst_has_15_open_hours(self) -> None:
        posterior = synthetic_posterior(
            self.FLAT, opening=self.HOURS, first_day=dt.date(2026, 10, 1), n_days=28
        )
        start, end = "2026-10-31T18:00-05:00", "2026-11-01T08:00-06:00"
        lam = expected_counts(posterior, *windows((start, end)))[0, 0]
        assert lam == pytest.approx(6.0 * 15)
        assert lam == pytest.approx(
            open_reference_integral(self.FLAT, self.HOURS, start, end), rel=1e-6
        )

    def test_the_rest_of_the_week_is_closed(self) -> None:
        posterior = synthetic_posterior(self.FLAT, opening=self.HOURS)
        lam = expected_counts(
            posterior,
            *windows(
                ("2026-03-08T08:00-05:00", "2026-03-14T18:00-05:00"),  # Sun 08:00 to Sat 18:00
                ("2026-03-07T17:30-06:00", "2026-03-07T18:30-06:00"),  # opens at 18:00
            ),
        )[0]
        assert lam[0] == 0.0
        assert lam[1] == pytest.approx(3.0)


class TestStrictInstants:
    @pytest.mark.parametrize(
        "text",
        [
            "05/04/2026",
            "27/04/2026",
            "April 27 2026 9am",
            "2026-4-27",
            "20260427T0900",
            "2026-04-27T9:00",
            "tomorrow",
            "",
        ],
    )
    def test_forms_other_than_iso_8601_are_refused_with_the_accepted_forms(self, text: str) -> None:
        with pytest.raises(WindowError, match=r"is not an ISO 8601 date-time; accepted: ISO 8601"):
            parse_instant(text, tz=CHICAGO)

    @pytest.mark.parametrize(
        ("text", "expected"),
        [
            ("2026-04-27", "2026-04-27T00:00:00-05:00"),
            ("2026-04-27T09:00", "2026-04-27T09:00:00-05:00"),
            ("2026-04-27 09:00:30", "2026-04-27T09:00:30-05:00"),
            ("2026-04-27T09:00:30.5-0300", "2026-04-27T09:00:30.500000-03:00"),
            ("2026-04-27T14:00Z", "2026-04-27T14:00:00+00:00"),
        ],
    )
    def test_iso_8601_forms_are_read(self, text: str, expected: str) -> None:
        assert parse_instant(text, tz=CHICAGO).isoformat() == expected

    def test_an_impossible_date_is_refused(self) -> None:
        with pytest.raises(WindowError, match="not a valid calendar date"):
            parse_instant("2026-02-30T09:00", tz=CHICAGO)


class TestIsoLocal:
    """Row times, checked against pandas' own ``Timestamp.isoformat`` in the zone."""

    @pytest.mark.parametrize(
        "tz",
        # Whole-hour, half-hour (Kolkata, St John's, Lord Howe's 30-minute daylight saving) and
        # 45-minute (Chatham) offsets.
        [
            "UTC",
            CHICAGO,
            "Asia/Kolkata",
            "America/St_Johns",
            "Australia/Lord_Howe",
            "Pacific/Chatham",
        ],
    )
    @pytest.mark.parametrize("count", [3, 500])  # one by one, and the vectorised pass
    def test_matches_pandas_isoformat(self, tz: str, count: int) -> None:
        instants = pd.date_range("2026-01-01", periods=count, freq="1013min", tz="UTC")
        expected = [stamp.isoformat() for stamp in instants.tz_convert(tz)]  # pandas, per instant
        assert iso_local(instants, tz) == expected

    def test_across_a_daylight_saving_change_and_with_fractions_of_a_second(self) -> None:
        # US daylight saving began 2026-03-08 at 02:00 local (common practice, no source): the
        # offset goes from -06:00 to -05:00; a fraction of a second is printed as pandas does.
        instants = pd.DatetimeIndex(["2026-03-08T07:30Z", "2026-03-08T08:30Z"])
        assert iso_local(instants, CHICAGO) == [
            "2026-03-08T01:30:00-06:00",
            "2026-03-08T03:30:00-05:00",
        ]
        fractional = pd.DatetimeIndex(["2026-03-08T08:30:00.25Z"])
        assert iso_local(fractional, CHICAGO) == [fractional.tz_convert(CHICAGO)[0].isoformat()]

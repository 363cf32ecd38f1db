"""Baseline forecasts and their laws, checked by hand and against scipy / statsmodels."""

from __future__ import annotations

import datetime as dt

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from models.evaluation.baselines import (
    NegBinLaw,
    PoissonMixtureLaw,
    glm_poisson,
    same_slot_history,
    seasonal_naive,
    weekday_mean,
)
from models.exceptions import InputError
from models.ratemodel.binning import BinnedSeries, bin_grid
from models.ratemodel.spec import HolidayCalendar

DUBLIN = "Europe/Dublin"


def hourly(counts: np.ndarray, first: dt.date, days: int, tz: str = DUBLIN) -> BinnedSeries:
    grid = bin_grid(first, first + dt.timedelta(days=days), tz=tz, bin_minutes=60)
    assert len(grid) == len(counts)
    return BinnedSeries(
        grid,
        counts.astype(np.int64),
        np.ones(len(grid)),
        tz,
        60,
        first,
        first + dt.timedelta(days=days),
    )


def at(*local: str, tz: str = DUBLIN) -> pd.DatetimeIndex:
    return pd.DatetimeIndex([pd.Timestamp(t).tz_localize(tz) for t in local]).tz_convert("UTC")


class TestSameSlotHistory:
    def test_reads_the_same_wall_clock_slot_each_week_back(self) -> None:
        first = dt.date(2026, 3, 2)  # a Monday
        counts = np.arange(21 * 24)  # the count is the bin's position: easy to check by hand
        past = hourly(counts, first, 21)
        got = same_slot_history(past, at("2026-03-23 09:00", "2026-03-24 17:00"), weeks=4)
        # 09:00 Monday one week back is bin 14*24+9 = 345, two weeks 7*24+9 = 177, three weeks 9.
        assert got[:3, 0].tolist() == [345.0, 177.0, 9.0]
        assert np.isnan(got[3, 0])  # four weeks back is before the history
        assert got[:3, 1].tolist() == [15 * 24 + 17, 8 * 24 + 17, 24 + 17]

    def test_same_clock_time_across_the_spring_change(self) -> None:
        # Ireland moves its clocks forward at 01:00 on Sunday 29 March 2026 (common practice, no
        # source): that day has 23 hourly bins, so "same slot" is found by wall-clock time.
        first = dt.date(2026, 3, 23)
        grid = bin_grid(first, first + dt.timedelta(days=14), tz=DUBLIN, bin_minutes=60)
        assert len(grid) == 14 * 24 - 1
        past = BinnedSeries(
            grid,
            np.arange(len(grid)),
            np.ones(len(grid)),
            DUBLIN,
            60,
            first,
            first + dt.timedelta(days=14),
        )
        got = same_slot_history(past, at("2026-04-05 12:00"), weeks=1)
        local = past.start.tz_convert(DUBLIN)
        expected = np.flatnonzero((local.day == 29) & (local.month == 3) & (local.hour == 12))[0]
        assert got[0, 0] == float(expected)

    def test_unobserved_and_partly_observed_bins_are_missing(self) -> None:
        first = dt.date(2026, 3, 2)
        past = hourly(np.full(7 * 24, 5), first, 7)
        keep = np.ones(len(past.count), dtype=bool)
        keep[9] = False  # Monday 09:00 missing from the data
        exposure = np.ones(len(past.count))
        exposure[10] = 0.5  # Monday 10:00 half observed
        gappy = BinnedSeries(
            past.start[keep],
            past.count[keep],
            exposure[keep],
            DUBLIN,
            60,
            past.first_day,
            past.end_day,
        )
        got = same_slot_history(
            gappy, at("2026-03-09 09:00", "2026-03-09 10:00", "2026-03-09 11:00"), weeks=1
        )
        assert np.isnan(got[0, 0]) and np.isnan(got[0, 1]) and got[0, 2] == 5.0

    def test_refuses_zero_weeks(self) -> None:
        past = hourly(np.ones(24), dt.date(2026, 3, 2), 1)
        with pytest.raises(InputError, match="weeks=0"):
            same_slot_history(past, at("2026-03-03 09:00"), weeks=0)


@pytest.fixture
def three_weeks() -> BinnedSeries:
    rng = np.random.default_rng(4)
    return hourly(rng.poisson(20.0, size=21 * 24), dt.date(2026, 3, 2), 21)


class TestSeasonalNaive:
    def test_mean_is_last_weeks_count_and_law_is_poisson(self, three_weeks) -> None:
        starts = at("2026-03-23 08:00", "2026-03-25 19:00")
        law = seasonal_naive(three_weeks, starts)
        last = same_slot_history(three_weeks, starts, weeks=1)[0]
        np.testing.assert_array_equal(law.mean(), last)
        # Reference: scipy.stats.poisson (quantile = smallest k with F(k) >= q).
        lo, hi = law.intervals([0.8])[0.8]
        np.testing.assert_array_equal(lo, stats.poisson.ppf(0.1, last))
        np.testing.assert_array_equal(hi, stats.poisson.ppf(0.9, last))
        lower, upper = law.pit(np.array([15, 22]))
        np.testing.assert_allclose(upper, stats.poisson.cdf([15, 22], last), rtol=1e-12)
        np.testing.assert_allclose(lower, stats.poisson.cdf([14, 21], last), rtol=1e-12)


class TestWeekdayMean:
    def test_poisson_mean_is_the_average_of_past_weeks(self, three_weeks) -> None:
        starts = at("2026-03-23 08:00")
        past = same_slot_history(three_weeks, starts, weeks=3)[:, 0]
        law = weekday_mean(three_weeks, starts, weeks=3)
        assert law.mean()[0] == pytest.approx(past.mean(), rel=1e-12)

    def test_negbin_is_moment_matched_to_the_past_weeks(self) -> None:
        # Counts of the Monday 09:00 slot in three past weeks, by hand: 10, 30, 20 -> mean 20,
        # sample variance 100, excess 80, size n = 20**2 / 80 = 5, p = n / (n + mean) = 0.2.
        first = dt.date(2026, 3, 2)
        counts = np.full(21 * 24, 20)
        for week, value in enumerate((10, 30, 20)):
            counts[week * 7 * 24 + 9] = value
        law = weekday_mean(hourly(counts, first, 21), at("2026-03-23 09:00"), weeks=3, law="negbin")
        assert isinstance(law, NegBinLaw)
        assert law.mu[0] == pytest.approx(20.0) and law.size[0] == pytest.approx(5.0)
        # Reference: scipy.stats.nbinom(5, 0.2) has mean 20 and variance 100.
        assert stats.nbinom.mean(5, 0.2) == pytest.approx(20.0)
        assert stats.nbinom.var(5, 0.2) == pytest.approx(100.0)
        lo, hi = law.intervals([0.95])[0.95]
        assert (lo[0], hi[0]) == (stats.nbinom.ppf(0.025, 5, 0.2), stats.nbinom.ppf(0.975, 5, 0.2))

    def test_negbin_falls_back_to_poisson_without_excess_variance(self, three_weeks) -> None:
        flat = hourly(np.full(21 * 24, 7), dt.date(2026, 3, 2), 21)
        law = weekday_mean(flat, at("2026-03-23 09:00"), weeks=3, law="negbin")
        assert np.isinf(law.size[0])
        assert law.crps(np.array([7]))[0] == pytest.approx(
            PoissonMixtureLaw(np.array([[7.0]])).crps(np.array([7]))[0], rel=1e-12
        )

    def test_unknown_law_is_refused(self, three_weeks) -> None:
        with pytest.raises(InputError, match="'gamma'"):
            weekday_mean(three_weeks, at("2026-03-23 09:00"), law="gamma")


class TestNegBinLaw:
    def test_crps_matches_the_published_value(self) -> None:
        # ../shared/REFERENCE_VALUES.md [R]: negative binomial CRPS (y=2, n=7, p=0.8) = 0.3834322.
        law = NegBinLaw(mu=np.array([7 * 0.2 / 0.8]), size=np.array([7.0]))
        assert law.crps(np.array([2]))[0] == pytest.approx(0.3834322, abs=1e-7)

    def test_crps_matches_a_sum_over_scipy_cdf(self) -> None:
        # CRPS = sum_k (F(k) - 1{y <= k})^2 (Gneiting & Raftery 2007), F from scipy.stats.nbinom.
        mu, size, y = 12.5, 3.0, 30
        law = NegBinLaw(mu=np.array([mu]), size=np.array([size]))
        k = np.arange(0, 2000)
        cdf = stats.nbinom.cdf(k, size, size / (size + mu))
        assert law.crps(np.array([y]))[0] == pytest.approx(np.sum((cdf - (y <= k)) ** 2), rel=1e-9)

    def test_pit_is_the_scipy_cdf_at_y_minus_one_and_y(self) -> None:
        law = NegBinLaw(mu=np.array([4.0, 9.0]), size=np.array([2.0, np.inf]))
        lower, upper = law.pit(np.array([3, 0]))
        assert upper[0] == pytest.approx(stats.nbinom.cdf(3, 2.0, 2.0 / 6.0), rel=1e-12)
        assert lower[0] == pytest.approx(stats.nbinom.cdf(2, 2.0, 2.0 / 6.0), rel=1e-12)
        assert (lower[1], upper[1]) == (0.0, pytest.approx(stats.poisson.pmf(0, 9.0)))

    def test_subset_keeps_the_chosen_windows(self) -> None:
        law = NegBinLaw(mu=np.array([1.0, np.nan, 3.0]), size=np.array([2.0, np.inf, 4.0]))
        part = law.subset(np.isfinite(law.mean()))
        np.testing.assert_array_equal(part.mean(), [1.0, 3.0])

    def test_refuses_negative_means(self) -> None:
        with pytest.raises(InputError, match="means >= 0"):
            NegBinLaw(mu=np.array([-1.0]), size=np.array([2.0]))


class TestGlmPoisson:
    def test_cell_means_without_holidays_are_exposure_weighted_averages(self) -> None:
        # A Poisson GLM with one indicator per cell and a log-exposure offset has the closed-form
        # MLE exp(beta_c) = sum(y in c) / sum(exposure in c) (common practice, no source).
        rng = np.random.default_rng(8)
        past = hourly(rng.poisson(9.0, size=14 * 24), dt.date(2026, 3, 2), 14)
        exposure = np.where(np.arange(len(past.count)) % 5 == 0, 0.5, 1.0)
        past = BinnedSeries(
            past.start, past.count, exposure, DUBLIN, 60, past.first_day, past.end_day
        )
        starts = at("2026-03-16 09:00", "2026-03-21 23:00")
        law = glm_poisson(past, starts)
        local = past.start.tz_convert(DUBLIN)
        for i, (dow, hour) in enumerate(((0, 9), (5, 23))):
            cell = (local.day_of_week == dow) & (local.hour == hour)
            expected = past.count[cell].sum() / exposure[cell].sum()
            assert law.mean()[i] == pytest.approx(expected, rel=1e-8)

    def test_holiday_effect_matches_a_statsmodels_formula_fit(self) -> None:
        # Reference: statsmodels' formula interface, design built independently with patsy.
        import statsmodels.api as sm
        import statsmodels.formula.api as smf

        rng = np.random.default_rng(9)
        first = dt.date(2026, 4, 6)  # four weeks clear of a clock change
        past = hourly(rng.poisson(12.0, size=28 * 24), first, 28)
        calendar = HolidayCalendar(extra=(dt.date(2026, 4, 14), dt.date(2026, 4, 23)))
        local = past.start.tz_convert(DUBLIN)
        frame = pd.DataFrame(
            {
                "y": past.count,
                "cell": [f"{d}-{h}" for d, h in zip(local.day_of_week, local.hour, strict=True)],
                "holiday": np.isin(local.date, calendar.extra).astype(float),
            }
        )
        reference = smf.glm("y ~ C(cell) + holiday - 1", frame, family=sm.families.Poisson()).fit()
        target = at("2026-05-05 14:00")  # a Tuesday, made a holiday below
        law = glm_poisson(
            past, target, holidays=HolidayCalendar(extra=(*calendar.extra, dt.date(2026, 5, 5)))
        )
        expected = np.exp(reference.params["C(cell)[1-14]"] + reference.params["holiday"])
        assert law.mean()[0] == pytest.approx(expected, rel=1e-6)

    def test_cells_the_history_never_saw_have_no_forecast(self) -> None:
        past = hourly(np.full(24, 3), dt.date(2026, 3, 2), 1)  # one Monday only
        law = glm_poisson(past, at("2026-03-10 09:00", "2026-03-09 09:00"))
        assert np.isnan(law.mean()[0]) and law.mean()[1] == pytest.approx(3.0)

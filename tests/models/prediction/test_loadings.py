"""Weekday (and holiday) loadings on the daily latent deviation, in prediction and intraday.

The checks use the AR(1) law (common practice, no source): with state ``z[k] = rho z[k-1] + sd
e[k]`` started at ``z0``, ``z[k]`` is normal with mean ``rho**k z0`` and variance
``sd**2 (1 - rho**(2k)) / (1 - rho**2)``; a day's deviation is its kind's loading times ``z``.
"""

from __future__ import annotations

import dataclasses
import datetime as dt

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from models.exceptions import InputError
from models.prediction.intraday import update_forecast
from models.prediction.posterior import weekday_loading
from models.ratemodel.design import DAY_KINDS
from models.ratemodel.spec import HolidayCalendar, ModelSpec
from tests.conftest import synthetic_posterior

FIRST = dt.date(2026, 2, 2)  # a Monday
DAYS = 28
LOADING = np.array([0.5, 0.5, 0.5, 0.5, 0.5, 2.0, 3.0, 6.0])  # Mon..Sun, holiday
RHO, SD, LAST = 0.7, 0.2, 0.3  # the last history day is a Sunday: its state is LAST / 3


def loaded(draws: int = 20_000, *, loading: np.ndarray = LOADING, holidays=None):  # type: ignore[no-untyped-def]
    base = synthetic_posterior(
        np.full((7, 24), 5.0), first_day=FIRST, n_days=DAYS, draws=draws,
        latent_rho=RHO, latent_sd=SD, latent_last=LAST, seed=11,
    )  # fmt: skip
    spec = dataclasses.replace(base.spec, latent_by_weekday=True, holidays=holidays)
    calendar = dataclasses.replace(base.calendar, holidays=holidays)
    return dataclasses.replace(
        base,
        spec=spec,
        calendar=calendar,
        latent_loading=np.tile(np.float32(loading), (draws, 1)),
    )


class TestForwardPath:
    def test_future_days_follow_the_loaded_ar1_law(self) -> None:
        posterior = loaded()
        path = posterior.latent_through(DAYS + 13)[:, DAYS:]  # Monday 2 March on, 14 days
        state0 = LAST / LOADING[6]
        for k in range(14):
            kind = (FIRST.weekday() + DAYS + k) % 7
            steps = k + 1
            mean = LOADING[kind] * RHO**steps * state0
            sd = LOADING[kind] * SD * np.sqrt((1 - RHO ** (2 * steps)) / (1 - RHO**2))
            # 20,000 draws: the sample mean is within 4 standard errors, the sd within 3%.
            assert abs(path[:, k].mean() - mean) < 4 * sd / np.sqrt(path.shape[0])
            assert path[:, k].std() == pytest.approx(sd, rel=0.03)
            assert stats.kstest(path[:, k], "norm", args=(mean, sd)).pvalue > 1e-3

    def test_holidays_take_the_holiday_loading(self) -> None:
        # 2026-03-17 is St Patrick's Day, a public holiday in Ireland (common practice, no source;
        # the `holidays` package lists it).
        posterior = loaded(holidays=HolidayCalendar(country="IE"))
        day = (dt.date(2026, 3, 17) - FIRST).days
        rows = weekday_loading(posterior, np.array([day - 1, day, day + 1]))
        assert rows[:, 0].tolist() == [LOADING[0], LOADING[7], LOADING[2]]
        assert DAY_KINDS[7] == "holiday" and DAY_KINDS[0] == "Mon"

    def test_unit_loadings_give_the_unloaded_path_exactly(self) -> None:
        plain = synthetic_posterior(
            np.full((7, 24), 5.0), first_day=FIRST, n_days=DAYS, draws=50,
            latent_rho=RHO, latent_sd=SD, latent_last=LAST, seed=11,
        )  # fmt: skip
        ones = loaded(50, loading=np.ones(8))
        np.testing.assert_array_equal(
            plain.latent_through(DAYS + 20), ones.latent_through(DAYS + 20)
        )

    def test_the_loadings_survive_the_store_format(self) -> None:
        posterior = loaded(10)
        back = type(posterior).from_bytes(posterior.to_bytes(), posterior.meta())
        np.testing.assert_array_equal(back.latent_loading, posterior.latent_loading)
        with pytest.raises(Exception, match="latent_loading"):
            dataclasses.replace(posterior, latent_loading=np.ones((10, 7))).check_shapes()


class TestIntraday:
    def test_unit_loadings_leave_the_update_unchanged(self) -> None:
        plain = synthetic_posterior(
            np.full((7, 24), 5.0), first_day=FIRST, n_days=DAYS, draws=400,
            latent_rho=RHO, latent_sd=SD, latent_last=LAST, seed=11,
        )  # fmt: skip
        ones = loaded(400, loading=np.ones(8))
        tz = plain.calendar.tz
        today = pd.Timestamp("2026-03-02", tz=tz)
        observed = pd.DatetimeIndex([today + pd.Timedelta(hours=h) for h in range(8, 11)])
        later = pd.DatetimeIndex([today + pd.Timedelta(days=d, hours=12) for d in (0, 1, 3)])
        args = (
            observed.tz_convert("UTC"),
            (observed + pd.Timedelta(hours=1)).tz_convert("UTC"),
            np.array([9, 7, 8]),
            later.tz_convert("UTC"),
            (later + pd.Timedelta(hours=1)).tz_convert("UTC"),
        )
        a = update_forecast(plain, *args, seed=3)
        b = update_forecast(ones, *args, seed=3)
        np.testing.assert_allclose(a.lam, b.lam)

    def test_a_steady_weekday_carries_a_morning_surprise_into_tomorrow_scaled(self) -> None:
        # Tomorrow's deviation is its loading over today's times rho times today's: with the
        # same loading on Monday and Tuesday, the shift carried is rho times today's.
        posterior = loaded(4000)
        tz = posterior.calendar.tz
        today = pd.Timestamp("2026-03-02", tz=tz)  # Monday, the day after the history
        observed = pd.DatetimeIndex([today + pd.Timedelta(hours=h) for h in range(7, 12)])
        later = pd.DatetimeIndex(
            [today + pd.Timedelta(hours=15), today + pd.Timedelta(days=1, hours=15)]
        )
        update = update_forecast(
            posterior,
            observed.tz_convert("UTC"),
            (observed + pd.Timedelta(hours=1)).tz_convert("UTC"),
            np.array([9, 9, 9, 9, 9]),  # 45 against 25 expected
            later.tz_convert("UTC"),
            (later + pd.Timedelta(hours=1)).tz_convert("UTC"),
            seed=3,
        )
        today_log = np.log(update.lam[:, 0] / 5.0).mean()
        tomorrow_log = np.log(update.lam[:, 1] / 5.0).mean()
        assert today_log > 0.1  # pulled up from the prior mean of 0.035
        # Monday and Tuesday share loading 0.5, so E[log tomorrow] ~ rho * E[log today]
        # (plus nothing: the innovation has mean 0).
        assert tomorrow_log == pytest.approx(RHO * today_log, abs=0.03)


class TestSpec:
    def test_needs_the_latent_and_the_weekday_effect(self) -> None:
        with pytest.raises(InputError, match="latent_by_weekday needs"):
            ModelSpec(latent_daily=False, latent_by_weekday=True)
        with pytest.raises(InputError, match="non-centred"):
            ModelSpec(centred_latent=True, latent_by_weekday=True)

    def test_stored_form_leaves_the_default_out(self) -> None:
        assert "latent_by_weekday" not in ModelSpec().to_dict()
        spec = ModelSpec(latent_by_weekday=True)
        assert ModelSpec.from_dict(spec.to_dict()) == spec

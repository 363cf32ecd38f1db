"""Several series fitted jointly: shared weekly shape, series deviations, young series borrow."""

from __future__ import annotations

import datetime as dt
import warnings

import numpy as np
import pandas as pd
import pytest

from models.exceptions import InputError
from models.fitting.joint import fit_joint, joint_posteriors, make_joint_data, publish_joint
from models.fitting.options import FitOptions
from models.ratemodel.binning import BinnedSeries, bin_grid, local_features
from models.ratemodel.spec import ModelSpec
from models.store import MemoryStore

TZ = "Europe/Dublin"
FIRST = dt.date(2026, 1, 5)
HOURS = np.arange(24)
SHARED = (
    np.log(4.0)
    + 1.3 * np.exp(-0.5 * ((HOURS - 12) / 3.5) ** 2)[None, :]
    + np.array([0.1, 0.05, 0.0, 0.0, 0.15, -0.15, -0.15])[:, None]
)
DEVIATION = {
    "site-a": np.zeros((7, 24)),
    "site-b": np.where(np.arange(7)[:, None] >= 5, 0.35, -0.14) + np.zeros((7, 24)),
    "site-c": 0.2 * np.sin(2 * np.pi * HOURS / 24)[None, :] + np.zeros((7, 1)),
}
WEEKS = {"site-a": 5, "site-b": 5, "site-c": 1}  # site-c is young: one week of history


def simulate(name: str, rng: np.random.Generator) -> BinnedSeries:
    first = FIRST + dt.timedelta(weeks=5 - WEEKS[name])  # every history ends on the same day
    end = FIRST + dt.timedelta(weeks=5)
    grid = bin_grid(first, end, tz=TZ, bin_minutes=60)
    dow, slot, _, _ = local_features(grid, tz=TZ, bin_minutes=60)
    counts = rng.poisson(np.exp((SHARED + DEVIATION[name])[dow, slot]))
    return BinnedSeries(grid, counts, np.ones(len(grid)), TZ, 60, first, end)


@pytest.fixture(scope="session")
def joint_fit():  # type: ignore[no-untyped-def]
    rng = np.random.default_rng(17)
    histories = {name: simulate(name, rng) for name in DEVIATION}
    spec = ModelSpec(trend=False, latent_daily=False)
    data = make_joint_data(histories, spec)
    options = FitOptions(draws=300, tune=400, chains=2, seed=5, progressbar=False, retry=False)
    return fit_joint(data, spec, options=options), histories


def true_week(name: str) -> np.ndarray:
    return SHARED + DEVIATION[name]


@pytest.mark.slow
class TestJointFit:
    def test_dims_and_calendar(self, joint_fit) -> None:
        fit, _ = joint_fit
        week = fit.idata["posterior"]["week_log_rate"]
        assert week.dims == ("chain", "draw", "series", "dow", "slot")
        assert list(week["series"].values) == ["site-a", "site-b", "site-c"]
        assert fit.data.n_days == 35

    def test_series_level_deviations_are_recovered(self, joint_fit) -> None:
        fit, _ = joint_fit
        posteriors = joint_posteriors(fit)
        for name in ("site-a", "site-b"):
            mean = posteriors[name].week_log_rate.mean(axis=0)
            weekend_gap = mean[5:].mean() - mean[:5].mean()
            expected = true_week(name)[5:].mean() - true_week(name)[:5].mean()
            assert weekend_gap == pytest.approx(expected, abs=0.08)

    def test_young_series_borrows_the_shared_shape(self, joint_fit) -> None:
        # Reference: statsmodels GLM (Poisson family, log link) of the young series alone with
        # one indicator per weekly cell (saturated: one week holds one count per cell). Its
        # estimate of a cell is log(count), checked here; a cell counting 0 has no finite
        # estimate, so the comparison runs over the cells with one. Jointly, the shape comes
        # from the siblings, so the cell errors must be clearly smaller.
        import statsmodels.api as sm
        from statsmodels.tools.sm_exceptions import PerfectSeparationWarning

        fit, histories = joint_fit
        young = histories["site-c"]
        dow, slot, _, _ = local_features(young.start, tz=TZ, bin_minutes=60)
        cell = dow * 24 + slot
        assert np.array_equal(np.sort(cell), np.arange(7 * 24))  # one bin per weekly cell
        seen = young.count > 0
        design = pd.get_dummies(pd.Series(cell[seen]), dtype=float)
        with warnings.catch_warnings(), np.errstate(divide="ignore", invalid="ignore"):
            # A saturated model fits every count exactly: statsmodels reports that as perfect
            # prediction and divides by zero residual degrees of freedom for the scale.
            warnings.simplefilter("ignore", PerfectSeparationWarning)
            glm = sm.GLM(young.count[seen], design, family=sm.families.Poisson()).fit()
        alone = pd.Series(glm.params.to_numpy(), index=design.columns)[cell[seen]].to_numpy()
        np.testing.assert_allclose(alone, np.log(young.count[seen]), atol=1e-8)
        joint = joint_posteriors(fit)["site-c"].week_log_rate.mean(axis=0)[dow, slot][seen]
        truth = true_week("site-c")[dow, slot][seen]
        rmse_alone = np.sqrt(np.mean((alone - truth) ** 2))
        rmse_joint = np.sqrt(np.mean((joint - truth) ** 2))
        assert rmse_joint < 0.6 * rmse_alone

    def test_publish_gives_each_series_an_ordinary_version(self, joint_fit) -> None:
        fit, _ = joint_fit
        store = MemoryStore()
        published = publish_joint(fit, store, force=True)
        assert sorted(published) == ["site-a", "site-b", "site-c"]
        loaded = store.load("site-c")
        assert loaded.posterior.week_log_rate.shape[1:] == (7, 24)
        assert loaded.manifest["fit"]["joint_with"] == ["site-a", "site-b"]


def test_joint_needs_one_zone_and_two_series() -> None:
    rng = np.random.default_rng(1)
    one = simulate("site-a", rng)
    with pytest.raises(InputError, match="at least two"):
        make_joint_data({"a": one}, ModelSpec())
    other = BinnedSeries(one.start, one.count, one.exposure, "UTC", 60, one.first_day, one.end_day)
    with pytest.raises(InputError, match="one zone"):
        make_joint_data({"a": one, "b": other}, ModelSpec())


TRUE_K = {"site-a": 4.0, "site-b": 40.0}


@pytest.fixture(scope="session")
def joint_negbin_fit():  # type: ignore[no-untyped-def]
    # Two invented series with gamma-noised bins: one noisy (k = 4), one nearly Poisson (k = 40).
    rng = np.random.default_rng(18)
    histories = {}
    for name, k in TRUE_K.items():
        grid = bin_grid(FIRST, FIRST + dt.timedelta(weeks=5), tz=TZ, bin_minutes=60)
        dow, slot, _, _ = local_features(grid, tz=TZ, bin_minutes=60)
        rate = np.exp((SHARED + 1.0 + DEVIATION[name])[dow, slot])
        counts = rng.poisson(rate * rng.gamma(k, 1.0 / k, size=len(grid)))
        end = FIRST + dt.timedelta(weeks=5)
        histories[name] = BinnedSeries(grid, counts, np.ones(len(grid)), TZ, 60, FIRST, end)
    spec = ModelSpec(
        trend=False, latent_daily=False, observation="negbin", dispersion_by_slot=False
    )
    options = FitOptions(draws=300, tune=400, chains=2, seed=6, progressbar=False, retry=False)
    return fit_joint(make_joint_data(histories, spec), spec, options=options)


@pytest.mark.slow
class TestJointNegativeBinomial:
    def test_each_series_keeps_its_own_dispersion(self, joint_negbin_fit) -> None:
        dispersion = joint_negbin_fit.idata["posterior"]["dispersion"]
        assert dispersion.dims == ("chain", "draw", "series", "slot")
        for name, k in TRUE_K.items():
            draws = dispersion.sel(series=name).isel(slot=0).to_numpy().ravel()
            lo, hi = np.quantile(draws, [0.01, 0.99])
            assert lo <= k <= hi, (name, lo, hi)
        a, b = (float(dispersion.sel(series=n).median()) for n in TRUE_K)
        assert b > 3 * a

    def test_compact_posteriors_carry_the_dispersion(self, joint_negbin_fit) -> None:
        posteriors = joint_posteriors(joint_negbin_fit)
        for posterior in posteriors.values():
            assert posterior.dispersion is not None
            assert posterior.dispersion.shape == (600, 24)
            posterior.check_shapes()

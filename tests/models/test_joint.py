"""Several series fitted jointly: shared weekly shape, series deviations, young series borrow."""

from __future__ import annotations

import datetime as dt

import numpy as np
import pytest

from models.binning import BinnedSeries, bin_grid, local_features
from models.exceptions import InputError
from models.joint import fit_joint, joint_posteriors, make_joint_data, publish_joint
from models.pipeline import FitOptions
from models.spec import ModelSpec
from models.store import MemoryStore

pytestmark = pytest.mark.slow
TZ = "Europe/Dublin"
FIRST = dt.date(2026, 1, 5)
HOURS = np.arange(24)
SHARED = np.log(4.0) + 1.3 * np.exp(-0.5 * ((HOURS - 12) / 3.5) ** 2)[None, :] + np.array(
    [0.1, 0.05, 0.0, 0.0, 0.15, -0.15, -0.15]
)[:, None]
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
    options = FitOptions(draws=300, tune=400, chains=2, seed=5, progressbar=False)
    return fit_joint(data, spec, options=options), histories


def true_week(name: str) -> np.ndarray:
    return SHARED + DEVIATION[name]


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
        # Alone, one week gives one count per weekly cell: the saturated Poisson GLM estimate of a
        # cell is log(count) (statsmodels would return exactly that; +0.5 guards zeros). Jointly,
        # the shape comes from the siblings, so the cell errors must be clearly smaller.
        fit, histories = joint_fit
        young = histories["site-c"]
        dow, slot, _, _ = local_features(young.start, tz=TZ, bin_minutes=60)
        alone = np.full((7, 24), np.nan)
        alone[dow, slot] = np.log(young.count + 0.5)
        joint = joint_posteriors(fit)["site-c"].week_log_rate.mean(axis=0)
        truth = true_week("site-c")
        rmse_alone = np.sqrt(np.nanmean((alone - truth) ** 2))
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

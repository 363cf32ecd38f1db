"""The negative binomial observation option: spec, graph, compact posterior and prediction."""

from __future__ import annotations

import dataclasses
import datetime as dt
import io

import numpy as np
import pandas as pd
import pytest
import xarray as xr
from scipy import stats

from models.exceptions import CorruptArtefact, InputError
from models.fitting.compact import compact_from_fit
from models.prediction.mixture import mixture_cdf
from models.prediction.posterior import CompactPosterior
from models.prediction.windows import expected_counts
from models.ratemodel.binning import BinnedSeries, bin_counts, bin_grid
from models.ratemodel.design import make_model_data
from models.ratemodel.spec import ModelSpec
from tests.conftest import synthetic_posterior

CHICAGO = "America/Chicago"


def negbin(posterior: CompactPosterior, dispersion: np.ndarray) -> CompactPosterior:
    """``posterior`` turned into a negative binomial one with the given (draw, slot) dispersion."""
    spec = posterior.spec.with_(observation="negbin")
    return dataclasses.replace(posterior, spec=spec, dispersion=dispersion.astype(np.float32))


def hour_windows(*local: str, hours: float = 1.0) -> tuple[pd.DatetimeIndex, pd.DatetimeIndex]:
    starts = pd.DatetimeIndex([pd.Timestamp(t).tz_localize(CHICAGO) for t in local])
    return starts.tz_convert("UTC"), (starts + pd.Timedelta(hours=hours)).tz_convert("UTC")


class TestSpec:
    def test_observation_is_checked_against_the_allowed_values(self) -> None:
        with pytest.raises(InputError, match=r"'gamma' is not one of poisson, negbin"):
            ModelSpec(observation="gamma")

    def test_round_trip_and_old_manifests_default_to_poisson(self) -> None:
        spec = ModelSpec(observation="negbin", dispersion_by_slot=False)
        assert ModelSpec.from_dict(spec.to_dict()) == spec
        old = ModelSpec().to_dict()
        for key in ("observation", "dispersion_by_slot"):
            del old[key]
        for key in ("overdispersion_median", "overdispersion_log_sd", "overdispersion_slot_scale"):
            del old["priors"][key]
        assert ModelSpec.from_dict(old).observation == "poisson"

    def test_daily_bins_leave_out_the_time_of_day_terms(self) -> None:
        spec = ModelSpec(bin_minutes=1440)
        assert spec.slots_per_day == 1 and not spec.has_time_of_day
        with pytest.raises(InputError, match="bin_minutes 45"):
            ModelSpec(bin_minutes=45)


class TestDailyBins:
    def test_daily_counts_in_utc_bin_one_per_day(self) -> None:
        frame = pd.DataFrame(
            {"start": ["1970-01-01", "1970-01-02", "1970-01-04"], "count": [10, 12, 9]}
        )
        binned = bin_counts(frame, tz="UTC", bin_minutes=1440)
        assert binned.count.tolist() == [10, 12, 9] and binned.end_day == dt.date(1970, 1, 5)

    def test_a_zone_with_clock_changes_is_refused(self) -> None:
        with pytest.raises(InputError, match="daily bins in America/Chicago"):
            bin_grid(dt.date(2026, 3, 1), dt.date(2026, 3, 15), tz=CHICAGO, bin_minutes=1440)


class TestCompactPosterior:
    @pytest.fixture
    def posterior(self, weekly_table: np.ndarray) -> CompactPosterior:
        base = synthetic_posterior(weekly_table, draws=3)
        return negbin(base, np.full((3, 24), 8.0))

    def test_round_trip_keeps_the_dispersion(self, posterior) -> None:
        again = CompactPosterior.from_bytes(posterior.to_bytes(), posterior.meta())
        np.testing.assert_array_equal(again.dispersion, posterior.dispersion)
        assert again.spec.observation == "negbin"

    def test_a_poisson_store_has_no_dispersion_and_still_loads(self, weekly_table) -> None:
        base = synthetic_posterior(weekly_table, draws=2)
        payload = base.to_bytes()
        with np.load(io.BytesIO(payload)) as npz:
            assert "dispersion" not in npz.files
        assert CompactPosterior.from_bytes(payload, base.meta()).dispersion is None

    def test_negbin_without_dispersion_is_corrupt(self, posterior) -> None:
        stripped = dataclasses.replace(posterior, dispersion=None)
        with pytest.raises(CorruptArtefact, match=r"dispersion of shape \(3, 24\); found None"):
            CompactPosterior.from_bytes(stripped.to_bytes(), stripped.meta())

    def test_non_positive_dispersion_is_corrupt(self, posterior) -> None:
        bad = dataclasses.replace(posterior, dispersion=np.zeros((3, 24), dtype=np.float32))
        with pytest.raises(CorruptArtefact, match="not > 0"):
            bad.check_shapes()

    def test_extracted_from_a_posterior_group(self) -> None:
        # An ArviZ-shaped posterior group (chain, draw, ...) built by hand, as build_model names it.
        chains, draws = 2, 5
        rng = np.random.default_rng(1)
        group = xr.Dataset(
            {
                "week_log_rate": (("chain", "draw", "dow", "slot"), rng.normal(size=(2, 5, 7, 24))),
                "dispersion": (("chain", "draw", "slot"), rng.uniform(2, 9, size=(2, 5, 24))),
            }
        )
        spec = ModelSpec(observation="negbin", trend=False, latent_daily=False)
        base = synthetic_posterior(np.ones((7, 24)))
        compact = compact_from_fit(
            group, calendar=base.calendar, spec=spec, n_days=28, opening=None, seed=3
        )
        assert compact.dispersion is not None and compact.dispersion.shape == (chains * draws, 24)
        np.testing.assert_allclose(
            compact.dispersion[draws + 1], group["dispersion"][1, 1], rtol=1e-6
        )


class TestPrediction:
    def test_huge_dispersion_gives_the_poisson_answer(self, weekly_table) -> None:
        base = synthetic_posterior(weekly_table, draws=4)
        windows = hour_windows("2026-03-02 09:00", "2026-03-07 22:30", hours=2.5)
        poisson = expected_counts(base, *windows)
        almost = expected_counts(negbin(base, np.full((4, 24), np.inf)), *windows)
        np.testing.assert_allclose(almost, poisson, rtol=1e-12)

    def test_one_bin_is_the_negative_binomial_law(self, weekly_table) -> None:
        # With every draw at the same rate mu and dispersion k, a one-bin window's predictive is
        # the mixture over draws of Poisson(mu G_d), G_d the gamma noise. Reference:
        # scipy.stats.nbinom(k, k / (k + mu)). Independent gamma draws would miss it by about
        # 0.5 / sqrt(D) (0.008 here); the stratified noise must come within 0.001.
        draws, k = 4000, 3.0
        base = synthetic_posterior(weekly_table, draws=draws)
        windows = hour_windows("2026-03-03 13:00")
        lam = expected_counts(negbin(base, np.full((draws, 24), k)), *windows)
        mu = float(weekly_table[1, 13])
        grid = np.arange(0, int(mu * 4))
        got = np.array([mixture_cdf(lam, int(g))[0] for g in grid])
        expected = stats.nbinom.cdf(grid, k, k / (k + mu))
        assert np.max(np.abs(got - expected)) < 1e-3
        assert lam.mean() / mu == pytest.approx(1.0, abs=1e-3)
        assert lam.var() / mu**2 == pytest.approx(1 / k, rel=0.01)

    def test_a_bin_gets_the_same_noise_in_every_query(self, weekly_table) -> None:
        posterior = negbin(synthetic_posterior(weekly_table, draws=50), np.full((50, 24), 4.0))
        alone = expected_counts(posterior, *hour_windows("2026-03-04 10:00"))
        among = expected_counts(
            posterior, *hour_windows("2026-03-02 08:00", "2026-03-04 10:00", "2026-03-09 10:00")
        )
        np.testing.assert_allclose(among[:, 1], alone[:, 0], rtol=1e-12)
        two_hours = expected_counts(posterior, *hour_windows("2026-03-04 10:00", hours=2.0))
        parts = expected_counts(posterior, *hour_windows("2026-03-04 10:00", "2026-03-04 11:00"))
        np.testing.assert_allclose(two_hours[:, 0], parts.sum(axis=1), rtol=1e-12)
        half = expected_counts(posterior, *hour_windows("2026-03-04 10:00", hours=0.5))
        np.testing.assert_allclose(half[:, 0], alone[:, 0] / 2, rtol=1e-12)

    def test_cached_noise_equals_fresh_noise_and_the_cache_is_bounded(
        self, weekly_table, monkeypatch
    ) -> None:
        import models.prediction.windows as predict

        monkeypatch.setattr(predict, "NOISE_CACHE_BINS", 30)
        posterior = negbin(synthetic_posterior(weekly_table, draws=40), np.full((40, 24), 3.0))
        week = hour_windows(*(f"2026-03-0{d} {h:02d}:00" for d in (2, 3) for h in range(24)))
        first = expected_counts(posterior, *week)
        _, cache = posterior.noise_cache
        assert len(cache) == 30  # 48 bins computed, the 30 most recent kept
        again = expected_counts(posterior, *week)  # 18 bins recomputed, 30 from the cache
        np.testing.assert_array_equal(again, first)
        # A fresh copy of the version (empty cache) gives the same numbers.
        twin = negbin(synthetic_posterior(weekly_table, draws=40), np.full((40, 24), 3.0))
        np.testing.assert_array_equal(expected_counts(twin, *week), first)

    def test_the_seed_fixes_the_noise(self, weekly_table) -> None:
        posterior = negbin(synthetic_posterior(weekly_table, draws=20), np.full((20, 24), 4.0))
        windows = hour_windows("2026-03-04 10:00")
        first = expected_counts(posterior, *windows)
        np.testing.assert_array_equal(expected_counts(posterior, *windows), first)
        other = dataclasses.replace(posterior, seed=posterior.seed + 1)
        assert not np.allclose(expected_counts(other, *windows), first)

    def test_each_slot_has_its_own_dispersion(self, weekly_table) -> None:
        draws = 2000
        dispersion = np.full((draws, 24), np.inf)
        dispersion[:, 9] = 2.0
        posterior = negbin(synthetic_posterior(weekly_table, draws=draws), dispersion)
        lam = expected_counts(posterior, *hour_windows("2026-03-04 09:00", "2026-03-04 10:00"))
        assert np.ptp(lam[:, 1]) == pytest.approx(0.0, abs=1e-9)  # Poisson slot: no spread
        assert lam[:, 0].var() / lam[:, 0].mean() ** 2 == pytest.approx(0.5, rel=0.15)

    def test_bins_of_a_window_carry_independent_noise(self, weekly_table) -> None:
        # Var(mu1 G1 + mu2 G2) = (mu1**2 + mu2**2) / k for independent Gamma(k, k) factors.
        draws, k = 4000, 5.0
        posterior = negbin(synthetic_posterior(weekly_table, draws=draws), np.full((draws, 24), k))
        lam = expected_counts(posterior, *hour_windows("2026-03-04 12:00", hours=2.0))[:, 0]
        mu = weekly_table[2, 12:14]
        assert lam.var() == pytest.approx(np.sum(mu**2) / k, rel=0.1)


class TestBuild:
    def test_negbin_logp_matches_scipy(self) -> None:
        # Reference: scipy.stats.nbinom.logpmf with n = k, p = k / (k + mu).
        first = dt.date(2026, 6, 1)
        grid = bin_grid(first, first + dt.timedelta(days=1), tz="UTC", bin_minutes=60)
        counts = np.array([3, 0, 7, 12, 5, 1] * 4)
        binned = BinnedSeries(
            grid, counts, np.ones(24), "UTC", 60, first, first + dt.timedelta(days=1)
        )
        spec = ModelSpec.intercept_only().with_(observation="negbin")
        data = make_model_data(binned, spec)
        from models.fitting.build import build_model

        model = build_model(data, spec)
        assert model.named_vars_to_dims["dispersion"] == ("slot",)
        # FAST_COMPILE evaluates in Python: no C compile for a one-off check.
        logp = model.compile_logp(vars=[model["arrivals"]], jacobian=False, mode="FAST_COMPILE")
        baseline, log_cv = np.log(4.0), np.log(0.5)
        value = logp({"baseline": baseline, "log_overdispersion": log_cv})
        k = np.exp(-2 * log_cv)
        expected = stats.nbinom.logpmf(counts, k, k / (k + 4.0)).sum()
        assert float(value) == pytest.approx(expected, rel=1e-9)

    def test_daily_model_has_no_slot_terms(self) -> None:
        first = dt.date(1970, 1, 1)
        grid = bin_grid(first, first + dt.timedelta(days=14), tz="UTC", bin_minutes=1440)
        binned = BinnedSeries(
            grid, np.arange(14) + 10, np.ones(14), "UTC", 1440, first, first + dt.timedelta(days=14)
        )
        spec = ModelSpec(bin_minutes=1440, observation="negbin", trend=False)
        from models.fitting.build import build_model

        model = build_model(make_model_data(binned, spec), spec)
        names = set(model.named_vars)
        assert {"dow_effect", "dispersion", "latent"} <= names
        assert not {"slot_effect", "interaction", "overdispersion_slot_sd"} & names

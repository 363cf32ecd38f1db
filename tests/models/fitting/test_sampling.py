"""Real PyMC fits, small and once per session: conjugacy, recovery, diagnostics gate, dims."""

from __future__ import annotations

import datetime as dt

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from models.exceptions import FitRejected, InputError
from models.fitting.gate import check_diagnostics
from models.fitting.options import FitOptions, GateThresholds
from models.fitting.publish import fit_and_publish
from models.fitting.sampling import fit_model
from models.prediction.mixture import mixture_cdf
from models.prediction.windows import expected_counts
from models.ratemodel.binning import BinnedSeries, bin_grid, local_features
from models.ratemodel.design import make_model_data
from models.ratemodel.spec import ModelSpec, Priors
from models.store import MemoryStore

TZ = "Europe/Dublin"


def hourly_series(counts: np.ndarray, first_day: dt.date, days: int) -> BinnedSeries:
    grid = bin_grid(first_day, first_day + dt.timedelta(days=days), tz=TZ, bin_minutes=60)
    assert len(grid) == len(counts)
    return BinnedSeries(
        start=grid,
        count=counts.astype(np.int64),
        exposure=np.ones(len(grid)),
        tz=TZ,
        bin_minutes=60,
        first_day=first_day,
        end_day=first_day + dt.timedelta(days=days),
    )


# ----------------------------------------------------------------------------- conjugacy
# Hoff, A First Course in Bayesian Statistical Methods (2009), sec. 3.2: prior Gamma(2, 1),
# n = 111 observations summing to 217 -> posterior Gamma(219, 112). Here: 111 one-hour bins.
CONJUGATE_SPEC = ModelSpec.intercept_only(priors=Priors(baseline_gamma=(2.0, 1.0)))
CONJUGATE_OPTIONS = FitOptions(draws=1000, tune=500, chains=2, seed=11, progressbar=False)


def conjugate_series() -> BinnedSeries:
    counts = np.array([2] * 106 + [1] * 5)
    assert counts.sum() == 217
    first = dt.date(2026, 6, 1)
    grid = bin_grid(first, first + dt.timedelta(days=5), tz=TZ, bin_minutes=60)[:111]
    return BinnedSeries(grid, counts, np.ones(111), TZ, 60, first, first + dt.timedelta(days=5))


@pytest.fixture(scope="session")
def conjugate_fit():  # type: ignore[no-untyped-def]
    data = make_model_data(conjugate_series(), CONJUGATE_SPEC)
    return fit_model(data, CONJUGATE_SPEC, options=CONJUGATE_OPTIONS)


@pytest.mark.slow
class TestConjugateGammaPoisson:
    def test_posterior_matches_gamma_219_112(self, conjugate_fit) -> None:
        # Hoff 2009 sec. 3.2 [R in ../shared/REFERENCE_VALUES.md]: mean 1.9554,
        # 95% (1.7049, 2.2227).
        rate = conjugate_fit.idata["posterior"]["baseline_rate"].to_numpy().ravel()
        assert rate.mean() == pytest.approx(219 / 112, abs=0.015)
        assert np.quantile(rate, [0.025, 0.975]) == pytest.approx([1.7049, 2.2227], abs=0.03)
        # Whole distribution: KS against the closed form (scipy.stats.gamma), thinned to ~independent.
        assert stats.kstest(rate[::4], stats.gamma(a=219, scale=1 / 112).cdf).pvalue > 0.001

    def test_predictive_count_matches_negative_binomial(self, conjugate_fit) -> None:
        # Hoff 2009 sec. 3.2 [R]: predictive NB(219, 112/113) pmf at 0..3 = 0.1427 0.2767 0.2693 0.1756.
        fit = conjugate_fit
        posterior = fit.compact()
        start = pd.Timestamp("2026-06-08T10:00", tz=TZ)
        lam = expected_counts(
            posterior, pd.DatetimeIndex([start]), pd.DatetimeIndex([start + pd.Timedelta(hours=1)])
        )
        cdf = np.array([mixture_cdf(lam, np.array([k]))[0] for k in range(-1, 4)])
        assert np.diff(cdf) == pytest.approx([0.1427, 0.2767, 0.2693, 0.1756], abs=0.006)


# ----------------------------------------------------------------------------- recovery
TRUE_DOW = np.array([0.15, 0.1, 0.05, 0.0, 0.2, -0.25, -0.25])
TRUE_SLOT = 1.2 * np.sin(2 * np.pi * (np.arange(24) - 7) / 24) - 0.3


@pytest.fixture(scope="session")
def recovery_fit():  # type: ignore[no-untyped-def]
    rng = np.random.default_rng(2026)
    first, days = dt.date(2026, 1, 5), 42
    grid = bin_grid(first, first + dt.timedelta(days=days), tz=TZ, bin_minutes=60)
    dow, slot, day, _ = local_features(grid, tz=TZ, bin_minutes=60)
    day_index = (day - np.datetime64(first)).astype(int)
    latent = np.zeros(days)
    for k in range(1, days):
        latent[k] = 0.5 * latent[k - 1] + 0.05 * rng.standard_normal()
    true_week = np.log(6.0) + TRUE_DOW[:, None] + TRUE_SLOT[None, :]
    counts = rng.poisson(np.exp(true_week[dow, slot] + latent[day_index]))
    binned = hourly_series(counts, first, days)
    spec = ModelSpec(trend=False)
    fit = fit_model(
        make_model_data(binned, spec),
        spec,
        options=FitOptions(draws=400, tune=400, chains=2, seed=3, progressbar=False),
    )
    return fit, true_week, binned


@pytest.mark.slow
class TestRecovery:
    def test_weekly_cells_are_covered_at_about_the_nominal_rate(self, recovery_fit) -> None:
        fit, true_week, _ = recovery_fit
        week = fit.idata["posterior"]["week_log_rate"]
        assert week.dims == ("chain", "draw", "dow", "slot")
        draws = week.stack(s=("chain", "draw")).transpose("s", "dow", "slot").to_numpy()
        lo, hi = np.quantile(draws, [0.05, 0.95], axis=0)
        covered = ((true_week >= lo) & (true_week <= hi)).mean()
        # 168 cells, nominal 90%; cells are not independent, so allow a wide band (common practice).
        assert 0.75 <= covered <= 1.0

    def test_posterior_means_agree_with_a_statsmodels_poisson_glm(self, recovery_fit) -> None:
        # Reference: statsmodels GLM (Poisson family, log link) with dow + hour main effects; our
        # model adds an interaction and a latent day term, so compare the data-rich main effects.
        import statsmodels.api as sm

        fit, _, binned = recovery_fit
        dow, slot, _, _ = local_features(binned.start, tz=TZ, bin_minutes=60)
        frame = pd.DataFrame({"y": binned.count, "dow": dow, "slot": slot})
        design = pd.get_dummies(frame[["dow", "slot"]].astype(str), drop_first=True, dtype=float)
        glm = sm.GLM(frame["y"], sm.add_constant(design), family=sm.families.Poisson()).fit()
        fitted = np.log(glm.predict(sm.add_constant(design)))
        glm_week = pd.Series(fitted.to_numpy()).groupby([dow, slot]).mean().unstack().to_numpy()
        ours = fit.idata["posterior"]["week_log_rate"].mean(("chain", "draw")).to_numpy()
        # Compare day-of-week profiles and hour-of-day profiles (margins over the other factor).
        np.testing.assert_allclose(
            ours.mean(axis=1) - ours.mean(), glm_week.mean(axis=1) - glm_week.mean(), atol=0.03
        )
        busy = TRUE_SLOT > 0  # data-rich daytime hours
        np.testing.assert_allclose(
            (ours.mean(axis=0) - ours.mean())[busy],
            (glm_week.mean(axis=0) - glm_week.mean())[busy],
            atol=0.06,
        )

    def test_gate_reports_problems_by_name(self, recovery_fit) -> None:
        fit, _, _ = recovery_fit
        strict = check_diagnostics(fit.idata, thresholds=GateThresholds(min_ess_bulk=1e6))
        assert not strict.ok
        assert any("bulk ESS" in p for p in strict.problems)


@pytest.mark.slow
def test_rejected_fit_is_not_published() -> None:
    # No fit reaches a bulk ESS of 1e6 with 2 x 1000 draws, so the gate must refuse it. The
    # conjugate model is the cheapest real fit to refuse (the recovery model once cost a second
    # 20 s fit here for the same check).
    store = MemoryStore()
    strict = CONJUGATE_OPTIONS.with_changes(thresholds=GateThresholds(min_ess_bulk=1e6))
    with pytest.raises(FitRejected, match="diagnostics gate") as refused:
        fit_and_publish(
            conjugate_series(), CONJUGATE_SPEC, store=store, series="sim", options=strict
        )
    assert any("bulk ESS" in p for p in refused.value.problems)
    assert store.series() == []


def test_bad_sampling_options_are_refused() -> None:
    first = dt.date(2026, 6, 1)
    binned = hourly_series(np.ones(24), first, 1)
    spec = ModelSpec.intercept_only()
    with pytest.raises(InputError, match="draws=5"):
        fit_model(make_model_data(binned, spec), spec, options=FitOptions(draws=5))


@pytest.mark.slow
def test_nutpie_sampler_gives_the_same_conjugate_posterior() -> None:
    # Hoff 2009 sec. 3.2 [R]: Gamma(219, 112), mean 1.9554; the optional nutpie sampler must agree.
    fit = fit_model(
        make_model_data(conjugate_series(), CONJUGATE_SPEC),
        CONJUGATE_SPEC,
        options=CONJUGATE_OPTIONS.with_changes(sampler="nutpie", seed=2),
    )
    rate = fit.idata["posterior"]["baseline_rate"].to_numpy().ravel()
    assert rate.mean() == pytest.approx(219 / 112, abs=0.015)
    assert fit.timings["leapfrog_steps"] > 0
    assert "warmup_posterior" not in fit.idata.groups()


def test_never_observed_cells_are_left_out_of_the_gate() -> None:
    # Two chains that disagree only on a slot no data inform (a closed hour): the gate must not
    # refuse the fit for it, and must still refuse it when the same slot was observed.
    import arviz as az

    from models.ratemodel.design import slot_labels

    rng = np.random.default_rng(4)
    slots = slot_labels(60)
    draws = rng.normal(size=(2, 500, 24))
    draws[1, :, 23] += 3.0  # chains far apart at 23:00 only
    idata = az.from_dict(
        posterior={"slot_effect": draws}, coords={"slot": slots}, dims={"slot_effect": ["slot"]}
    )
    closed = np.zeros((7, 24), dtype=bool)
    closed[:, 23] = True
    assert check_diagnostics(idata, unobserved=closed).ok
    refused = check_diagnostics(idata, unobserved=np.zeros((7, 24), dtype=bool))
    assert not refused.ok
    assert any("slot_effect[23:00]" in p for p in refused.problems)

"""The gate's escalation: one stronger retry, then a refusal whose remedy fits the failure, and
a forced publish marked degraded (tiny conjugate fits; the settings logic without fits)."""

from __future__ import annotations

import datetime as dt

import arviz as az
import numpy as np
import pytest

from models.exceptions import FitRejected
from models.fitting.escalation import RETRY_TARGET_ACCEPT, remedy, stronger_options
from models.fitting.gate import Diagnostics, check_diagnostics, divergence_locations
from models.fitting.options import FitOptions
from models.fitting.publish import fit_and_publish
from models.fitting.verdict import fit_problems, is_degraded
from models.ratemodel.binning import BinnedSeries, bin_grid
from models.ratemodel.spec import ModelSpec, Priors
from models.store import MemoryStore

TZ = "Europe/Dublin"


def _diagnostics(*, divergences: int = 0, ess: float = 1000.0, r_hat: float = 1.0) -> Diagnostics:
    problems = []
    if divergences:
        problems.append(f"{divergences} divergent transitions > 0 allowed")
    if ess < 400:
        problems.append(f"bulk ESS {ess:.0f} < 400 for latent_sd")
    if r_hat > 1.01:
        problems.append(f"r_hat {r_hat:.3f} > 1.01 for latent_rho")
    return Diagnostics(r_hat, ess, divergences, 1000, 4, tuple(problems))


class TestStrongerSettings:
    def test_divergences_get_smaller_steps_and_a_longer_warm_up(self) -> None:
        options, note = stronger_options(FitOptions(), _diagnostics(divergences=3))
        assert options.target_accept == RETRY_TARGET_ACCEPT
        assert options.tune == 2 * FitOptions().tune
        assert "target_accept 0.95 -> 0.98" in note

    def test_low_ess_alone_gets_more_draws_in_proportion(self) -> None:
        # ESS grows in proportion to the draws of a chain that mixes at a steady rate (common
        # practice, no source): 200 of 400 asks for 1.2 x 2 = 2.4 times the draws.
        options, note = stronger_options(FitOptions(), _diagnostics(ess=200.0))
        assert options.target_accept == FitOptions().target_accept
        assert options.draws == 2400
        assert note == "draws 1000 -> 2400"

    def test_the_retry_never_asks_for_more_than_three_times_the_draws(self) -> None:
        options, _ = stronger_options(FitOptions(draws=20), _diagnostics(ess=5.0))
        assert options.draws == 100  # 3 x 20 = 60, rounded up to a multiple of 50


class TestRemedy:
    def test_divergences_are_not_answered_with_more_draws(self) -> None:
        diagnostics = Diagnostics(
            1.0,
            900.0,
            7,
            1000,
            4,
            ("7 divergent transitions > 0 allowed",),
            divergent_at=("log overdispersion_slot_sd: -3 vs -1 (z -2.5)",),
        )
        text = remedy(diagnostics, observation="negbin", bin_minutes=60)
        assert "--observation poisson" in text
        assert "--draws" not in text

    def test_slow_mixing_without_divergences_is_answered_with_more_draws(self) -> None:
        text = remedy(_diagnostics(ess=150.0), observation="negbin", bin_minutes=60)
        assert "--draws" in text


def test_divergences_are_located_at_the_mouth_of_a_funnel() -> None:
    # Neal's funnel (Neal 2003, "Slice sampling", Ann. Statist. 31(3), sec. 8, from memory):
    # divergences happen where the scale is small. Draws flagged divergent exactly where the log
    # scale is lowest must name that scale first, with a negative shift.
    rng = np.random.default_rng(3)
    log_sd = rng.normal(size=(2, 500))
    effect = rng.normal(size=(2, 500, 3)) * np.exp(log_sd)[..., None]
    diverging = log_sd < np.quantile(log_sd, 0.02)
    idata = az.from_dict(
        posterior={"group_sd": np.exp(log_sd), "effect": effect},
        sample_stats={"diverging": diverging},
    )
    found = divergence_locations(idata)
    assert found[0].startswith("log group_sd:")
    assert "(z -" in found[0]
    diagnostics = check_diagnostics(idata)
    assert "divergent draws sit apart on log group_sd" in " ".join(diagnostics.problems)


def test_old_manifests_read_degraded_from_forced() -> None:
    assert is_degraded({"fit": {"forced": True}, "diagnostics": {"problems": ["x"]}})
    assert fit_problems({"fit": {"forced": True}, "diagnostics": {"problems": ["x"]}}) == ["x"]
    assert not is_degraded({"fit": {"forced": False}})
    assert fit_problems({"fit": {"degraded": False, "problems": []}}) == []


# ----------------------------------------------------------------------------- tiny real fits
def _conjugate_history() -> BinnedSeries:
    # Hoff, A First Course in Bayesian Statistical Methods (2009), sec. 3.2: 111 observations
    # summing to 217 (the same data as tests/models/fitting/test_sampling.py).
    counts = np.array([2] * 106 + [1] * 5)
    first = dt.date(2026, 6, 1)
    grid = bin_grid(first, first + dt.timedelta(days=5), tz=TZ, bin_minutes=60)[:111]
    return BinnedSeries(grid, counts, np.ones(111), TZ, 60, first, first + dt.timedelta(days=5))


#: 2 chains x 20 draws cannot reach a bulk ESS of 400, and nor can the retry's 100.
TOO_FEW = FitOptions(draws=20, tune=100, chains=2, seed=5, progressbar=False)
SPEC = ModelSpec.intercept_only(priors=Priors(baseline_gamma=(2.0, 1.0)))


@pytest.mark.slow
def test_a_fit_that_cannot_pass_is_retried_once_then_refused() -> None:
    store = MemoryStore()
    with pytest.raises(FitRejected) as caught:
        fit_and_publish(_conjugate_history(), SPEC, store=store, series="tiny", options=TOO_FEW)
    message = str(caught.value)
    assert "after one retry (" in message and "draws 20 -> 100" in message
    assert "more --draws" in message  # no divergences: ESS only, where draws do help
    assert "bulk ESS" in message and "baseline_rate" in message
    assert store.series() == []


@pytest.mark.slow
def test_a_forced_publish_is_marked_degraded() -> None:
    store = MemoryStore()
    outcome = fit_and_publish(
        _conjugate_history(), SPEC, store=store, series="tiny", options=TOO_FEW, force=True
    )
    assert outcome.degraded
    assert outcome.retry is not None and "draws 20 -> 100" in outcome.retry
    assert [a["draws"] for a in outcome.attempts] == [20, 100]
    assert not any(a["ok"] for a in outcome.attempts)
    manifest = store.load("tiny").manifest
    assert manifest["fit"]["degraded"] is True
    assert manifest["fit"]["draws"] == 100
    assert any("bulk ESS" in p for p in manifest["fit"]["problems"])
    assert is_degraded(manifest)
    assert fit_problems(manifest) == manifest["fit"]["problems"]


@pytest.mark.slow
def test_no_retry_when_retries_are_off() -> None:
    store = MemoryStore()
    with pytest.raises(FitRejected) as caught:
        fit_and_publish(
            _conjugate_history(),
            SPEC,
            store=store,
            series="tiny",
            options=TOO_FEW.with_changes(retry=False),
        )
    assert "retry" not in str(caught.value).split("\n")[0]


def test_a_weekday_closed_all_day_is_left_out_of_the_gate() -> None:
    # Chains that disagree only on Sunday's effect, when Sunday is closed all day (no data):
    # the gate must not refuse the fit for it, and must when Sunday was observed.
    rng = np.random.default_rng(8)
    draws = rng.normal(size=(2, 500, 7))
    draws[1, :, 6] += 3.0
    idata = az.from_dict(
        posterior={"dow_effect": draws},
        coords={"dow": ["Mon", "Tue", "Wed", "Thu", "Fri", "Sat", "Sun"]},
        dims={"dow_effect": ["dow"]},
    )
    closed = np.zeros((7, 24), dtype=bool)
    closed[6, :] = True
    assert check_diagnostics(idata, unobserved=closed).ok
    refused = check_diagnostics(idata, unobserved=np.zeros((7, 24), dtype=bool))
    assert any("dow_effect[Sun]" in p for p in refused.problems)

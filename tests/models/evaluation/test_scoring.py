"""Tests of models.evaluation.scoring against published values and independent scipy computations.

Sources cited beside the checks:
- [WH14] Wei & Held, "Calibration tests for count data", TEST 23(4), 2014 (Poisson CRPS closed
  form).
- [CGH09] Czado, Gneiting & Held, "Predictive model assessment for count data", Biometrics 65(4),
  2009 (CRPS for counts as a sum over k; non-randomised PIT and its histogram).
- [GR07] Gneiting & Raftery, "Strictly proper scoring rules, prediction, and estimation",
  JASA 102(477), 2007 (CRPS kernel form E|X - y| - E|X - X'|/2, eq. 21; interval score, eq. 43).
- [REF] ../shared/REFERENCE_VALUES.md, "Scoring count forecasts"; values marked [R] there were
  recomputed with scipy/mpmath.
"""

from __future__ import annotations

import doctest

import numpy as np
import pytest
from scipy import special, stats

from models.evaluation import scoring
from models.evaluation.scoring import (
    coverage,
    crps_negbin,
    crps_poisson,
    crps_poisson_mixture,
    interval_score,
    pit_histogram,
    pit_interval,
    pit_poisson_mixture,
    pit_value,
)
from models.exceptions import CountError, InputError


def crps_by_direct_sum(y: float, cdf: np.ndarray) -> float:
    """sum_k (F(k) - 1{y <= k})^2 over k = 0..len(cdf)-1 [CGH09, sec. 3]; the caller makes the
    grid long enough that F is 1 to double precision at its end and y lies inside it."""
    k = np.arange(cdf.size)
    return float(np.sum((cdf - (k >= y)) ** 2))


def monte_carlo_crps(y: float, draws: np.ndarray, other: np.ndarray) -> tuple[float, float]:
    """E|X - y| - E|X - X'|/2 [GR07, eq. 21] from paired independent samples; (mean, std error)."""
    values = np.abs(draws - y) - 0.5 * np.abs(draws - other)
    return float(values.mean()), float(values.std(ddof=1) / np.sqrt(values.size))


def test_docstring_examples_run() -> None:
    """The examples in the module's docstrings give the outputs they show."""
    result = doctest.testmod(scoring, optionflags=doctest.NORMALIZE_WHITESPACE)
    assert result.attempted > 0
    assert result.failed == 0


class TestCrpsPoisson:
    @pytest.mark.parametrize(
        ("y", "mu", "expected"),
        [
            # [WH14] closed form; values [REF] [R], recomputed with scipy/mpmath.
            (1, 3.0, 1.143447),
            (0, 1.0, 0.4762224),
            (5, 5.0, 0.5091936),
            (10, 4.0, 4.8979655),
        ],
    )
    def test_reference_values(self, y: int, mu: float, expected: float) -> None:
        """The closed form reproduces the recomputed reference values."""
        assert float(crps_poisson(y, mu)) == pytest.approx(expected, abs=6e-7)

    def test_matches_direct_sum_of_scipy_cdf(self) -> None:
        """It equals sum_k (F(k) - 1{y <= k})^2 with F from scipy.stats.poisson [CGH09]."""
        for y, mu in [(0, 0.3), (7, 2.5), (3, 40.0), (95, 60.0), (1000, 1000.0), (850, 1000.0)]:
            cdf = stats.poisson.cdf(np.arange(int(mu + 40 * np.sqrt(mu) + 200)), mu)
            assert float(crps_poisson(y, mu)) == pytest.approx(
                crps_by_direct_sum(y, cdf), rel=1e-10
            )

    @pytest.mark.parametrize(
        ("mu", "expected"), [(1.0, 0.52378), (10.0, 1.77287), (100.0, 5.63837)]
    )
    def test_expected_score_of_a_perfect_forecast(self, mu: float, expected: float) -> None:
        """E_y[CRPS(Poisson(l), y)] with y ~ Poisson(l) gives the [REF] [R] floor values."""
        y = np.arange(int(mu + 30 * np.sqrt(mu) + 30))
        mean_score = float(np.sum(stats.poisson.pmf(y, mu) * crps_poisson(y, mu)))
        assert mean_score == pytest.approx(expected, abs=6e-6)
        # The same floor is E|X - X'|/2 [GR07, eq. 21], the last term of [WH14]'s closed form.
        half_gap = mu * np.exp(-2 * mu) * (special.iv(0, 2 * mu) + special.iv(1, 2 * mu))
        assert mean_score == pytest.approx(half_gap, rel=1e-10)

    def test_zero_mean_scores_the_absolute_error(self) -> None:
        """A zero mean is a point forecast of 0, whose CRPS is |y - 0| [GR07, sec. 4.2]."""
        np.testing.assert_allclose(crps_poisson([0, 1, 17], 0.0), [0.0, 1.0, 17.0], atol=1e-15)

    def test_large_mean_stays_finite_and_exact(self) -> None:
        """At a mean of 1e6 (I0(2e6) overflows) it still matches the scipy direct sum [CGH09]."""
        mu, y = 1e6, 998_500
        k = np.arange(int(mu - 8000), int(mu + 8000))
        cdf = stats.poisson.cdf(k, mu)
        direct = float(np.sum((cdf - (k >= y)) ** 2))  # F < 1e-14 below the grid, y inside it
        assert float(crps_poisson(y, mu)) == pytest.approx(direct, rel=1e-9)

    def test_vectorised_with_scalar_broadcast(self) -> None:
        """Arrays are scored window by window and a scalar mean applies to every window."""
        y = np.array([0, 3, 9])
        together = crps_poisson(y, 4.0)
        one_by_one = [float(crps_poisson(int(v), 4.0)) for v in y]
        assert together.shape == (3,)
        np.testing.assert_allclose(together, one_by_one, rtol=1e-14)

    @pytest.mark.parametrize("bad_y", [-1, 2.5, np.nan, np.inf])
    def test_rejects_bad_counts(self, bad_y: float) -> None:
        """Negative, fractional and non-finite counts raise CountError naming the value."""
        with pytest.raises(CountError, match=f"got {float(bad_y)!r} at index 1"):
            crps_poisson([1, bad_y], 2.0)

    def test_rejects_negative_mean_and_mismatched_shapes(self) -> None:
        """A negative mean and arrays of different shapes raise InputError."""
        with pytest.raises(InputError, match=r"mu .*got -0\.5"):
            crps_poisson(1, -0.5)
        with pytest.raises(InputError, match=r"y has shape \(2,\), mu has shape \(3,\)"):
            crps_poisson([1, 2], [1.0, 2.0, 3.0])
        with pytest.raises(InputError, match="numeric"):
            crps_poisson("three", 1.0)


class TestCrpsNegbin:
    @pytest.mark.parametrize(
        ("y", "n", "p", "expected", "tolerance"),
        [
            # [REF] [R], recomputed with scipy/mpmath (scipy nbinom parameterisation).
            (2, 7.0, 0.8, 0.3834322, 6e-8),
            (5, 100.0, 0.95, 0.53215257681, 1e-10),
            (44, 200.1, 0.82, 1.70859687251, 1e-10),
        ],
    )
    def test_reference_values(
        self, y: int, n: float, p: float, expected: float, tolerance: float
    ) -> None:
        """The summed score reproduces the recomputed reference values."""
        assert float(crps_negbin(y, n, p)) == pytest.approx(expected, abs=tolerance)

    def test_matches_hypergeometric_closed_form(self) -> None:
        """It equals the negative binomial closed form with scipy's 2F1 [WH14; formula from memory,
        as in the R package scoringRules]: y(2F(y) - 1) - n(1-p)/p^2 [p(2F_{n+1}(y-1) - 1)
        + 2F1(n+1, 1/2; 2; -4(1-p)/p^2)]."""
        y = np.array([0, 3, 12, 30, 150, 2])
        n = np.array([0.5, 2.0, 7.5, 2.5, 40.0, 1000.0])
        p = np.array([0.3, 0.4, 0.5, 0.1, 0.2, 0.999])
        ratio = (1 - p) / p**2
        closed = y * (2 * stats.nbinom.cdf(y, n, p) - 1) - n * ratio * (
            p * (2 * stats.nbinom.cdf(y - 1, n + 1, p) - 1)
            + special.hyp2f1(n + 1, 0.5, 2, -4 * ratio)
        )
        np.testing.assert_allclose(crps_negbin(y, n, p), closed, rtol=1e-9)

    def test_heavy_tail_agrees_with_monte_carlo(self) -> None:
        """With a long right tail (n = 0.4, p = 0.02) it lies within 4 standard errors of the
        seeded Monte Carlo E|X - y| - E|X - X'|/2 [GR07, eq. 21]."""
        rng = np.random.default_rng(11)
        n, p, y = 0.4, 0.02, 3
        draws = stats.nbinom.rvs(n, p, size=(2, 400_000), random_state=rng)
        estimate, error = monte_carlo_crps(y, draws[0], draws[1])
        assert abs(float(crps_negbin(y, n, p)) - estimate) < 4 * error

    def test_approaches_poisson_as_n_grows(self) -> None:
        """With the mean fixed and n -> infinity it tends to the Poisson CRPS [WH14]; the variance
        gap mu^2/n = 5e-5 bounds the difference."""
        mu, n = 7.0, 1e6
        y = np.array([0, 4, 7, 20])
        np.testing.assert_allclose(crps_negbin(y, n, n / (n + mu)), crps_poisson(y, mu), rtol=1e-5)

    def test_p_one_is_a_point_mass_at_zero(self) -> None:
        """p = 1 puts all mass on 0, so the score is the absolute error [GR07, sec. 4.2]."""
        np.testing.assert_allclose(crps_negbin([0, 4], 3.0, 1.0), [0.0, 4.0], atol=1e-15)

    def test_result_does_not_depend_on_the_memory_budget(self) -> None:
        """A budget of 7 values (many chunks and grid blocks) gives the default-budget result."""
        y = np.array([0, 9, 80, 3, 500])
        n = np.array([1.0, 3.0, 0.7, 50.0, 10.0])
        p = np.array([0.5, 0.2, 0.01, 0.9, 0.03])
        np.testing.assert_allclose(
            crps_negbin(y, n, p, max_elements=7), crps_negbin(y, n, p), rtol=1e-12
        )

    def test_rejects_bad_parameters(self) -> None:
        """n <= 0 and p outside (0, 1] raise InputError naming the value."""
        with pytest.raises(InputError, match=r"n must be .*got 0\.0"):
            crps_negbin(1, 0.0, 0.5)
        with pytest.raises(InputError, match=r"p must be .*got 1\.5"):
            crps_negbin(1, 2.0, 1.5)
        with pytest.raises(InputError, match=r"p must be .*got 0\.0"):
            crps_negbin(1, 2.0, 0.0)
        with pytest.raises(InputError, match="tail"):
            crps_negbin(1, 2.0, 0.5, tail=0.0)


class TestCrpsPoissonMixture:
    def test_equal_draws_give_the_poisson_closed_form(self) -> None:
        """When every draw is the same rate the mixture is that Poisson, so the score equals
        [WH14]'s closed form, including outcomes far outside the forecast mass."""
        rates = np.array([0.0, 0.01, 0.5, 3.0, 20.0, 250.0, 1e4, 20.0, 1e4])
        y = np.array([2, 0, 1, 3, 70, 200, 10_050, 0, 9_000])
        draws = np.tile(rates, (5, 1))
        np.testing.assert_allclose(
            crps_poisson_mixture(y, draws), crps_poisson(y, rates), rtol=1e-9, atol=1e-12
        )

    def test_matches_direct_sum_over_scipy_mixture_cdf(self) -> None:
        """It equals sum_k (F(k) - 1{y <= k})^2 with F the mean of scipy Poisson CDFs [CGH09],
        for draws that include a zero rate and spread widely."""
        draws = np.array(
            [[0.0, 2.0, 30.0], [1.5, 9.0, 300.0], [4.0, 2.5, 55.0], [0.2, 14.0, 120.0]]
        )
        y = np.array([0, 30, 64])
        k = np.arange(800)
        for w in range(3):
            cdf = stats.poisson.cdf(k[:, None], draws[None, :, w]).mean(axis=1)
            assert float(crps_poisson_mixture(y, draws)[w]) == pytest.approx(
                crps_by_direct_sum(y[w], cdf), rel=1e-11
            )

    def test_agrees_with_monte_carlo(self) -> None:
        """It lies within 4 standard errors of the seeded Monte Carlo estimate
        E|X - y| - E|X - X'|/2 [GR07, eq. 21] for a gamma spread of rates around 20."""
        rng = np.random.default_rng(7)
        lam = rng.gamma(25.0, 20.0 / 25.0, size=400)
        y = 29
        picks = rng.integers(0, lam.size, size=(2, 300_000))
        samples = rng.poisson(lam[picks])
        estimate, error = monte_carlo_crps(y, samples[0], samples[1])
        exact = float(crps_poisson_mixture([y], lam[:, None])[0])
        assert abs(exact - estimate) < 4 * error

    def test_result_does_not_depend_on_the_memory_budget(self) -> None:
        """A budget smaller than one window's grid (blocks along k) matches the default."""
        rng = np.random.default_rng(3)
        draws = rng.gamma(50.0, rng.uniform(0.05, 20.0, size=40) / 50.0, size=(30, 40))
        y = rng.poisson(draws.mean(axis=0) * 1.3)
        np.testing.assert_allclose(
            crps_poisson_mixture(y, draws, max_elements=100),
            crps_poisson_mixture(y, draws),
            rtol=1e-12,
        )

    def test_rejects_bad_shapes_and_rates(self) -> None:
        """Draws not 2-D, not matching y, or holding negative or nan rates raise InputError."""
        with pytest.raises(InputError, match=r"shape \(draws, windows\).*got shape \(3,\)"):
            crps_poisson_mixture([1, 2, 3], np.ones(3))
        with pytest.raises(InputError, match=r"y must have shape \(windows,\) = \(2,\)"):
            crps_poisson_mixture([1, 2, 3], np.ones((4, 2)))
        with pytest.raises(InputError, match=r"got -1\.0 at index \(1, 0\)"):
            crps_poisson_mixture([1, 2], np.array([[1.0, 2.0], [-1.0, 2.0]]))
        with pytest.raises(InputError, match="got nan"):
            crps_poisson_mixture([1], np.array([[np.nan]]))
        with pytest.raises(CountError, match=r"got 1\.5 at index 0"):
            crps_poisson_mixture([1.5], np.ones((2, 1)))


class TestPit:
    def test_czado_example_value(self) -> None:
        """Poisson(3) with y = 2 gives F(0.3 | y) = 0.450147 [CGH09 definition; REF [R],
        recomputed with scipy/mpmath]."""
        lower, upper = pit_interval(2, lambda k: stats.poisson.cdf(k, 3.0))
        assert float(pit_value(0.3, lower, upper)) == pytest.approx(0.450147, abs=6e-7)

    def test_interval_is_cdf_below_and_at_the_count(self) -> None:
        """pit_interval gives (F(y - 1), F(y)) from scipy's negative binomial, and 0 below y = 0."""
        y = np.array([0, 1, 6, 25])
        lower, upper = pit_interval(y, lambda k: stats.nbinom.cdf(k, 3.0, 0.3))
        np.testing.assert_allclose(upper, stats.nbinom.cdf(y, 3.0, 0.3), rtol=1e-14)
        np.testing.assert_allclose(lower, stats.nbinom.cdf(y - 1, 3.0, 0.3), rtol=1e-14)
        assert lower[0] == 0.0

    def test_mixture_interval_matches_scipy(self) -> None:
        """pit_poisson_mixture equals the mean over draws of scipy's Poisson CDF at y - 1 and y."""
        rng = np.random.default_rng(5)
        draws = rng.gamma(4.0, 5.0, size=(50, 30))
        y = rng.poisson(20.0, size=30)
        y[0] = 0
        lower, upper = pit_poisson_mixture(y, draws, max_elements=60)
        np.testing.assert_allclose(upper, stats.poisson.cdf(y, draws).mean(axis=0), rtol=1e-12)
        np.testing.assert_allclose(
            lower, stats.poisson.cdf(y - 1, draws).mean(axis=0), rtol=1e-10, atol=1e-15
        )

    def test_pit_function_shape(self) -> None:
        """F(u | y) is 0 up to F(y - 1), linear up to F(y), then 1; a zero-mass outcome is a
        step [CGH09, eq. for F(u | x)]."""
        u = np.array([0.0, 0.2, 0.25, 0.3, 0.4, 0.9])
        np.testing.assert_allclose(pit_value(u, 0.2, 0.4), [0, 0, 0.25, 0.5, 1, 1], atol=1e-15)
        np.testing.assert_array_equal(pit_value([0.49, 0.5, 0.51], 0.5, 0.5), [0, 0, 1])

    def test_histogram_hand_example(self) -> None:
        """Two windows with PIT intervals [0, 0.5] and [0.9, 1] spread half the mass evenly over
        [0, 0.5] and half on [0.9, 1] [CGH09, sec. 2.1]."""
        masses = pit_histogram([0.0, 0.9], [0.5, 1.0], bins=10)
        expected = np.array([0.1] * 5 + [0.0] * 4 + [0.5])
        np.testing.assert_allclose(masses, expected, atol=1e-15)

    def test_histogram_is_flat_for_the_true_poisson(self) -> None:
        """Poisson data scored with the Poisson that made them give a flat PIT histogram within
        4 binomial standard errors [CGH09, sec. 2.1: a calibrated forecast has E F(u | Y) = u]."""
        rng = np.random.default_rng(2009)
        n_windows, bins = 5000, 10
        mu = rng.uniform(0.5, 30.0, size=n_windows)
        y = rng.poisson(mu)
        lower, upper = pit_interval(y, lambda k: stats.poisson.cdf(k, mu))
        masses = pit_histogram(lower, upper, bins=bins)
        tolerance = 4 * np.sqrt((1 / bins) * (1 - 1 / bins) / n_windows)
        assert masses.sum() == pytest.approx(1.0, abs=1e-12)
        assert np.max(np.abs(masses - 1 / bins)) < tolerance

    def test_histogram_of_overdispersed_data_is_u_shaped(self) -> None:
        """Negative binomial data scored with a Poisson of the right mean overflow both end bins
        beyond the same tolerance: too narrow forecasts give a U shape [CGH09, sec. 2.1, from
        memory]."""
        rng = np.random.default_rng(2009)
        n_windows, bins = 5000, 10
        mu = rng.uniform(5.0, 30.0, size=n_windows)
        y = rng.negative_binomial(3.0, 3.0 / (3.0 + mu))
        lower, upper = pit_interval(y, lambda k: stats.poisson.cdf(k, mu))
        masses = pit_histogram(lower, upper, bins=bins)
        tolerance = 4 * np.sqrt((1 / bins) * (1 - 1 / bins) / n_windows)
        assert masses[0] - 1 / bins > tolerance
        assert masses[-1] - 1 / bins > tolerance

    def test_histogram_is_flat_for_a_posterior_predictive_mixture(self) -> None:
        """Counts drawn as y ~ Poisson(l), l ~ Gamma, scored with the Poisson mixture over draws
        from that Gamma (whose predictive is the true marginal), give a flat histogram within 4
        binomial standard errors [CGH09, sec. 2.1]."""
        rng = np.random.default_rng(1979)
        n_windows, n_draws, bins = 3000, 400, 10
        shape = rng.uniform(2.0, 40.0, size=n_windows)
        scale = rng.uniform(0.5, 2.0, size=n_windows)
        y = rng.poisson(rng.gamma(shape, scale))
        draws = rng.gamma(shape, scale, size=(n_draws, n_windows))
        masses = pit_histogram(*pit_poisson_mixture(y, draws), bins=bins)
        # The draws only approximate the Gamma, so allow the Monte Carlo spread of F(y) as well.
        tolerance = 4 * np.sqrt((1 / bins) * (1 - 1 / bins) / n_windows) + 4 / np.sqrt(
            n_draws * n_windows
        )
        assert np.max(np.abs(masses - 1 / bins)) < tolerance

    def test_rejects_bad_pit_inputs(self) -> None:
        """Values outside [0, 1], lower above upper, no windows and bad bins raise InputError."""
        with pytest.raises(InputError, match=r"lower must not exceed upper; got lower=0\.6"):
            pit_histogram([0.1, 0.6], [0.2, 0.5])
        with pytest.raises(InputError, match=r"upper must be .*got 1\.2"):
            pit_value(0.5, 0.1, 1.2)
        with pytest.raises(InputError, match=r"u must be .*got -0\.1"):
            pit_value(-0.1, 0.1, 0.2)
        with pytest.raises(InputError, match="no windows"):
            pit_histogram([], [])
        with pytest.raises(InputError, match="bins"):
            pit_histogram([0.1], [0.2], bins=0)
        with pytest.raises(InputError, match=r"cdf_fn\(y\) must be .*got 2\.0"):
            pit_interval([1, 2], lambda k: k)


class TestIntervalScore:
    def test_hand_examples(self) -> None:
        """Hand-worked values of [GR07, eq. 43]: inside -> width; 1 below [2, 8] at alpha 0.2 ->
        6 + 10 * 1; 2 above at alpha 0.1 -> 6 + 20 * 2."""
        np.testing.assert_allclose(interval_score(5, 2, 8, alpha=0.2), 6.0)
        np.testing.assert_allclose(interval_score(1, 2, 8, alpha=0.2), 16.0)
        np.testing.assert_allclose(interval_score(10, 2, 8, alpha=0.1), 46.0)
        np.testing.assert_allclose(interval_score(8, 2, 8, alpha=0.1), 6.0)

    def test_equals_scaled_sum_of_quantile_scores(self) -> None:
        """IS_alpha = (2/alpha)[QS_{alpha/2}(l) + QS_{1-alpha/2}(u)] with the pinball loss
        QS_t(q) = (1{y < q} - t)(q - y) [GR07, sec. 6.2]."""
        rng = np.random.default_rng(43)
        y = rng.poisson(12.0, size=200)
        lower = rng.uniform(0.0, 12.0, size=200)
        upper = lower + rng.uniform(0.0, 15.0, size=200)
        alpha = 0.3

        def pinball(q: np.ndarray, level: float) -> np.ndarray:
            return ((y < q) - level) * (q - y)

        expected = (2 / alpha) * (pinball(lower, alpha / 2) + pinball(upper, 1 - alpha / 2))
        np.testing.assert_allclose(interval_score(y, lower, upper, alpha=alpha), expected)

    def test_true_quantiles_minimise_the_expected_score(self) -> None:
        """For a Poisson(10) outcome the expected score is lowest at the alpha/2 and 1 - alpha/2
        quantiles (the rule is proper [GR07, sec. 6.2]); moving either bound by 1 does not help."""
        y = np.arange(80)
        weights = stats.poisson.pmf(y, 10.0)
        alpha = 0.2
        best_l, best_u = stats.poisson.ppf([alpha / 2, 1 - alpha / 2], 10.0)

        def expected(lower: float, upper: float) -> float:
            return float(np.sum(weights * interval_score(y, lower, upper, alpha=alpha)))

        at_quantiles = expected(best_l, best_u)
        for dl, du in [(-1, 0), (1, 0), (0, -1), (0, 1)]:
            assert at_quantiles <= expected(best_l + dl, best_u + du) + 1e-12

    def test_rejects_bad_alpha_and_reversed_bounds(self) -> None:
        """alpha outside (0, 1) and lower > upper raise InputError naming the value."""
        with pytest.raises(InputError, match=r"alpha .*got 1\.0"):
            interval_score(3, 1, 5, alpha=1.0)
        with pytest.raises(InputError, match=r"got lower=6\.0 > upper=5\.0"):
            interval_score(3, 6, 5, alpha=0.1)
        with pytest.raises(InputError, match=r"upper must be a finite number; got inf"):
            interval_score(3, 1, np.inf, alpha=0.1)


class TestCoverage:
    def test_hand_example_includes_both_bounds(self) -> None:
        """Counts on either bound count as covered (common practice, no source)."""
        assert coverage([2, 8, 1, 9], 2, 8) == 0.5

    def test_matches_interval_probability_for_poisson_data(self) -> None:
        """Seeded Poisson(12) data fall in scipy's central 80% interval at the exact probability
        P(l <= Y <= u), within 4 binomial standard errors (common practice, no source)."""
        rng = np.random.default_rng(80)
        y = rng.poisson(12.0, size=4000)
        lower, upper = stats.poisson.ppf([0.1, 0.9], 12.0)
        exact = stats.poisson.cdf(upper, 12.0) - stats.poisson.cdf(lower - 1, 12.0)
        error = np.sqrt(exact * (1 - exact) / y.size)
        assert abs(coverage(y, lower, upper) - exact) < 4 * error
        assert exact > 0.8  # a discrete central interval holds at least its nominal probability

    def test_rejects_empty_and_fractional_input(self) -> None:
        """No windows raise InputError and a fractional count raises CountError."""
        with pytest.raises(InputError, match="no windows"):
            coverage([], [], [])
        with pytest.raises(CountError, match=r"got 2\.5"):
            coverage([2.5], [1], [3])

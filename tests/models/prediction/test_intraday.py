"""Intraday update: the exact conditional of today's level, draw reweighting, and a backtest.

Sources and references:
- Hoff, *A First Course in Bayesian Statistical Methods* (2009), sec. 3.2 [R in
  ../shared/REFERENCE_VALUES.md]: prior Gamma(2, 1), 217 events over exposure 111 ->
  Gamma(219, 112), mean 1.9554, 95% interval (1.7049, 2.2227). Reweighting prior draws by the
  Poisson likelihood must reproduce it.
- scipy.integrate.quad of the unnormalised conditional density and scipy.stats.kstest for the
  sampled latent level.
- The backtests on simulated days: the exact prior and conditional forecasts by quadrature over
  today's level (and shape weights), scored by the count CRPS of Czado, Gneiting & Held
  (Biometrics 65(4) 2009); the update is scored by models.evaluation.scoring.crps_poisson_mixture
  (itself checked against Wei & Held 2014).
"""

from __future__ import annotations

import dataclasses
import itertools
import math

import numpy as np
import pandas as pd
import pytest
from scipy import integrate, special, stats

from models.evaluation.scoring import crps_poisson_mixture
from models.exceptions import CountError, InputError, WindowError
from models.prediction.intraday import update_forecast
from models.prediction.mixture import summarise
from models.prediction.windows import expected_counts
from models.ratemodel.binning import OpeningHours
from tests.conftest import synthetic_posterior

TZ = "America/Chicago"
TODAY = "2026-03-03"  # a Tuesday; the synthetic history ends on Sunday 2026-03-01
RHO, SD, LAST = 0.6, 0.3, 0.2
# Today is two days after the last history day: z ~ N(rho^2 LAST, SD^2 (1 + rho^2)).
PRIOR_MEAN = RHO**2 * LAST
PRIOR_VAR = SD**2 * (1 + RHO**2)


# ----------------------------------------------------------------------------- exact reference
# The backtests below score the update against the exact Bayesian forecast of the same simulated
# day, computed here by quadrature over today's latent level (and shape weights): prior times the
# morning's likelihood on a grid, then each afternoon hour's predictive pmf as the weighted
# mixture over the grid, scored by the CRPS of a count forecast written as a sum over k,
# sum_k (F(k) - 1{y <= k})^2 (Czado, Gneiting & Held, Biometrics 65(4) 2009). A forecast from
# m equally weighted draws exceeds the exact forecast's expected CRPS by at most E|X - X'| / (2m)
# (Ferro, QJRMS 140, 2014, "fair" ensemble CRPS; from memory), about 1/m of the score for a
# calibrated forecast: 0.5% at m = 200 and 0.3% at 300, plus sampling noise averaged over the
# replicates. So the update's mean score must agree with the exact one within 3%.
SCORE_AGREEMENT = 0.03


def grid_pmf(
    log_weight: np.ndarray, means: np.ndarray, dispersion: float | None = None
) -> np.ndarray:
    """Predictive pmf of each window: the mixture over grid points ``g`` (weights
    ``exp(log_weight)``, normalised) of Poisson(``means[g, w]``), or of the negative binomial
    with ``dispersion`` k as scipy.stats.nbinom has it (n = k, p = k / (k + mean)).

    Grid points below 1e-12 of the largest weight are left out. The counts run 20 mixture sd
    past the mixture mean, which :func:`discrete_crps` checks holds all the mass.
    """
    w = np.exp(log_weight - log_weight.max())
    keep = w > 1e-12
    w = w[keep] / w[keep].sum()
    mu = means[keep]
    mean = w @ mu
    extra = 0.0 if dispersion is None else w @ mu**2 / dispersion
    sd = np.sqrt(mean + extra + w @ (mu - mean) ** 2)
    k = np.arange(int((mean + 20 * sd).max()) + 30)[None, None, :]
    mu = mu[:, :, None]
    if dispersion is None:
        log_pmf = special.xlogy(k, mu) - mu - special.gammaln(k + 1.0)
    else:
        n, p = dispersion, dispersion / (dispersion + mu)
        log_pmf = (
            special.gammaln(k + n) - special.gammaln(n) - special.gammaln(k + 1.0)
            + n * np.log(p) + k * np.log1p(-p)
        )  # fmt: skip
    return np.einsum("g,gwk->wk", w, np.exp(log_pmf))


def test_grid_pmf_is_the_scipy_mixture() -> None:
    # The closed forms above against scipy.stats on a two-point grid.
    means = np.array([[3.0, 40.0], [5.0, 60.0]])
    log_weight = np.log([0.25, 0.75])
    for law, pmf in (
        (stats.poisson(means[:, :, None]), grid_pmf(log_weight, means)),
        (stats.nbinom(20.0, 20.0 / (20.0 + means[:, :, None])), grid_pmf(log_weight, means, 20)),
    ):
        k = np.arange(pmf.shape[1])
        expected = 0.25 * law.pmf(k)[0] + 0.75 * law.pmf(k)[1]
        np.testing.assert_allclose(pmf, expected, rtol=1e-10, atol=1e-300)


def discrete_crps(pmf: np.ndarray, y: np.ndarray) -> np.ndarray:
    """CRPS per window of the pmfs ``pmf[w]`` at counts ``y[w]`` (Czado et al. 2009)."""
    assert np.allclose(pmf.sum(axis=1), 1.0, rtol=0, atol=1e-10)  # the counts hold all the mass
    step = np.arange(pmf.shape[1])[None, :] >= y[:, None]
    return ((np.cumsum(pmf, axis=1) - step) ** 2).sum(axis=1)


def level_grid() -> tuple[np.ndarray, np.ndarray]:
    """Today's level z on a grid of +-9 prior sd, and its N(PRIOR_MEAN, PRIOR_VAR) log prior."""
    z = PRIOR_MEAN + math.sqrt(PRIOR_VAR) * np.linspace(-9.0, 9.0, 721)
    return z, -0.5 * (z - PRIOR_MEAN) ** 2 / PRIOR_VAR


def gaussian_grid(mean: np.ndarray, cov: np.ndarray, *, points: int = 11) -> np.ndarray:
    """Points ``mean + L u`` with ``L L' = cov`` and ``u`` on a cube of +-6 in each coordinate.

    A spacing of 1.2 sd is plenty: for a Gaussian integrand the trapezoid rule's relative error
    is about exp(-2 pi^2 / h^2) = 1e-6 at spacing h = 1.2 (the rule is spectrally accurate for
    smooth, fast-decaying integrands; Trefethen & Weideman, SIAM Review 56(3) 2014)."""
    axis = np.linspace(-6.0, 6.0, points)
    u = np.stack(np.meshgrid(*[axis] * len(mean), indexing="ij"), axis=-1).reshape(-1, len(mean))
    return mean + u @ np.linalg.cholesky(cov).T


def poisson_log_posterior_grid(
    design: np.ndarray, base: np.ndarray, counts: np.ndarray, mean: np.ndarray, cov: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Grid and log posterior of ``theta`` ~ N(mean, cov) given counts ~ Poisson(base exp(design
    theta)), the grid laid over the posterior's Laplace approximation (mode by Newton's method,
    covariance the inverse negative Hessian there)."""
    precision = np.linalg.inv(cov)

    def log_post(theta: np.ndarray) -> np.ndarray:
        eta = theta @ design.T
        dev = theta - mean
        prior = -0.5 * np.einsum("gi,ij,gj->g", dev, precision, dev)
        return (counts * eta - base * np.exp(eta)).sum(axis=1) + prior

    theta = mean.copy()
    for _ in range(50):
        rate = base * np.exp(design @ theta)
        grad = design.T @ (counts - rate) - precision @ (theta - mean)
        hess = -(design.T * rate) @ design - precision
        theta = theta - np.linalg.solve(hess, grad)
    grid = gaussian_grid(theta, np.linalg.inv(-hess))
    return grid, log_post(grid)


def assert_scores_agree(ours: list[float], exact: list[float]) -> None:
    assert np.mean(ours) == pytest.approx(np.mean(exact), rel=SCORE_AGREEMENT)


def stamps(*texts: str) -> pd.DatetimeIndex:
    return pd.DatetimeIndex([pd.Timestamp(t, tz=TZ) for t in texts]).tz_convert("UTC")


def hours(day: str, first: int, last: int) -> tuple[pd.DatetimeIndex, pd.DatetimeIndex]:
    """Hourly windows first:00 .. last:00 of a local day."""
    return (
        stamps(*(f"{day}T{h:02d}:00" for h in range(first, last))),
        stamps(*(f"{day}T{h:02d}:00" for h in range(first + 1, last + 1))),
    )


@pytest.fixture
def latent_posterior(weekly_table: np.ndarray):
    return synthetic_posterior(
        weekly_table, draws=4000, latent_rho=RHO, latent_sd=SD, latent_last=LAST
    )


class TestLatentConditional:
    def test_sampled_level_follows_the_exact_conditional(self, latent_posterior, weekly_table):
        observed = 80
        morning = float(weekly_table[1, :11].sum())  # Tuesday 00:00-11:00, z = 0

        def density(z: float) -> float:
            # Normal prior times the Poisson likelihood in exp(z), in plain floats for speed.
            prior = -0.5 * (z - PRIOR_MEAN) ** 2 / PRIOR_VAR - 0.5 * math.log(
                2 * math.pi * PRIOR_VAR
            )
            return math.exp(prior + observed * z - morning * math.exp(z))

        peak = np.log(observed / morning)
        norm = integrate.quad(density, -6, 6, points=[peak])[0]
        mean = integrate.quad(lambda z: z * density(z), -6, 6, points=[peak])[0] / norm

        result = update_forecast(
            latent_posterior,
            stamps(f"{TODAY}T00:00"),
            stamps(f"{TODAY}T11:00"),
            [observed],
            *hours(TODAY, 12, 13),
            seed=11,
        )
        assert result.latent is not None
        assert result.effective_sample_size == 4000  # every draw is the same: nothing to choose
        # Probability integral transform by quad between consecutive sorted samples.
        ordered = np.sort(result.latent)
        edges = np.concatenate([[-6.0], ordered])
        pieces = [integrate.quad(density, a, b)[0] for a, b in itertools.pairwise(edges)]
        assert stats.kstest(np.cumsum(pieces) / norm, "uniform").pvalue > 0.01
        assert result.latent.mean() == pytest.approx(mean, abs=4 * result.latent.std() / 63)
        assert result.expected_before == pytest.approx(
            morning * np.exp(PRIOR_MEAN + PRIOR_VAR / 2), rel=1e-6
        )

    def test_nothing_observed_where_nothing_can_arrive_leaves_the_prior(self, weekly_table):
        posterior = synthetic_posterior(
            weekly_table,
            draws=4000,
            latent_rho=RHO,
            latent_sd=SD,
            latent_last=LAST,
            opening=OpeningHours.parse("daily 08:00-20:00"),
        )
        result = update_forecast(
            posterior,
            stamps(f"{TODAY}T00:00"),
            stamps(f"{TODAY}T06:00"),
            [0],
            *hours(TODAY, 12, 13),
            seed=2,
        )
        assert result.latent is not None
        # Sampling error of 4000 normal draws: sd / 63 for the mean, ~1.2% for the sd.
        assert result.latent.mean() == pytest.approx(PRIOR_MEAN, abs=4 * SD / 63)
        assert result.latent.std() == pytest.approx(np.sqrt(PRIOR_VAR), rel=0.05)

    def test_a_busy_morning_raises_today_and_less_so_tomorrow(self, latent_posterior):
        windows = (
            stamps(f"{TODAY}T13:00", "2026-03-04T13:00"),
            stamps(f"{TODAY}T17:00", "2026-03-04T17:00"),
        )
        before = expected_counts(latent_posterior, *windows).mean(axis=0)
        morning = stamps(f"{TODAY}T06:00"), stamps(f"{TODAY}T12:00")
        expected = expected_counts(latent_posterior, *morning).mean()
        busy = update_forecast(latent_posterior, *morning, [round(2 * expected)], *windows, seed=1)
        quiet = update_forecast(latent_posterior, *morning, [round(expected / 2)], *windows, seed=1)
        busy_ratio = busy.lam.mean(axis=0) / before
        quiet_ratio = quiet.lam.mean(axis=0) / before
        # The AR(1) carries only part of today's level into tomorrow (rho = 0.6).
        assert busy_ratio[0] > busy_ratio[1] > 1.1
        assert quiet_ratio[0] < quiet_ratio[1] < 0.95

    def test_same_seed_same_answer(self, latent_posterior):
        args = (stamps(f"{TODAY}T00:00"), stamps(f"{TODAY}T09:00"), [40], *hours(TODAY, 9, 12))
        a = update_forecast(latent_posterior, *args, seed=5)
        b = update_forecast(latent_posterior, *args, seed=5)
        c = update_forecast(latent_posterior, *args, seed=6)
        np.testing.assert_array_equal(a.lam, b.lam)
        assert not np.array_equal(a.lam, c.lam)
        assert summarise(a.lam).mean.shape == (3,)


class TestReweighting:
    def test_gamma_poisson_posterior_of_hoff_2009(self):
        # Hoff (2009) sec. 3.2: prior Gamma(2, 1), sum 217 over exposure 111 -> Gamma(219, 112).
        # Draws theta_d ~ Gamma(2, 1) set a flat rate of 10 theta per hour; 11.1 hours observed.
        draws = 20_000
        theta = np.random.default_rng(11).gamma(2.0, 1.0, draws)
        posterior = synthetic_posterior(np.full((7, 24), 10.0), draws=draws)
        week = np.broadcast_to(np.log(10 * theta)[:, None, None], (draws, 7, 24))
        posterior = dataclasses.replace(posterior, week_log_rate=week.astype(np.float32))
        result = update_forecast(
            posterior,
            stamps(f"{TODAY}T00:00"),
            stamps(f"{TODAY}T11:06"),
            [217],
            stamps(f"{TODAY}T12:00"),
            stamps(f"{TODAY}T18:00"),
            seed=1,
        )
        assert result.latent is None
        kept = np.exp(posterior.week_log_rate[result.draw_index, 0, 0].astype(np.float64)) / 10
        assert kept.mean() == pytest.approx(1.9554, abs=0.015)
        assert np.quantile(kept, 0.025) == pytest.approx(1.7049, abs=0.03)
        assert np.quantile(kept, 0.975) == pytest.approx(2.2227, abs=0.03)
        np.testing.assert_allclose(result.lam[:, 0], 60 * kept, rtol=1e-5)
        # Effective sample size of the Poisson-likelihood weights, computed with scipy.
        rate = np.exp(posterior.week_log_rate[:, 0, 0].astype(np.float64)) * 11.1
        log_w = stats.poisson.logpmf(217, rate)
        w = np.exp(log_w - log_w.max())
        assert result.effective_sample_size == pytest.approx(w.sum() ** 2 / (w**2).sum(), rel=1e-6)


class TestBacktest:
    def test_updated_afternoons_score_as_the_exact_forecast_does(self, weekly_table):
        # Simulated days from the model's own parameters (synthetic posterior with a latent
        # term): the morning (00:00-12:00) is observed, the afternoon hours are scored, before
        # and after the update, and compared with the exact prior and conditional forecasts
        # (quadrature, see "exact reference" above).
        posterior = synthetic_posterior(
            weekly_table, draws=200, latent_rho=RHO, latent_sd=SD, latent_last=LAST
        )
        afternoon = hours(TODAY, 12, 18)
        morning = hours(TODAY, 0, 12)
        before = expected_counts(posterior, *afternoon)
        z, log_prior = level_grid()
        means = weekly_table[1, 12:18][None, :] * np.exp(z)[:, None]
        prior_pmf = grid_pmf(log_prior, means)
        rng = np.random.default_rng(2026)
        scores_before, scores_after, exact_before, exact_after = [], [], [], []
        for replicate in range(60):
            level = rng.normal(PRIOR_MEAN, np.sqrt(PRIOR_VAR))
            counts = rng.poisson(weekly_table[1] * np.exp(level))
            result = update_forecast(posterior, *morning, counts[:12], *afternoon, seed=replicate)
            scores_before.append(crps_poisson_mixture(counts[12:18], before).mean())
            scores_after.append(crps_poisson_mixture(counts[12:18], result.lam).mean())
            log_post = log_prior + counts[:12].sum() * z - weekly_table[1, :12].sum() * np.exp(z)
            exact_before.append(discrete_crps(prior_pmf, counts[12:18]).mean())
            exact_after.append(discrete_crps(grid_pmf(log_post, means), counts[12:18]).mean())
        assert_scores_agree(scores_before, exact_before)
        assert_scores_agree(scores_after, exact_after)
        # The exact conditional forecast is the best one can make of these days (CRPS is proper,
        # Gneiting & Raftery, JASA 102(477) 2007); the update must gain over the prior as it does.
        assert np.mean(exact_after) < np.mean(exact_before)
        assert np.mean(scores_after) < np.mean(scores_before)


class TestBadInputs:
    @pytest.fixture
    def posterior(self, weekly_table):
        return synthetic_posterior(weekly_table, draws=20, latent_rho=RHO, latent_sd=SD)

    def forecast_hour(self) -> tuple[pd.DatetimeIndex, pd.DatetimeIndex]:
        return hours(TODAY, 15, 16)

    def test_a_day_inside_the_history(self, posterior):
        with pytest.raises(WindowError, match="2026-03-01 is inside the fitted history"):
            update_forecast(posterior, *hours("2026-03-01", 8, 9), [3], *self.forecast_hour())

    def test_observations_over_two_days(self, posterior):
        with pytest.raises(WindowError, match="several local days"):
            update_forecast(
                posterior,
                stamps(f"{TODAY}T22:00"),
                stamps("2026-03-04T02:00"),
                [3],
                *self.forecast_hour(),
            )

    @pytest.mark.parametrize(("count", "named"), [(-1, "-1"), (2.5, "2.5")])
    def test_bad_counts(self, posterior, count, named):
        with pytest.raises(CountError, match=named):
            update_forecast(posterior, *hours(TODAY, 8, 9), [count], *self.forecast_hour())

    def test_overlapping_observations(self, posterior):
        with pytest.raises(WindowError, match="overlap"):
            update_forecast(
                posterior,
                stamps(f"{TODAY}T08:00", f"{TODAY}T08:30"),
                stamps(f"{TODAY}T09:00", f"{TODAY}T09:30"),
                [3, 4],
                *self.forecast_hour(),
            )

    def test_forecast_window_before_today(self, posterior):
        with pytest.raises(WindowError, match="before today"):
            update_forecast(posterior, *hours(TODAY, 8, 9), [3], *hours("2026-03-02", 8, 9))

    def test_arrivals_where_the_model_expects_none(self, weekly_table):
        closed = synthetic_posterior(
            weekly_table, draws=20, opening=OpeningHours.parse("daily 08:00-20:00")
        )
        with pytest.raises(InputError, match="impossible under every posterior draw"):
            update_forecast(closed, *hours(TODAY, 2, 3), [5], *self.forecast_hour())


SHAPE_SD = 0.3


def shape_factor(hour: int) -> float:
    """The first within-day cosine at an hourly slot (definition written out here)."""
    return math.sqrt(2.0) * math.cos(math.pi * (hour + 0.5) / 24)


@pytest.fixture
def shaped_posterior(weekly_table: np.ndarray):
    return synthetic_posterior(
        weekly_table,
        draws=4000,
        latent_rho=RHO,
        latent_sd=SD,
        latent_last=LAST,
        within_day_sd=np.array([SHAPE_SD]),
    )


class TestWithShape:
    def test_matches_two_dimensional_quadrature(self, shaped_posterior, weekly_table):
        # Reference: scipy.integrate.dblquad of the exact posterior of today's (level z, shape
        # weight c): prior N(PRIOR_MEAN, PRIOR_VAR) x N(0, SHAPE_SD^2), Poisson counts with mean
        # table[h] exp(z + c g(h)) in the observed hours. Checked: E[z], E[c] and the updated
        # mean of 14:00-18:00.
        observed = list(range(6, 12))
        counts = np.array([12, 14, 19, 25, 30, 33])
        table = weekly_table[1]  # Tuesday
        later = list(range(14, 18))

        def log_post(z: float, c: float) -> float:
            rates = np.array([table[h] * math.exp(z + c * shape_factor(h)) for h in observed])
            return float(
                (counts * np.log(rates) - rates).sum()
                - 0.5 * (z - PRIOR_MEAN) ** 2 / PRIOR_VAR
                - 0.5 * c**2 / SHAPE_SD**2
            )

        peak = max(log_post(z, c) for z in np.linspace(-1, 1.5, 51) for c in np.linspace(-1, 1, 41))

        def moment(f):
            value, _ = integrate.dblquad(
                lambda c, z: f(z, c) * math.exp(log_post(z, c) - peak),
                PRIOR_MEAN - 8 * math.sqrt(PRIOR_VAR),
                PRIOR_MEAN + 8 * math.sqrt(PRIOR_VAR),
                -8 * SHAPE_SD,
                8 * SHAPE_SD,
                epsabs=1e-10,
                epsrel=1e-8,
            )
            return value

        norm = moment(lambda z, c: 1.0)
        mean_z = moment(lambda z, c: z) / norm
        mean_c = moment(lambda z, c: c) / norm
        mean_later = (
            moment(lambda z, c: sum(table[h] * math.exp(z + c * shape_factor(h)) for h in later))
            / norm
        )

        result = update_forecast(
            shaped_posterior,
            *hours(TODAY, observed[0], observed[-1] + 1),
            counts,
            *(stamps(f"{TODAY}T14:00"), stamps(f"{TODAY}T18:00")),
        )
        assert result.latent is not None and result.shape is not None
        n = result.lam.shape[0]
        assert result.latent.mean() == pytest.approx(mean_z, abs=4 * result.latent.std() / n**0.5)
        assert result.shape[:, 0].mean() == pytest.approx(
            mean_c, abs=4 * result.shape[:, 0].std() / n**0.5
        )
        lam = result.lam[:, 0]
        assert lam.mean() == pytest.approx(mean_later, abs=4 * lam.std() / n**0.5)

    def test_a_busy_morning_is_read_partly_as_shape(self, shaped_posterior, weekly_table):
        # A morning 60% above its forecast in every hour: the level alone would carry all of it
        # to the evening. With the shape term part of it goes to the first cosine (positive in
        # the morning, negative in the evening), so the evening rises, but less.
        morning = hours(TODAY, 6, 12)
        evening = hours(TODAY, 18, 22)
        counts = np.round(expected_counts(shaped_posterior, *morning).mean(axis=0) * 1.6)
        level_only = synthetic_posterior(
            weekly_table, draws=4000, latent_rho=RHO, latent_sd=SD, latent_last=LAST
        )
        with_shape = update_forecast(shaped_posterior, *morning, counts, *evening, seed=3)
        alone = update_forecast(level_only, *morning, counts, *evening, seed=3)
        before = expected_counts(shaped_posterior, *evening).mean(axis=0).sum()
        rise_with_shape = with_shape.lam.mean(axis=0).sum() / before
        rise_alone = (
            alone.lam.mean(axis=0).sum() / expected_counts(level_only, *evening).mean(0).sum()
        )
        assert with_shape.shape is not None and with_shape.shape[:, 0].mean() > 0.05
        assert 1.0 < rise_with_shape < rise_alone - 0.05

    def test_same_seed_same_answer(self, shaped_posterior):
        morning = hours(TODAY, 6, 10)
        later = hours(TODAY, 12, 16)
        counts = np.array([5, 6, 9, 12])
        one = update_forecast(shaped_posterior, *morning, counts, *later, seed=5)
        two = update_forecast(shaped_posterior, *morning, counts, *later, seed=5)
        np.testing.assert_array_equal(one.lam, two.lam)
        assert 0 < one.effective_sample_size <= shaped_posterior.n_draws

    def test_updated_afternoons_score_as_the_exact_forecast_does(self, weekly_table):
        # Days simulated from the model itself (level and shape drawn from their priors).
        posterior = synthetic_posterior(
            weekly_table,
            draws=300,
            latent_rho=RHO,
            latent_sd=SD,
            latent_last=LAST,
            within_day_sd=np.array([SHAPE_SD, 0.15]),
        )
        morning, afternoon = hours(TODAY, 0, 12), hours(TODAY, 12, 20)
        before = expected_counts(posterior, *afternoon)
        rng = np.random.default_rng(2027)
        g = np.array(
            [
                [math.sqrt(2) * math.cos(math.pi * k * (h + 0.5) / 24) for k in (1, 2)]
                for h in range(24)
            ]
        )
        # Exact reference over (level, weight 1, weight 2): design rows (1, g1(h), g2(h)).
        design = np.column_stack([np.ones(24), g])
        prior_mean = np.array([PRIOR_MEAN, 0.0, 0.0])
        prior_cov = np.diag([PRIOR_VAR, SHAPE_SD**2, 0.15**2])
        prior_grid = gaussian_grid(prior_mean, prior_cov)
        later = weekly_table[1, 12:20] * np.exp(prior_grid @ design[12:20].T)
        prior_pmf = grid_pmf(
            -0.5 * ((prior_grid - prior_mean) ** 2 / np.diag(prior_cov)).sum(axis=1), later
        )
        scores_before, scores_after, exact_before, exact_after = [], [], [], []
        for replicate in range(40):
            level = rng.normal(PRIOR_MEAN, math.sqrt(PRIOR_VAR))
            weights = rng.normal(0.0, [SHAPE_SD, 0.15])
            counts = rng.poisson(weekly_table[1] * np.exp(level + g @ weights))
            result = update_forecast(posterior, *morning, counts[:12], *afternoon, seed=replicate)
            scores_before.append(crps_poisson_mixture(counts[12:20], before).mean())
            scores_after.append(crps_poisson_mixture(counts[12:20], result.lam).mean())
            grid, log_post = poisson_log_posterior_grid(
                design[:12], weekly_table[1, :12], counts[:12], prior_mean, prior_cov
            )
            post_pmf = grid_pmf(log_post, weekly_table[1, 12:20] * np.exp(grid @ design[12:20].T))
            exact_before.append(discrete_crps(prior_pmf, counts[12:20]).mean())
            exact_after.append(discrete_crps(post_pmf, counts[12:20]).mean())
        assert_scores_agree(scores_before, exact_before)
        assert_scores_agree(scores_after, exact_after)
        assert np.mean(exact_after) < np.mean(exact_before)
        assert np.mean(scores_after) < np.mean(scores_before)


K_NB = 20.0


class TestNegativeBinomial:
    def test_level_matches_quadrature_with_the_scipy_nbinom_likelihood(self, weekly_table):
        # Reference: scipy.integrate.quad over z of N(z; PRIOR_MEAN, PRIOR_VAR) times the
        # likelihood from scipy.stats.nbinom (n = k, p = k / (k + mean)) of each observed hour:
        # the per-bin gamma noise of the observed hours is integrated out, not held fixed.
        posterior = synthetic_posterior(
            weekly_table,
            draws=4000,
            latent_rho=RHO,
            latent_sd=SD,
            latent_last=LAST,
            dispersion=K_NB,
        )
        observed = list(range(8, 14))
        counts = np.array([40, 55, 61, 80, 70, 66])
        table = weekly_table[1]

        def log_post(z: float) -> float:
            mean = table[observed] * math.exp(z)
            return float(
                stats.nbinom.logpmf(counts, K_NB, K_NB / (K_NB + mean)).sum()
                - 0.5 * (z - PRIOR_MEAN) ** 2 / PRIOR_VAR
            )

        grid = np.linspace(-2, 2, 401)
        peak = max(log_post(z) for z in grid)
        lo, hi = PRIOR_MEAN - 10 * math.sqrt(PRIOR_VAR), PRIOR_MEAN + 10 * math.sqrt(PRIOR_VAR)
        norm = integrate.quad(lambda z: math.exp(log_post(z) - peak), lo, hi, points=[0.0])[0]
        mean_z = integrate.quad(lambda z: z * math.exp(log_post(z) - peak), lo, hi, points=[0.0])[0]
        mean_z /= norm
        result = update_forecast(
            posterior, *hours(TODAY, 8, 14), counts, *hours(TODAY, 15, 17), seed=2
        )
        assert result.latent is not None
        n = result.latent.size
        assert result.latent.mean() == pytest.approx(mean_z, abs=4 * result.latent.std() / n**0.5)

    def test_updated_afternoons_score_as_the_exact_forecast_does(self, weekly_table):
        posterior = synthetic_posterior(
            weekly_table,
            draws=300,
            latent_rho=RHO,
            latent_sd=SD,
            latent_last=LAST,
            dispersion=K_NB,
        )
        morning, afternoon = hours(TODAY, 0, 12), hours(TODAY, 12, 20)
        before = expected_counts(posterior, *afternoon)
        # Exact reference: the level's posterior under the scipy.stats.nbinom likelihood of the
        # morning hours; each afternoon hour is negative binomial given the level.
        z, log_prior = level_grid()
        table = weekly_table[1]
        morning_means = table[None, :12] * np.exp(z)[:, None]
        later = table[None, 12:20] * np.exp(z)[:, None]
        prior_pmf = grid_pmf(log_prior, later, K_NB)
        rng = np.random.default_rng(2028)
        scores_before, scores_after, exact_before, exact_after = [], [], [], []
        for replicate in range(40):
            level = rng.normal(PRIOR_MEAN, math.sqrt(PRIOR_VAR))
            noise = rng.gamma(K_NB, 1 / K_NB, size=24)
            counts = rng.poisson(weekly_table[1] * np.exp(level) * noise)
            result = update_forecast(posterior, *morning, counts[:12], *afternoon, seed=replicate)
            scores_before.append(crps_poisson_mixture(counts[12:20], before).mean())
            scores_after.append(crps_poisson_mixture(counts[12:20], result.lam).mean())
            likelihood = stats.nbinom.logpmf(
                counts[None, :12], K_NB, K_NB / (K_NB + morning_means)
            ).sum(axis=1)
            exact_before.append(discrete_crps(prior_pmf, counts[12:20]).mean())
            exact_after.append(
                discrete_crps(grid_pmf(log_prior + likelihood, later, K_NB), counts[12:20]).mean()
            )
        assert_scores_agree(scores_before, exact_before)
        assert_scores_agree(scores_after, exact_after)
        assert np.mean(exact_after) < np.mean(exact_before)
        assert np.mean(scores_after) < np.mean(scores_before)

    def test_a_huge_dispersion_updates_like_the_poisson_series(self, weekly_table):
        # k = 1e9 is beyond any measurable noise: the sampling update must agree with the exact
        # grid update of the same series fitted as Poisson (within Monte Carlo error).
        kwargs = dict(draws=4000, latent_rho=RHO, latent_sd=SD, latent_last=LAST)
        counts = np.array([40, 55, 61, 80, 70, 66])
        observed, later = hours(TODAY, 8, 14), hours(TODAY, 15, 17)
        nb = update_forecast(
            synthetic_posterior(weekly_table, dispersion=1e9, **kwargs), *observed, counts, *later
        )
        poisson = update_forecast(
            synthetic_posterior(weekly_table, **kwargs), *observed, counts, *later
        )
        assert nb.latent is not None and poisson.latent is not None
        spread = math.hypot(nb.latent.std(), poisson.latent.std()) / math.sqrt(4000)
        assert nb.latent.mean() == pytest.approx(poisson.latent.mean(), abs=4 * spread)

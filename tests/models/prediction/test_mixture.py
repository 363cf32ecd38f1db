"""Tests of models.prediction.mixture against scipy.stats.poisson and against Monte Carlo sampling.

Reference: scipy.stats.poisson (SciPy, ``scipy.stats.poisson`` pmf/cdf/sf/ppf, backed by the Cephes
``pdtr``/``pdtrc`` incomplete-gamma routines).  The mixture CDF is, by definition, the
equal-weight average over draws of Poisson CDFs, so a brute-force average of
``scipy.stats.poisson.cdf`` is an independent reference for it; the quantile is then found by a
plain search over that brute-force CDF.
"""

from __future__ import annotations

import doctest
import itertools
import re
from collections.abc import Iterable

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.typing import NDArray
from scipy import stats

import models.prediction.mixture as mixture_module
from models.exceptions import InputError
from models.prediction.mixture import MixtureSummary, mixture_cdf, mixture_quantile, summarise

QUANTILES = (0.001, 0.01, 0.025, 0.05, 0.25, 0.5, 0.75, 0.95, 0.975, 0.99, 0.999)
LEVELS = (0.5, 0.8, 0.9, 0.95, 0.99)


def test_docstring_examples_run() -> None:
    """The examples in the module's docstrings give the outputs they show."""
    result = doctest.testmod(mixture_module, optionflags=doctest.NORMALIZE_WHITESPACE)
    assert result.attempted > 0
    assert result.failed == 0


def brute_cdf(lam: NDArray[np.float64], k_max: int) -> NDArray[np.float64]:
    """F_w(k) = mean_d scipy.stats.poisson.cdf(k, lam[d, w]), k = 0..k_max; shape (k_max + 1, W)."""
    ks = np.arange(k_max + 1)
    return np.concatenate(
        [
            stats.poisson.cdf(ks[a : a + 256, None, None], lam[None]).mean(axis=1)
            for a in range(0, ks.size, 256)
        ]
    )


def brute_quantiles(
    lam: NDArray[np.float64], qs: Iterable[float]
) -> dict[float, NDArray[np.int64]]:
    """Smallest k with brute-force F(k) >= q, searched over k = 0, 1, ... per window.

    The search runs to scipy's ppf at the largest draw of the whole array plus a margin; the
    assertion confirms that every window's CDF has reached each level by then.
    """
    qs = list(qs)
    cdf = brute_cdf(lam, int(stats.poisson.ppf(max(qs), lam.max())) + 5)
    result = {}
    for q in qs:
        assert np.all(cdf[-1] >= q)
        result[q] = np.argmax(cdf >= q, axis=0).astype(np.int64)
    return result


# --- (1) all draws equal: the mixture is a single Poisson ---------------------------------------


@pytest.mark.parametrize("mu", [0.3, 4.0, 37.5, 700.0, 900.0, 5000.0])
def test_equal_draws_match_scipy_poisson(mu: float) -> None:
    """Equal draws reduce the mixture to Poisson(mu); reference scipy.stats.poisson ppf/pmf/sf."""
    lam = np.full((40, 3), mu)
    counts = sorted({0, 1, 2, int(mu), int(mu) + 1, int(mu + 3 * np.sqrt(mu)) + 1})
    out = summarise(lam, quantiles=QUANTILES, levels=LEVELS, at_least=counts)
    for q in QUANTILES:
        expected = int(stats.poisson.ppf(q, mu))
        assert out.quantiles[q].tolist() == [expected] * 3, q
        assert mixture_quantile(lam, q).tolist() == [expected] * 3, q
    for level in LEVELS:
        lo, hi = out.intervals[level]
        assert lo.tolist() == [int(stats.poisson.ppf((1 - level) / 2, mu))] * 3
        assert hi.tolist() == [int(stats.poisson.ppf((1 + level) / 2, mu))] * 3
    # Averages of 40 identical values may differ from the value in the last bit only.
    np.testing.assert_allclose(out.p_zero, stats.poisson.pmf(0, mu), rtol=1e-13, atol=0)
    for k in counts:
        np.testing.assert_allclose(out.at_least[k], stats.poisson.sf(k - 1, mu), rtol=1e-13, atol=0)
    np.testing.assert_allclose(out.mean, mu, rtol=1e-14)
    np.testing.assert_allclose(out.sd, np.sqrt(mu), rtol=1e-14)
    ks = np.array([int(mu) - 2, int(mu), int(mu) + 7])
    np.testing.assert_allclose(
        mixture_cdf(lam, ks), stats.poisson.cdf(ks, mu), rtol=1e-13, atol=1e-300
    )


def test_float32_input_is_computed_in_float64() -> None:
    """float32 draws give the quantiles of the float64 value they hold (scipy.stats.poisson.ppf)."""
    lam32 = np.full((25, 2), 37.3, dtype=np.float32)
    mu = float(lam32[0, 0])
    out = summarise(lam32, quantiles=(0.05, 0.5, 0.95))
    for q in (0.05, 0.5, 0.95):
        assert out.quantiles[q].tolist() == [int(stats.poisson.ppf(q, mu))] * 2
    assert out.mean.dtype == np.float64


def test_all_zero_window_is_a_point_mass_at_zero() -> None:
    """Poisson(0) is the point mass at 0 (scipy.stats.poisson.ppf(q, 0) = 0 for every q)."""
    lam = np.zeros((30, 2))
    lam[:, 1] = np.linspace(0.0, 3.0, 30)  # a neighbouring window that is not degenerate
    out = summarise(lam, quantiles=(0.01, 0.5, 0.999), levels=(0.8, 0.99), at_least=(0, 1))
    for q in (0.01, 0.5, 0.999):
        assert out.quantiles[q][0] == 0 == int(stats.poisson.ppf(q, 0.0))
    assert out.intervals[0.99][0][0] == 0 and out.intervals[0.99][1][0] == 0
    assert out.p_zero[0] == 1.0 and out.mean[0] == 0.0 and out.sd[0] == 0.0
    assert out.at_least[0][0] == 1.0 and out.at_least[1][0] == 0.0
    assert mixture_cdf(lam, 0)[0] == 1.0


def test_no_windows_gives_empty_results() -> None:
    out = summarise(np.zeros((10, 0)), quantiles=(0.5,), at_least=(3,))
    assert isinstance(out, MixtureSummary)
    assert out.mean.shape == out.quantiles[0.5].shape == out.intervals[0.8][0].shape == (0,)
    assert mixture_quantile(np.zeros((10, 0)), 0.5).shape == (0,)


# --- (2) heterogeneous draws: brute-force mixture of scipy.stats.poisson ----------------------


def hetero_draws() -> NDArray[np.float64]:
    """Windows from near-empty to thousands, with wide and narrow posterior spread, a zero draw
    and an all-zero window; sizes chosen so every code path (grid from 0, grid from an
    incomplete-gamma base, several grid runs) is used."""
    rng = np.random.default_rng(20240611)
    scales = np.array([0.02, 0.7, 6.0, 30.0, 85.0, 400.0, 2500.0, 4000.0])
    spread = np.array([1.0, 0.6, 0.3, 0.1, 0.5, 0.05, 0.2, 0.02])
    lam = scales * np.exp(spread * rng.standard_normal((150, scales.size)))
    lam[0, 2] = 0.0
    return np.column_stack([lam, np.zeros(150)])


def test_mixture_cdf_matches_brute_force() -> None:
    lam = hetero_draws()
    for k in (0, 1, 3, 7, 30, 90, 410, 2500, 4100):
        expected = stats.poisson.cdf(k, lam).mean(axis=0)
        np.testing.assert_allclose(mixture_cdf(lam, k), expected, rtol=0, atol=1e-12)
    per_window = np.array([0, 1, 5, 28, 80, 399, 2600, 3990, 0])
    expected = stats.poisson.cdf(per_window, lam).mean(axis=0)
    np.testing.assert_allclose(mixture_cdf(lam, per_window), expected, rtol=0, atol=1e-12)
    assert mixture_cdf(lam, -1).tolist() == [0.0] * lam.shape[1]


def test_quantiles_match_brute_force_search() -> None:
    lam = hetero_draws()
    out = summarise(lam, quantiles=QUANTILES, levels=(0.8, 0.95))
    ends = [(1 - level) / 2 for level in (0.8, 0.95)] + [(1 + level) / 2 for level in (0.8, 0.95)]
    expected = brute_quantiles(lam, [*QUANTILES, *ends])
    for q in QUANTILES:
        np.testing.assert_array_equal(out.quantiles[q], expected[q], err_msg=str(q))
        np.testing.assert_array_equal(mixture_quantile(lam, q), expected[q], err_msg=str(q))
    for level in (0.8, 0.95):
        lo, hi = out.intervals[level]
        np.testing.assert_array_equal(lo, expected[(1 - level) / 2])
        np.testing.assert_array_equal(hi, expected[(1 + level) / 2])


def test_small_chunks_and_draw_blocks_give_the_same_answer() -> None:
    """A tiny memory budget forces one window per chunk and splits the draws; the results must
    still equal the brute-force search over scipy.stats.poisson."""
    lam = hetero_draws()
    out = summarise(lam, quantiles=(0.05, 0.5, 0.95), chunk_elements=997)
    expected = brute_quantiles(lam, (0.05, 0.5, 0.95))
    for q in (0.05, 0.5, 0.95):
        np.testing.assert_array_equal(out.quantiles[q], expected[q])


def test_windows_regrouped_by_width_give_the_same_answer() -> None:
    """Alternating narrow and wide grids with a small memory budget make the windows be processed
    out of storage order (grouped by grid width); results must still match scipy.stats.poisson."""
    rng = np.random.default_rng(5)
    scales = np.tile([1.0, 300.0], 30)
    lam = scales * np.exp(0.1 * rng.standard_normal((50, scales.size)))
    qs = (0.05, 0.5, 0.95)
    lo, hi = mixture_module._bracket(np.array(qs), lam.min(axis=0), lam.max(axis=0))
    order = mixture_module._window_order(hi - lo + 1, 50, 4000)
    assert not np.array_equal(order, np.arange(scales.size))  # the regrouping path is taken
    out = summarise(lam, quantiles=qs, chunk_elements=4000)
    expected = brute_quantiles(lam, qs)
    for q in qs:
        np.testing.assert_array_equal(out.quantiles[q], expected[q])
    np.testing.assert_allclose(out.mean, lam.mean(axis=0), rtol=1e-14)


def test_a_bracket_that_misses_is_widened(monkeypatch: pytest.MonkeyPatch) -> None:
    """If the analytic bracket were wrong at either end, the numerical check must catch it and the
    answer must still equal the brute-force search over scipy.stats.poisson."""
    original = mixture_module._bracket

    def too_narrow(levels, lam_min, lam_max):  # type: ignore[no-untyped-def]
        lo, hi = original(levels, lam_min, lam_max)
        return lo + 3, np.maximum(hi - 3, lo + 4)

    redone: list[int] = []
    widen = mixture_module._widen_and_redo

    def counting_widen(lam, todo, *args):  # type: ignore[no-untyped-def]
        redone.append(todo.size)
        return widen(lam, todo, *args)

    monkeypatch.setattr(mixture_module, "_bracket", too_narrow)
    monkeypatch.setattr(mixture_module, "_widen_and_redo", counting_widen)
    lam = hetero_draws()
    out = summarise(lam, quantiles=(0.01, 0.99))
    assert redone and redone[0] > 0
    expected = brute_quantiles(lam, (0.01, 0.99))
    for q in (0.01, 0.99):
        np.testing.assert_array_equal(out.quantiles[q], expected[q])


# --- (3) Monte Carlo: sample the mixture -----------------------------------------------------


def test_monte_carlo_sample_agrees() -> None:
    """2e6 counts drawn from the mixture (draw index uniform, then numpy's Poisson sampler) agree
    with the exact summary within sampling error.  Empirical quantiles use the same definition:
    numpy.quantile(method="inverted_cdf") is Hyndman & Fan (1996) definition 1, the smallest sample
    value whose empirical CDF reaches q [from memory]."""
    rng = np.random.default_rng(7)
    n = 2_000_000
    lam = np.column_stack(
        [
            3.0 * rng.gamma(4.0, 0.25, size=400),  # mean 3: many zeros, jumpy CDF
            55.0 * np.exp(0.3 * rng.standard_normal(400)),
        ]
    )
    levels = np.round(np.arange(0.02, 0.99, 0.02), 2)
    out = summarise(lam, quantiles=tuple(levels), at_least=(1, 5, 80))
    checked = 0
    for w in range(lam.shape[1]):
        sample = rng.poisson(lam[rng.integers(0, lam.shape[0], size=n), w])
        mean, var = sample.mean(), sample.var()
        se_mean = np.sqrt(var / n)
        # Standard errors: mean sqrt(var / n); sample variance sqrt((m4 - var^2) / n), m4 the 4th
        # central moment (large-sample variance of the sample variance) [from memory]; proportion
        # sqrt(p (1 - p) / n).  5 standard errors: a false alarm is a ~1e-6 event per check.
        se_var = np.sqrt((np.mean((sample - mean) ** 4) - var**2) / n)
        assert abs(mean - out.mean[w]) < 5 * se_mean
        assert abs(var - out.sd[w] ** 2) < 5 * se_var
        p0 = np.mean(sample == 0)
        se_p0 = np.sqrt(out.p_zero[w] * (1 - out.p_zero[w]) / n)
        assert abs(p0 - out.p_zero[w]) < 5 * se_p0 + 1e-12
        for k in (1, 5, 80):
            p = out.at_least[k][w]
            assert abs(np.mean(sample >= k) - p) < 5 * np.sqrt(p * (1 - p) / n) + 1e-12
        empirical = np.quantile(sample, levels, method="inverted_cdf")
        for q, emp in zip(levels, empirical, strict=True):
            exact = out.quantiles[float(q)][w]
            below = mixture_cdf(lam[:, [w]], exact - 1)[0]
            at = mixture_cdf(lam[:, [w]], exact)[0]
            # The empirical CDF at a fixed k has standard error sqrt(F (1 - F) / n); away from a
            # jump by 5 of those, the empirical quantile lands on the exact one.
            margin = 5 * np.sqrt(q * (1 - q) / n)
            if q - below > margin and at - q > margin:
                assert emp == exact, (w, q)
                checked += 1
    assert checked >= 40


# --- (4) large expected counts ---------------------------------------------------------------


def test_large_lambda_with_spread_does_not_underflow() -> None:
    """exp(-lam) underflows to 0 beyond lam ~ 745, so a pmf recursion from k = 0 would return 0;
    the results must still match the brute-force search over scipy.stats.poisson."""
    rng = np.random.default_rng(11)
    lam = np.column_stack(
        [
            1e4 * np.exp(0.08 * rng.standard_normal(120)),
            rng.uniform(5e3, 2e4, size=120),  # very wide posterior
            # Two far-apart modes holding 5/12 and 7/12 of the draws; no level sits at 5/12, where
            # F is flat to within rounding across the whole gap.
            np.r_[np.full(50, 5.0), np.full(70, 5000.0)],
        ]
    )
    qs = (0.025, 0.25, 0.5, 0.75, 0.975)
    out = summarise(lam, quantiles=qs, levels=(0.95,))
    assert np.all(out.p_zero[:2] == 0.0)
    expected = brute_quantiles(lam, qs)
    for q in qs:
        np.testing.assert_array_equal(out.quantiles[q], expected[q], err_msg=str(q))
    assert out.quantiles[0.25][2] < 10 < 4500 < out.quantiles[0.5][2]


# --- (5) bad input --------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("lam", "message"),
    [
        (np.array([[1.0, np.nan], [2.0, 3.0]]), "lam[0, 1] = nan"),
        (np.array([[1.0, 2.0], [-0.5, 3.0]]), "lam[1, 0] = -0.5"),
        (np.array([[1.0, 2.0], [3.0, np.inf]]), "lam[1, 1] = inf"),
        (np.ones(5), "shape (5,)"),
        (np.ones((0, 3)), "shape (0, 3)"),
        (np.array([["a"]]), "dtype <U1"),
    ],
)
def test_bad_lam_is_refused(lam: NDArray[np.float64], message: str) -> None:
    for call in (
        lambda: summarise(lam),
        lambda: mixture_cdf(lam, 1),
        lambda: mixture_quantile(lam, 0.5),
    ):
        with pytest.raises(InputError, match=re.escape(message)):
            call()


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"quantiles": (0.5, 0.0)}, "quantile level 0.0"),
        ({"quantiles": (1.0,)}, "quantile level 1.0"),
        ({"quantiles": (float("nan"),)}, "quantile level nan"),
        ({"quantiles": ("0.5",)}, "quantile level '0.5'"),
        ({"levels": (0.8, 1.2)}, "interval level 1.2"),
        ({"levels": (-0.1,)}, "interval level -0.1"),
        ({"at_least": (-1,)}, "at_least value -1"),
        ({"at_least": (2.5,)}, "at_least value 2.5"),
        ({"at_least": (True,)}, "at_least value True"),
        ({"chunk_elements": 0}, "chunk_elements 0"),
    ],
)
def test_bad_options_are_refused(kwargs: dict[str, object], message: str) -> None:
    with pytest.raises(InputError, match=re.escape(message)) as info:
        summarise(np.ones((4, 2)), **kwargs)  # type: ignore[arg-type]
    assert "allowed" in str(info.value)


def test_bad_k_and_q_are_refused() -> None:
    lam = np.ones((4, 3))
    with pytest.raises(InputError, match=re.escape("k = 1.5")):
        mixture_cdf(lam, 1.5)
    with pytest.raises(InputError, match=re.escape("shape (2,)")):
        mixture_cdf(lam, np.array([1, 2]))
    with pytest.raises(InputError, match=re.escape("quantile level 1.5")):
        mixture_quantile(lam, 1.5)
    assert issubclass(InputError, ValueError)


# --- (6) properties -------------------------------------------------------------------------


lam_arrays = st.integers(1, 12).flatmap(
    lambda draws: st.integers(1, 3).flatmap(
        lambda windows: st.lists(
            st.one_of(st.just(0.0), st.floats(0.0, 300.0)),
            min_size=draws * windows,
            max_size=draws * windows,
        ).map(lambda values: np.array(values).reshape(draws, windows))
    )
)
open_unit = st.floats(0.001, 0.999)


@settings(max_examples=60, deadline=None, derandomize=True)
@given(
    lam=lam_arrays,
    qs=st.lists(open_unit, min_size=1, max_size=6),
    levels=st.lists(open_unit, min_size=1, max_size=4),
)
def test_quantiles_monotone_and_intervals_nested(
    lam: NDArray[np.float64], qs: list[float], levels: list[float]
) -> None:
    out = summarise(lam, quantiles=qs, levels=levels)
    ordered = sorted(set(qs))
    for a, b in itertools.pairwise(ordered):
        assert np.all(out.quantiles[a] <= out.quantiles[b])
    wide = sorted(set(levels))
    for narrow, wider in itertools.pairwise(wide):
        assert np.all(out.intervals[wider][0] <= out.intervals[narrow][0])
        assert np.all(out.intervals[narrow][1] <= out.intervals[wider][1])
    for level in wide:
        assert np.all(out.intervals[level][0] <= out.intervals[level][1])
    # Definition check against scipy.stats.poisson: F(Q - 1) < q <= F(Q), up to rounding.
    for q in ordered:
        k = out.quantiles[q]
        at = stats.poisson.cdf(k, lam).mean(axis=0)
        below = stats.poisson.cdf(k - 1, lam).mean(axis=0)
        assert np.all(at >= q - 1e-12) and np.all(below < q + 1e-12)


@pytest.mark.parametrize("scale", [0.4, 6.0, 60.0, 400.0])
def test_tail_probabilities_equal_the_mean_of_scipy_poisson_tails(scale: float) -> None:
    """P(N >= k) is mean_d P(Poisson(lam_d) >= k), reference scipy.stats.poisson.sf per draw;
    covers tails read off the quantile grid (grids from 0, tail >= 0.05) and the
    incomplete-gamma path (small tails, grids anchored above 0)."""
    rng = np.random.default_rng(17)
    lam = scale * np.exp(0.4 * rng.standard_normal((300, 25)))
    centre = int(scale)
    counts = sorted({1, 2, max(1, centre // 2), centre + 1, 2 * centre + 3, 4 * centre + 10})
    out = summarise(lam, levels=(0.8, 0.95), at_least=counts)
    for k in counts:
        expected = stats.poisson.sf(k - 1, lam).mean(axis=0)
        np.testing.assert_allclose(out.at_least[k], expected, rtol=1e-12, atol=1e-300)

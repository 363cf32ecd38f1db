"""Scoring rules for probabilistic forecasts of counts per window.

Every function is vectorised over windows. The predictive distributions scored here are

* a Poisson law with mean ``mu`` (:func:`crps_poisson`),
* a negative binomial law in SciPy's ``nbinom(n, p)`` parameterisation, i.e. the number of failures
  before the ``n``-th success, mean ``n (1 - p) / p`` (:func:`crps_negbin`),
* the equal-weight mixture over posterior draws ``d`` of ``Poisson(lam_draws[d, w])``, which is what
  a fitted Bayesian rate model predicts for window ``w`` (:func:`crps_poisson_mixture`,
  :func:`pit_poisson_mixture`).

Definitions
-----------
* Continuous ranked probability score of a count forecast with CDF ``F`` and outcome ``y``
  (Gneiting & Raftery, JASA 102(477), 2007; Czado, Gneiting & Held, Biometrics 65(4), 2009)::

      CRPS(F, y) = sum_{k >= 0} (F(k) - 1{y <= k})^2 = E|X - y| - E|X - X'| / 2.

  Lower is better; it is in units of counts, and a point forecast scores its absolute error.
* Poisson closed form (Wei & Held, TEST 23(4), 2014)::

      CRPS = (y - l)(2 F(y) - 1) + 2 l f(y) - l exp(-2l) (I0(2l) + I1(2l)).

  ``exp(-2l) I_v(2l)`` is evaluated as ``scipy.special.ive(v, 2l)`` so large rates do not overflow.
* Non-randomised probability integral transform (PIT) of Czado, Gneiting & Held (2009): with
  ``lower = F(y - 1)`` and ``upper = F(y)``::

      F(u | y) = 0                                   if u <= lower
               = (u - lower) / (upper - lower)       if lower < u < upper
               = 1                                   if u >= upper.

  The PIT histogram is the mean over windows of the increments of ``F(u | y)`` across equal bins
  of ``[0, 1]``; a calibrated forecast gives about ``1 / bins`` in every bin.
* Interval score of a central ``(1 - alpha)`` interval ``[l, u]`` (Gneiting & Raftery 2007,
  eq. 43)::

      IS = (u - l) + (2 / alpha) (l - y)+ + (2 / alpha) (y - u)+.

Accuracy of the summed scores
-----------------------------
:func:`crps_negbin` and :func:`crps_poisson_mixture` sum the series above exactly on a grid of
counts ``[lo, hi]`` with ``F(lo - 1) < tail`` and ``1 - F(hi) <= tail`` (``tail = 1e-12`` by
default; for the mixture ``lo`` comes from the smallest draw and ``hi`` from the largest, since a
Poisson CDF falls as its mean rises). Outside the grid each term is replaced by its limit,
``1{y <= k}`` below and ``1{y > k}`` above, and those are counted in closed form. A replaced term
is off by at most ``2 tail`` where ``y`` lies beyond the grid and by ``tail^2``-small amounts
elsewhere, so the error is below ``2 tail`` times the distance from ``y`` to the grid, plus
rounding: a relative error of order 1e-12 however far ``y`` lies from the forecast mass.

Working memory beyond the inputs is bounded by about ``max_elements`` float64 values (16 MiB by
default): windows are taken in chunks of similar grid width, and a grid too wide for one chunk is
walked in blocks.

Caution
-------
These scores rank forecasts; they do not make a forecast safe to staff from. Forecasts are
probabilistic and staffing figures derived from them are advisory: local labour rules and the
licensed or responsible people who plan the rota decide.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
import numpy.typing as npt
from scipy import special, stats

from models.exceptions import CountError, InputError

__all__ = [
    "coverage",
    "crps_negbin",
    "crps_poisson",
    "crps_poisson_mixture",
    "interval_score",
    "pit_histogram",
    "pit_interval",
    "pit_poisson_mixture",
    "pit_value",
]

FloatArray = npt.NDArray[np.float64]
IntArray = npt.NDArray[np.int64]
# Maps a chunk's window indices to a function of (count grid, CDF just below the grid) -> CDF.
_Prepare = Callable[[IntArray], Callable[[FloatArray, "FloatArray | None"], FloatArray]]

DEFAULT_TAIL = 1e-12
DEFAULT_MAX_ELEMENTS = 2**21
# log of a zero rate would be -inf and 0 * -inf is nan; a rate of 1e-308 has the same pmf to
# double precision (P(X = 1) ~ 1e-308).
_TINY_RATE = np.finfo(np.float64).tiny


# --------------------------------------------------------------------------- input checks


def _where(mask: npt.NDArray[np.bool_]) -> str:
    """Describe the first True position of ``mask`` for an error message."""
    if mask.ndim == 0:
        return ""
    position = tuple(int(i) for i in np.argwhere(mask)[0])
    return f" at index {position[0] if len(position) == 1 else position}"


def _as_float_array(value: npt.ArrayLike, name: str) -> FloatArray:
    try:
        array = np.asarray(value, dtype=np.float64)
    except (TypeError, ValueError) as error:
        raise InputError(f"{name} must be numeric; got {value!r}") from error
    return array


def _as_counts(value: npt.ArrayLike, name: str = "y") -> FloatArray:
    counts = _as_float_array(value, name)
    with np.errstate(invalid="ignore"):
        bad = ~np.isfinite(counts) | (counts < 0) | (counts != np.floor(counts))
    if bad.any():
        first = counts[tuple(np.argwhere(bad)[0])] if counts.ndim else counts
        raise CountError(f"{name} must hold whole counts >= 0; got {float(first)!r}{_where(bad)}")
    return counts


def _as_bounded(
    value: npt.ArrayLike,
    name: str,
    *,
    low: float,
    high: float = np.inf,
    low_open: bool = False,
    allowed: str,
) -> FloatArray:
    array = _as_float_array(value, name)
    with np.errstate(invalid="ignore"):
        below = array <= low if low_open else array < low
        bad = ~np.isfinite(array) | below | (array > high)
    if bad.any():
        first = array[tuple(np.argwhere(bad)[0])] if array.ndim else array
        raise InputError(f"{name} must be {allowed}; got {float(first)!r}{_where(bad)}")
    return array


def _same_shape(**arrays: FloatArray) -> tuple[FloatArray, ...]:
    """Broadcast scalars against the arrays; arrays must all share one shape."""
    shapes = {name: a.shape for name, a in arrays.items() if a.ndim > 0}
    if len(set(shapes.values())) > 1:
        listed = ", ".join(f"{name} has shape {shape}" for name, shape in shapes.items())
        raise InputError(
            f"shapes do not match: {listed}; give arrays of one shape (scalars are also accepted)"
        )
    return tuple(np.broadcast_arrays(*arrays.values()))


def _check_alpha(alpha: float) -> float:
    if not (isinstance(alpha, (int, float, np.floating)) and 0.0 < float(alpha) < 1.0):
        raise InputError(f"alpha must be a number strictly between 0 and 1; got {alpha!r}")
    return float(alpha)


def _check_interval(lower: FloatArray, upper: FloatArray) -> None:
    bad = lower > upper
    if bad.any():
        i = tuple(np.argwhere(bad)[0]) if bad.ndim else ()
        raise InputError(
            f"lower must not exceed upper; got lower={float(lower[i])!r} > "
            f"upper={float(upper[i])!r}{_where(bad)}"
        )


def _check_options(tail: float, max_elements: int) -> None:
    if not (isinstance(tail, (int, float)) and 0.0 < tail < 0.5):
        raise InputError(f"tail must be a probability in (0, 0.5); got {tail!r}")
    if not (isinstance(max_elements, (int, np.integer)) and max_elements >= 1):
        raise InputError(f"max_elements must be a positive integer; got {max_elements!r}")


def _check_draws(y: npt.ArrayLike, lam_draws: npt.ArrayLike) -> tuple[FloatArray, FloatArray]:
    lam = _as_bounded(lam_draws, "lam_draws", low=0.0, allowed="finite rates >= 0")
    if lam.ndim != 2 or lam.shape[0] == 0:
        raise InputError(
            f"lam_draws must be a 2-D array of shape (draws, windows) with at least one draw; "
            f"got shape {lam.shape}"
        )
    counts = _as_counts(y)
    if counts.shape != (lam.shape[1],):
        raise InputError(
            f"y must have shape (windows,) = {(lam.shape[1],)} to match lam_draws of shape "
            f"{lam.shape}; got shape {counts.shape}"
        )
    return counts, lam


# --------------------------------------------------------------------------- CRPS


def crps_poisson(y: npt.ArrayLike, mu: npt.ArrayLike) -> FloatArray:
    """CRPS of Poisson forecasts, in closed form.

    Parameters
    ----------
    y
        Observed counts (whole numbers >= 0), one per window.
    mu
        Poisson means (>= 0, finite), one per window. A scalar applies to every window.

    Returns
    -------
    numpy.ndarray
        CRPS per window, in counts; shape of the inputs (0-d for scalars).

    Raises
    ------
    models.exceptions.CountError
        If a count is negative, fractional or not finite.
    models.exceptions.InputError
        If a mean is negative or not finite, or the shapes differ.

    Notes
    -----
    Wei & Held, TEST 23(4), 2014: ``(y - l)(2F(y) - 1) + 2 l f(y) - l e^{-2l}(I0(2l) + I1(2l))``.
    A zero mean is a point forecast of 0 and scores ``y``.

    Examples
    --------
    >>> round(float(crps_poisson(1, 3.0)), 6)
    1.143447
    >>> crps_poisson([0, 5], [1.0, 5.0]).round(7)
    array([0.4762224, 0.5091936])
    """
    counts = _as_counts(y)
    means = _as_bounded(mu, "mu", low=0.0, allowed="a finite mean >= 0")
    counts, means = _same_shape(y=counts, mu=means)
    cdf = special.pdtr(counts, means)
    pmf = np.exp(special.xlogy(counts, means) - means - special.gammaln(counts + 1.0))
    half_mean_gap = means * (special.ive(0, 2.0 * means) + special.ive(1, 2.0 * means))
    return np.asarray((counts - means) * (2.0 * cdf - 1.0) + 2.0 * means * pmf - half_mean_gap)


def crps_negbin(
    y: npt.ArrayLike,
    n: npt.ArrayLike,
    p: npt.ArrayLike,
    *,
    tail: float = DEFAULT_TAIL,
    max_elements: int = DEFAULT_MAX_ELEMENTS,
) -> FloatArray:
    """CRPS of negative binomial forecasts, summed exactly over the support.

    Parameters
    ----------
    y
        Observed counts (whole numbers >= 0), one per window.
    n
        Number of successes (> 0, need not be whole), as in ``scipy.stats.nbinom``.
    p
        Success probability in (0, 1]; the mean is ``n (1 - p) / p``; ``p = 1`` is a point mass
        at 0.
    tail
        Probability left outside the summed grid in each tail; see the module notes for the
        resulting error bound.
    max_elements
        Working-space budget in float64 values.

    Returns
    -------
    numpy.ndarray
        CRPS per window, in counts; shape of the inputs (0-d for scalars).

    Raises
    ------
    models.exceptions.CountError
        If a count is negative, fractional or not finite.
    models.exceptions.InputError
        If ``n <= 0``, ``p`` is outside (0, 1], the shapes differ, or an option is out of range.

    Notes
    -----
    The grid width grows like the spread of the law: about ``27.6 / p`` counts for a heavy tail
    (small ``n`` and ``p``), so ``p = 1e-6`` means summing some 3e7 terms for that window.

    Examples
    --------
    >>> round(float(crps_negbin(2, 7, 0.8)), 7)
    0.3834322
    """
    _check_options(tail, max_elements)
    counts = _as_counts(y)
    sizes = _as_bounded(n, "n", low=0.0, low_open=True, allowed="a finite number > 0")
    probs = _as_bounded(p, "p", low=0.0, high=1.0, low_open=True, allowed="a probability in (0, 1]")
    counts, sizes, probs = _same_shape(y=counts, n=sizes, p=probs)
    shape = counts.shape
    counts, sizes, probs = counts.ravel(), sizes.ravel(), probs.ravel()
    lo = stats.nbinom.ppf(tail, sizes, probs)
    hi = stats.nbinom.ppf(1.0 - tail, sizes, probs)

    def prepare(rows: IntArray) -> Callable[[FloatArray, FloatArray | None], FloatArray]:
        size_rows = sizes[rows, None]
        prob_rows = probs[rows, None]

        def cdf(k: FloatArray, below: FloatArray | None) -> FloatArray:
            # P(X <= k) = I_p(n, k + 1), the regularised incomplete beta function.
            return np.asarray(special.betainc(size_rows, k + 1.0, prob_rows))

        return cdf

    total = _sum_squared_cdf_gap(
        counts, lo, hi, prepare, cells_per_point=1, max_elements=max_elements
    )
    return total.reshape(shape)


def crps_poisson_mixture(
    y: npt.ArrayLike,
    lam_draws: npt.ArrayLike,
    *,
    tail: float = DEFAULT_TAIL,
    max_elements: int = DEFAULT_MAX_ELEMENTS,
) -> FloatArray:
    """Exact CRPS of equal-weight Poisson mixtures over posterior draws.

    Parameters
    ----------
    y
        Observed counts, shape ``(windows,)``.
    lam_draws
        Posterior draws of the expected count, shape ``(draws, windows)``, each finite and >= 0.
        The forecast for window ``w`` is the mixture over ``d`` of ``Poisson(lam_draws[d, w])``.
    tail
        Mixture probability left outside the summed grid in each tail; see the module notes.
    max_elements
        Working-space budget in float64 values (at least ``draws`` are always used).

    Returns
    -------
    numpy.ndarray
        CRPS per window, in counts, shape ``(windows,)``.

    Raises
    ------
    models.exceptions.CountError
        If a count is negative, fractional or not finite.
    models.exceptions.InputError
        If ``lam_draws`` is not 2-D, holds a negative or non-finite rate, does not match ``y``,
        or an option is out of range.

    Notes
    -----
    The mixture pmf on the grid is the mean over draws of
    ``exp(k log l - l - log k!)``, which never overflows; its running sum is the CDF, started
    from the exact mixture CDF just below the grid. The cost is about ``draws x grid width``
    exponentials per window (grid width ~ 70 at rates near 20).

    Examples
    --------
    >>> import numpy as np
    >>> draws = np.array([[3.0, 1.0], [3.0, 1.0]])
    >>> crps_poisson_mixture([1, 0], draws).round(6)
    array([1.143447, 0.476222])
    """
    _check_options(tail, max_elements)
    counts, lam = _check_draws(y, lam_draws)
    n_draws = lam.shape[0]
    lo = stats.poisson.ppf(tail, lam.min(axis=0))
    hi = stats.poisson.ppf(1.0 - tail, lam.max(axis=0))
    # One buffer reused by every chunk: fresh large arrays cost page faults on each allocation.
    work_space = np.empty(max(max_elements, n_draws))

    def prepare(rows: IntArray) -> Callable[[FloatArray, FloatArray | None], FloatArray]:
        rates = np.ascontiguousarray(lam[:, rows].T)
        log_rates = np.log(np.maximum(rates, _TINY_RATE))

        def cdf(k: FloatArray, below: FloatArray | None) -> FloatArray:
            n_rows, width = k.shape
            work = work_space[: n_rows * n_draws * width].reshape(n_rows, n_draws, width)
            np.multiply(log_rates[:, :, None], k[:, None, :], out=work)
            work -= rates[:, :, None]
            work -= special.gammaln(k + 1.0)[:, None, :]
            np.exp(work, out=work)
            pmf = work.mean(axis=1)
            if below is None:
                below = _mixture_cdf(k[:, 0] - 1.0, rates)
            return np.asarray(below[:, None] + np.cumsum(pmf, axis=1))

        return cdf

    return _sum_squared_cdf_gap(
        counts, lo, hi, prepare, cells_per_point=n_draws, max_elements=max_elements
    )


def _mixture_cdf(k: FloatArray, rates: FloatArray) -> FloatArray:
    """Mixture CDF at ``k[i]`` over the draws ``rates[i, :]``; 0 for ``k < 0``."""
    out = np.zeros(k.shape)
    inside = k >= 0
    if inside.any():
        out[inside] = special.pdtr(k[inside, None], rates[inside]).mean(axis=1)
    return out


def _sum_squared_cdf_gap(
    y: FloatArray,
    lo: FloatArray,
    hi: FloatArray,
    prepare: _Prepare,
    *,
    cells_per_point: int,
    max_elements: int,
) -> FloatArray:
    """``sum_k (F(k) - 1{y <= k})^2`` per window, summed on ``[lo, hi]`` and closed-form outside.

    ``prepare(rows)`` returns ``cdf(k, below)`` giving F on a grid ``k`` of shape (rows, width),
    contiguous along each row; ``below`` is F just below the grid, or None for the first block.
    """
    widths = (hi - lo + 1.0).astype(np.int64)
    order = np.argsort(widths, kind="stable")
    points_budget = max(1, max_elements // cells_per_point)
    out = np.empty(y.shape)
    start = 0
    while start < y.size:
        # Windows are sorted by width, so a chunk's widest window is its last one.
        candidates = order[start : start + points_budget]
        cost = np.arange(1, candidates.size + 1) * widths[candidates]
        n_rows = max(1, int(np.searchsorted(cost, points_budget, side="right")))
        rows = np.sort(candidates[:n_rows])
        start += n_rows
        width = int(widths[rows].max())
        block = max(1, points_budget // n_rows)
        lo_rows, y_rows = lo[rows], y[rows]
        cdf = prepare(rows)
        total = np.zeros(n_rows)
        below: FloatArray | None = None
        for offset in range(0, width, block):
            steps = np.arange(offset, min(offset + block, width), dtype=np.float64)
            k = lo_rows[:, None] + steps[None, :]
            values = cdf(k, below)
            gap = values - (k >= y_rows[:, None])
            total += np.einsum("ij,ij->i", gap, gap)
            below = values[:, -1]
        # Below the grid F ~ 0 so a term is 1{y <= k}; above it F ~ 1 so a term is 1{y > k}.
        top = lo_rows + width - 1.0
        total += np.maximum(lo_rows - y_rows, 0.0) + np.maximum(y_rows - top - 1.0, 0.0)
        out[rows] = total
    return out


# --------------------------------------------------------------------------- PIT


def pit_interval(
    y: npt.ArrayLike, cdf_fn: Callable[[FloatArray], npt.ArrayLike]
) -> tuple[FloatArray, FloatArray]:
    """PIT interval ``(F(y - 1), F(y))`` of count forecasts given by a CDF.

    Parameters
    ----------
    y
        Observed counts (whole numbers >= 0).
    cdf_fn
        Predictive CDF: takes a float array of counts shaped like ``y`` and returns ``F`` at those
        counts, element by element (e.g. ``lambda k: scipy.stats.poisson.cdf(k, mu)``).

    Returns
    -------
    tuple of numpy.ndarray
        ``(lower, upper)`` = ``(F(y - 1), F(y))``, shaped like ``y``; ``lower`` is 0 where y = 0.

    Raises
    ------
    models.exceptions.CountError
        If a count is negative, fractional or not finite.
    models.exceptions.InputError
        If ``cdf_fn`` returns the wrong shape, values outside [0, 1] or a decreasing CDF.

    Examples
    --------
    >>> from scipy import stats
    >>> lower, upper = pit_interval([0, 2], lambda k: stats.poisson.cdf(k, 3.0))
    >>> lower.round(6), upper.round(6)
    (array([0.      , 0.199148]), array([0.049787, 0.42319 ]))
    """
    counts = _as_counts(y)
    upper = _cdf_values(cdf_fn, counts, "cdf_fn(y)")
    below = _cdf_values(cdf_fn, np.maximum(counts - 1.0, 0.0), "cdf_fn(y - 1)")
    lower = np.where(counts > 0, below, 0.0)
    _check_interval(lower, upper)
    return lower, upper


def _cdf_values(
    cdf_fn: Callable[[FloatArray], npt.ArrayLike], k: FloatArray, name: str
) -> FloatArray:
    values = _as_bounded(cdf_fn(k), name, low=0.0, high=1.0, allowed="a probability in [0, 1]")
    if values.shape != k.shape:
        raise InputError(f"{name} must have the shape of y, {k.shape}; got shape {values.shape}")
    return values


def pit_poisson_mixture(
    y: npt.ArrayLike,
    lam_draws: npt.ArrayLike,
    *,
    max_elements: int = DEFAULT_MAX_ELEMENTS,
) -> tuple[FloatArray, FloatArray]:
    """PIT interval ``(F(y - 1), F(y))`` of equal-weight Poisson mixtures over posterior draws.

    Parameters
    ----------
    y
        Observed counts, shape ``(windows,)``.
    lam_draws
        Posterior draws of the expected count, shape ``(draws, windows)``.
    max_elements
        Working-space budget in float64 values.

    Returns
    -------
    tuple of numpy.ndarray
        ``(lower, upper)``, each of shape ``(windows,)``.

    Raises
    ------
    models.exceptions.CountError
        If a count is negative, fractional or not finite.
    models.exceptions.InputError
        If ``lam_draws`` is not 2-D, holds a negative or non-finite rate, or does not match ``y``.

    Examples
    --------
    >>> import numpy as np
    >>> lower, upper = pit_poisson_mixture([2], np.full((4, 1), 3.0))
    >>> round(float(pit_value(0.3, lower, upper)[0]), 6)
    0.450147
    """
    _check_options(DEFAULT_TAIL, max_elements)
    counts, lam = _check_draws(y, lam_draws)
    n_draws, n_windows = lam.shape
    upper = np.empty(n_windows)
    point = np.empty(n_windows)
    step = max(1, max_elements // n_draws)
    for start in range(0, n_windows, step):
        cols = slice(start, start + step)
        rates, k = lam[:, cols], counts[cols]
        upper[cols] = special.pdtr(k, rates).mean(axis=0)
        point[cols] = np.exp(special.xlogy(k, rates) - rates - special.gammaln(k + 1.0)).mean(
            axis=0
        )
    upper = np.clip(upper, 0.0, 1.0)
    # F(y - 1) = F(y) - P(Y = y): one incomplete gamma per draw instead of two.
    lower = np.where(counts > 0, np.clip(upper - point, 0.0, upper), 0.0)
    return lower, upper


def pit_value(u: npt.ArrayLike, lower: npt.ArrayLike, upper: npt.ArrayLike) -> FloatArray:
    """Non-randomised PIT function ``F(u | y)`` of Czado, Gneiting & Held (2009).

    Parameters
    ----------
    u
        Point(s) in [0, 1]; a scalar or an array shaped like ``lower``.
    lower, upper
        ``F(y - 1)`` and ``F(y)`` per window, from :func:`pit_interval` or
        :func:`pit_poisson_mixture`.

    Returns
    -------
    numpy.ndarray
        ``F(u | y)`` per window. Where ``lower == upper`` (an outcome given zero probability) it
        steps from 0 to 1 at ``u = upper``.

    Raises
    ------
    models.exceptions.InputError
        If a value is outside [0, 1], ``lower > upper``, or the shapes differ.

    Examples
    --------
    >>> pit_value(0.3, [0.2, 0.0, 0.5], [0.4, 0.2, 0.9])
    array([0.5, 1. , 0. ])
    """
    points = _as_bounded(u, "u", low=0.0, high=1.0, allowed="a number in [0, 1]")
    low, high = _check_pit_bounds(lower, upper)
    points, low, high = _same_shape(u=points, lower=low, upper=high)
    return _pit_function(points, low, high)


def _check_pit_bounds(lower: npt.ArrayLike, upper: npt.ArrayLike) -> tuple[FloatArray, FloatArray]:
    allowed = "a probability in [0, 1]"
    low = _as_bounded(lower, "lower", low=0.0, high=1.0, allowed=allowed)
    high = _as_bounded(upper, "upper", low=0.0, high=1.0, allowed=allowed)
    low, high = _same_shape(lower=low, upper=high)
    _check_interval(low, high)
    return low, high


def _pit_function(u: FloatArray, lower: FloatArray, upper: FloatArray) -> FloatArray:
    with np.errstate(divide="ignore", invalid="ignore"):
        inside = (u - lower) / (upper - lower)
    return np.asarray(np.where(u <= lower, 0.0, np.where(u >= upper, 1.0, inside)))


def pit_histogram(lower: npt.ArrayLike, upper: npt.ArrayLike, *, bins: int = 10) -> FloatArray:
    """Non-randomised PIT histogram (Czado, Gneiting & Held, Biometrics 65(4), 2009).

    Parameters
    ----------
    lower, upper
        ``F(y - 1)`` and ``F(y)`` per window.
    bins
        Number of equal bins on [0, 1].

    Returns
    -------
    numpy.ndarray
        Share of the windows' PIT mass in each bin, shape ``(bins,)``, summing to 1. A calibrated
        forecast gives about ``1 / bins`` everywhere; a U shape means the forecasts are too
        narrow, a hump that they are too wide.

    Raises
    ------
    models.exceptions.InputError
        If there are no windows, a value is outside [0, 1], ``lower > upper``, or ``bins < 1``.

    Examples
    --------
    >>> pit_histogram([0.2], [0.4], bins=10)
    array([0. , 0. , 0.5, 0.5, 0. , 0. , 0. , 0. , 0. , 0. ])
    """
    if isinstance(bins, bool) or not isinstance(bins, (int, np.integer)) or bins < 1:
        raise InputError(f"bins must be a whole number >= 1; got {bins!r}")
    low, high = _check_pit_bounds(lower, upper)
    if low.size == 0:
        raise InputError("lower and upper hold no windows; a PIT histogram needs at least one")
    edges = np.linspace(0.0, 1.0, int(bins) + 1)
    curve = _pit_function(edges[None, :], low.reshape(-1, 1), high.reshape(-1, 1))
    return np.asarray(np.diff(curve, axis=1).mean(axis=0))


# --------------------------------------------------------------------------- intervals


def interval_score(
    y: npt.ArrayLike, lower: npt.ArrayLike, upper: npt.ArrayLike, *, alpha: float
) -> FloatArray:
    """Interval score of central ``(1 - alpha)`` prediction intervals (lower is better).

    Parameters
    ----------
    y
        Observed counts (whole numbers >= 0).
    lower, upper
        Interval bounds per window (finite, ``lower <= upper``); ideally the ``alpha / 2`` and
        ``1 - alpha / 2`` predictive quantiles.
    alpha
        Nominal miss probability in (0, 1); e.g. 0.2 for an 80% interval.

    Returns
    -------
    numpy.ndarray
        ``(u - l) + (2/alpha)(l - y)+ + (2/alpha)(y - u)+`` per window (Gneiting & Raftery,
        JASA 102(477), 2007, eq. 43).

    Raises
    ------
    models.exceptions.CountError
        If a count is negative, fractional or not finite.
    models.exceptions.InputError
        If a bound is not finite, ``lower > upper``, the shapes differ or ``alpha`` is outside
        (0, 1).

    Examples
    --------
    >>> interval_score([5, 1, 10], [2, 2, 2], [8, 8, 8], alpha=0.2)
    array([ 6., 16., 26.])
    """
    level = _check_alpha(alpha)
    counts, low, high = _checked_intervals(y, lower, upper)
    penalty = 2.0 / level
    return np.asarray(
        (high - low)
        + penalty * np.maximum(low - counts, 0.0)
        + penalty * np.maximum(counts - high, 0.0)
    )


def coverage(y: npt.ArrayLike, lower: npt.ArrayLike, upper: npt.ArrayLike) -> float:
    """Share of windows whose count lies in ``[lower, upper]``, bounds included.

    Parameters
    ----------
    y
        Observed counts (whole numbers >= 0).
    lower, upper
        Interval bounds per window (finite, ``lower <= upper``).

    Returns
    -------
    float
        Empirical coverage in [0, 1]. For count forecasts with quantile bounds it tends to exceed
        the nominal level, since a discrete interval holds at least its nominal probability.

    Raises
    ------
    models.exceptions.CountError
        If a count is negative, fractional or not finite.
    models.exceptions.InputError
        If there are no windows, a bound is not finite, ``lower > upper`` or the shapes differ.

    Examples
    --------
    >>> coverage([1, 5, 9, 3], [1, 2, 2, 4], [4, 5, 8, 6])
    0.5
    """
    counts, low, high = _checked_intervals(y, lower, upper)
    if counts.size == 0:
        raise InputError("y holds no windows; coverage needs at least one")
    return float(np.mean((low <= counts) & (counts <= high)))


def _checked_intervals(
    y: npt.ArrayLike, lower: npt.ArrayLike, upper: npt.ArrayLike
) -> tuple[FloatArray, FloatArray, FloatArray]:
    counts = _as_counts(y)
    low = _as_bounded(lower, "lower", low=-np.inf, allowed="a finite number")
    high = _as_bounded(upper, "upper", low=-np.inf, allowed="a finite number")
    counts, low, high = _same_shape(y=counts, lower=low, upper=high)
    _check_interval(low, high)
    return counts, low, high

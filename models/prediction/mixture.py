"""Exact predictive count distribution from posterior draws of an expected count.

A fitted model gives, for every forecast window ``w``, posterior draws ``lam[d, w]`` of the expected
count Lambda.  The predictive count ``N_w`` is the equal-weight mixture over draws of
``Poisson(lam[d, w])``.  This module summarises that mixture exactly (no sampling noise): its CDF is
evaluated on the integer grid where the requested quantiles must lie, so every quantile is the exact
smallest integer ``k`` with ``F(k) >= q``, up to floating-point rounding of ``F``.

Quantile and interval convention
--------------------------------
The quantile at level ``q`` is ``Q(q) = min{k integer : F(k) >= q}``, ``F`` the exact mixture
CDF.  The central interval at level ``L`` is ``[Q((1 - L) / 2), Q((1 + L) / 2)]`` (both ends
inclusive), with the two levels computed as written in floating point.  Because counts are discrete
the interval covers *at least* ``L`` of the predictive probability, usually more.

Forecasts are probabilistic: these are statements about the model's predictive distribution, not
guarantees, and any staffing derived from them is advisory.

Method
------
All requested levels lie in ``[kL, kU]``, ``kL`` the Poisson quantile of the smallest draw at the
lowest level and ``kU`` that of the largest draw at the highest level, because the Poisson CDF
decreases in its mean.  The mixture pmf is evaluated on that grid (or from 0 when ``kL`` is
small, which is cheaper than an incomplete-gamma call per draw), averaged over draws, cumulated and
added to the base ``F(kL - 1)``.  Both ends are then checked numerically and the grid widened where
rounding defeats the bracket.

Each run of up to ``_SEGMENT`` grid points is anchored per draw by the log-space pmf
``k log(lam) - lam - gammaln(k + 1)``, which does not underflow for large ``lam`` (the plain
recursion from ``k = 0`` does beyond ``lam ~ 700``).  Within the run the pmf ratios
``lam / (k + 1)`` are split into a per-draw part ``lam / m`` and a per-grid-point part
``m / (k + 1)`` that is pulled out of the sum over draws, so that sum becomes a small matrix product
(powers of ``lam / m``, blocked ``ceil(sqrt(run))`` at a time).  This needs about
``2 sqrt(run)`` multiplications per draw and grid run instead of an ``exp`` per draw and grid point.

Range: with ``m`` mid-run a scaled value is the pmf times a factor between about ``exp(-run / 2)``
and 1, so nothing overflows and only pmf values below about 1e-250 can underflow.  A draw whose pmf
underflows at a run's anchor (below 1e-308) stays below 1e-85 for the rest of the run (checked
numerically for ``100 <= lam <= 1e7``), so what the recursion drops is far below double precision.
"""

from __future__ import annotations

import math
import typing
from collections.abc import Iterable
from dataclasses import dataclass
from numbers import Integral, Real

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy import special

from models.exceptions import InputError

__all__ = ["MixtureSummary", "mixture_cdf", "mixture_quantile", "summarise"]

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]
BoolArray = NDArray[np.bool_]

# Grid points per log-space anchor.  Longer runs mean fewer exp calls, but the mid-run scale drifts
# further from the pmf at the run ends (by up to exp(run / 2) when the run starts at 0).
_SEGMENT = 256
# When the lower bracket is below this, summing the pmf from 0 costs less than one incomplete-gamma
# evaluation per draw (about 100 ns against well under 1 ns per grid point and draw).
_GRID_FROM_ZERO_BELOW = 256
# Floats of working memory per chunk of windows.  Tuned on the reference machine (2 MiB L2 per
# core): of 2**17..2**20, 2**19 was fastest; larger chunks fall out of cache, smaller ones pay more
# per-call overhead.  chunk_elements can only lower it.
_WORK_FLOATS = 1 << 19
# Draws per tile when transposing a chunk of lam (see _gather).
_GATHER_TILE = 256
# Bracket widenings to try when rounding defeats the analytic bracket; one is always enough unless a
# level is within rounding of 0 or 1.
_MAX_WIDENINGS = 6
# Tails P(N >= k) at least this large are read off the quantile grid's CDF (see _tail).
_TAIL_FROM_GRID = 0.05


@dataclass(frozen=True)
class MixtureSummary:
    """Summary of the predictive count distribution of each forecast window.

    Attributes
    ----------
    mean
        Predictive mean ``mean_d lam[d, w]``, shape ``(windows,)``.
    sd
        Predictive standard deviation ``sqrt(mean_d lam + var_d lam)`` (law of total variance, the
        variance over draws taken with equal weights, i.e. ``ddof=0``).
    p_zero
        ``P(N_w = 0) = mean_d exp(-lam[d, w])``.
    quantiles
        Level ``q`` -> smallest integer ``k`` with ``F(k) >= q`` (int64, shape ``(windows,)``).
    intervals
        Level ``L`` -> ``(lo, hi)`` = ``(Q((1 - L) / 2), Q((1 + L) / 2))``, int64 arrays, both ends
        inclusive; coverage is at least ``L``.
    at_least
        ``k`` -> ``P(N_w >= k)``.
    """

    mean: FloatArray
    sd: FloatArray
    p_zero: FloatArray
    quantiles: dict[float, IntArray]
    intervals: dict[float, tuple[IntArray, IntArray]]
    at_least: dict[int, FloatArray]


# --- the count family: per-draw log-pmf and CDF --------------------------------------------------
# A second family (e.g. negative binomial per draw) supplies its own two functions here and its own
# grid evaluator; the ratio splitting in _run_pmf is specific to the Poisson pmf.


def _draw_logpmf(k: FloatArray, lam: FloatArray) -> FloatArray:
    """Log pmf ``log P(X = k)`` of ``Poisson(lam)``; integer ``k`` broadcasts against ``lam``.

    ``gammaln`` is evaluated on ``k`` alone, so with ``k`` of shape ``(windows, 1)`` it costs one
    call per window, not per draw.  ``0 log 0`` is taken as 0, so ``lam == 0`` gives ``log 1`` at
    ``k = 0`` and ``-inf`` above.  ``xlogy`` does that in general but costs several times
    ``k * log(lam)``, so it is kept for the mixed case only.
    """
    if np.all(k == 0):
        return -lam
    if np.all(k > 0):
        with np.errstate(divide="ignore"):
            k_log_lam = k * np.log(lam)
    else:
        k_log_lam = special.xlogy(k, lam)
    return k_log_lam - lam - special.gammaln(k + 1.0)


def _draw_cdf(k: ArrayLike, lam: FloatArray, *, upper: bool = False) -> FloatArray:
    """``P(X <= k)`` of ``Poisson(lam)`` for integer ``k >= 0``, or ``P(X > k)`` if ``upper``.

    The upper tail comes from its own incomplete-gamma call rather than ``1 - cdf`` so that small
    tail probabilities keep their relative accuracy.
    """
    result: FloatArray = special.pdtrc(k, lam) if upper else special.pdtr(k, lam)
    return result


# --- validation ----------------------------------------------------------------------------------


def _check_lam(lam: ArrayLike) -> NDArray[np.floating]:
    """Return ``lam`` as a real 2-D array (no copy when possible) or raise :class:`InputError`."""
    arr = np.asarray(lam)
    if arr.dtype == np.bool_ or not (
        np.issubdtype(arr.dtype, np.floating) or np.issubdtype(arr.dtype, np.integer)
    ):
        raise InputError(
            f"lam has dtype {arr.dtype}; allowed: a real (float32 or float64) array of "
            "expected counts"
        )
    if arr.ndim != 2:
        raise InputError(f"lam has shape {arr.shape}; allowed: 2-D (draws, windows)")
    if arr.shape[0] < 1:
        raise InputError(f"lam has shape {arr.shape}; allowed: at least one posterior draw")
    if not np.issubdtype(arr.dtype, np.floating):
        arr = arr.astype(np.float64)
    return arr


def _column_extremes(lam: NDArray[np.floating]) -> tuple[FloatArray, FloatArray]:
    """Per-window minimum and maximum draw; raises if any draw is negative, NaN or infinite.

    ``min`` propagates NaN, so one pass each over ``lam`` both validates it and gives the bracket.
    """
    if lam.shape[1] == 0:
        return np.zeros(0), np.zeros(0)
    lo = lam.min(axis=0).astype(np.float64)
    hi = lam.max(axis=0).astype(np.float64)
    bad = np.flatnonzero(~((lo >= 0.0) & np.isfinite(hi)))
    if bad.size:
        w = int(bad[0])
        column = lam[:, w]
        d = int(np.flatnonzero(~(np.isfinite(column) & (column >= 0)))[0])
        raise InputError(
            f"lam[{d}, {w}] = {float(column[d])!r}; allowed: finite expected counts >= 0"
        )
    return lo, hi


def _check_level(value: object, name: str) -> float:
    if isinstance(value, bool) or not isinstance(value, Real):
        raise InputError(f"{name} {value!r} is not a number; allowed: a real number in (0, 1)")
    level = float(value)
    if not 0.0 < level < 1.0:
        raise InputError(f"{name} {value!r} is outside the allowed range: strictly between 0 and 1")
    return level


def _check_count(value: object) -> int:
    if isinstance(value, bool) or not isinstance(value, Integral) or int(value) < 0:
        raise InputError(f"at_least value {value!r} is not allowed; allowed: integers >= 0")
    return int(value)


def _check_counts_per_window(k: ArrayLike, windows: int) -> IntArray:
    k_arr = np.asarray(k)
    integral = np.issubdtype(k_arr.dtype, np.integer) or (
        np.issubdtype(k_arr.dtype, np.floating)
        and bool(np.all(np.abs(k_arr) < 2.0**62))  # finite and safe to cast to int64
        and bool(np.all(k_arr == np.round(k_arr)))
    )
    if k_arr.dtype == np.bool_ or not integral:
        raise InputError(f"k = {k!r} is not allowed; allowed: integer counts")
    try:
        return np.broadcast_to(k_arr, (windows,)).astype(np.int64)
    except ValueError:
        raise InputError(
            f"k has shape {k_arr.shape}; allowed: a scalar or shape ({windows},) (one per window)"
        ) from None


# --- exact quantiles on the integer grid ---------------------------------------------------------


def _run_pmf(lam_t: FloatArray, k0: FloatArray, run: int, draw_block: int) -> FloatArray:
    """Summed pmf ``sum_d P(X_d = k0_w + j)`` for ``j < run``; ``lam_t`` is (windows, draws).

    ``k0`` has shape ``(windows, 1)``, or ``(1, 1)`` when it is the same for every window.
    """
    n, draws = lam_t.shape
    p = _isqrt_ceil(run)  # powers per block
    q = -(-run // p)  # blocks
    m = np.maximum(k0 + 0.5 * run, 1.0)
    scaled = np.zeros((n, q, p))
    for d0 in range(0, draws, draw_block):
        lam_b = lam_t[:, d0 : d0 + draw_block]
        # Power and block index first so each multiply below runs over one contiguous array.
        ratio = lam_b * (1.0 / m)
        powers = np.empty((p, n, lam_b.shape[1]))
        powers[0] = 1.0
        for i in range(1, p):
            np.multiply(powers[i - 1], ratio, out=powers[i])
        # blocks[a] = pmf(k0) * ratio**(a p): the scaled pmf at the start of each block.
        blocks = np.empty((q, n, lam_b.shape[1]))
        np.exp(_draw_logpmf(k0, lam_b), out=blocks[0])
        if q > 1:
            stride = powers[p - 1] * ratio
            for a in range(1, q):
                np.multiply(blocks[a - 1], stride, out=blocks[a])
        scaled += np.matmul(blocks.transpose(1, 0, 2), powers.transpose(1, 2, 0))
    j = np.arange(run, dtype=np.float64)
    log_fac = j * np.log(m) - (special.gammaln(k0 + 1.0 + j) - special.gammaln(k0 + 1.0))
    result: FloatArray = scaled.reshape(n, q * p)[:, :run] * np.exp(log_fac)
    return result


def _chunk_quantiles(
    lam_t: FloatArray,
    lo: IntArray,
    width: int,
    draw_block: int,
    levels: FloatArray,
    tail_points: list[int] = (),  # type: ignore[assignment]
) -> tuple[IntArray, BoolArray, BoolArray, FloatArray, dict[int, FloatArray]]:
    """Quantiles of one chunk of windows on the grids ``lo_w .. lo_w + width - 1``.

    Every window runs over ``width`` points even if it needs fewer: the extra points are true grid
    points of that window, so they need no masking and only cost time.  The grid is walked in runs
    of ``_SEGMENT`` points carrying the CDF along, so memory does not grow with its width.

    Returns
    -------
    table
        Quantiles, shape ``(len(levels), windows)``.
    low_failed, high_failed
        Windows whose computed ``F(lo - 1)`` is not below the lowest level, or whose ``F`` at the
        top of the grid is below the highest level: their bracket must be widened.
    pmf0
        The mixture pmf at the first grid point (``P(N = 0)`` where ``lo == 0``).
    cdf_at
        For each ``j`` in ``tail_points``, the computed ``F(j)`` of every window whose grid starts
        at 0, NaN where ``j`` is not on that window's grid or the grid starts above 0.
    """
    n, draws = lam_t.shape
    base = np.zeros(n)
    needs_base = lo > 0
    if needs_base.any():
        base[needs_base] = _draw_cdf((lo[needs_base] - 1)[:, None], lam_t[needs_base]).mean(axis=1)
    cdf_top = base
    below = np.zeros((n, levels.size), dtype=np.int64)
    pmf0 = np.zeros(n)
    # Only grids summed from 0 carry F with the accuracy _tail needs (anchored grids far from 0
    # accumulate about 1e-13 of absolute error, measured at lam = 700).
    from_zero = lo == 0
    cdf_at = {j: np.full(n, np.nan) for j in tail_points}
    for start in range(0, width, _SEGMENT):
        run = min(_SEGMENT, width - start)
        k0 = (lo + start).astype(np.float64)[:, None]
        if np.all(k0 == k0[0]):  # one scale and one factor row serve the whole chunk
            k0 = k0[:1]
        pmf = _run_pmf(lam_t, k0, run, draw_block)
        pmf /= draws
        if start == 0:
            pmf0 = pmf[:, 0].copy()
        cdf = np.cumsum(pmf, axis=1)
        cdf += cdf_top[:, None]
        below += np.count_nonzero(cdf[:, None, :] < levels[None, :, None], axis=2)
        for j, values in cdf_at.items():
            offset = j - (lo + start)
            inside = from_zero & (offset >= 0) & (offset < run)
            if inside.any():
                values[inside] = cdf[inside, offset[inside]]
        cdf_top = cdf[:, -1]
    table = lo[None, :] + below.T
    return table, base >= levels[0], cdf_top < levels[-1], pmf0, cdf_at


def _isqrt_ceil(n: int) -> int:
    return math.isqrt(n - 1) + 1 if n > 1 else 1


def _floats_per_draw(width: int) -> int:
    """Working floats per window and draw in :func:`_run_pmf` (powers, blocks, temporaries)."""
    return 2 * _isqrt_ceil(min(_SEGMENT, max(width, 1))) + 5


def _bracket(
    levels: FloatArray, lam_min: FloatArray, lam_max: FloatArray
) -> tuple[IntArray, IntArray]:
    """Grid ``[lo, hi]`` per window holding every requested quantile, one spare point each side.

    ``ceil(pdtrik(q, mu))`` is the Poisson quantile; the spare points absorb its rounding, and the
    caller verifies the bracket on the computed CDF anyway.
    """
    lo = np.ceil(special.pdtrik(levels[0], lam_min)) - 1.0
    hi = np.ceil(special.pdtrik(levels[-1], lam_max)) + 1.0
    lo = np.where(np.isfinite(lo) & (lo >= _GRID_FROM_ZERO_BELOW), lo, 0.0)
    hi = np.where(np.isfinite(hi), np.maximum(hi, lo + 1.0), lo + 1.0)
    return lo.astype(np.int64), hi.astype(np.int64)


def _window_order(width: IntArray, draws: int, limit: int) -> IntArray:
    """Order in which to process windows: by grid width when that saves padding, else as stored.

    Sorting groups similar widths into a chunk, but gathering scattered columns of ``lam`` can
    cost a fifth of the grid work for narrow grids, so it is used only when it cuts the padded grid
    by more than 10%.  The stable sort keeps windows of equal width in memory order.
    """
    if width.size < 2:
        return np.arange(width.size)
    typical = int(np.median(width))
    n = max(1, min(width.size, _chunk_windows(typical, draws, limit)))

    def padded(ordered: IntArray) -> int:
        pad = -ordered.size % n
        grid = np.concatenate([ordered, np.zeros(pad, dtype=ordered.dtype)]).reshape(-1, n)
        return int(grid.max(axis=1).sum()) * n

    by_width = np.argsort(width, kind="stable")
    if padded(width[by_width]) < 0.9 * padded(width):
        return by_width
    return np.arange(width.size)


def _chunk_windows(width: int, draws: int, limit: int) -> int:
    return max(1, limit // (_floats_per_draw(width) * draws))


def _chunks(
    order: IntArray, width: IntArray, draws: int, limit: int
) -> Iterable[tuple[IntArray, int, int]]:
    """Split ``order`` into chunks ``(windows, padded width, draw block)`` of ``limit`` floats."""
    a = 0
    total = order.size
    while a < total:
        guess = order[a : a + _chunk_windows(int(width[order[a]]), draws, limit)]
        n = _chunk_windows(int(width[guess].max()), draws, limit)
        idx = order[a : a + n]
        w_max = int(width[idx].max())
        draw_block = max(1, min(draws, limit // _floats_per_draw(w_max)))
        yield idx, w_max, draw_block
        a += idx.size


def _gather(lam: NDArray[np.floating], idx: IntArray) -> FloatArray:
    """Columns ``idx`` of ``lam`` as a C-contiguous float64 (windows, draws) block.

    Copied in tiles of ``_GATHER_TILE`` draws: a plain transposed copy walks ``lam`` with a stride
    of a whole row per element, which on the reference machine costs over twice as much.
    """
    n = idx.size
    contiguous = idx[-1] - idx[0] == n - 1 and bool(np.all(np.diff(idx) == 1))
    if contiguous and lam.dtype == np.float64 and lam.T.flags.c_contiguous:
        # Already window-major (as expected_counts gives it): the block is a view, not a copy.
        return typing.cast(FloatArray, lam.T[idx[0] : idx[-1] + 1])
    cols = lam[:, idx[0] : idx[-1] + 1] if contiguous else lam[:, idx]
    out = np.empty((n, lam.shape[0]))
    for d0 in range(0, lam.shape[0], _GATHER_TILE):
        out[:, d0 : d0 + _GATHER_TILE] = cols[d0 : d0 + _GATHER_TILE].T
    return out


class _Totals:
    """Per-window results, filled chunk by chunk."""

    def __init__(self, windows: int, levels: FloatArray, counts: list[int]) -> None:
        self.mean = np.empty(windows)
        self.var = np.empty(windows)
        self.p_zero = np.empty(windows)
        self.table = np.zeros((levels.size, windows), dtype=np.int64)
        self.tails = {k: np.ones(windows) for k in counts}


def _compute(
    lam: NDArray[np.floating],
    levels: FloatArray,
    counts: list[int],
    limit: int,
    *,
    moments: bool,
) -> _Totals:
    """Quantiles at ``levels`` (sorted ascending) and, if ``moments``, mean, variance, ``P(N = 0)``
    and ``P(N >= k)`` for ``k`` in ``counts``, every window; ``lam`` already validated."""
    draws, windows = lam.shape
    lam_min, lam_max = _column_extremes(lam)
    out = _Totals(windows, levels, counts)
    if windows == 0:
        return out
    if levels.size:
        lo, hi = _bracket(levels, lam_min, lam_max)
    else:
        lo, hi = np.zeros(windows, dtype=np.int64), np.zeros(windows, dtype=np.int64)
    width = hi - lo + 1
    positive = sorted({k for k in counts if k > 0})
    failed_low: list[IntArray] = []
    failed_high: list[IntArray] = []
    for idx, w_max, draw_block in _chunks(_window_order(width, draws, limit), width, draws, limit):
        lam_t = _gather(lam, idx)
        pmf0 = None
        cdf_at: dict[int, FloatArray] = {}
        if levels.size:
            table, low, high, pmf0, cdf_at = _chunk_quantiles(
                lam_t, lo[idx], w_max, draw_block, levels, [k - 1 for k in positive]
            )
            out.table[:, idx] = table
            failed_low.append(idx[low])
            failed_high.append(idx[high])
        if moments:
            out.mean[idx] = lam_t.mean(axis=1)
            out.var[idx] = lam_t.var(axis=1)
            if pmf0 is not None and np.all(lo[idx] == 0):
                out.p_zero[idx] = pmf0
            else:
                out.p_zero[idx] = np.exp(-lam_t).mean(axis=1)
            for k in positive:
                out.tails[k][idx] = _tail(lam_t, k, cdf_at.get(k - 1))
    low_todo = np.concatenate([np.zeros(0, dtype=np.int64), *failed_low])
    high_todo = np.concatenate([np.zeros(0, dtype=np.int64), *failed_high])
    if low_todo.size or high_todo.size:
        _widen_and_redo(lam, low_todo, high_todo, lo, hi, levels, limit, out.table)
    return out


def _tail(lam_t: FloatArray, k: int, cdf_below: FloatArray | None) -> FloatArray:
    """``P(N >= k)`` of every window of a chunk.

    Where the quantile grid (summed from 0) already holds ``F(k - 1)`` and the tail
    ``1 - F(k - 1)`` is at least ``_TAIL_FROM_GRID``, the tail is read off the grid: its absolute
    error is that of the summed CDF (a few 1e-16 per grid point), so its relative error stays
    below about 1e-14 (the equal-draws tests against scipy.stats.poisson.sf hold it to 1e-13). Elsewhere,
    and for tails smaller than that, it takes one incomplete-gamma call per draw, which keeps small
    tail probabilities accurate to their last digits.
    """
    tail = np.empty(lam_t.shape[0])
    use_grid = np.zeros(lam_t.shape[0], dtype=bool)
    if cdf_below is not None:
        from_grid = 1.0 - cdf_below
        use_grid = np.isfinite(from_grid) & (from_grid >= _TAIL_FROM_GRID)
        tail[use_grid] = from_grid[use_grid]
    rest = ~use_grid
    if rest.any():
        tail[rest] = _draw_cdf(k - 1, lam_t[rest], upper=True).mean(axis=1)
    return tail


def _widen_and_redo(
    lam: NDArray[np.floating],
    low: IntArray,
    high: IntArray,
    lo: IntArray,
    hi: IntArray,
    levels: FloatArray,
    limit: int,
    table: IntArray,
) -> None:
    """Redo the windows whose bracket rounding defeated at the bottom (``low``) or top (``high``),
    widening that end by half the grid width each time; ``lo``, ``hi`` and ``table`` are updated."""
    draws = lam.shape[0]
    for _ in range(_MAX_WIDENINGS):
        todo = np.union1d(low, high)
        if todo.size == 0:
            return
        span = np.maximum((hi - lo + 1) // 2, 2)
        new_lo = lo[low] - span[low]
        lo[low] = np.where(new_lo < _GRID_FROM_ZERO_BELOW, 0, new_lo)
        hi[high] += span[high]
        width = hi - lo + 1
        failed_low: list[IntArray] = [np.zeros(0, dtype=np.int64)]
        failed_high: list[IntArray] = [np.zeros(0, dtype=np.int64)]
        for idx, w_max, draw_block in _chunks(todo, width, draws, limit):
            result, low_failed, high_failed, _, _ = _chunk_quantiles(
                _gather(lam, idx), lo[idx], w_max, draw_block, levels
            )
            table[:, idx] = result
            failed_low.append(idx[low_failed])
            failed_high.append(idx[high_failed])
        low, high = np.concatenate(failed_low), np.concatenate(failed_high)
    todo = np.union1d(low, high)
    if todo.size:
        raise InputError(
            f"quantile levels {float(levels[0])!r}..{float(levels[-1])!r} cannot be resolved in "
            f"double precision for window {int(todo[0])}; allowed: levels not within rounding "
            "error of 0 or 1"
        )


# --- public API ----------------------------------------------------------------------------------


def summarise(
    lam: ArrayLike,
    *,
    quantiles: Iterable[float] = (),
    levels: Iterable[float] = (0.8, 0.95),
    at_least: Iterable[int] = (),
    chunk_elements: int = 4_000_000,
) -> MixtureSummary:
    """Summarise the Poisson mixture predictive count of every forecast window.

    Parameters
    ----------
    lam
        Posterior draws of the expected count, shape ``(draws, windows)``, float32 or float64
        (computed in float64), every entry finite and ``>= 0``.
    quantiles
        Levels ``q``, each strictly in (0, 1); ``Q(q)`` is the smallest integer ``k`` with
        ``F(k) >= q`` for the exact mixture CDF ``F``.
    levels
        Central interval levels ``L``, each strictly in (0, 1); the interval is
        ``[Q((1 - L) / 2), Q((1 + L) / 2)]`` with the same quantile definition and the two levels
        computed as written in floating point.  Both ends are inclusive; coverage is at least ``L``.
    at_least
        Counts ``k >= 0`` for which to report ``P(N >= k)``.
    chunk_elements
        Upper bound on floats of working memory per chunk of windows.  Chunks are smaller than
        this when a smaller, cache-resident chunk is faster.

    Returns
    -------
    MixtureSummary
        Per-window mean, sd, ``P(N = 0)``, quantiles, intervals and upper-tail probabilities.

    Raises
    ------
    InputError
        If ``lam`` is not 2-D, has no draws, or holds a negative, NaN or infinite value; if a level
        is outside (0, 1); if an ``at_least`` value is not an integer ``>= 0``; if
        ``chunk_elements`` is not a positive integer; or if a level lies within rounding error of
        1 (e.g. ``1 - 1e-16``), where the summed CDF cannot be told apart from it.

    Notes
    -----
    Results are exact up to floating-point rounding of the CDF: no sampling is involved.  The
    predictive distribution is a model statement; staffing figures built on it are advisory.

    Examples
    --------
    Two draws for each of two windows. By hand: the means are (3 + 5) / 2 = 4 and
    (40 + 60) / 2 = 50, and the sd is ``sqrt(mean + var of the draws)`` = sqrt(4 + 1) and
    sqrt(50 + 100). The quantiles are recomputed with scipy.stats.poisson (the mean of
    ``poisson.cdf(k, [3, 5])`` and of ``poisson.cdf(k, [40, 60])`` first reaching each level):
    for 0.5 at 4 and 49; for the 0.8 interval's ends 0.1 and 0.9 at 1 and 35, and 7 and 66:

    >>> import numpy as np
    >>> lam = np.array([[3.0, 40.0], [5.0, 60.0]])
    >>> s = summarise(lam, quantiles=(0.5,), levels=(0.8,), at_least=(1,))
    >>> s.mean, s.quantiles[0.5]
    (array([ 4., 50.]), array([ 4, 49]))
    >>> s.intervals[0.8]
    (array([ 1, 35]), array([ 7, 66]))
    >>> s.sd.round(4)  # sqrt(5), sqrt(150)
    array([ 2.2361, 12.2474])

    The same quantile straight from scipy.stats.poisson, summing the mixture by hand:

    >>> from scipy.stats import poisson
    >>> [int(np.argmax(poisson.cdf(np.arange(200)[:, None], lam[:, w]).mean(axis=1) >= 0.5))
    ...  for w in (0, 1)]
    [4, 49]
    """
    arr = _check_lam(lam)
    q_levels = [_check_level(q, "quantile level") for q in quantiles]
    i_levels = [_check_level(level, "interval level") for level in levels]
    counts = [_check_count(k) for k in at_least]
    if (
        isinstance(chunk_elements, bool)
        or not isinstance(chunk_elements, Integral)
        or chunk_elements < 1
    ):
        raise InputError(
            f"chunk_elements {chunk_elements!r} is not allowed; allowed: an integer >= 1"
        )
    lower = {level: (1.0 - level) / 2.0 for level in i_levels}
    upper = {level: (1.0 + level) / 2.0 for level in i_levels}
    needed = sorted(set(q_levels) | set(lower.values()) | set(upper.values()))
    limit = min(int(chunk_elements), _WORK_FLOATS)
    out = _compute(arr, np.asarray(needed, dtype=np.float64), counts, limit, moments=True)
    row = {level: i for i, level in enumerate(needed)}
    return MixtureSummary(
        mean=out.mean,
        sd=np.sqrt(out.mean + out.var),
        p_zero=out.p_zero,
        quantiles={q: out.table[row[q]] for q in q_levels},
        intervals={
            level: (out.table[row[lower[level]]], out.table[row[upper[level]]])
            for level in i_levels
        },
        at_least=out.tails,
    )


def mixture_cdf(lam: ArrayLike, k: ArrayLike) -> FloatArray:
    """Exact mixture CDF ``P(N_w <= k_w) = mean_d P(Poisson(lam[d, w]) <= k_w)``.

    Parameters
    ----------
    lam
        Posterior draws of the expected count, shape ``(draws, windows)``, finite and ``>= 0``.
    k
        Integer count(s), broadcast to ``(windows,)``; negative values give probability 0.

    Returns
    -------
    numpy.ndarray
        Float64 array of shape ``(windows,)``.

    Raises
    ------
    InputError
        If ``lam`` is invalid (see :func:`summarise`), or ``k`` is not integer-valued or does not
        broadcast to ``(windows,)``.

    Examples
    --------
    The mean over draws of ``scipy.stats.poisson.cdf``, shown beside it:

    >>> import numpy as np
    >>> from scipy.stats import poisson
    >>> mixture_cdf(np.array([[3.0, 40.0], [5.0, 60.0]]), [4, 50]).round(6)
    array([0.627878, 0.527525])
    >>> round(float(poisson.cdf(4, 3.0) + poisson.cdf(4, 5.0)) / 2, 6)
    0.627878
    """
    arr = _check_lam(lam)
    _column_extremes(arr)
    draws, windows = arr.shape
    k_w = _check_counts_per_window(k, windows)
    out = np.zeros(windows)
    step = max(1, _WORK_FLOATS // draws)
    for a in range(0, windows, step):
        kk = k_w[a : a + step]
        inside = kk >= 0
        if inside.any():
            block = np.asarray(arr[:, a : a + step], dtype=np.float64)
            out[a : a + step][inside] = _draw_cdf(kk[inside], block[:, inside]).mean(axis=0)
    return out


def mixture_quantile(lam: ArrayLike, q: float) -> IntArray:
    """Exact mixture quantile: the smallest integer ``k`` with ``P(N_w <= k) >= q``, per window.

    Parameters
    ----------
    lam
        Posterior draws of the expected count, shape ``(draws, windows)``, finite and ``>= 0``.
    q
        Level strictly in (0, 1).

    Returns
    -------
    numpy.ndarray
        Int64 array of shape ``(windows,)``.

    Raises
    ------
    InputError
        If ``lam`` is invalid (see :func:`summarise`), ``q`` is outside (0, 1), or ``q`` lies within
        rounding error of 1.

    Examples
    --------
    Recomputed with scipy.stats.poisson: the mixture CDF of the first window is 0.8643 at 6 and
    0.9274 at 7, of the second 0.8822 at 65 and 0.9006 at 66:

    >>> import numpy as np
    >>> mixture_quantile(np.array([[3.0, 40.0], [5.0, 60.0]]), 0.9)
    array([ 7, 66])
    """
    level = _check_level(q, "quantile level")
    arr = _check_lam(lam)
    return _compute(arr, np.array([level]), [], _WORK_FLOATS, moments=False).table[0]

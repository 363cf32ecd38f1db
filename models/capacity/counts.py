"""The predictive count distribution of each interval of a plan, on a grid of counts.

The predictive count ``K_w`` of interval ``w`` is the equal-weight mixture over posterior draws of
``Poisson(lam[d, w])``. Summing one Poisson pmf per draw costs draws x counts per interval; here
each draw's ``Λ_d`` is spread over nodes spaced 0.1 apart in ``2 sqrt(Λ)`` (where a Poisson pmf
changes at a steady pace) with 6-point Lagrange weights, so the mixture pmf is a short weighted sum
of Poisson pmfs at the nodes. It matches the direct sum over draws to about 1e-8 in probability
(tested) and keeps the predictive mean and variance exactly (the weights are exact for
polynomials of degree 5 in ``2 sqrt(Λ)``, which ``Λ`` and ``Λ^2`` are). Counts whose tail
probability is below 1e-12 on either side are left out.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import numpy.typing as npt
from scipy import special

from models.exceptions import StaffingError

__all__ = ["MAX_GRID_FLOATS", "CountGrid", "count_grid"]

FloatArray = npt.NDArray[np.float64]
IntArray = npt.NDArray[np.int64]

#: Most probabilities one grid may hold (intervals x counts, and nodes x counts of one
#: interval); a few arrays of that size exist at once, so this bounds the memory to some
#: hundreds of MB whatever the forecast.
MAX_GRID_FLOATS = 10_000_000

# Probability left out in each tail of every interval's count distribution.
_TAIL = 1e-12
# Rate nodes per interval: spacing in 2 sqrt(rate) and interpolation order (see module notes).
_NODE_SPACING = 0.1
_NODE_ORDER = 6
# Floats per array when spreading draws over rate nodes (a block of intervals x all draws).
_WEIGHT_BLOCK_FLOATS = 1 << 15


@dataclass(frozen=True)
class CountGrid:
    """Predictive count pmf of each interval on the grid ``first[w] + 0..width-1``."""

    first: IntArray
    pmf: FloatArray

    @property
    def counts(self) -> FloatArray:
        return (self.first[:, None] + np.arange(self.pmf.shape[1])[None, :]).astype(np.float64)


def _node_weights(t: FloatArray, nodes: IntArray) -> tuple[IntArray, FloatArray]:
    """First node and Lagrange weights of each draw on its ``_NODE_ORDER`` nearest nodes.

    ``t`` is each draw's position in node units, shape ``(interval, draw)``; ``nodes`` is the
    node count per interval (at least ``_NODE_ORDER``).
    """
    order = _NODE_ORDER
    first = np.floor(t) - (order // 2 - 1)
    first = np.clip(first, 0.0, (nodes - order).astype(np.float64)[:, None])
    frac = t - first
    # w_i = prod_{m != i} (frac - m) / (i - m), from prefix and suffix products of (frac - m).
    gaps = [frac - m for m in range(order)]
    prefix = [np.ones_like(frac)]
    for m in range(order - 1):
        prefix.append(prefix[-1] * gaps[m])
    weights = np.empty((order, *frac.shape))
    suffix = np.ones_like(frac)
    for i in range(order - 1, -1, -1):
        denominator = math.prod(i - m for m in range(order) if m != i)
        np.multiply(prefix[i], suffix, out=weights[i])
        weights[i] /= denominator
        suffix = suffix * gaps[i]
    return first.astype(np.int64), weights


def count_grid(lam: FloatArray) -> CountGrid:
    """The predictive count pmf of every interval, from draws ``lam`` of shape (draw, interval).

    ``lam`` is assumed checked (finite, >= 0; :mod:`.staffing` checks it where it enters).

    Raises
    ------
    StaffingError
        If the grid would hold more than :data:`MAX_GRID_FLOATS` probabilities.
    """
    draws, windows = lam.shape
    # (interval, draw), C-ordered: a Poisson pmf moves at a steady pace in 2 sqrt(rate).
    root = np.ascontiguousarray(2.0 * np.sqrt(lam.T))
    r_lo, r_hi = root.min(axis=1), root.max(axis=1)
    lo, hi = (r_lo / 2.0) ** 2, (r_hi / 2.0) ** 2
    with np.errstate(invalid="ignore"):
        k_lo = np.ceil(special.pdtrik(_TAIL, lo)) - 1.0
        k_hi = np.ceil(special.pdtrik(1.0 - _TAIL, hi)) + 1.0
    k_lo = np.where(np.isfinite(k_lo) & (k_lo > 0), k_lo, 0.0).astype(np.int64)
    k_hi = np.where(np.isfinite(k_hi), k_hi, 1.0).astype(np.int64)
    width = int((k_hi - k_lo).max()) + 1
    spread = r_hi - r_lo > 1e-12 * np.maximum(1.0, r_hi)
    nodes = np.ones(windows, dtype=np.int64)
    nodes[spread] = np.maximum(np.ceil((r_hi - r_lo)[spread] / _NODE_SPACING), _NODE_ORDER - 1) + 1
    cells = nodes * (k_hi - k_lo + 1)  # the pmf matrix of each interval, nodes x counts
    if max(windows * width, int(cells.max())) > MAX_GRID_FLOATS:
        w = int(np.argmax(cells))
        raise StaffingError(
            f"the predictive count of interval {w} spans {int(k_lo[w])} to {int(k_hi[w])} "
            f"arrivals over {windows} intervals, more than a grid of {MAX_GRID_FLOATS:,} "
            "probabilities holds; allowed: fewer intervals or forecasts of fewer or less "
            "uncertain arrivals"
        )
    step = np.where(spread, (r_hi - r_lo) / np.maximum(nodes - 1, 1), 1.0)
    offset = np.concatenate(([0], np.cumsum(nodes)))
    mass = np.zeros(int(offset[-1]))
    varied = np.flatnonzero(spread)
    block = max(1, _WEIGHT_BLOCK_FLOATS // draws)  # small blocks keep the temporaries in cache
    for b0 in range(0, varied.size, block):
        rows = varied[b0 : b0 + block]
        t = (root[rows] - r_lo[rows, None]) / step[rows, None]
        first, weights = _node_weights(t, nodes[rows])
        first += offset[rows, None]
        for i in range(_NODE_ORDER):
            mass += np.bincount(
                (first + i).ravel(), weights=weights[i].ravel(), minlength=mass.size
            )
    mass /= draws
    mass[offset[:-1][~spread]] = 1.0  # every draw equal: one node carries all the mass

    pmf = np.zeros((windows, width))
    j = np.arange(width, dtype=np.float64)
    for w in range(windows):
        size = int(k_hi[w] - k_lo[w]) + 1
        k = k_lo[w] + j[:size]
        rates = (0.5 * (r_lo[w] + step[w] * np.arange(nodes[w]))) ** 2
        log_pmf = special.xlogy(k[None, :], rates[:, None]) - rates[:, None]
        log_pmf -= special.gammaln(k + 1.0)[None, :]
        # Interpolation weights can be slightly negative; a pmf cannot.
        pmf[w, :size] = np.maximum(mass[offset[w] : offset[w + 1]] @ np.exp(log_pmf), 0.0)
    return CountGrid(first=k_lo, pmf=pmf)

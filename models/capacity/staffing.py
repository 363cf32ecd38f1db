"""Agents per interval of a plan, from the predictive distribution of the interval's arrivals.

A forecast gives, for every interval ``w`` of a plan, posterior draws ``lam[d, w]`` of the expected
arrivals ``Λ``; the predictive count ``K_w`` is the equal-weight mixture over draws of
``Poisson(lam[d, w])`` (:mod:`models.prediction.mixture`). This module turns that into staffing:

(a) *plug-in*: the agents the queue formula asks for at the predictive mean ``E[K] = mean_d Λ_d``,
    the usual answer that ignores forecast uncertainty;
(b) *assured*: the fewest agents ``N`` with ``P(SL(K, N) >= share) >= p`` (see below);
(c) for any staffing: the expected service level ``E[SL(K, N)]`` and the probability of missing
    the target ``P(SL(K, N) < share)``.

What "met with probability p" means
-----------------------------------
``SL(k, N)`` is the steady-state service level (share of callers answered within ``T`` seconds)
of a queue with ``N`` agents fed at the constant rate of ``k`` arrivals per interval: Erlang C, or
Erlang A when callers hang up after a mean patience. The probability is taken over the
*predictive distribution of the interval's arrival count* ``K`` (the Poisson mixture, so it
carries both the posterior uncertainty of the rate and the Poisson scatter of the count), each
possible count being read as the interval's rate. An interval with no arrivals misses nothing:
``SL(0, N) = 1``. Because ``SL(k, N)`` falls as ``k`` grows, the agents needed,
``n*(k) = min{N : SL(k, N) >= share}``, do not fall as ``k`` grows, so the p-quantile of
``n*(K)`` is ``n*(Q_K(p))``: the agents needed at the exact p-quantile of the count
(:func:`models.prediction.mixture.mixture_quantile`). That is answer (b). Even a perfectly known rate leaves
the Poisson scatter, so (b) exceeds (a) for ``p`` well above 1/2 whatever the posterior, and (b)
equals (a) exactly when ``n*`` at the p-quantile of the count equals ``n*`` at its mean. Reading
each count as a rate is the cautious choice: the queue formula already assumes Poisson arrivals
at that rate, so a busy interval's shortfall is counted at its realised volume, as an interval
report measures it.

Methods
-------
* Erlang C in closed form per (load, agents) pair: ``B = P(X = N) / P(X <= N)`` with
  ``X ~ Poisson(A)`` (the Erlang B recursion summed), then ``C = N B / (N - A (1 - B))`` and
  ``SL = 1 - C exp(-(N - A) T / AHT)``; 0 when ``N <= A``. No factorials are formed, so loads and
  agents in the thousands are fine. Checked against :mod:`models.capacity.queueing`.
* Erlang A (M/M/N+M) from the birth-death stationary distribution in log space, grouped by agent
  count so the answered-within probabilities of a caller with ``j`` ahead are computed once per
  ``N`` (the same formula as :func:`models.capacity.queueing.erlang_a`).
* ``n*`` for many loads at once by doubling then bisection on ``N`` (service level rises with
  ``N``).
* The count distribution of each interval for (c): each draw's ``Λ_d`` is spread over nodes
  spaced 0.1 apart in ``2 sqrt(Λ)`` (where a Poisson pmf changes at a steady pace) with 6-point
  Lagrange weights, so the mixture pmf is a short weighted sum of Poisson pmfs at the nodes. It
  matches the direct sum over draws to about 1e-8 in probability (tested) and keeps the predictive
  mean and variance exactly (the weights are exact for polynomials of degree 5 in ``2 sqrt(Λ)``,
  which ``Λ`` and ``Λ^2`` are). The p-quantile in (b) is exact.

Shrinkage ``s`` is the share of paid time agents are not available to answer (breaks, training,
absence): ``N`` available agents need ``N / (1 - s)`` paid, rounded up per interval.

Caution
-------
Forecasts are probabilistic and real intervals are not in steady state: every figure here is
advisory (see :data:`STAFFING_CAUTION`).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import numpy.typing as npt
from scipy import special

from models.capacity.queueing import answered_within
from models.exceptions import StaffingError
from models.prediction.mixture import mixture_quantile

__all__ = [
    "STAFFING_CAUTION",
    "DayTotal",
    "ServiceTarget",
    "StaffingCheck",
    "StaffingPlan",
    "evaluate_staffing",
    "required_agents",
    "service_level_at",
    "staff_intervals",
]

FloatArray = npt.NDArray[np.float64]
IntArray = npt.NDArray[np.int64]

STAFFING_CAUTION = (
    "Staffing figures are advisory: they come from a probabilistic forecast and an idealised "
    "steady-state queue. In safety-critical settings (health care, emergency lines) they need "
    "review by the responsible people and must follow local rules and agreements."
)

# Count grid: probability left out in each tail of every interval's count distribution.
_TAIL = 1e-12
# Rate nodes per interval: spacing in 2 sqrt(rate) and interpolation order (see module notes).
_NODE_SPACING = 0.1
_NODE_ORDER = 6
# Counts whose probability is below this add nothing visible to (c); their service level is skipped.
_NEGLIGIBLE_PMF = 1e-18
# log(1e-19): queue states this far below the largest are beyond double precision of the total.
_LOG_NEGLIGIBLE = -44.0
_MAX_QUEUE_STATES = 1_000_000
# Floats per array when spreading draws over rate nodes (a block of intervals x all draws).
_WEIGHT_BLOCK_FLOATS = 1 << 15
# Floats of working memory per block of (rate, queue state) pairs in Erlang A.
_BLOCK_FLOATS = 1 << 20


# --------------------------------------------------------------------------- inputs


def _positive(name: str, value: float, *, allowed: str, strict: bool = True) -> float:
    if isinstance(value, bool) or not isinstance(value, int | float | np.integer | np.floating):
        raise StaffingError(f"{name} must be a number ({allowed}); got {value!r}")
    number = float(value)
    if not math.isfinite(number) or (number <= 0 if strict else number < 0):
        raise StaffingError(f"{name} must be {allowed}; got {value!r}")
    return number


def _fraction(
    name: str, value: float, *, upper_open: bool = True, lower_open: bool = True
) -> float:
    low = "(0" if lower_open else "[0"
    high = "1)" if upper_open else "1]"
    allowed = f"a number in {low}, {high}"
    if isinstance(value, bool) or not isinstance(value, int | float | np.integer | np.floating):
        raise StaffingError(f"{name} must be {allowed}; got {value!r}")
    number = float(value)
    too_low = number <= 0 if lower_open else number < 0
    too_high = number >= 1 if upper_open else number > 1
    if not math.isfinite(number) or too_low or too_high:
        raise StaffingError(f"{name} must be {allowed}; got {value!r}")
    return number


@dataclass(frozen=True)
class ServiceTarget:
    """The service-level goal of a queue and how long calls take.

    Attributes
    ----------
    handle_time
        Mean handle time in seconds (> 0).
    answer_within
        Target answer time ``T`` in seconds (>= 0).
    share
        Share of callers to answer within ``T``, strictly between 0 and 1 (0.8 for "80% in T").
    patience
        Mean patience in seconds (> 0) if callers hang up while waiting (Erlang A), or ``None``
        if nobody hangs up (Erlang C). Callers who hang up count as not answered.

    Examples
    --------
    >>> ServiceTarget(handle_time=240, answer_within=20, share=0.8)
    ServiceTarget(handle_time=240.0, answer_within=20.0, share=0.8, patience=None)
    """

    handle_time: float
    answer_within: float
    share: float
    patience: float | None = None

    def __post_init__(self) -> None:
        set_ = object.__setattr__  # frozen: store the checked float values
        set_(self, "handle_time", _positive("handle_time", self.handle_time, allowed="seconds > 0"))
        set_(
            self,
            "answer_within",
            _positive("answer_within", self.answer_within, allowed="seconds >= 0", strict=False),
        )
        set_(self, "share", _fraction("service-level share", self.share))
        if self.patience is not None:
            set_(
                self,
                "patience",
                _positive("patience", self.patience, allowed="seconds > 0, or None"),
            )


def _check_lam(lam: npt.ArrayLike) -> FloatArray:
    try:
        arr = np.asarray(lam, dtype=np.float64)
    except (TypeError, ValueError):
        raise StaffingError(
            "expected arrivals must be numbers, shape (draw, interval); got an array of "
            f"{np.asarray(lam).dtype}"
        ) from None
    if arr.ndim != 2 or arr.shape[0] < 1 or arr.shape[1] < 1:
        raise StaffingError(
            f"expected arrivals have shape {arr.shape}; allowed: (draw, interval) with at least "
            "one of each"
        )
    bad = ~np.isfinite(arr) | (arr < 0)
    if bad.any():
        d, w = (int(i) for i in np.argwhere(bad)[0])
        raise StaffingError(
            f"expected arrivals [{d}, {w}] = {float(arr[d, w])!r}; allowed: finite numbers >= 0"
        )
    return arr


def _per_interval(name: str, value: npt.ArrayLike, size: int) -> FloatArray:
    arr = np.asarray(value, dtype=np.float64)
    try:
        arr = np.broadcast_to(arr, (size,)).astype(np.float64)
    except ValueError:
        raise StaffingError(
            f"{name} has shape {np.shape(value)}; allowed: one number or one per interval ({size})"
        ) from None
    return arr


def _check_seconds(value: npt.ArrayLike, size: int) -> FloatArray:
    seconds = _per_interval("interval_seconds", value, size)
    bad = np.flatnonzero(~np.isfinite(seconds) | (seconds <= 0))
    if bad.size:
        i = int(bad[0])
        raise StaffingError(
            f"interval_seconds[{i}] = {float(seconds[i])!r}; allowed: interval lengths > 0 seconds"
        )
    return seconds


def _check_agents(agents: npt.ArrayLike, size: int) -> IntArray:
    arr = np.asarray(agents)
    if arr.dtype == np.bool_ or not (
        np.issubdtype(arr.dtype, np.integer) or np.issubdtype(arr.dtype, np.floating)
    ):
        raise StaffingError(f"agents must be whole numbers >= 0; got {agents!r}")
    values = _per_interval("agents", arr, size)
    bad = np.flatnonzero(~np.isfinite(values) | (values < 0) | (values != np.round(values)))
    if bad.size:
        i = int(bad[0])
        raise StaffingError(f"agents[{i}] = {values[i]!r}; allowed: whole numbers >= 0")
    return values.astype(np.int64)


# --------------------------------------------------------------------------- service level


def _erlang_c_level(load: FloatArray, agents: FloatArray, spare_rate: float) -> FloatArray:
    """Erlang C service level for pairs (load, agents); ``spare_rate`` is ``T / AHT``."""
    level = np.zeros(load.shape)
    stable = agents > load
    a, n = load[stable], agents[stable]
    # P(X = N) / P(X <= N) for X ~ Poisson(A) is the Erlang B blocking probability.
    blocking = np.exp(special.xlogy(n, a) - a - special.gammaln(n + 1.0)) / special.pdtr(n, a)
    wait = n * blocking / (n - a * (1.0 - blocking))
    level[stable] = 1.0 - wait * np.exp(-(n - a) * spare_rate)
    return level


def _queue_states(rate: float, capacity: float, patience_rate: float) -> int:
    """Queue lengths ``0..J-1`` that hold all but a negligible share of the queue's mass."""
    peak = max(0.0, (rate - capacity) / patience_rate)
    size = int(min(_MAX_QUEUE_STATES, max(64.0, 2.0 * peak + 64.0)))
    while True:
        m = np.arange(1, size + 1, dtype=np.float64)
        log_ratio = math.log(rate) - np.log(capacity + patience_rate * m)
        log_q = np.concatenate(([0.0], np.cumsum(log_ratio)))
        last = float(log_ratio[-1])
        if last < 0:
            # Ratios only fall from here, so a geometric series bounds what is left out.
            log_tail = float(log_q[-1]) + last - math.log(-math.expm1(last))
            if log_tail < float(log_q.max()) + _LOG_NEGLIGIBLE:
                return size + 1
        if size >= _MAX_QUEUE_STATES:
            raise StaffingError(
                f"patience of {1.0 / patience_rate:.6g} s is too long for an exact sum at "
                f"{rate * 3600:.6g} arrivals per hour against {capacity * 3600:.6g} answered per "
                "hour; give a shorter patience or none"
            )
        size = min(2 * size, _MAX_QUEUE_STATES)


def _erlang_a_level(
    rate: FloatArray, agents: FloatArray, *, handle_time: float, patience: float, within: float
) -> FloatArray:
    """Erlang A service level (share of all callers answered within ``within``) for pairs."""
    mu, theta = 1.0 / handle_time, 1.0 / patience
    level = np.zeros(rate.shape)
    for n in np.unique(agents):
        group = np.flatnonzero(agents == n)
        if n == 0:
            continue  # nobody answers
        capacity = n * mu
        states = _queue_states(float(rate[group].max()), capacity, theta)
        j = np.arange(states, dtype=np.float64)
        log_service = np.concatenate(([0.0], np.cumsum(np.log(capacity + theta * j[1:]))))
        answered = answered_within(j, capacity, theta, within)
        rows = max(1, _BLOCK_FLOATS // states)
        for r0 in range(0, group.size, rows):
            idx = group[r0 : r0 + rows]
            lam = rate[idx]
            load = lam / mu
            # log of sum_{i<N} pi_i / pi_N, and of pi_{N+j} / pi_N.
            with np.errstate(divide="ignore"):
                log_below = np.log(special.pdtr(n - 1.0, load)) - (
                    n * np.log(load) - load - special.gammaln(n + 1.0)
                )
            log_queue = j[None, :] * np.log(lam)[:, None] - log_service[None, :]
            top = np.maximum(log_queue.max(axis=1), log_below)
            below = np.exp(log_below - top)
            queue = np.exp(log_queue - top[:, None])
            level[idx] = (below + queue @ answered) / (below + queue.sum(axis=1))
    return level


def _level(
    arrivals: FloatArray, agents: FloatArray, seconds: FloatArray, target: ServiceTarget
) -> FloatArray:
    """Service level for pairs (arrivals per interval, agents); no arrivals misses nothing."""
    level = np.ones(arrivals.shape)
    busy = arrivals > 0
    if not busy.any():
        return level
    rate = arrivals[busy] / seconds[busy]
    n = agents[busy]
    if target.patience is None:
        level[busy] = _erlang_c_level(
            rate * target.handle_time, n, target.answer_within / target.handle_time
        )
    else:
        level[busy] = _erlang_a_level(
            rate,
            n,
            handle_time=target.handle_time,
            patience=target.patience,
            within=target.answer_within,
        )
    return level


def service_level_at(
    arrivals: npt.ArrayLike,
    agents: npt.ArrayLike,
    *,
    interval_seconds: npt.ArrayLike,
    target: ServiceTarget,
) -> FloatArray:
    """Steady-state service level with ``agents`` when ``arrivals`` come in an interval.

    Parameters
    ----------
    arrivals
        Arrivals per interval (a count or an expected count, >= 0); any shape.
    agents
        Whole numbers of agents (>= 0), broadcast against ``arrivals``.
    interval_seconds
        Interval length(s) in seconds (> 0), broadcast against ``arrivals``.
    target
        Handle time, answer time and patience (the share is not used here).

    Returns
    -------
    numpy.ndarray
        Share answered within ``target.answer_within``; 1 where there are no arrivals, 0 for an
        unstable Erlang C queue (agents <= load).

    Examples
    --------
    360 calls per 30 minutes at 240 s each is 48 erlangs; 55 agents answer 84.6% within 15 s
    (the worked interval in the module's tests):

    >>> goal = ServiceTarget(handle_time=240, answer_within=15, share=0.8)
    >>> service_level_at([360.0], [55], interval_seconds=1800, target=goal).round(6)
    array([0.845883])
    """
    arr = np.asarray(arrivals, dtype=np.float64)
    if (~np.isfinite(arr) | (arr < 0)).any():
        raise StaffingError(f"arrivals must be finite numbers >= 0; got {arrivals!r}")
    shape = np.broadcast_shapes(arr.shape, np.shape(agents), np.shape(interval_seconds))
    size = int(np.prod(shape))
    flat_agents = _check_agents(np.broadcast_to(np.asarray(agents), shape).ravel(), size)
    seconds = _check_seconds(np.broadcast_to(np.asarray(interval_seconds), shape).ravel(), size)
    level = _level(
        np.broadcast_to(arr, shape).ravel(), flat_agents.astype(np.float64), seconds, target
    )
    return level.reshape(shape)


# --------------------------------------------------------------------------- agents needed


def _required(arrivals: FloatArray, seconds: FloatArray, target: ServiceTarget) -> IntArray:
    """``n*``: fewest agents with service level >= share, for each (arrivals, seconds) pair."""
    need = np.zeros(arrivals.shape, dtype=np.int64)
    busy = np.flatnonzero(arrivals > 0)
    if busy.size == 0:
        return need
    arr, sec = arrivals[busy], seconds[busy]
    load = arr / sec * target.handle_time
    # Invariant: level(low) < share <= level(high). Erlang C fails at N <= A (unstable);
    # with abandonment nothing is certain but that zero agents answer nobody.
    low = np.floor(load) if target.patience is None else np.zeros(busy.size)
    step = np.maximum(1.0, np.ceil(np.sqrt(load)))
    high = low + step
    todo = np.arange(busy.size)
    while todo.size:
        ok = _level(arr[todo], high[todo], sec[todo], target) >= target.share
        failed = todo[~ok]
        low[failed] = high[failed]
        step[failed] *= 2.0
        high[failed] = low[failed] + step[failed]
        todo = failed
    todo = np.flatnonzero(high - low > 1)
    while todo.size:
        mid = np.floor((low[todo] + high[todo]) / 2.0)
        ok = _level(arr[todo], mid, sec[todo], target) >= target.share
        high[todo[ok]] = mid[ok]
        low[todo[~ok]] = mid[~ok]
        todo = todo[high[todo] - low[todo] > 1]
    need[busy] = high.astype(np.int64)
    return need


def required_agents(
    arrivals: npt.ArrayLike, *, interval_seconds: npt.ArrayLike, target: ServiceTarget
) -> IntArray:
    """Fewest agents whose steady-state service level meets ``target`` at each arrival volume.

    Parameters
    ----------
    arrivals
        Arrivals per interval (count or expected count, >= 0), a 1-D array or a number.
    interval_seconds
        Interval length(s) in seconds (> 0).
    target
        The service-level goal.

    Returns
    -------
    numpy.ndarray
        Int64 agents, 0 where there are no arrivals. Advisory: see :data:`STAFFING_CAUTION`.

    Examples
    --------
    >>> goal = ServiceTarget(handle_time=240, answer_within=20, share=0.8)
    >>> required_agents([360.0, 0.0], interval_seconds=1800, target=goal)
    array([54,  0])
    """
    arr = np.atleast_1d(np.asarray(arrivals, dtype=np.float64))
    if arr.ndim != 1:
        raise StaffingError(f"arrivals must be 1-D; got shape {arr.shape}")
    bad = np.flatnonzero(~np.isfinite(arr) | (arr < 0))
    if bad.size:
        i = int(bad[0])
        raise StaffingError(f"arrivals[{i}] = {float(arr[i])!r}; allowed: finite numbers >= 0")
    return _required(arr, _check_seconds(interval_seconds, arr.size), target)


# --------------------------------------------------------------------------- count distribution


@dataclass(frozen=True)
class _CountGrid:
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


def _count_grid(lam: FloatArray) -> _CountGrid:
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
    log_factorial = special.gammaln(np.arange(1, int(k_hi.max()) + 2, dtype=np.float64))
    for w in range(windows):
        size = int(k_hi[w] - k_lo[w]) + 1
        k = k_lo[w] + j[:size]
        rates = (0.5 * (r_lo[w] + step[w] * np.arange(nodes[w]))) ** 2
        log_pmf = special.xlogy(k[None, :], rates[:, None]) - rates[:, None]
        log_pmf -= log_factorial[k_lo[w] : k_lo[w] + size][None, :]
        # Interpolation weights can be slightly negative; a pmf cannot.
        pmf[w, :size] = np.maximum(mass[offset[w] : offset[w + 1]] @ np.exp(log_pmf), 0.0)
    return _CountGrid(first=k_lo, pmf=pmf)


# --------------------------------------------------------------------------- (c) evaluation


@dataclass(frozen=True)
class StaffingCheck:
    """How a staffing fares against the predictive count distribution, per interval.

    Attributes
    ----------
    agents
        Agents available to answer in each interval (after shrinkage), int64.
    expected_service_level
        ``E[SL(K, N)]`` over the predictive count ``K`` (no arrivals counts as 1).
    miss_probability
        ``P(SL(K, N) < share)``: the probability that the interval misses the target.
    """

    agents: IntArray
    expected_service_level: FloatArray
    miss_probability: FloatArray


def _check_staffing(
    grid: _CountGrid, agents: IntArray, seconds: FloatArray, target: ServiceTarget
) -> StaffingCheck:
    counts = grid.counts
    shape = counts.shape
    live = grid.pmf > _NEGLIGIBLE_PMF
    rows = np.nonzero(live)[0]
    level = np.ones(shape)
    level[live] = _level(counts[live], agents[rows].astype(np.float64), seconds[rows], target)
    expected = (grid.pmf * level).sum(axis=1)
    miss = np.where(level < target.share, grid.pmf, 0.0).sum(axis=1)
    return StaffingCheck(
        agents=agents,
        expected_service_level=np.minimum(expected, 1.0),
        miss_probability=np.minimum(miss, 1.0),
    )


def evaluate_staffing(
    lam: npt.ArrayLike,
    agents: npt.ArrayLike,
    *,
    interval_seconds: npt.ArrayLike,
    target: ServiceTarget,
) -> StaffingCheck:
    """Expected service level and probability of missing the target for a given staffing.

    Parameters
    ----------
    lam
        Posterior draws of the expected arrivals, shape ``(draw, interval)``.
    agents
        Agents answering in each interval (one number for all, or one per interval).
    interval_seconds
        Interval length(s) in seconds.
    target
        The service-level goal.

    Returns
    -------
    StaffingCheck

    Raises
    ------
    StaffingError
        On bad input, or (Erlang C only) if an interval has agents at or below the offered load
        of its predictive mean: that queue grows without bound. With a patience the queue stays
        finite, so any staffing can be evaluated.

    Examples
    --------
    >>> import numpy as np
    >>> goal = ServiceTarget(handle_time=240, answer_within=15, share=0.8)
    >>> check = evaluate_staffing(np.full((1, 1), 360.0), 55, interval_seconds=1800, target=goal)
    >>> round(float(check.miss_probability[0]), 3)
    0.363
    """
    arr = _check_lam(lam)
    windows = arr.shape[1]
    seconds = _check_seconds(interval_seconds, windows)
    staff = _check_agents(agents, windows)
    if target.patience is None:
        load = arr.mean(axis=0) / seconds * target.handle_time
        under = np.flatnonzero((load > 0) & (staff <= load))
        if under.size:
            i = int(under[0])
            raise StaffingError(
                f"agents[{i}] = {int(staff[i])} is not above the offered load of {load[i]:.4g} "
                "erlangs at the predictive mean: the queue would grow without bound; allowed: "
                "more agents than the load, or give a patience (Erlang A)"
            )
    return _check_staffing(_count_grid(arr), staff, seconds, target)


# --------------------------------------------------------------------------- the plan


@dataclass(frozen=True)
class DayTotal:
    """Agent-hours of one day of a plan.

    Attributes
    ----------
    day
        The day's label (e.g. a local date).
    mean_arrivals
        Predictive mean arrivals over the day's intervals.
    plug_in_hours, assured_hours
        Agent-hours answering calls under staffing (a) and (b).
    plug_in_paid_hours, assured_paid_hours
        The same grossed up for shrinkage: ``hours / (1 - shrinkage)``.
    """

    day: str
    mean_arrivals: float
    plug_in_hours: float
    assured_hours: float
    plug_in_paid_hours: float
    assured_paid_hours: float


@dataclass(frozen=True)
class StaffingPlan:
    """Staffing per interval: plug-in (a), assured (b) and how each fares (c).

    Attributes
    ----------
    target, meet_probability, shrinkage
        The inputs the plan was made for.
    interval_seconds
        Length of each interval.
    day
        Day label of each interval (for totals).
    mean_arrivals
        Predictive mean arrivals ``E[K]``.
    quantile_arrivals
        Exact p-quantile of the predictive count, ``p = meet_probability``.
    mean_load
        Offered load in erlangs at the predictive mean.
    plug_in, assured
        Staffing (a) and (b) with their expected service level and miss probability.
    """

    target: ServiceTarget
    meet_probability: float
    shrinkage: float
    interval_seconds: FloatArray
    day: tuple[str, ...]
    mean_arrivals: FloatArray
    quantile_arrivals: IntArray
    mean_load: FloatArray
    plug_in: StaffingCheck
    assured: StaffingCheck

    def scheduled(self, agents: IntArray) -> IntArray:
        """Paid agents per interval for ``agents`` available: ``ceil(N / (1 - shrinkage))``."""
        gross = agents / (1.0 - self.shrinkage)
        # Rounding noise must not turn an exact 10.000000000000002 into 11.
        return np.ceil(gross - 1e-9 * np.maximum(gross, 1.0)).astype(np.int64)

    def day_totals(self) -> list[DayTotal]:
        """Agent-hours per day, in order of first appearance."""
        hours = self.interval_seconds / 3600.0
        gross = 1.0 / (1.0 - self.shrinkage)
        labels = np.asarray(self.day, dtype=object)
        totals = []
        for label in dict.fromkeys(self.day):
            mask = labels == label
            plug = float((self.plug_in.agents[mask] * hours[mask]).sum())
            assured = float((self.assured.agents[mask] * hours[mask]).sum())
            totals.append(
                DayTotal(
                    day=label,
                    mean_arrivals=float(self.mean_arrivals[mask].sum()),
                    plug_in_hours=plug,
                    assured_hours=assured,
                    plug_in_paid_hours=plug * gross,
                    assured_paid_hours=assured * gross,
                )
            )
        return totals

    def rows(self, labels: Sequence[tuple[str, str]]) -> list[dict[str, Any]]:
        """One JSON-ready dict per interval; ``labels`` gives each interval's (start, end)."""
        if len(labels) != self.mean_arrivals.size:
            raise StaffingError(
                f"{len(labels)} interval labels for {self.mean_arrivals.size} intervals"
            )
        paid_plug = self.scheduled(self.plug_in.agents)
        paid_assured = self.scheduled(self.assured.agents)
        out = []
        for i, (start, end) in enumerate(labels):
            out.append(
                {
                    "start": start,
                    "end": end,
                    "mean_arrivals": float(self.mean_arrivals[i]),
                    "quantile_arrivals": int(self.quantile_arrivals[i]),
                    "mean_load_erlangs": float(self.mean_load[i]),
                    "plug_in": _check_row(self.plug_in, i, int(paid_plug[i])),
                    "assured": _check_row(self.assured, i, int(paid_assured[i])),
                }
            )
        return out


def _check_row(check: StaffingCheck, i: int, paid: int) -> dict[str, Any]:
    return {
        "agents": int(check.agents[i]),
        "scheduled": paid,
        "expected_service_level": float(check.expected_service_level[i]),
        "miss_probability": float(check.miss_probability[i]),
    }


def staff_intervals(
    lam: npt.ArrayLike,
    *,
    interval_seconds: npt.ArrayLike,
    target: ServiceTarget,
    meet_probability: float = 0.9,
    shrinkage: float = 0.0,
    min_agents: int = 1,
    day: Sequence[str] | None = None,
) -> StaffingPlan:
    """Plug-in and assured staffing for each interval of a plan, with how each fares.

    Parameters
    ----------
    lam
        Posterior draws of the expected arrivals, shape ``(draw, interval)``
        (:func:`models.prediction.windows.expected_counts`).
    interval_seconds
        Interval length(s) in seconds (one number, or one per interval).
    target
        The service-level goal (handle time, answer time, share, optional patience).
    meet_probability
        ``p`` in (0, 1): the assured staffing meets the target with probability at least ``p``
        over the predictive distribution of the interval's arrival count (module notes).
    shrinkage
        Share of paid time not available to answer, in [0, 1).
    min_agents
        Fewest agents in any interval that can receive arrivals (predictive mean > 0); an
        interval that cannot (closed) gets 0. Without it a quiet interval whose count is 0 with
        probability >= p would be left unstaffed.
    day
        Day label per interval for :meth:`StaffingPlan.day_totals`; default one group "all".

    Returns
    -------
    StaffingPlan

    Raises
    ------
    StaffingError
        If an input is outside what is allowed (the message names it).

    Examples
    --------
    Forecast draws of 300 to 420 calls in a 30-minute interval:

    >>> import numpy as np
    >>> lam = np.linspace(300.0, 420.0, 41)[:, None]
    >>> goal = ServiceTarget(handle_time=240, answer_within=20, share=0.8)
    >>> plan = staff_intervals(lam, interval_seconds=1800, target=goal, meet_probability=0.9)
    >>> int(plan.plug_in.agents[0]), int(plan.assured.agents[0])
    (54, 62)
    """
    arr = _check_lam(lam)
    windows = arr.shape[1]
    seconds = _check_seconds(interval_seconds, windows)
    p = _fraction("meet_probability", meet_probability)
    loss = _fraction("shrinkage", shrinkage, lower_open=False)
    if (
        isinstance(min_agents, bool)
        or not isinstance(min_agents, int | np.integer)
        or min_agents < 0
    ):
        raise StaffingError(f"min_agents must be a whole number >= 0; got {min_agents!r}")
    labels = ("all",) * windows if day is None else tuple(str(d) for d in day)
    if len(labels) != windows:
        raise StaffingError(f"day has {len(labels)} labels; allowed: one per interval ({windows})")

    mean = arr.mean(axis=0)
    quantile = mixture_quantile(arr, p)
    floor = np.where(mean > 0, int(min_agents), 0)
    plug_agents = np.maximum(_required(mean, seconds, target), floor)
    assured_agents = np.maximum(_required(quantile.astype(np.float64), seconds, target), floor)
    grid = _count_grid(arr)
    return StaffingPlan(
        target=target,
        meet_probability=p,
        shrinkage=loss,
        interval_seconds=seconds,
        day=labels,
        mean_arrivals=mean,
        quantile_arrivals=quantile,
        mean_load=mean / seconds * target.handle_time,
        plug_in=_check_staffing(grid, plug_agents, seconds, target),
        assured=_check_staffing(grid, assured_agents, seconds, target),
    )

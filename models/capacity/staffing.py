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
* The service level of a (count, agents) pair comes from :mod:`models.capacity.queueing`, the one
  implementation of the queue formulas: Erlang C per pair (0 when ``N <= A``), or Erlang A
  (M/M/N+M) from the birth-death stationary distribution, with that module's limits (at most
  :data:`~models.capacity.queueing.MAX_QUEUE_STATES` queue states, loads up to
  :data:`~models.capacity.queueing.MAX_LOAD` erlangs).
* ``n*`` for many loads at once by doubling then bisection on ``N`` (service level rises with
  ``N``), both bounded: a search that would pass
  :data:`~models.capacity.queueing.MAX_AGENTS`, or a service level that comes out NaN, raises
  :class:`~models.exceptions.StaffingError` naming the interval instead of searching on.
* The count distribution of each interval for (c) on a grid of counts
  (:mod:`models.capacity.counts`); the p-quantile in (b) is exact.

Inputs are checked once, where they enter: :class:`ServiceTarget` refuses handle times outside
:data:`HANDLE_TIME_SECONDS` and patience below :data:`MIN_PATIENCE_SECONDS` (a subnormal such as
5e-324 s would make its rate infinite and every service level NaN); each public function checks
its arrays and options.

Shrinkage ``s`` is the share of paid time agents are not available to answer (breaks, training,
absence): ``N`` available agents need ``N / (1 - s)`` paid, rounded up per interval.

Caution
-------
Forecasts are probabilistic and real intervals are not in steady state: every figure here is
advisory (see :data:`STAFFING_CAUTION`).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import numpy.typing as npt

from models.capacity.counts import CountGrid, count_grid
from models.capacity.queueing import (
    MAX_AGENTS,
    MAX_LOAD,
    _erlang_a_pairs,
    _erlang_c_pairs,
    check_number,
)
from models.exceptions import StaffingError
from models.prediction.mixture import mixture_quantile

__all__ = [
    "HANDLE_TIME_SECONDS",
    "MIN_PATIENCE_SECONDS",
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

#: Mean handle times a :class:`ServiceTarget` accepts, in seconds: below a millisecond the queue
#: is no queue (and a subnormal time makes the service rate infinite); above a day no
#: steady-state interval formula means anything.
HANDLE_TIME_SECONDS = (0.001, 86_400.0)
#: Shortest mean patience a :class:`ServiceTarget` accepts, in seconds (``None`` means nobody
#: hangs up); a shorter one, down to a subnormal such as 5e-324, makes the hang-up rate infinite.
MIN_PATIENCE_SECONDS = 0.001

# Counts whose probability is below this add nothing visible to (c); their service level is skipped.
_NEGLIGIBLE_PMF = 1e-18
# Rounds of doubling, then of bisection, in the agents search: 2**64 passes MAX_AGENTS.
_MAX_SEARCH_ROUNDS = 64


# --------------------------------------------------------------------------- inputs


def _fraction(name: str, value: float, *, zero: bool = False) -> float:
    """A share in (0, 1), or in [0, 1) if ``zero`` is allowed."""
    allowed = f"in {'[' if zero else '('}0, 1)"
    return check_number(
        name, value, allowed=allowed, minimum=0, strict=not zero, maximum=1, strict_max=True
    )


@dataclass(frozen=True)
class ServiceTarget:
    """The service-level goal of a queue and how long calls take.

    Attributes
    ----------
    handle_time
        Mean handle time in seconds, within :data:`HANDLE_TIME_SECONDS` (1 ms to 1 day).
    answer_within
        Target answer time ``T`` in seconds (finite, >= 0).
    share
        Share of callers to answer within ``T``, strictly between 0 and 1 (0.8 for "80% in T").
    patience
        Mean patience in seconds (finite, >= :data:`MIN_PATIENCE_SECONDS`) if callers hang up
        while waiting (Erlang A), or ``None`` if nobody hangs up (Erlang C). Callers who hang up
        count as not answered.

    Raises
    ------
    StaffingError
        If a value is outside those ranges; the message names it and the range.

    Examples
    --------
    The values are stored as checked floats (no computed figure here):

    >>> ServiceTarget(handle_time=240, answer_within=20, share=0.8)
    ServiceTarget(handle_time=240.0, answer_within=20.0, share=0.8, patience=None)
    """

    handle_time: float
    answer_within: float
    share: float
    patience: float | None = None

    def __post_init__(self) -> None:
        set_ = object.__setattr__  # frozen: store the checked float values
        low, high = HANDLE_TIME_SECONDS
        allowed = f"seconds in [{low:g}, {high:g}]"
        handle = check_number(
            "handle_time", self.handle_time, allowed=allowed, minimum=low, maximum=high
        )
        set_(self, "handle_time", handle)
        within = check_number(
            "answer_within", self.answer_within, allowed="finite seconds >= 0", minimum=0
        )
        set_(self, "answer_within", within)
        set_(self, "share", _fraction("service-level share", self.share))
        if self.patience is not None:
            allowed = f"finite seconds >= {MIN_PATIENCE_SECONDS:g}, or None (nobody hangs up)"
            patience = check_number(
                "patience", self.patience, allowed=allowed, minimum=MIN_PATIENCE_SECONDS
            )
            set_(self, "patience", patience)


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
    bad = np.flatnonzero(
        ~np.isfinite(values) | (values < 0) | (values != np.round(values)) | (values > MAX_AGENTS)
    )
    if bad.size:
        i = int(bad[0])
        raise StaffingError(
            f"agents[{i}] = {float(values[i])!r}; allowed: whole numbers from 0 to {MAX_AGENTS}"
        )
    return values.astype(np.int64)


def _check_arrivals(arrivals: npt.ArrayLike) -> FloatArray:
    arr = np.asarray(arrivals, dtype=np.float64)
    bad = np.flatnonzero(~np.isfinite(arr) | (arr < 0))
    if bad.size:
        i = int(bad[0])
        raise StaffingError(f"arrivals[{i}] = {float(arr.flat[i])!r}; allowed: finite numbers >= 0")
    return arr


# --------------------------------------------------------------------------- service level


def _level(
    arrivals: FloatArray, agents: FloatArray, seconds: FloatArray, target: ServiceTarget
) -> FloatArray:
    """Service level for pairs (arrivals per interval, agents); no arrivals misses nothing.

    The NaN/inf exit of every search here: a level that is not a finite number is refused with
    the inputs that gave it, never compared with the target.
    """
    level = np.ones(arrivals.shape)
    busy = arrivals > 0
    if not busy.any():
        return level
    rate = arrivals[busy] / seconds[busy]
    n = agents[busy]
    if target.patience is None:
        level[busy] = _erlang_c_pairs(
            rate * target.handle_time,
            n,
            handle_time=target.handle_time,
            answer_within=target.answer_within,
        )
    else:
        level[busy] = _erlang_a_pairs(
            rate,
            n,
            service_rate=1.0 / target.handle_time,
            patience_rate=1.0 / target.patience,
            within=target.answer_within,
            patience=f"patience of {target.patience:.6g} s is too long",
            per="per second",
        )
    bad = np.flatnonzero(~np.isfinite(level))
    if bad.size:
        i = int(bad[0])
        raise StaffingError(
            f"the service level is {level[i]!r} for {arrivals[i]!r} arrivals in "
            f"{seconds[i]!r} s with {agents[i]:.0f} agents and {target}; allowed: inputs that "
            "give a finite service level"
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
    (the worked interval of ``../shared/REFERENCE_VALUES.md``, listed there as 0.845883):

    >>> goal = ServiceTarget(handle_time=240, answer_within=15, share=0.8)
    >>> service_level_at([360.0], [55], interval_seconds=1800, target=goal).round(6)
    array([0.845883])
    """
    arr = _check_arrivals(arrivals)
    shape = np.broadcast_shapes(arr.shape, np.shape(agents), np.shape(interval_seconds))
    size = int(np.prod(shape))
    flat_agents = _check_agents(np.broadcast_to(np.asarray(agents), shape).ravel(), size)
    seconds = _check_seconds(np.broadcast_to(np.asarray(interval_seconds), shape).ravel(), size)
    level = _level(
        np.broadcast_to(arr, shape).ravel(), flat_agents.astype(np.float64), seconds, target
    )
    return level.reshape(shape)


# --------------------------------------------------------------------------- agents needed


def _check_loads(arrivals: FloatArray, seconds: FloatArray, target: ServiceTarget) -> FloatArray:
    """Offered loads in erlangs per interval, refused above the queue formulas' MAX_LOAD."""
    load = arrivals / seconds * target.handle_time
    over = np.flatnonzero(load > MAX_LOAD)
    if over.size:
        i = int(over[0])
        raise StaffingError(
            f"interval {i}: {arrivals[i]:.6g} arrivals in {seconds[i]:g} s at a handle time of "
            f"{target.handle_time:g} s are an offered load of {load[i]:.6g} erlangs; allowed: "
            f"at most {MAX_LOAD:g} erlangs per interval"
        )
    return load


def _required(arrivals: FloatArray, seconds: FloatArray, target: ServiceTarget) -> IntArray:
    """``n*``: fewest agents with service level >= share, for each (arrivals, seconds) pair."""
    need = np.zeros(arrivals.shape, dtype=np.int64)
    busy = np.flatnonzero(arrivals > 0)
    if busy.size == 0:
        return need
    arr, sec = arrivals[busy], seconds[busy]
    load = _check_loads(arr, sec, target)
    # Invariant: level(low) < share <= level(high). Erlang C fails at N <= A (unstable);
    # with abandonment nothing is certain but that zero agents answer nobody.
    low = np.floor(load) if target.patience is None else np.zeros(busy.size)
    step = np.maximum(1.0, np.ceil(np.sqrt(load)))
    high = low + step
    todo = np.arange(busy.size)
    for _ in range(_MAX_SEARCH_ROUNDS):  # doubling: past MAX_AGENTS within ~21 rounds (refused)
        if not todo.size:
            break
        ok = _level(arr[todo], high[todo], sec[todo], target) >= target.share
        failed = todo[~ok]
        beyond = failed[high[failed] >= MAX_AGENTS]
        if beyond.size:
            i = int(busy[beyond[0]])
            raise StaffingError(
                f"interval {i}: no staffing of up to {MAX_AGENTS} agents meets a service level "
                f"of {target.share!r} for {arrivals[i]!r} arrivals in {seconds[i]!r} s; "
                "allowed: targets some staffing can meet"
            )
        low[failed] = high[failed]
        step[failed] *= 2.0
        high[failed] = np.minimum(low[failed] + step[failed], MAX_AGENTS)
        todo = failed
    todo = np.flatnonzero(high - low > 1)
    for _ in range(_MAX_SEARCH_ROUNDS):  # bisection halves every gap of at most MAX_AGENTS
        if not todo.size:
            break
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

    Raises
    ------
    StaffingError
        On bad input, if an interval's offered load is above
        :data:`~models.capacity.queueing.MAX_LOAD` erlangs, or if no staffing of up to
        :data:`~models.capacity.queueing.MAX_AGENTS` agents meets the target.

    Examples
    --------
    360 calls per 30 minutes at 240 s each is 48 erlangs: 54 agents answer 81.7% within 20 s and
    53 agents 75.2% (as in :func:`models.capacity.queueing.agents_for_service_level`, whose
    example shows the check); no arrivals need nobody:

    >>> goal = ServiceTarget(handle_time=240, answer_within=20, share=0.8)
    >>> required_agents([360.0, 0.0], interval_seconds=1800, target=goal)
    array([54,  0])
    """
    arr = np.atleast_1d(_check_arrivals(arrivals))
    if arr.ndim != 1:
        raise StaffingError(f"arrivals must be 1-D; got shape {arr.shape}")
    return _required(arr, _check_seconds(interval_seconds, arr.size), target)


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
    grid: CountGrid, agents: IntArray, seconds: FloatArray, target: ServiceTarget
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
    A rate known to be 360 calls per 30 minutes still gives a Poisson(360) count. With 55 agents
    (AHT 240 s) the Erlang C level within 15 s is 0.8024 at 366 calls and 0.7943 at 367, so the
    target is missed when 367 or more come: ``scipy.stats.poisson.sf(366, 360) = 0.36305``
    (both recomputed with scipy.stats.poisson):

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
    load = _check_loads(arr.mean(axis=0), seconds, target)
    if target.patience is None:
        under = np.flatnonzero((load > 0) & (staff <= load))
        if under.size:
            i = int(under[0])
            raise StaffingError(
                f"agents[{i}] = {int(staff[i])} is not above the offered load of {load[i]:.4g} "
                "erlangs at the predictive mean: the queue would grow without bound; allowed: "
                "more agents than the load, or give a patience (Erlang A)"
            )
    return _check_staffing(count_grid(arr), staff, seconds, target)


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
    Forecast draws of 300 to 420 calls in a 30-minute interval. The plug-in staffing is the 54
    agents of 360 calls (:func:`required_agents`); the exact 0.9-quantile of the count is 414
    (the mean over draws of ``scipy.stats.poisson.cdf`` is 0.8988 at 413 and 0.9039 at 414), and
    414 calls (55.2 erlangs) reach ``SL(20 s) = 0.8426`` with 62 agents but 0.7885 with 61
    (Erlang C recomputed with scipy.stats.poisson):

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
    loss = _fraction("shrinkage", shrinkage, zero=True)
    if (
        isinstance(min_agents, bool)
        or not isinstance(min_agents, int | np.integer)
        or not 0 <= min_agents <= MAX_AGENTS
    ):
        raise StaffingError(
            f"min_agents must be a whole number from 0 to {MAX_AGENTS}; got {min_agents!r}"
        )
    labels = ("all",) * windows if day is None else tuple(str(d) for d in day)
    if len(labels) != windows:
        raise StaffingError(f"day has {len(labels)} labels; allowed: one per interval ({windows})")

    mean = arr.mean(axis=0)
    # Refuse what is too large before any heavy work: the load at the mean, then the size of
    # the count grid (which also bounds the work of the exact quantile).
    _check_loads(mean, seconds, target)
    grid = count_grid(arr)
    quantile = mixture_quantile(arr, p)
    floor = np.where(mean > 0, int(min_agents), 0)
    plug_agents = np.maximum(_required(mean, seconds, target), floor)
    assured_agents = np.maximum(_required(quantile.astype(np.float64), seconds, target), floor)
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

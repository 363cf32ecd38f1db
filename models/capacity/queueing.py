"""Queueing formulas for staffing: Erlang B, Erlang C, Erlang A and square-root staffing.

Units
-----
The *load* (offered traffic) is in erlangs: arrival rate x mean handle time, both in the same time
unit (e.g. 360 calls per 30 minutes with a 4-minute handle time is 12 calls/min x 4 min = 48
erlangs). ``handle_time``, ``answer_within`` and the average speed of answer share one time unit of
your choice (seconds, say). ``erlang_a`` takes rates per one time unit instead, and its waiting
times come back in that unit.

Formulas (``A`` load, ``N`` agents, ``AHT`` mean handle time)
--------------------------------------------------------------
* Erlang B blocking, by the recursion ``B_0 = 1``, ``B_k = A B_{k-1} / (k + A B_{k-1})``. It never
  forms a factorial or a power, so it stays finite and accurate for thousands of agents and
  thousands of erlangs; values below about 1e-308 underflow to 0.
* Erlang C probability of waiting, ``C = N B / (N - A (1 - B))`` for ``N > A``. When ``N <= A`` the
  queue is unstable (it grows without bound) and this module returns ``C = 1``, service level 0 and
  an infinite average speed of answer rather than raising: a staffing search then simply moves on.
* Service level ``SL(t) = 1 - C exp(-(N - A) t / AHT)``: the share of callers answered within
  ``t`` in the M/M/N queue, first come first served, nobody hangs up.
* Average speed of answer ``ASA = C AHT / (N - A)``; occupancy ``A / N`` (capped at 1).
* Erlang A (M/M/N+M: callers hang up after an exponential patience with rate ``theta``; Garnett,
  Mandelbaum & Reiman, M&SOM 4(3), 2002) from the exact birth-death stationary distribution,
  summed in log space and truncated only where the remaining mass is below 1e-19 of the total.
* Square-root staffing ``N = ceil(R + beta sqrt(R))`` with the Halfin-Whitt wait probability
  ``[1 + beta Phi(beta) / phi(beta)]^-1`` (Halfin & Whitt, Operations Research 29(3), 1981;
  Borst, Mandelbaum & Reiman, Operations Research 52(1), 2004).

Caution
-------
These are steady-state figures for an idealised queue fed by a *forecast* load. Forecasts are
probabilistic and real intervals are not in steady state, so every staffing figure here is
advisory. Local labour rules, breaks, shrinkage and the licensed or responsible people who plan
the rota decide the actual staffing.
"""

from __future__ import annotations

import math
import operator
from collections.abc import Iterator
from dataclasses import dataclass
from typing import Any, overload

import numpy as np
import numpy.typing as npt
from scipy import optimize, special, stats

from models.exceptions import StaffingError

__all__ = [
    "ErlangAResult",
    "agents_for_service_level",
    "agents_for_wait_probability",
    "answered_within",
    "average_speed_of_answer",
    "erlang_a",
    "erlang_b",
    "erlang_c",
    "halfin_whitt_beta",
    "halfin_whitt_wait_probability",
    "occupancy",
    "service_level",
    "square_root_staffing",
]

FloatArray = npt.NDArray[np.float64]
AgentCount = int | np.integer[Any]

# log(1e-19): terms this far below the largest are beyond double precision of the total.
_LOG_NEGLIGIBLE = -44.0
# Above this many queue states the patience rate is too small for an exact sum in memory.
_MAX_QUEUE_STATES = 5_000_000
# Above this ratio (service capacity / patience rate) the Erlang-A waiting-time law equals the
# Erlang-C one to double precision, and the incomplete beta function loses accuracy.
_PATIENCE_NEGLIGIBLE_RATIO = 1e25


# --------------------------------------------------------------------------- input checks


def _check_number(name: str, value: float, *, allowed: str, minimum: float, strict: bool) -> float:
    """Return ``value`` as a float or raise :class:`StaffingError` naming it."""
    if isinstance(value, bool) or not isinstance(value, int | float | np.integer | np.floating):
        raise StaffingError(f"{name} must be a number ({allowed}); got {value!r}")
    number = float(value)
    too_small = number <= minimum if strict else number < minimum
    if not math.isfinite(number) or too_small:
        raise StaffingError(f"{name} must be {allowed}; got {value!r}")
    return number


def _check_agents(agents: AgentCount, *, minimum: int = 0) -> int:
    """Return ``agents`` as an int or raise :class:`StaffingError` naming it."""
    try:
        if isinstance(agents, bool):
            raise TypeError
        count = operator.index(agents)
    except TypeError:
        raise StaffingError(f"agents must be a whole number >= {minimum}; got {agents!r}") from None
    if count < minimum:
        raise StaffingError(f"agents must be a whole number >= {minimum}; got {agents!r}")
    return count


def _check_fraction(name: str, value: float) -> float:
    """Return a probability target strictly between 0 and 1, or raise naming it."""
    number = _check_number(name, value, allowed="strictly between 0 and 1", minimum=0, strict=True)
    if number >= 1:
        raise StaffingError(f"{name} must be strictly between 0 and 1; got {value!r}")
    return number


def _check_load(load: float | FloatArray) -> tuple[FloatArray, bool]:
    """Return the load(s) as a float array and whether a scalar was given."""
    allowed = "a finite number of erlangs >= 0"
    scalar = np.ndim(load) == 0
    if scalar:
        if isinstance(load, np.ndarray):
            load = load.item()
        return np.asarray(
            _check_number("load", load, allowed=allowed, minimum=0, strict=False)
        ), True
    try:
        loads = np.asarray(load, dtype=np.float64)
    except (TypeError, ValueError):
        raise StaffingError(f"load must hold numbers ({allowed}); got {load!r}") from None
    bad = ~np.isfinite(loads) | (loads < 0)
    if bad.any():
        index = tuple(int(i) for i in np.argwhere(bad)[0])
        raise StaffingError(
            f"load must hold only finite numbers of erlangs >= 0; got {float(loads[index])!r} "
            f"at index {index}"
        )
    return loads, False


def _check_time(name: str, value: float, *, positive: bool) -> float:
    allowed = "a finite time > 0" if positive else "a finite time >= 0"
    return _check_number(name, value, allowed=allowed, minimum=0, strict=positive)


def _result(values: FloatArray, scalar: bool) -> Any:
    return float(values) if scalar else values


# --------------------------------------------------------------------------- Erlang B and C


def _next_blocking(load: Any, previous: Any, agents: int) -> Any:
    """One step of the Erlang B recursion; works on floats and arrays alike."""
    offered = load * previous
    return offered / (agents + offered)


def _blocking_from(load: float, start: int) -> Iterator[tuple[int, float]]:
    """Yield ``(N, B(load, N))`` for ``N = start, start + 1, ...`` in O(1) per step."""
    blocking = 1.0
    for agents in range(1, start + 1):
        blocking = _next_blocking(load, blocking, agents)
    agents = start
    while True:
        yield agents, blocking
        agents += 1
        blocking = _next_blocking(load, blocking, agents)


def _blocking(loads: FloatArray, agents: int) -> FloatArray:
    if loads.ndim == 0:  # plain floats are much faster than 0-d arrays in a long loop
        return np.asarray(next(_blocking_from(float(loads), agents))[1])
    blocking = np.ones_like(loads)
    for k in range(1, agents + 1):
        blocking = _next_blocking(loads, blocking, k)
    return blocking


def _wait_probability(loads: FloatArray, agents: int, blocking: FloatArray) -> FloatArray:
    stable = agents > loads
    # Every caller waits once the queue is unstable; the formula below would divide by <= 0.
    wait = np.ones_like(loads)
    b = blocking[stable]
    wait[stable] = agents * b / (agents - loads[stable] * (1.0 - b))
    return wait


@overload
def erlang_b(load: float, agents: AgentCount) -> float: ...
@overload
def erlang_b(load: FloatArray, agents: AgentCount) -> FloatArray: ...
def erlang_b(load: float | FloatArray, agents: AgentCount) -> float | FloatArray:
    """Blocking probability of the Erlang loss system M/M/N/N.

    Parameters
    ----------
    load
        Offered load in erlangs (>= 0), a number or an array of numbers.
    agents
        Number of agents (servers), a whole number >= 0.

    Returns
    -------
    float or numpy.ndarray
        Share of callers who find every agent busy and are lost; same shape as ``load``.

    Examples
    --------
    >>> round(erlang_b(2.0, 3), 12)  # 4/19
    0.210526315789
    """
    loads, scalar = _check_load(load)
    count = _check_agents(agents)
    return _result(_blocking(loads, count), scalar)


@overload
def erlang_c(load: float, agents: AgentCount) -> float: ...
@overload
def erlang_c(load: FloatArray, agents: AgentCount) -> FloatArray: ...
def erlang_c(load: float | FloatArray, agents: AgentCount) -> float | FloatArray:
    """Probability that a caller has to wait in the Erlang delay system M/M/N.

    Parameters
    ----------
    load
        Offered load in erlangs (>= 0), a number or an array of numbers.
    agents
        Number of agents, a whole number >= 0.

    Returns
    -------
    float or numpy.ndarray
        ``P(wait > 0)``. It is 1.0 when ``agents <= load``: the queue is then unstable and every
        caller eventually waits (no error is raised, so staffing searches can step past it).

    Examples
    --------
    >>> round(erlang_c(2.0, 3), 12)  # 4/9
    0.444444444444
    >>> erlang_c(5.0, 5)
    1.0
    """
    loads, scalar = _check_load(load)
    count = _check_agents(agents)
    return _result(_wait_probability(loads, count, _blocking(loads, count)), scalar)


@overload
def service_level(
    load: float, agents: AgentCount, *, handle_time: float, answer_within: float
) -> float: ...
@overload
def service_level(
    load: FloatArray, agents: AgentCount, *, handle_time: float, answer_within: float
) -> FloatArray: ...
def service_level(
    load: float | FloatArray, agents: AgentCount, *, handle_time: float, answer_within: float
) -> float | FloatArray:
    """Share of callers answered within ``answer_within`` in the Erlang C queue.

    Parameters
    ----------
    load
        Offered load in erlangs (>= 0), a number or an array of numbers.
    agents
        Number of agents, a whole number >= 0.
    handle_time
        Mean handle time (> 0), in the same time unit as ``answer_within``.
    answer_within
        Target answer time (>= 0).

    Returns
    -------
    float or numpy.ndarray
        ``1 - C exp(-(N - A) t / AHT)``, or 0.0 when ``agents <= load`` (unstable queue).

    Examples
    --------
    >>> round(service_level(48.0, 55, handle_time=240.0, answer_within=15.0), 6)
    0.845883
    """
    loads, scalar = _check_load(load)
    count = _check_agents(agents)
    aht = _check_time("handle_time", handle_time, positive=True)
    within = _check_time("answer_within", answer_within, positive=False)
    wait = _wait_probability(loads, count, _blocking(loads, count))
    stable = count > loads
    level = np.zeros_like(loads)
    level[stable] = 1.0 - wait[stable] * np.exp(-(count - loads[stable]) * within / aht)
    return _result(level, scalar)


@overload
def average_speed_of_answer(load: float, agents: AgentCount, *, handle_time: float) -> float: ...
@overload
def average_speed_of_answer(
    load: FloatArray, agents: AgentCount, *, handle_time: float
) -> FloatArray: ...
def average_speed_of_answer(
    load: float | FloatArray, agents: AgentCount, *, handle_time: float
) -> float | FloatArray:
    """Mean wait over all callers (those answered at once count as 0) in the Erlang C queue.

    Parameters
    ----------
    load
        Offered load in erlangs (>= 0), a number or an array of numbers.
    agents
        Number of agents, a whole number >= 0.
    handle_time
        Mean handle time (> 0); the result is in the same time unit.

    Returns
    -------
    float or numpy.ndarray
        ``C AHT / (N - A)``, or ``inf`` when ``agents <= load`` (unstable queue).

    Examples
    --------
    >>> round(average_speed_of_answer(48.0, 55, handle_time=240.0), 3)
    8.184
    """
    loads, scalar = _check_load(load)
    count = _check_agents(agents)
    aht = _check_time("handle_time", handle_time, positive=True)
    wait = _wait_probability(loads, count, _blocking(loads, count))
    stable = count > loads
    speed = np.full_like(loads, np.inf)
    speed[stable] = wait[stable] * aht / (count - loads[stable])
    return _result(speed, scalar)


@overload
def occupancy(load: float, agents: AgentCount) -> float: ...
@overload
def occupancy(load: FloatArray, agents: AgentCount) -> FloatArray: ...
def occupancy(load: float | FloatArray, agents: AgentCount) -> float | FloatArray:
    """Share of agent time spent handling calls, ``load / agents`` capped at 1.

    Parameters
    ----------
    load
        Offered load in erlangs (>= 0), a number or an array of numbers.
    agents
        Number of agents, a whole number >= 1.

    Examples
    --------
    >>> occupancy(48.0, 60)
    0.8
    """
    loads, scalar = _check_load(load)
    count = _check_agents(agents, minimum=1)
    return _result(np.minimum(loads / count, 1.0), scalar)


# --------------------------------------------------------------------------- staffing searches


def _smallest_stable_agents(load: float) -> int:
    # The first N with N > A; the queue formulas treat N <= A as unstable, even at zero load.
    return math.floor(load) + 1


def agents_for_wait_probability(load: float, alpha: float) -> int:
    """Smallest number of agents with Erlang C ``P(wait > 0) <= alpha``.

    Parameters
    ----------
    load
        Offered load in erlangs (>= 0).
    alpha
        Largest acceptable probability of waiting, strictly between 0 and 1.

    Returns
    -------
    int
        Advisory agent count (at least 1); see the module caution.

    Examples
    --------
    >>> agents_for_wait_probability(100.0, 0.2)
    111
    """
    rho = _check_load(load)[0].item()
    target = _check_fraction("alpha", alpha)
    for agents, blocking in _blocking_from(rho, _smallest_stable_agents(rho)):
        if agents * blocking / (agents - rho * (1.0 - blocking)) <= target:
            return agents
    raise AssertionError("unreachable: the search above only stops by returning")


def agents_for_service_level(
    load: float,
    *,
    handle_time: float,
    answer_within: float,
    target: float,
    max_occupancy: float | None = None,
) -> int:
    """Smallest number of agents whose Erlang C service level reaches ``target``.

    The search starts at the first stable staffing (and, if given, the first meeting
    ``max_occupancy``) and steps up one agent at a time, extending the Erlang B recursion by one
    step each time, since service level never falls as agents are added.

    Parameters
    ----------
    load
        Offered load in erlangs (>= 0).
    handle_time
        Mean handle time (> 0), same time unit as ``answer_within``.
    answer_within
        Target answer time (>= 0).
    target
        Required share answered within ``answer_within``, strictly between 0 and 1.
    max_occupancy
        Optional ceiling on ``load / agents``, in (0, 1].

    Returns
    -------
    int
        Advisory agent count (at least 1); see the module caution.

    Examples
    --------
    >>> agents_for_service_level(48.0, handle_time=240.0, answer_within=20.0, target=0.8)
    54
    >>> agents_for_service_level(
    ...     48.0, handle_time=240.0, answer_within=20.0, target=0.8, max_occupancy=0.85
    ... )
    57
    """
    rho = _check_load(load)[0].item()
    aht = _check_time("handle_time", handle_time, positive=True)
    within = _check_time("answer_within", answer_within, positive=False)
    goal = _check_fraction("target", target)
    start = _smallest_stable_agents(rho)
    if max_occupancy is not None:
        ceiling = _check_number(
            "max_occupancy", max_occupancy, allowed="in (0, 1]", minimum=0, strict=True
        )
        if ceiling > 1:
            raise StaffingError(f"max_occupancy must be in (0, 1]; got {max_occupancy!r}")
        start = max(start, math.ceil(rho / ceiling))
        # Rounding in the division can overshoot by one; recheck with the occupancy test itself.
        while start > 1 and rho / (start - 1) <= ceiling:
            start -= 1
        while rho / start > ceiling:
            start += 1
    for agents, blocking in _blocking_from(rho, start):
        wait = agents * blocking / (agents - rho * (1.0 - blocking))
        if 1.0 - wait * math.exp(-(agents - rho) * within / aht) >= goal:
            return agents
    raise AssertionError("unreachable: the search above only stops by returning")


# --------------------------------------------------------------------------- square-root staffing


def halfin_whitt_wait_probability(beta: float) -> float:
    """Halfin-Whitt limit of ``P(wait > 0)`` under square-root staffing with spare ``beta``.

    Parameters
    ----------
    beta
        Quality-of-service factor in ``N = R + beta sqrt(R)``, finite and >= 0.

    Returns
    -------
    float
        ``[1 + beta Phi(beta) / phi(beta)]^-1``, computed in log space so a large ``beta``
        underflows quietly towards 0 instead of overflowing.

    Examples
    --------
    >>> round(halfin_whitt_wait_probability(1.0), 5)
    0.22336
    """
    spare = _check_number("beta", beta, allowed="a finite number >= 0", minimum=0, strict=False)
    if spare == 0:
        return 1.0
    log_ratio = math.log(spare) + special.log_ndtr(spare) - stats.norm.logpdf(spare)
    return float(special.expit(-log_ratio))


def halfin_whitt_beta(wait_probability: float) -> float:
    """The ``beta`` whose Halfin-Whitt wait probability equals ``wait_probability``.

    Solves ``beta Phi(beta) / phi(beta) = (1 - alpha) / alpha``; feed the result to
    :func:`square_root_staffing`.

    Parameters
    ----------
    wait_probability
        Target ``P(wait > 0)``, strictly between 0 and 1.

    Examples
    --------
    >>> round(halfin_whitt_beta(0.2), 5)
    1.06152
    """
    alpha = _check_fraction("wait_probability", wait_probability)
    log_goal = math.log1p(-alpha) - math.log(alpha)

    def excess(beta: float) -> float:
        return float(math.log(beta) + special.log_ndtr(beta) - stats.norm.logpdf(beta) - log_goal)

    upper = 1.0
    while excess(upper) < 0:
        upper *= 2.0
    lower = upper / 2.0
    while excess(lower) > 0:
        lower /= 2.0
    return float(optimize.brentq(excess, lower, upper, xtol=1e-14, rtol=1e-14))


def square_root_staffing(load: float, beta: float) -> int:
    """Agents by the square-root rule ``ceil(R + beta sqrt(R))``.

    Parameters
    ----------
    load
        Offered load ``R`` in erlangs (>= 0).
    beta
        Finite quality-of-service factor; negative values (understaffing, only sensible when
        callers abandon) are allowed, and the result is never below 0.

    Returns
    -------
    int
        Advisory agent count; see the module caution.

    Examples
    --------
    >>> square_root_staffing(100.0, 1.0)
    110
    """
    rho = _check_load(load)[0].item()
    spare = _check_number("beta", beta, allowed="a finite number", minimum=-math.inf, strict=True)
    exact = rho + spare * math.sqrt(rho)
    # Rounding noise must not turn an exact whole number like 110.00000000000001 into 111.
    return max(0, math.ceil(exact - 1e-12 * max(1.0, abs(exact))))


# --------------------------------------------------------------------------- Erlang A


@dataclass(frozen=True, slots=True)
class ErlangAResult:
    """Steady-state figures of the M/M/N+M queue, per arriving caller.

    Attributes
    ----------
    prob_wait
        ``P(wait > 0)``: the caller finds every agent busy.
    prob_abandon
        Share of callers who hang up before being answered.
    mean_wait
        Mean time in queue over all callers (answered at once = 0; abandoners count until they
        hang up), in the time unit of the rates.
    service_level
        Share of *all* callers answered within ``answer_within`` (abandoners never count as
        answered); ``None`` when no ``answer_within`` was asked for.
    """

    prob_wait: float
    prob_abandon: float
    mean_wait: float
    service_level: float | None


def _queue_log_weights(arrival_rate: float, capacity: float, patience_rate: float) -> FloatArray:
    """``log(pi_{N+j} / pi_N)`` for ``j = 0..J``, with ``J`` past all non-negligible mass."""
    peak = max(0.0, (arrival_rate - capacity) / patience_rate)
    if peak > _MAX_QUEUE_STATES / 2:
        raise StaffingError(
            f"patience_rate {patience_rate!r} is too small for an exact sum at this overload "
            f"(about {peak:.3g} callers would queue); use a larger patience_rate or patience_rate=0"
        )
    size = int(min(_MAX_QUEUE_STATES, max(256.0, 2.0 * peak + 256.0)))
    while True:
        log_ratio = math.log(arrival_rate) - np.log(
            capacity + patience_rate * np.arange(1, size + 1, dtype=np.float64)
        )
        log_weights = np.concatenate(([0.0], np.cumsum(log_ratio)))
        last = float(log_ratio[-1])
        if last < 0:
            # Ratios only fall from here on, so a geometric series bounds what is left out.
            log_tail = float(log_weights[-1]) + last - math.log(-math.expm1(last))
            if log_tail < float(log_weights.max()) + _LOG_NEGLIGIBLE:
                return log_weights
        if size >= _MAX_QUEUE_STATES:
            raise StaffingError(
                f"patience_rate {patience_rate!r} is too small for an exact sum this close to "
                "full load; use a larger patience_rate or patience_rate=0"
            )
        size = min(2 * size, _MAX_QUEUE_STATES)


def answered_within(
    queue_ahead: FloatArray, capacity: float, patience_rate: float, within: float
) -> FloatArray:
    """P(answered within ``within``) for a caller who finds ``j`` callers already queued.

    The caller moves up at rate ``N mu + m theta`` when ``m`` are ahead and hangs up at rate
    ``theta``, so the offered wait is a sum of exponentials with rates ``N mu + m theta``,
    ``m = 0..j``: it is distributed as the (j+1)-th smallest of ``b + j`` exponential(theta)
    times, ``b = N mu / theta``. Weighting by the chance ``exp(-theta V)`` of not hanging up first
    gives ``b / (b + j + 1) I_x(j + 1, b + 1)`` with ``x = 1 - exp(-theta t)``.
    """
    stages = queue_ahead + 1.0
    if patience_rate == 0 or capacity / patience_rate > _PATIENCE_NEGLIGIBLE_RATIO:
        return np.asarray(special.gammainc(stages, capacity * within), dtype=np.float64)
    b = capacity / patience_rate
    x = -math.expm1(-patience_rate * within)
    return np.asarray(b / (b + stages) * special.betainc(stages, b + 1.0, x), dtype=np.float64)


def erlang_a(
    arrival_rate: float,
    service_rate: float,
    patience_rate: float,
    agents: AgentCount,
    *,
    answer_within: float | None = None,
) -> ErlangAResult:
    """Exact steady state of the Erlang A queue M/M/N+M (callers may hang up while waiting).

    Parameters
    ----------
    arrival_rate
        Poisson arrival rate ``lambda`` (>= 0), per time unit.
    service_rate
        ``mu`` = 1 / mean handle time (> 0), per the same time unit.
    patience_rate
        ``theta`` = 1 / mean patience (>= 0). ``theta = 0`` is the Erlang C queue (if it is unstable
        the result is wait probability 1, no abandonment, infinite mean wait, service level 0);
        ``theta = mu`` makes the number in system Poisson(lambda / mu), as in M/M/infinity.
    agents
        Number of agents ``N``, a whole number >= 1.
    answer_within
        If given (>= 0, same time unit), also compute the service level.

    Returns
    -------
    ErlangAResult

    Raises
    ------
    StaffingError
        On bad input, or if ``patience_rate`` is so small against an overload that the exact sum
        would need millions of states.

    Notes
    -----
    The stationary distribution of the birth-death chain (birth rate ``lambda``; death rate
    ``k mu`` up to ``N`` in system, then ``N mu + (k - N) theta``) is built in log space;
    ``P(wait) = P(K >= N)`` by PASTA and ``P(abandon) = theta E[queue] / lambda``.

    Examples
    --------
    >>> result = erlang_a(10.0, 1.0, 0.5, 10)
    >>> round(result.prob_wait, 10), round(result.prob_abandon, 10)
    (0.6196552309, 0.1039132123)
    """
    lam = _check_number(
        "arrival_rate", arrival_rate, allowed="a finite rate >= 0", minimum=0, strict=False
    )
    mu = _check_number(
        "service_rate", service_rate, allowed="a finite rate > 0", minimum=0, strict=True
    )
    theta = _check_number(
        "patience_rate", patience_rate, allowed="a finite rate >= 0", minimum=0, strict=False
    )
    count = _check_agents(agents, minimum=1)
    within = (
        None
        if answer_within is None
        else _check_time("answer_within", answer_within, positive=False)
    )
    if lam == 0:
        return ErlangAResult(0.0, 0.0, 0.0, None if within is None else 1.0)
    capacity = count * mu
    if theta == 0:
        # Erlang C: the queue length is geometric, so everything has a closed form.
        load = lam / mu
        wait = erlang_c(load, count)
        if capacity <= lam:
            return ErlangAResult(1.0, 0.0, math.inf, None if within is None else 0.0)
        level = None if within is None else 1.0 - wait * math.exp(-(capacity - lam) * within)
        return ErlangAResult(wait, 0.0, wait / (capacity - lam), level)

    log_load = math.log(lam / mu)
    in_service = np.arange(count, dtype=np.float64)
    log_below = in_service * log_load - special.gammaln(in_service + 1.0)
    log_at_capacity = count * log_load - special.gammaln(count + 1.0)
    log_queue = log_at_capacity + _queue_log_weights(lam, capacity, theta)
    log_mass_below = float(special.logsumexp(log_below))
    log_mass_queue = float(special.logsumexp(log_queue))
    log_total = float(np.logaddexp(log_mass_below, log_mass_queue))

    queued = np.arange(log_queue.size, dtype=np.float64)
    log_mean_queue = float(special.logsumexp(log_queue[1:] + np.log(queued[1:]))) - log_total
    mean_queue = math.exp(log_mean_queue)
    level = None
    if within is not None:
        keep = log_queue > log_queue.max() + _LOG_NEGLIGIBLE
        answered = answered_within(queued[keep], capacity, theta, within)
        level = math.exp(log_mass_below - log_total) + float(
            np.sum(np.exp(log_queue[keep] - log_total) * answered)
        )
    return ErlangAResult(
        prob_wait=math.exp(log_mass_queue - log_total),
        prob_abandon=theta * mean_queue / lam,
        mean_wait=mean_queue / lam,
        service_level=level,
    )

"""Queueing formulas for staffing: Erlang B, Erlang C, Erlang A and square-root staffing.

This module is the one place where the capacity package computes a queue: :mod:`.staffing`
applies these formulas (through the vectorised forms named below) and computes none of its own.

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
  thousands of erlangs; values below about 1e-308 underflow to 0. Where every pair of a batch has
  its own ``N > A`` (:func:`_erlang_c_pairs`), the recursion summed is used instead:
  ``B = P(X = N) / P(X <= N)`` with ``X ~ Poisson(A)``, O(1) per pair (the tests check that both
  agree to 1e-12).
* Erlang C probability of waiting, ``C = N B / (N - A (1 - B))`` for ``N > A``. When ``N <= A`` the
  queue is unstable (it grows without bound) and this module returns ``C = 1``, service level 0 and
  an infinite average speed of answer rather than raising: a staffing search then simply moves on.
* Service level ``SL(t) = 1 - C exp(-(N - A) t / AHT)``: the share of callers answered within
  ``t`` in the M/M/N queue, first come first served, nobody hangs up.
* Average speed of answer ``ASA = C AHT / (N - A)``; occupancy ``A / N`` (capped at 1).
* Erlang A (M/M/N+M: callers hang up after an exponential patience with rate ``theta``; Garnett,
  Mandelbaum & Reiman, M&SOM 4(3), 2002) from the exact birth-death stationary distribution,
  truncated only where the remaining mass is below 1e-19 of the total. :func:`erlang_a` answers
  one queue; :func:`_erlang_a_pairs` the service level of many (arrival rate, agents) pairs.
* Square-root staffing ``N = ceil(R + beta sqrt(R))`` with the Halfin-Whitt wait probability
  ``[1 + beta Phi(beta) / phi(beta)]^-1`` (Halfin & Whitt, Operations Research 29(3), 1981;
  Borst, Mandelbaum & Reiman, Operations Research 52(1), 2004).

Limits
------
Every search and loop here is bounded, so no input can keep a caller waiting for ever:
loads above :data:`MAX_LOAD` erlangs and agent counts above :data:`MAX_AGENTS` are refused, an
Erlang A sum may use at most :data:`MAX_QUEUE_STATES` queue states, and a result that comes out
NaN or infinite where a finite one is due raises :class:`~models.exceptions.StaffingError`
naming the inputs instead of being returned or searched on.

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
from typing import Any, TypeVar

import numpy as np
import numpy.typing as npt
from scipy import optimize, special, stats

from models.exceptions import StaffingError

__all__ = [
    "MAX_AGENTS",
    "MAX_LOAD",
    "MAX_QUEUE_STATES",
    "ErlangAResult",
    "agents_for_service_level",
    "agents_for_wait_probability",
    "answered_within",
    "average_speed_of_answer",
    "check_number",
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
#: A load given as one number comes back as one number, an array as an array of its shape.
Load = TypeVar("Load", float, FloatArray)

#: Largest offered load accepted, in erlangs: far beyond any queue a person staffs, and it keeps
#: the O(N) Erlang B recursion of a search to about a second.
MAX_LOAD = 1_000_000.0
#: Most agents a formula or a search here considers; a search that reaches it without meeting
#: its target is refused (with loads <= MAX_LOAD, a target that double precision tells apart
#: from 0 and 1 is met well before: about MAX_LOAD + 40 sqrt(MAX_LOAD) at the most).
MAX_AGENTS = 2_000_000
#: Most queue states one Erlang A sum may use (about 8 MB per array of them).
MAX_QUEUE_STATES = 1_000_000

# log(1e-19): terms this far below the largest are beyond double precision of the total.
_LOG_NEGLIGIBLE = -44.0
# First guess of the queue states of an Erlang A sum; doubled until the tail is negligible.
_FIRST_QUEUE_STATES = 64
# Above this ratio (service capacity / patience rate) the Erlang-A waiting-time law equals the
# Erlang-C one to double precision, and the incomplete beta function loses accuracy.
_PATIENCE_NEGLIGIBLE_RATIO = 1e25
# Floats of working memory per block of (arrival rate, queue state) pairs in Erlang A.
_BLOCK_FLOATS = 1 << 20
# Doublings or halvings allowed when bracketing a root: 2**1100 passes every finite double.
_MAX_BRACKET_STEPS = 1100
# Corrections of a rounded division (a float quotient is off by at most one either way).
_ROUNDING_STEPS = 3


# --------------------------------------------------------------------------- input checks


def check_number(
    name: str,
    value: float,
    *,
    allowed: str,
    minimum: float = -math.inf,
    strict: bool = False,
    maximum: float = math.inf,
    strict_max: bool = False,
) -> float:
    """Return ``value`` as a float, or raise :class:`StaffingError` naming it and ``allowed``.

    The one number check of the capacity package: ``value`` must be a real number (not a bool),
    finite, at least ``minimum`` (above it if ``strict``) and at most ``maximum`` (below it if
    ``strict_max``).
    """
    if isinstance(value, bool) or not isinstance(value, int | float | np.integer | np.floating):
        raise StaffingError(f"{name} must be a number ({allowed}); got {value!r}")
    try:
        number = float(value)
    except OverflowError:  # an int too large for a float
        raise StaffingError(f"{name} must be {allowed}; got {value!r}") from None
    too_small = number <= minimum if strict else number < minimum
    too_large = number >= maximum if strict_max else number > maximum
    if not math.isfinite(number) or too_small or too_large:
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
    if count > MAX_AGENTS:
        raise StaffingError(
            f"agents must be a whole number from {minimum} to {MAX_AGENTS}; got {agents!r}"
        )
    return count


def _check_fraction(name: str, value: float) -> float:
    """Return a probability target strictly between 0 and 1, or raise naming it."""
    allowed = "strictly between 0 and 1"
    return check_number(
        name, value, allowed=allowed, minimum=0, strict=True, maximum=1, strict_max=True
    )


def _too_large_load(value: object) -> StaffingError:
    return StaffingError(
        f"load must be at most {MAX_LOAD:g} erlangs (a finite number of erlangs >= 0); "
        f"got {value!r}"
    )


def _check_load(load: float | FloatArray) -> tuple[FloatArray, bool]:
    """Return the load(s) as a float array and whether a scalar was given."""
    allowed = "a finite number of erlangs >= 0"
    if np.ndim(load) == 0:
        if isinstance(load, np.ndarray):
            load = load.item()
        number = check_number("load", load, allowed=allowed, minimum=0)
        if number > MAX_LOAD:
            raise _too_large_load(load)
        return np.asarray(number), True
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
    if (loads > MAX_LOAD).any():
        raise _too_large_load(float(loads.max()))
    return loads, False


def _check_time(name: str, value: float, *, positive: bool) -> float:
    allowed = "a finite time > 0" if positive else "a finite time >= 0"
    return check_number(name, value, allowed=allowed, minimum=0, strict=positive)


def _result(values: FloatArray, scalar: bool) -> Any:
    return float(values) if scalar else values


def _refuse_non_finite(what: str, values: dict[str, float]) -> StaffingError:
    """The NaN/inf exit: a figure that cannot be computed is refused, never returned."""
    given = ", ".join(f"{name}={value!r}" for name, value in values.items())
    return StaffingError(
        f"{what} is not a finite number for {given}; allowed: inputs whose products and ratios "
        "stay within double precision (e.g. rates and times within a few powers of ten of "
        "each other)"
    )


# --------------------------------------------------------------------------- Erlang B and C


def _next_blocking(load: Any, previous: Any, agents: int) -> Any:
    """One step of the Erlang B recursion; works on floats and arrays alike."""
    offered = load * previous
    return offered / (agents + offered)


def _blocking_from(load: float, start: int) -> Iterator[tuple[int, float]]:
    """Yield ``(N, B(load, N))`` for ``N = start, ..., MAX_AGENTS`` in O(1) per step."""
    blocking = 1.0
    for agents in range(1, start + 1):
        blocking = _next_blocking(load, blocking, agents)
    yield start, blocking
    for agents in range(start + 1, MAX_AGENTS + 1):
        blocking = _next_blocking(load, blocking, agents)
        yield agents, blocking


def _blocking(loads: FloatArray, agents: int) -> FloatArray:
    if loads.ndim == 0:  # plain floats are much faster than 0-d arrays in a long loop
        return np.asarray(next(_blocking_from(float(loads), agents))[1])
    blocking = np.ones_like(loads)
    for k in range(1, agents + 1):
        blocking = _next_blocking(loads, blocking, k)
    return blocking


def _delay(load: Any, agents: Any, blocking: Any) -> Any:
    """Erlang C ``N B / (N - A (1 - B))`` for stable ``N > A``; floats or arrays."""
    return agents * blocking / (agents - load * (1.0 - blocking))


def _answered_in_time(wait: Any, spare: Any, within: float, handle_time: float) -> Any:
    """Erlang C service level ``1 - C exp(-(N - A) t / AHT)``, ``spare = N - A > 0``."""
    with np.errstate(over="ignore"):  # a tiny handle time: exp(-inf) = 0, everyone in time
        return 1.0 - wait * np.exp(-spare * within / handle_time)


def _wait_probability(loads: FloatArray, agents: int, blocking: FloatArray) -> FloatArray:
    stable = agents > loads
    # Every caller waits once the queue is unstable; the formula would divide by <= 0.
    wait = np.ones_like(loads)
    wait[stable] = _delay(loads[stable], agents, blocking[stable])
    return wait


def erlang_b(load: Load, agents: AgentCount) -> Load:
    """Blocking probability of the Erlang loss system M/M/N/N.

    Parameters
    ----------
    load
        Offered load in erlangs (0 to :data:`MAX_LOAD`), a number or an array of numbers.
    agents
        Number of agents (servers), a whole number from 0 to :data:`MAX_AGENTS`.

    Returns
    -------
    float or numpy.ndarray
        Share of callers who find every agent busy and are lost; same shape as ``load``.

    Examples
    --------
    By hand, ``B = (A^3/3!) / (1 + A + A^2/2! + A^3/3!) = (4/3) / (19/3) = 4/19`` (also the exact
    rational in ``../shared/REFERENCE_VALUES.md``):

    >>> round(erlang_b(2.0, 3), 12)  # 4/19 = 0.2105263157894...
    0.210526315789
    """
    loads, scalar = _check_load(load)
    count = _check_agents(agents)
    return _result(_blocking(loads, count), scalar)


def erlang_c(load: Load, agents: AgentCount) -> Load:
    """Probability that a caller has to wait in the Erlang delay system M/M/N.

    Takes ``load`` and ``agents`` as :func:`erlang_b` does.

    Returns
    -------
    float or numpy.ndarray
        ``P(wait > 0)``. It is 1.0 when ``agents <= load``: the queue is then unstable and every
        caller eventually waits (no error is raised, so staffing searches can step past it).

    Examples
    --------
    By hand from ``B(2, 3) = 4/19``: ``C = 3 (4/19) / (3 - 2 (15/19)) = 4/9`` (the exact rational
    in ``../shared/REFERENCE_VALUES.md``):

    >>> round(erlang_c(2.0, 3), 12)  # 4/9 = 0.4444...
    0.444444444444
    >>> erlang_c(5.0, 5)  # N <= A: unstable, everyone waits (this module's convention)
    1.0
    """
    loads, scalar = _check_load(load)
    count = _check_agents(agents)
    return _result(_wait_probability(loads, count, _blocking(loads, count)), scalar)


def service_level(
    load: Load, agents: AgentCount, *, handle_time: float, answer_within: float
) -> Load:
    """Share of callers answered within ``answer_within`` in the Erlang C queue.

    Parameters
    ----------
    load, agents
        As for :func:`erlang_b`.
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
    The worked interval of ``../shared/REFERENCE_VALUES.md`` (360 calls per 30 min, AHT 240 s,
    so 48 erlangs; 55 agents):

    >>> round(service_level(48.0, 55, handle_time=240.0, answer_within=15.0), 6)  # listed: 0.845883
    0.845883
    """
    loads, scalar = _check_load(load)
    count = _check_agents(agents)
    aht = _check_time("handle_time", handle_time, positive=True)
    within = _check_time("answer_within", answer_within, positive=False)
    wait = _wait_probability(loads, count, _blocking(loads, count))
    stable = count > loads
    level = np.zeros_like(loads)
    level[stable] = _answered_in_time(wait[stable], count - loads[stable], within, aht)
    return _result(level, scalar)


def average_speed_of_answer(load: Load, agents: AgentCount, *, handle_time: float) -> Load:
    """Mean wait over all callers (those answered at once count as 0) in the Erlang C queue.

    Parameters
    ----------
    load, agents
        As for :func:`erlang_b`.
    handle_time
        Mean handle time (> 0); the result is in the same time unit.

    Returns
    -------
    float or numpy.ndarray
        ``C AHT / (N - A)``, or ``inf`` when ``agents <= load`` (unstable queue).

    Examples
    --------
    >>> round(average_speed_of_answer(48.0, 55, handle_time=240.0), 3)  # REFERENCE_VALUES: 8.1840 s
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


def occupancy(load: Load, agents: AgentCount) -> Load:
    """Share of agent time spent handling calls, ``load / agents`` capped at 1.

    Takes ``load`` and ``agents`` as :func:`erlang_b` does, with at least one agent.

    Examples
    --------
    >>> occupancy(48.0, 60)  # by hand: 48 / 60
    0.8
    """
    loads, scalar = _check_load(load)
    count = _check_agents(agents, minimum=1)
    return _result(np.minimum(loads / count, 1.0), scalar)


def _erlang_c_pairs(
    load: FloatArray, agents: FloatArray, *, handle_time: float, answer_within: float
) -> FloatArray:
    """Erlang C service level of each pair ``(load[i], agents[i])``; 0 where ``N <= A``.

    The vectorised form for :mod:`.staffing`, whose inputs are checked at its own boundary:
    Erlang B in closed form, then the same Erlang C and service-level formulas as above.
    """
    level = np.zeros(load.shape)
    stable = agents > load
    a, n = load[stable], agents[stable]
    # P(X = N) / P(X <= N) for X ~ Poisson(A) is the Erlang B blocking probability.
    blocking = np.exp(special.xlogy(n, a) - a - special.gammaln(n + 1.0)) / special.pdtr(n, a)
    level[stable] = _answered_in_time(_delay(a, n, blocking), n - a, answer_within, handle_time)
    return level


# --------------------------------------------------------------------------- staffing searches


def _smallest_stable_agents(load: float) -> int:
    # The first N with N > A; the queue formulas treat N <= A as unstable, even at zero load.
    return math.floor(load) + 1


def _search_failed(what: str, load: float) -> StaffingError:
    return StaffingError(
        f"no staffing of at most {MAX_AGENTS} agents meets {what} at a load of {load!r} erlangs; "
        f"allowed: loads up to {MAX_LOAD:g} erlangs with targets strictly between 0 and 1"
    )


def agents_for_wait_probability(load: float, alpha: float) -> int:
    """Smallest number of agents with Erlang C ``P(wait > 0) <= alpha``.

    Parameters
    ----------
    load
        Offered load in erlangs (0 to :data:`MAX_LOAD`).
    alpha
        Largest acceptable probability of waiting, strictly between 0 and 1.

    Returns
    -------
    int
        The fewest agents with that wait probability (at least 1). Advisory: see the module
        caution.

    Examples
    --------
    >>> agents_for_wait_probability(100.0, 0.2)  # Tijms 2003, Table 5.3.2 p.201: 111
    111
    """
    rho = _check_load(load)[0].item()
    target = _check_fraction("alpha", alpha)
    for agents, blocking in _blocking_from(rho, _smallest_stable_agents(rho)):
        wait = _delay(rho, agents, blocking)
        if wait <= target:
            return agents
        if math.isnan(wait):
            raise _refuse_non_finite("P(wait > 0)", {"load": load, "agents": agents})
    raise _search_failed(f"P(wait > 0) <= {alpha!r}", rho)


def _first_within_occupancy(load: float, max_occupancy: float, start: int) -> int:
    """The fewest agents ``>= start`` with ``load / agents <= max_occupancy``."""
    ceiling = check_number(
        "max_occupancy", max_occupancy, allowed="in (0, 1]", minimum=0, strict=True, maximum=1
    )
    least = load / ceiling
    if least > MAX_AGENTS:
        raise StaffingError(
            f"max_occupancy {max_occupancy!r} at a load of {load!r} erlangs asks for more than "
            f"{MAX_AGENTS} agents; allowed: in (0, 1] with load / max_occupancy <= {MAX_AGENTS}"
        )
    agents = max(start, math.ceil(least))
    # Rounding in the division can be off by one; settle it with the occupancy test itself.
    for _ in range(_ROUNDING_STEPS):
        if agents > start and load / (agents - 1) <= ceiling:
            agents -= 1
        elif load / agents > ceiling:
            agents += 1
    return agents


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
        Offered load in erlangs (0 to :data:`MAX_LOAD`).
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
    The worked interval of ``../shared/REFERENCE_VALUES.md`` (48 erlangs, AHT 240 s): 54 agents
    wait with probability 0.301308, so ``SL(20 s) = 1 - 0.301308 exp(-6 x 20 / 240) = 0.8172``
    (hand computation); 53 give 0.7518 (recomputed with scipy.stats.poisson):

    >>> agents_for_service_level(48.0, handle_time=240.0, answer_within=20.0, target=0.8)
    54

    With at most 85% occupancy: ``48 / 57 = 0.842 <= 0.85 < 48 / 56 = 0.857`` (by hand):

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
        start = _first_within_occupancy(rho, max_occupancy, start)
    for agents, blocking in _blocking_from(rho, start):
        level = _answered_in_time(_delay(rho, agents, blocking), agents - rho, within, aht)
        if level >= goal:
            return agents
        if math.isnan(level):
            raise _refuse_non_finite(
                "the service level",
                {"load": load, "agents": agents, "handle_time": aht, "answer_within": within},
            )
    raise _search_failed(f"a service level of {target!r}", rho)


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
    Halfin & Whitt 1981; Borst, Mandelbaum & Reiman 2004 (value in
    ``../shared/REFERENCE_VALUES.md``, recomputed there with scipy/mpmath):

    >>> round(halfin_whitt_wait_probability(1.0), 5)  # listed: 0.22336
    0.22336
    """
    spare = check_number("beta", beta, allowed="a finite number >= 0", minimum=0)
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
    Tijms 2003, sec. 5.3 lists ``k = 1.06152`` for ``alpha = 0.2`` (``../shared/REFERENCE_VALUES.md``):

    >>> round(halfin_whitt_beta(0.2), 5)
    1.06152
    """
    alpha = _check_fraction("wait_probability", wait_probability)
    log_goal = math.log1p(-alpha) - math.log(alpha)

    def excess(beta: float) -> float:
        value = float(math.log(beta) + special.log_ndtr(beta) - stats.norm.logpdf(beta) - log_goal)
        if math.isnan(value):
            raise _refuse_non_finite("beta", {"wait_probability": wait_probability})
        return value

    # excess rises with beta; bracket its root by doubling and halving, then solve.
    upper = 1.0
    for _ in range(_MAX_BRACKET_STEPS):
        if excess(upper) >= 0:
            break
        upper *= 2.0
    lower = upper / 2.0
    for _ in range(_MAX_BRACKET_STEPS):
        if excess(lower) <= 0:
            break
        lower /= 2.0
    if not excess(lower) <= 0 <= excess(upper):
        raise _refuse_non_finite("beta", {"wait_probability": wait_probability})
    return float(optimize.brentq(excess, lower, upper, xtol=1e-14, rtol=1e-14, maxiter=200))


def square_root_staffing(load: float, beta: float) -> int:
    """Agents by the square-root rule ``ceil(R + beta sqrt(R))``.

    Parameters
    ----------
    load
        Offered load ``R`` in erlangs (0 to :data:`MAX_LOAD`).
    beta
        Finite quality-of-service factor; negative values (understaffing, only sensible when
        callers abandon) are allowed, and the result is never below 0.

    Returns
    -------
    int
        Advisory agent count (at most :data:`MAX_AGENTS`); see the module caution.

    Examples
    --------
    >>> square_root_staffing(100.0, 1.0)  # by hand: ceil(100 + 1 x sqrt(100))
    110
    """
    rho = _check_load(load)[0].item()
    spare = check_number("beta", beta, allowed="a finite number")
    exact = rho + spare * math.sqrt(rho)
    if not exact <= MAX_AGENTS:  # also catches an overflow to inf
        raise StaffingError(
            f"beta {beta!r} at a load of {load!r} erlangs asks for {exact:.6g} agents; allowed: "
            f"a finite beta with load + beta sqrt(load) <= {MAX_AGENTS}"
        )
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


def _queue_states(
    arrival_rate: float, capacity: float, patience_rate: float, *, patience: str, per: str
) -> int:
    """Queue lengths ``0..J-1`` holding all but a negligible share of the queue's mass.

    ``arrival_rate`` is the largest of the rates the states will serve (a higher rate needs
    more). ``patience`` names the patience as the caller gave it and ``per`` the time unit of
    the rates, both for the refusal when more than :data:`MAX_QUEUE_STATES` would be needed.
    """
    peak = max(0.0, (arrival_rate - capacity) / patience_rate)
    where = (
        f"{arrival_rate:.6g} arrivals against {capacity:.6g} answered {per}, at most "
        f"{MAX_QUEUE_STATES:,} queue states are allowed"
    )
    if peak > MAX_QUEUE_STATES / 2:
        raise StaffingError(
            f"{patience} for an exact sum at this overload (about {peak:.3g} callers would "
            f"queue at {where})"
        )
    first = int(min(MAX_QUEUE_STATES, max(_FIRST_QUEUE_STATES, 2.0 * peak + _FIRST_QUEUE_STATES)))
    sizes = [first]
    while sizes[-1] < MAX_QUEUE_STATES:
        sizes.append(min(2 * sizes[-1], MAX_QUEUE_STATES))
    for size in sizes:
        log_ratio = math.log(arrival_rate) - np.log(
            capacity + patience_rate * np.arange(1, size + 1, dtype=np.float64)
        )
        log_weights = np.concatenate(([0.0], np.cumsum(log_ratio)))
        last = float(log_ratio[-1])
        if math.isnan(last):
            raise _refuse_non_finite(
                "the queue length distribution",
                {
                    "arrival_rate": arrival_rate,
                    "capacity": capacity,
                    "patience_rate": patience_rate,
                },
            )
        if last < 0:
            # Ratios only fall from here on, so a geometric series bounds what is left out.
            log_tail = float(log_weights[-1]) + last - math.log(-math.expm1(last))
            if log_tail < float(log_weights.max()) + _LOG_NEGLIGIBLE:
                return size + 1
    raise StaffingError(f"{patience} for an exact sum this close to full load ({where})")


def _queue_law(
    rates: FloatArray, agents: int, service_rate: float, patience_rate: float, states: int
) -> tuple[FloatArray, FloatArray]:
    """The stationary law of M/M/N+M for each arrival rate, up to a factor per rate.

    Returns ``below[r]`` proportional to ``P(K < N)`` and ``queue[r, j]`` to ``P(K = N + j)``,
    ``j < states``, both divided by the largest term of the row so nothing overflows. Built in
    log space relative to ``pi_N``: ``sum_{i<N} pi_i / pi_N = P(X < N) / P(X = N)`` with
    ``X ~ Poisson(lambda / mu)``, and ``pi_{N+j} / pi_N = prod_{m<=j} lambda / (N mu + m theta)``.
    """
    load = rates / service_rate
    steps = np.log(agents * service_rate + patience_rate * np.arange(1, states, dtype=np.float64))
    with np.errstate(divide="ignore", invalid="ignore"):
        log_below = np.log(special.pdtr(agents - 1.0, load)) - (
            agents * np.log(load) - load - special.gammaln(agents + 1.0)
        )
        log_queue = np.zeros((rates.size, states))
        np.cumsum(np.log(rates)[:, None] - steps[None, :], axis=1, out=log_queue[:, 1:])
        top = np.maximum(log_queue.max(axis=1), log_below)
        below = np.exp(log_below - top)
        queue = np.exp(log_queue - top[:, None])
    empty = load == 0  # a rate that underflows to no load: nobody waits
    below[empty], queue[empty] = 1.0, 0.0
    return below, queue


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


@np.errstate(all="ignore")  # overflow or NaN reaches the caller's NaN exit, not a warning
def _erlang_a_pairs(
    rates: FloatArray,
    agents: FloatArray,
    *,
    service_rate: float,
    patience_rate: float,
    within: float,
    patience: str,
    per: str,
) -> FloatArray:
    """Erlang A service level of each pair ``(rates[i], agents[i])``; 0 where ``N = 0``.

    The vectorised form for :mod:`.staffing` (inputs checked at its boundary): pairs are grouped
    by agent count so the answered-within probabilities are computed once per ``N``, and rates
    are taken in blocks of bounded memory. ``patience`` and ``per`` word a refusal as for
    :func:`_queue_states`.
    """
    level = np.zeros(rates.shape)
    for n in np.unique(agents):
        if n == 0:
            continue  # nobody answers
        group = np.flatnonzero(agents == n)
        capacity = n * service_rate
        states = _queue_states(
            float(rates[group].max()), capacity, patience_rate, patience=patience, per=per
        )
        answered = answered_within(
            np.arange(states, dtype=np.float64), capacity, patience_rate, within
        )
        rows = max(1, _BLOCK_FLOATS // states)
        for r0 in range(0, group.size, rows):
            idx = group[r0 : r0 + rows]
            below, queue = _queue_law(rates[idx], int(n), service_rate, patience_rate, states)
            level[idx] = (below + queue @ answered) / (below + queue.sum(axis=1))
    return level


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
        ``mu`` = 1 / mean handle time (> 0), per the same time unit; the load ``lambda / mu``
        must be at most :data:`MAX_LOAD` erlangs.
    patience_rate
        ``theta`` = 1 / mean patience (>= 0). ``theta = 0`` is the Erlang C queue (if it is unstable
        the result is wait probability 1, no abandonment, infinite mean wait, service level 0);
        ``theta = mu`` makes the number in system Poisson(lambda / mu), as in M/M/infinity.
    agents
        Number of agents ``N``, a whole number from 1 to :data:`MAX_AGENTS`.
    answer_within
        If given (>= 0, same time unit), also compute the service level.

    Returns
    -------
    ErlangAResult

    Raises
    ------
    StaffingError
        On bad input; if ``patience_rate`` is so small against an overload that the exact sum
        would need more than :data:`MAX_QUEUE_STATES` states; or if the rates are so far apart
        that a figure comes out NaN or infinite.

    Notes
    -----
    The stationary distribution of the birth-death chain (birth rate ``lambda``; death rate
    ``k mu`` up to ``N`` in system, then ``N mu + (k - N) theta``) is built in log space;
    ``P(wait) = P(K >= N)`` by PASTA and ``P(abandon) = theta E[queue] / lambda``.

    Examples
    --------
    ``../shared/REFERENCE_VALUES.md`` lists (0.6196552309, 0.1039132123) for this queue, recomputed
    there against a truncated birth-death chain:

    >>> result = erlang_a(10.0, 1.0, 0.5, 10)
    >>> round(result.prob_wait, 10), round(result.prob_abandon, 10)
    (0.6196552309, 0.1039132123)
    """
    lam = check_number("arrival_rate", arrival_rate, allowed="a finite rate >= 0", minimum=0)
    mu = check_number(
        "service_rate", service_rate, allowed="a finite rate > 0", minimum=0, strict=True
    )
    theta = check_number("patience_rate", patience_rate, allowed="a finite rate >= 0", minimum=0)
    count = _check_agents(agents, minimum=1)
    within = (
        None
        if answer_within is None
        else _check_time("answer_within", answer_within, positive=False)
    )
    load = lam / mu
    if load > MAX_LOAD:
        raise StaffingError(
            f"arrival_rate / service_rate is a load of {load:.6g} erlangs; allowed: at most "
            f"{MAX_LOAD:g} (arrival_rate={arrival_rate!r}, service_rate={service_rate!r})"
        )
    if load == 0:
        return ErlangAResult(0.0, 0.0, 0.0, None if within is None else 1.0)
    if theta == 0 and count * mu <= lam:  # Erlang C and unstable
        return ErlangAResult(1.0, 0.0, math.inf, None if within is None else 0.0)
    result = _erlang_a_figures(lam, mu, theta, count, within)
    figures = (result.prob_wait, result.prob_abandon, result.mean_wait, result.service_level)
    if not all(x is None or math.isfinite(x) for x in figures):
        raise _refuse_non_finite(
            "the Erlang A steady state",
            {"arrival_rate": lam, "service_rate": mu, "patience_rate": theta, "agents": count},
        )
    return result


@np.errstate(all="ignore")  # overflow or NaN reaches erlang_a's NaN exit, not a warning
def _erlang_a_figures(
    lam: float, mu: float, theta: float, count: int, within: float | None
) -> ErlangAResult:
    capacity = count * mu
    if theta == 0:
        # Erlang C: the queue length is geometric, so everything has a closed form.
        wait = erlang_c(lam / mu, count)
        level = None if within is None else 1.0 - wait * math.exp(-(capacity - lam) * within)
        return ErlangAResult(wait, 0.0, wait / (capacity - lam), level)
    patience = f"patience_rate {theta!r} is too small"
    states = _queue_states(lam, capacity, theta, patience=patience, per="per time unit")
    below, queue = _queue_law(np.array([lam]), count, mu, theta, states)
    queued = np.arange(states, dtype=np.float64)
    total = below[0] + queue[0].sum()  # numpy scalars: a zero total gives NaN, not an error
    mean_queue = float(queue[0] @ queued / total)
    level = None
    if within is not None:
        answered = answered_within(queued, capacity, theta, within)
        level = float((below[0] + queue[0] @ answered) / total)
    return ErlangAResult(
        prob_wait=float(queue[0].sum() / total),
        prob_abandon=theta * mean_queue / lam,
        mean_wait=mean_queue / lam,
        service_level=level,
    )

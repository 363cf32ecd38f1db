"""Tests for models.capacity.queueing against published tables and independent computations.

Sources (see ../shared/REFERENCE_VALUES.md, "Queueing"):
[T] read in the published text; [R] recomputed with scipy/mpmath as that file records.
- Tijms, *A First Course in Stochastic Models*, Wiley 2003, sec. 5.3 (Table 5.3.2 p.201, p.200).
- Halfin & Whitt, Operations Research 29(3) 1981; Borst, Mandelbaum & Reiman, "Dimensioning
  large call centers", Operations Research 52(1) 2004.
- Garnett, Mandelbaum & Reiman, M&SOM 4(3) 2002 (Erlang A; the form is [M] from memory).
Independent cross-checks use exact rational arithmetic (fractions), scipy.stats.poisson, a dense
scipy.linalg solve of the truncated birth-death chain and scipy.linalg.expm.
"""

from __future__ import annotations

import doctest
import math
from fractions import Fraction

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import linalg, optimize, stats

from models.capacity import queueing
from models.capacity.queueing import (
    ErlangAResult,
    agents_for_service_level,
    agents_for_wait_probability,
    average_speed_of_answer,
    erlang_a,
    erlang_b,
    erlang_c,
    halfin_whitt_beta,
    halfin_whitt_wait_probability,
    occupancy,
    service_level,
    square_root_staffing,
)
from models.exceptions import StaffingError
from tests.models.capacity.support import refusal

# Tijms 2003, Table 5.3.2 p.201 [T][R]: load -> smallest c with P(wait > 0) <= alpha.
TIJMS_ALPHAS = (0.5, 0.2, 0.1)
TIJMS_TABLE_5_3_2 = {
    1: (2, 3, 3),
    5: (7, 8, 9),
    10: (12, 14, 16),
    50: (54, 58, 61),
    100: (106, 111, 115),
    250: (259, 268, 274),
    500: (512, 525, 533),
    1000: (1017, 1034, 1046),
}

# Worked interval [R] (REFERENCE_VALUES.md): 360 calls per 30 min, AHT 240 s -> A = 48 erlangs.
# agents -> occupancy, P(wait > 0), SL(15 s), SL(20 s), ASA in seconds.
WORKED_LOAD = 360 / (30 * 60) * 240
WORKED_AHT = 240.0
WORKED_INTERVAL = {
    55: (0.8727, 0.238701, 0.845883, 0.866796, 8.1840),
    54: (None, 0.301308, 0.792914, None, 12.05),
    56: (None, 0.187154, 0.886485, None, 5.61),
}


def exact_erlang_b(load: Fraction, agents: int) -> Fraction:
    """The textbook definition (A^N/N!) / sum_k A^k/k!, in exact rational arithmetic."""
    terms = [load**k / math.factorial(k) for k in range(agents + 1)]
    return terms[-1] / sum(terms)


def poisson_erlang_b(load: float, agents: int) -> float:
    """Log-space Erlang B from scipy: B = P(Poisson(A) = N) / P(Poisson(A) <= N)."""
    return math.exp(stats.poisson.logpmf(agents, load) - stats.poisson.logcdf(agents, load))


def poisson_erlang_c(load: float, agents: int) -> float:
    """Log-space Erlang C from scipy: C = 1 / (1 + (1 - A/N) P(K <= N-1) / P(K = N))."""
    log_ratio = stats.poisson.logcdf(agents - 1, load) - stats.poisson.logpmf(agents, load)
    return 1.0 / (1.0 + (1.0 - load / agents) * math.exp(log_ratio))


def birth_death_stationary(lam: float, mu: float, theta: float, agents: int, states: int):
    """Stationary law of the truncated M/M/N+M chain by a dense linear solve (no product form)."""
    generator = np.zeros((states, states))
    for k in range(states - 1):
        generator[k, k + 1] = lam
        generator[k + 1, k] = min(k + 1, agents) * mu + max(k + 1 - agents, 0) * theta
    np.fill_diagonal(generator, -generator.sum(axis=1))
    system = generator.T.copy()
    system[-1, :] = 1.0
    rhs = np.zeros(states)
    rhs[-1] = 1.0
    return linalg.solve(system, rhs)


class TestDocstringExamples:
    def test_every_example_in_the_module_runs(self):
        outcome = doctest.testmod(queueing, optionflags=doctest.NORMALIZE_WHITESPACE)
        assert outcome.attempted >= 10
        assert outcome.failed == 0


class TestErlangB:
    @pytest.mark.parametrize(
        ("load", "agents", "expected"),
        [(1, 1, Fraction(1, 2)), (2, 2, Fraction(2, 5)), (2, 3, Fraction(4, 19))],
    )
    def test_exact_rationals(self, load, agents, expected):
        # REFERENCE_VALUES.md exact rationals [R]; also checked against the definition here.
        assert exact_erlang_b(Fraction(load), agents) == expected
        assert erlang_b(float(load), agents) == pytest.approx(float(expected), rel=1e-15)

    @pytest.mark.parametrize(
        ("load", "agents", "expected"),
        [(10, 12, 0.1197392), (25, 30, 0.0526032), (10, 15, 0.036497), (15, 10, 0.410341)],
    )
    def test_listed_values(self, load, agents, expected):
        # REFERENCE_VALUES.md listed B values [R], recomputed with scipy/mpmath.
        assert erlang_b(float(load), agents) == pytest.approx(expected, abs=6e-7)

    def test_matches_the_exact_definition_at_moderate_size(self):
        # Independent: exact rational arithmetic of (A^N/N!) / sum A^k/k!.
        exact = exact_erlang_b(Fraction(48), 55)
        assert erlang_b(48.0, 55) == pytest.approx(float(exact), rel=1e-13)

    # Erlang B maximum load for a blocking target [R; agrees with standard published Erlang B
    # tables]: agents -> loads at 0.1%, 1%, 5% blocking.
    @pytest.mark.parametrize(
        ("agents", "loads"),
        [
            (5, (0.762, 1.361, 2.218)),
            (10, (3.092, 4.461, 6.216)),
            (15, (6.077, 8.108, 10.633)),
            (20, (9.411, 12.031, 15.249)),
            (30, (16.684, 20.337, 24.802)),
            (50, (32.512, 37.901, 44.533)),
            (100, (75.242, 84.064, 95.240)),
        ],
    )
    def test_maximum_load_table(self, agents, loads):
        for target, listed in zip((0.001, 0.01, 0.05), loads, strict=True):
            found = optimize.brentq(lambda a, t=target: erlang_b(a, agents) - t, 1e-6, 2 * agents)
            # The table rounds the load to 3 decimals.
            assert found == pytest.approx(listed, abs=5.01e-4)
            # Elasticity d log B / d log A is about N - A, so rounding moves B by a few 1e-3.
            assert erlang_b(listed, agents) == pytest.approx(target, rel=5e-3)

    def test_stable_for_thousands_of_agents(self):
        # Recursion vs an independent log-space formula built on scipy.stats.poisson.
        for load, agents in [(5000.0, 5100), (5000.0, 4900), (3000.0, 3000), (1000.0, 1200)]:
            value = erlang_b(load, agents)
            assert 0.0 <= value <= 1.0
            assert value == pytest.approx(poisson_erlang_b(load, agents), rel=1e-10)

    def test_edge_counts(self):
        # B with no agents blocks everyone; with no load nobody is blocked (definition).
        assert erlang_b(3.0, 0) == 1.0
        assert erlang_b(0.0, 4) == 0.0

    def test_array_of_loads_matches_scalars_and_keeps_shape(self):
        loads = np.array([[0.0, 1.0, 7.5], [48.0, 95.0, 130.0]])
        values = erlang_b(loads, 100)
        assert values.shape == loads.shape
        expected = [[erlang_b(float(a), 100) for a in row] for row in loads]
        np.testing.assert_allclose(values, expected, rtol=1e-14)

    @settings(derandomize=True, max_examples=150, deadline=None)
    @given(load=st.floats(0.0, 1500.0), agents=st.integers(0, 1600))
    def test_more_agents_never_block_more(self, load, agents):
        assert erlang_b(load, agents + 1) <= erlang_b(load, agents)


class TestErlangC:
    def test_exact_rational(self):
        # REFERENCE_VALUES.md [R]: C(2, 3) = 4/9.
        assert erlang_c(2.0, 3) == pytest.approx(4 / 9, rel=1e-14)

    def test_listed_value(self):
        # REFERENCE_VALUES.md [R]: C(10, 12) = 0.4493882, recomputed with scipy/mpmath.
        assert erlang_c(10.0, 12) == pytest.approx(0.4493882, abs=6e-8)

    def test_tijms_utilisation_095(self):
        # Tijms 2003 p.200 [T]: 100 agents at utilisation 0.95, 50.6% wait; 0.5064569 [R].
        assert erlang_c(95.0, 100) == pytest.approx(0.5064569, abs=6e-8)

    @pytest.mark.parametrize("agents", [55, 54, 56])
    def test_worked_interval(self, agents):
        # Worked interval [R], recomputed with scipy/mpmath (REFERENCE_VALUES.md).
        assert WORKED_LOAD == 48.0
        assert erlang_c(WORKED_LOAD, agents) == pytest.approx(WORKED_INTERVAL[agents][1], abs=6e-7)

    def test_stable_for_thousands_of_agents(self):
        # Recursion vs an independent log-space formula built on scipy.stats.poisson.
        value = erlang_c(5000.0, 5100)
        assert math.isfinite(value) and 0.0 < value < 1.0
        assert value == pytest.approx(poisson_erlang_c(5000.0, 5100), rel=1e-10)
        assert erlang_c(20000.0, 20150) == pytest.approx(poisson_erlang_c(20000.0, 20150), rel=1e-9)

    def test_unstable_queue_gives_one(self):
        # Documented choice: N <= A means the queue grows without bound and everyone waits.
        assert erlang_c(5.0, 5) == 1.0
        assert erlang_c(5000.0, 4000) == 1.0
        assert erlang_c(2.0, 0) == 1.0

    def test_array_of_loads_matches_scalars(self):
        loads = np.array([0.0, 2.0, 9.99, 10.0, 12.0])
        expected = [erlang_c(float(a), 10) for a in loads]
        np.testing.assert_allclose(erlang_c(loads, 10), expected, rtol=1e-14)

    @settings(derandomize=True, max_examples=150, deadline=None)
    @given(load=st.floats(0.0, 1500.0), agents=st.integers(1, 1600))
    def test_more_agents_never_raise_the_wait_probability(self, load, agents):
        assert erlang_c(load, agents + 1) <= erlang_c(load, agents) + 1e-15


class TestServiceLevel:
    @pytest.mark.parametrize("agents", [55, 54, 56])
    def test_worked_interval_15_seconds(self, agents):
        # Worked interval [R], recomputed with scipy/mpmath (REFERENCE_VALUES.md).
        level = service_level(WORKED_LOAD, agents, handle_time=WORKED_AHT, answer_within=15.0)
        assert level == pytest.approx(WORKED_INTERVAL[agents][2], abs=6e-7)

    def test_worked_interval_20_seconds(self):
        # Worked interval [R]: 55 agents, SL(20 s) = 0.866796.
        level = service_level(WORKED_LOAD, 55, handle_time=WORKED_AHT, answer_within=20.0)
        assert level == pytest.approx(0.866796, abs=6e-7)

    def test_zero_target_time_is_one_minus_wait_probability(self):
        # From the formula SL(0) = 1 - C (Tijms 2003 sec. 5.3, waiting time law of M/M/c).
        level = service_level(10.0, 12, handle_time=3.0, answer_within=0.0)
        assert level == pytest.approx(1 - 0.4493882, abs=6e-8)

    def test_unstable_queue_gives_zero(self):
        assert service_level(48.0, 48, handle_time=240.0, answer_within=20.0) == 0.0

    def test_stable_at_large_sizes(self):
        level = service_level(5000.0, 5100, handle_time=240.0, answer_within=20.0)
        expected = 1 - poisson_erlang_c(5000.0, 5100) * math.exp(-100 * 20 / 240)
        assert 0.0 <= level <= 1.0
        assert level == pytest.approx(expected, rel=1e-12)

    def test_array_of_loads(self):
        loads = np.array([40.0, 48.0, 60.0])
        levels = service_level(loads, 55, handle_time=WORKED_AHT, answer_within=15.0)
        assert levels[1] == pytest.approx(0.845883, abs=6e-7)
        assert levels[2] == 0.0
        assert levels[0] > levels[1]

    @settings(derandomize=True, max_examples=200, deadline=None)
    @given(
        load=st.floats(0.0, 2000.0),
        agents=st.integers(0, 2100),
        answer_within=st.floats(0.0, 600.0),
    )
    def test_more_agents_never_lower_the_service_level(self, load, agents, answer_within):
        # Monotone in N: common practice, no source (follows from the M/M/N waiting-time law).
        def level(n: int) -> float:
            return service_level(load, n, handle_time=180.0, answer_within=answer_within)

        assert level(agents + 1) >= level(agents) - 1e-12


class TestAverageSpeedOfAnswer:
    @pytest.mark.parametrize(("agents", "abs_tol"), [(55, 6e-5), (54, 6e-3), (56, 6e-3)])
    def test_worked_interval(self, agents, abs_tol):
        # Worked interval [R], recomputed with scipy/mpmath: 8.1840 s, 12.05 s, 5.61 s.
        speed = average_speed_of_answer(WORKED_LOAD, agents, handle_time=WORKED_AHT)
        assert speed == pytest.approx(WORKED_INTERVAL[agents][4], abs=abs_tol)

    def test_unstable_queue_is_infinite(self):
        assert average_speed_of_answer(50.0, 49, handle_time=240.0) == math.inf

    def test_array_of_loads(self):
        speeds = average_speed_of_answer(np.array([48.0, 55.0]), 55, handle_time=WORKED_AHT)
        assert speeds[0] == pytest.approx(8.1840, abs=6e-5)
        assert speeds[1] == math.inf


class TestOccupancy:
    def test_worked_interval(self):
        # Worked interval [R]: 48 erlangs on 55 agents, occupancy 0.8727.
        assert occupancy(WORKED_LOAD, 55) == pytest.approx(0.8727, abs=6e-5)

    def test_capped_at_one(self):
        # Agents cannot be busier than all the time: common practice, no source.
        assert occupancy(60.0, 55) == 1.0

    def test_needs_at_least_one_agent(self):
        with pytest.raises(StaffingError, match=r"agents must be a whole number >= 1; got 0"):
            occupancy(1.0, 0)


class TestAgentsForWaitProbability:
    @pytest.mark.parametrize("load", sorted(TIJMS_TABLE_5_3_2))
    def test_tijms_table_5_3_2(self, load):
        # Tijms 2003, Table 5.3.2 p.201 [T][R].
        found = tuple(agents_for_wait_probability(float(load), a) for a in TIJMS_ALPHAS)
        assert found == TIJMS_TABLE_5_3_2[load]

    def test_result_is_the_smallest(self):
        # Checks the search against its own definition at a large load.
        agents = agents_for_wait_probability(5000.0, 0.2)
        assert erlang_c(5000.0, agents) <= 0.2 < erlang_c(5000.0, agents - 1)

    def test_zero_load_needs_one_agent(self):
        # Documented: N <= A counts as unstable, so the first stable staffing is 1.
        assert agents_for_wait_probability(0.0, 0.1) == 1

    @pytest.mark.parametrize("alpha", [0.0, 1.0, -0.1, math.nan])
    def test_bad_alpha(self, alpha):
        with pytest.raises(StaffingError, match=r"alpha must be strictly between 0 and 1"):
            agents_for_wait_probability(10.0, alpha)


class TestAgentsForServiceLevel:
    def test_worked_interval_80_percent_in_15_seconds(self):
        # Worked interval [R]: SL(15 s) is 0.792914 with 54 agents and 0.845883 with 55.
        found = agents_for_service_level(
            WORKED_LOAD, handle_time=WORKED_AHT, answer_within=15.0, target=0.8
        )
        assert found == 55

    def test_worked_interval_85_percent_in_15_seconds(self):
        # Worked interval [R]: SL(15 s) is 0.845883 with 55 agents and 0.886485 with 56.
        found = agents_for_service_level(
            WORKED_LOAD, handle_time=WORKED_AHT, answer_within=15.0, target=0.85
        )
        assert found == 56

    def test_occupancy_ceiling_raises_the_count(self):
        # 48 / 57 = 0.842 <= 0.85 < 48 / 56 = 0.857: arithmetic, common practice, no source.
        found = agents_for_service_level(
            WORKED_LOAD, handle_time=WORKED_AHT, answer_within=15.0, target=0.8, max_occupancy=0.85
        )
        assert found == 57

    def test_exact_occupancy_boundary_is_allowed(self):
        # 48 / 60 = 0.8 exactly meets a ceiling of 0.8.
        found = agents_for_service_level(
            WORKED_LOAD, handle_time=WORKED_AHT, answer_within=15.0, target=0.5, max_occupancy=0.8
        )
        assert found == 60

    def test_result_is_the_smallest_at_large_load(self):
        found = agents_for_service_level(5000.0, handle_time=240.0, answer_within=20.0, target=0.9)

        def level(n: int) -> float:
            return service_level(5000.0, n, handle_time=240.0, answer_within=20.0)

        assert level(found) >= 0.9 > level(found - 1)

    @pytest.mark.parametrize(
        ("options", "pattern"),
        [
            ({"handle_time": 0.0}, r"handle_time must be a finite time > 0; got 0.0"),
            ({"answer_within": -1.0}, r"answer_within must be a finite time >= 0; got -1.0"),
            ({"target": 1.0}, r"target must be strictly between 0 and 1; got 1.0"),
            ({"max_occupancy": 1.5}, r"max_occupancy must be in \(0, 1\]; got 1.5"),
            ({"max_occupancy": 0.0}, r"max_occupancy must be in \(0, 1\]; got 0.0"),
        ],
    )
    def test_bad_inputs(self, options, pattern):
        arguments = {"handle_time": 240.0, "answer_within": 20.0, "target": 0.8} | options
        with pytest.raises(StaffingError, match=pattern):
            agents_for_service_level(48.0, **arguments)


class TestHalfinWhittWaitProbability:
    @pytest.mark.parametrize(
        ("beta", "approx", "exact"),
        [
            (0.5, 0.50454, 0.51571),
            (1.0, 0.22336, 0.23701),
            (1.5, 0.08469, 0.09544),
            (2.0, 0.02688, 0.03320),
        ],
    )
    def test_published_values_at_load_100(self, beta, approx, exact):
        # Halfin & Whitt 1981; Borst, Mandelbaum & Reiman 2004; values [R] recomputed with
        # scipy/mpmath (REFERENCE_VALUES.md), the exact one being Erlang C at N = 100 + 10 beta.
        assert halfin_whitt_wait_probability(beta) == pytest.approx(approx, abs=6e-6)
        assert erlang_c(100.0, round(100 + 10 * beta)) == pytest.approx(exact, abs=6e-6)

    def test_is_the_limit_of_erlang_c(self):
        # Halfin & Whitt 1981: C(R, R + beta sqrt R) -> the limit as R grows.
        limit = halfin_whitt_wait_probability(1.0)
        gap_small = abs(erlang_c(100.0, 110) - limit)
        gap_large = abs(erlang_c(10000.0, 10100) - limit)
        assert gap_large < gap_small / 5

    def test_ends(self):
        assert halfin_whitt_wait_probability(0.0) == 1.0
        assert halfin_whitt_wait_probability(40.0) == 0.0

    def test_negative_beta_is_refused(self):
        with pytest.raises(StaffingError, match=r"beta must be a finite number >= 0; got -1.0"):
            halfin_whitt_wait_probability(-1.0)


class TestHalfinWhittBeta:
    @pytest.mark.parametrize(("alpha", "k"), [(0.5, 0.50605), (0.2, 1.06152), (0.1, 1.42019)])
    def test_tijms_factors(self, alpha, k):
        # Tijms 2003 sec. 5.3 [T][R]: k solving k Phi(k)/phi(k) = (1-alpha)/alpha.
        assert halfin_whitt_beta(alpha) == pytest.approx(k, abs=6e-6)

    @pytest.mark.parametrize("alpha", [0.999, 0.5, 0.01, 1e-6])
    def test_inverts_the_wait_probability(self, alpha):
        assert halfin_whitt_wait_probability(halfin_whitt_beta(alpha)) == pytest.approx(
            alpha, rel=1e-10
        )


class TestSquareRootStaffing:
    def test_tijms_comparison_with_table_5_3_2(self):
        # Tijms 2003 sec. 5.3 [T][R]: the square-root rule matches Table 5.3.2 except
        # R=10/a=0.1 -> 15, R=250 -> 267 and 273, R=500 -> 524 and 532, R=1000/a=0.1 -> 1045.
        differences = {
            (10, 0.1): 15,
            (250, 0.2): 267,
            (250, 0.1): 273,
            (500, 0.2): 524,
            (500, 0.1): 532,
            (1000, 0.1): 1045,
        }
        for load, row in TIJMS_TABLE_5_3_2.items():
            for alpha, table in zip(TIJMS_ALPHAS, row, strict=True):
                expected = differences.get((load, alpha), table)
                assert square_root_staffing(float(load), halfin_whitt_beta(alpha)) == expected

    def test_whole_number_is_not_rounded_up(self):
        # ceil(100 + 1 * 10) = 110 even if floating point lands a hair above.
        assert square_root_staffing(100.0, 1.0) == 110
        assert square_root_staffing(2.0, math.sqrt(2.0)) == 4

    def test_never_negative(self):
        assert square_root_staffing(4.0, -5.0) == 0

    def test_bad_beta(self):
        with pytest.raises(StaffingError, match=r"beta must be a finite number; got inf"):
            square_root_staffing(4.0, math.inf)


class TestErlangA:
    @pytest.mark.parametrize(
        ("arguments", "prob_wait", "prob_abandon"),
        [
            ((10.0, 1.0, 0.5, 10), 0.6196552309, 0.1039132123),
            ((100.0, 1.0, 0.1, 95), 0.9695036566, 0.0520097632),
            ((100.0, 1.0, 1.0, 100), 0.5132987983, 0.0398609968),
        ],
    )
    def test_reference_values(self, arguments, prob_wait, prob_abandon):
        # Garnett, Mandelbaum & Reiman 2002 model; values [R] recomputed with scipy/mpmath and
        # a truncated birth-death chain (REFERENCE_VALUES.md).
        result = erlang_a(*arguments)
        assert result.prob_wait == pytest.approx(prob_wait, abs=1e-10)
        assert result.prob_abandon == pytest.approx(prob_abandon, abs=1e-10)

    def test_patience_equal_to_service_is_m_m_infinity(self):
        # theta = mu: number in system ~ Poisson(lambda/mu) (REFERENCE_VALUES.md [R]; checked
        # here with scipy.stats.poisson): P(wait) = P(K >= 10) = 0.5420703, P(abandon) = 0.1251100.
        result = erlang_a(10.0, 1.0, 1.0, 10)
        poisson = stats.poisson(10.0)
        assert result.prob_wait == pytest.approx(poisson.sf(9), rel=1e-12)
        assert result.prob_wait == pytest.approx(0.5420703, abs=6e-8)
        k = np.arange(10, 200)
        mean_queue = float(np.sum((k - 10) * poisson.pmf(k)))
        assert result.prob_abandon == pytest.approx(mean_queue / 10.0, rel=1e-12)
        assert result.prob_abandon == pytest.approx(0.1251100, abs=6e-8)

    def test_matches_a_dense_solve_of_the_chain(self):
        # Independent: scipy.linalg solve of the truncated generator, not the product form.
        lam, mu, theta, agents = 12.0, 0.9, 0.35, 11
        pi = birth_death_stationary(lam, mu, theta, agents, states=agents + 120)
        queue = np.maximum(np.arange(pi.size) - agents, 0)
        result = erlang_a(lam, mu, theta, agents)
        assert result.prob_wait == pytest.approx(pi[agents:].sum(), rel=1e-10)
        assert result.prob_abandon == pytest.approx(theta * (queue @ pi) / lam, rel=1e-10)
        assert result.mean_wait == pytest.approx((queue @ pi) / lam, rel=1e-10)

    @pytest.mark.parametrize(("theta", "within"), [(0.35, 0.4), (0.9, 0.4), (3.0, 1.5)])
    def test_service_level_matches_matrix_exponential(self, theta, within):
        # Independent: a caller finding j queued is a pure-death chain (advance at N mu + m theta,
        # hang up at theta); scipy.linalg.expm gives P(answered by t) from each start.
        lam, mu, agents, depth = 12.0, 0.9, 11, 120
        pi = birth_death_stationary(lam, mu, theta, agents, states=agents + depth)
        waiting = depth  # states m = 0..depth-1 callers ahead; then answered, abandoned
        generator = np.zeros((waiting + 2, waiting + 2))
        answered, abandoned = waiting, waiting + 1
        for m in range(waiting):
            generator[m, m - 1 if m else answered] = agents * mu + m * theta
            generator[m, abandoned] = theta
        np.fill_diagonal(generator, -generator.sum(axis=1))
        by_time = linalg.expm(generator * within)[:waiting, answered]
        expected = pi[:agents].sum() + pi[agents:] @ by_time
        result = erlang_a(lam, mu, theta, agents, answer_within=within)
        assert result.service_level == pytest.approx(expected, rel=1e-9)

    def test_no_patience_limit_is_erlang_c(self):
        # theta = 0 is M/M/N (Tijms 2003 sec. 5.3), and theta -> 0 must approach it.
        load, agents = 9.0, 10
        exact = erlang_a(9.0, 1.0, 0.0, agents, answer_within=0.2)
        assert exact.prob_wait == pytest.approx(erlang_c(load, agents), rel=1e-14)
        assert exact.prob_abandon == 0.0
        assert exact.service_level == pytest.approx(
            service_level(load, agents, handle_time=1.0, answer_within=0.2), rel=1e-14
        )
        for theta in (1e-9, 1e-30):
            near = erlang_a(9.0, 1.0, theta, agents, answer_within=0.2)
            assert near.prob_wait == pytest.approx(exact.prob_wait, rel=1e-7)
            assert near.service_level == pytest.approx(exact.service_level, rel=1e-7)
            assert near.prob_abandon < 10 * theta

    def test_overload_with_no_patience_limit_is_unstable(self):
        result = erlang_a(11.0, 1.0, 0.0, 10, answer_within=1.0)
        assert result == ErlangAResult(1.0, 0.0, math.inf, 0.0)

    def test_overload_is_stable_with_abandonment(self):
        # Flow balance: lambda (1 - P(abandon)) = mu E[busy] <= N mu, so
        # P(abandon) >= 1 - N mu / lambda (common practice, no source).
        result = erlang_a(105.0, 1.0, 0.01, 100)
        assert 1 - 100 / 105 <= result.prob_abandon < 1
        assert result.prob_wait == pytest.approx(1.0, abs=1e-6)

    def test_no_arrivals(self):
        assert erlang_a(0.0, 1.0, 0.5, 3, answer_within=1.0) == ErlangAResult(0.0, 0.0, 0.0, 1.0)

    def test_large_call_centre_is_fast_and_finite(self):
        result = erlang_a(5000 / 240, 1 / 240, 1 / 600, 5100, answer_within=20.0)
        for value in (result.prob_wait, result.prob_abandon, result.service_level):
            assert value is not None and 0.0 <= value <= 1.0
        # Abandonment only shortens the queue, so fewer wait than in Erlang C.
        assert result.prob_wait < erlang_c(5000.0, 5100)

    def test_tiny_patience_in_overload_is_refused(self):
        with pytest.raises(StaffingError, match=r"patience_rate 1e-09 is too small"):
            erlang_a(105.0, 1.0, 1e-9, 100)

    @pytest.mark.parametrize(
        ("arguments", "pattern"),
        [
            ((-1.0, 1.0, 0.5, 10), r"arrival_rate must be a finite rate >= 0; got -1.0"),
            ((10.0, 0.0, 0.5, 10), r"service_rate must be a finite rate > 0; got 0.0"),
            ((10.0, 1.0, -0.5, 10), r"patience_rate must be a finite rate >= 0; got -0.5"),
            ((10.0, 1.0, math.inf, 10), r"patience_rate must be a finite rate >= 0; got inf"),
            ((10.0, 1.0, 0.5, 0), r"agents must be a whole number >= 1; got 0"),
        ],
    )
    def test_bad_inputs(self, arguments, pattern):
        with pytest.raises(StaffingError, match=pattern):
            erlang_a(*arguments)


class TestInputChecks:
    @pytest.mark.parametrize(
        ("load", "pattern"),
        [
            (-1.0, r"load must be a finite number of erlangs >= 0; got -1.0"),
            (math.nan, r"load must be a finite number of erlangs >= 0; got nan"),
            (math.inf, r"load must be a finite number of erlangs >= 0; got inf"),
            ("48", r"load must be a number \(a finite number of erlangs >= 0\); got '48'"),
            (np.array([1.0, -2.0]), r"got -2.0 at index \(1,\)"),
        ],
    )
    def test_bad_load(self, load, pattern):
        with pytest.raises(StaffingError, match=pattern):
            erlang_c(load, 10)

    @pytest.mark.parametrize("agents", [2.5, -1, True, "3"])
    def test_bad_agents(self, agents):
        with pytest.raises(
            StaffingError, match=rf"agents must be a whole number >= 0; got {agents!r}"
        ):
            erlang_b(1.0, agents)

    def test_numpy_integers_are_accepted(self):
        assert erlang_b(np.float64(2.0), np.int64(3)) == pytest.approx(4 / 19, rel=1e-15)

    def test_staffing_error_is_a_value_error(self):
        with pytest.raises(ValueError, match="handle_time"):
            service_level(1.0, 2, handle_time=-3.0, answer_within=1.0)


class TestLimits:
    """Every search and loop is bounded; what would run away or come out NaN is refused."""

    def test_load_above_the_limit_is_refused(self):
        with pytest.raises(
            StaffingError, match=r"load must be at most 1e\+06 erlangs .*got 2000000.0"
        ):
            agents_for_wait_probability(2e6, 0.2)
        with pytest.raises(StaffingError, match=r"load must be at most 1e\+06 erlangs"):
            erlang_c(np.array([10.0, 1.5e6]), 20)

    def test_agents_above_the_limit_are_refused(self):
        # An int too large even for a float is refused too, not an OverflowError.
        for agents in (queueing.MAX_AGENTS + 1, 10**400):
            with pytest.raises(StaffingError, match=r"agents must be a whole number from 0 to"):
                erlang_b(1.0, agents)

    def test_search_at_the_largest_load_ends(self):
        # The square-root rule (Halfin & Whitt 1981) is within one agent of the exact count all
        # through Tijms 2003, Table 5.3.2 [T][R], and only closer as the load grows; the exact
        # search at the largest load allowed must end there, not run on.
        found = agents_for_wait_probability(queueing.MAX_LOAD, 0.2)
        assert abs(found - square_root_staffing(queueing.MAX_LOAD, halfin_whitt_beta(0.2))) <= 1

    def test_occupancy_ceiling_near_zero_is_refused(self):
        message = refusal(
            lambda: agents_for_service_level(
                10.0, handle_time=240.0, answer_within=20.0, target=0.8, max_occupancy=5e-324
            )
        )
        assert "max_occupancy 5e-324 at a load of 10.0 erlangs asks for more than" in message

    def test_square_root_staffing_past_the_limit_is_refused(self):
        with pytest.raises(StaffingError, match=r"beta 1e\+308 .* asks for inf agents"):
            square_root_staffing(1e6, 1e308)

    @pytest.mark.parametrize("alpha", [1e-300, 1e-12, 0.5, 1 - 1e-12])
    def test_halfin_whitt_beta_brackets_every_target(self, alpha):
        beta = halfin_whitt_beta(alpha)
        assert math.isfinite(beta)
        assert halfin_whitt_wait_probability(beta) == pytest.approx(alpha, rel=1e-9)

    @pytest.mark.parametrize(
        ("arguments", "named"),
        [
            ((10.0, 1e308, 1.0, 10), "service_rate=1e+308"),  # N mu overflows
            ((10.0, 1e308, 0.0, 10), "service_rate=1e+308"),  # the Erlang C branch: inf x 0
        ],
    )
    def test_erlang_a_non_finite_result_is_refused(self, arguments, named):
        with pytest.raises(StaffingError, match="is not a finite number") as caught:
            erlang_a(*arguments, answer_within=0.0)
        assert named in str(caught.value)

    def test_erlang_a_load_above_the_limit_is_refused(self):
        with pytest.raises(StaffingError, match=r"load of 2e\+06 erlangs; allowed: at most 1e\+06"):
            erlang_a(2e6, 1.0, 1.0, 10)

    def test_erlang_a_rate_that_underflows_is_an_empty_queue(self):
        # lambda / mu = 1e-320 / 1e3 rounds to 0: nobody arrives, so nobody waits (definition).
        result = erlang_a(1e-320, 1e3, 1.0, 3, answer_within=0.0)
        assert result == ErlangAResult(0.0, 0.0, 0.0, 1.0)

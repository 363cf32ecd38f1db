"""Staffing under forecast uncertainty: published queue values, the meaning of p, bad inputs.

Sources (see ../shared/REFERENCE_VALUES.md, "Queueing"):
- Tijms, *A First Course in Stochastic Models*, Wiley 2003, sec. 5.3: Table 5.3.2 p.201 [T][R]
  and p.200 [T]. With answer time 0 the service level is 1 - P(wait > 0), so "service level
  >= 1 - alpha at T = 0" is Tijms' "P(wait > 0) <= alpha".
- The worked interval (360 calls per 30 min, AHT 240 s) [R].
- Garnett, Mandelbaum & Reiman, M&SOM 4(3) 2002, Erlang A values [R; the form is [M]].
Independent computations: scipy.stats.poisson for the predictive count distribution, and
models.capacity.queueing (itself checked against the sources above) for the service level per count.
"""

from __future__ import annotations

import doctest
from typing import Any

import numpy as np
import pytest
from scipy import stats

from models.capacity import counts, queueing, staffing
from models.capacity.staffing import (
    ServiceTarget,
    evaluate_staffing,
    required_agents,
    service_level_at,
    staff_intervals,
)
from models.exceptions import StaffingError
from models.prediction.mixture import summarise
from tests.models.capacity.support import refusal

HALF_HOUR = 1800.0
WORKED_15 = ServiceTarget(handle_time=240, answer_within=15, share=0.8)


def brute_force(
    lam: np.ndarray, agents: int, seconds: float, target: ServiceTarget
) -> tuple[float, float]:
    """(E[SL], P(SL < share)) for one interval with Erlang C: the Poisson mixture pmf from
    scipy.stats.poisson summed over every draw, the service level per count from
    models.capacity.queueing.service_level (its own recursion)."""
    top = int(lam.max() + 20 * np.sqrt(lam.max()) + 40)
    k = np.arange(top + 1)
    pmf = stats.poisson.pmf(k[None, :], lam[:, None]).mean(axis=0)
    load = (k * target.handle_time / seconds).astype(np.float64)
    level = queueing.service_level(
        load, agents, handle_time=target.handle_time, answer_within=target.answer_within
    )
    level[0] = 1.0  # no arrivals: nothing to miss
    return float((pmf * level).sum()), float(pmf[level < target.share].sum())


def lognormal_draws(mean: float, sd: float, draws: int = 2000, seed: int = 7) -> np.ndarray:
    rng = np.random.default_rng(seed)
    return mean * np.exp(sd * rng.standard_normal(draws) - 0.5 * sd**2)


class TestDocstringExamples:
    def test_every_example_in_the_module_runs(self) -> None:
        outcome = doctest.testmod(staffing, optionflags=doctest.NORMALIZE_WHITESPACE)
        assert outcome.attempted >= 6
        assert outcome.failed == 0


class TestServiceLevelAt:
    @pytest.mark.parametrize(
        ("agents", "within", "expected"),
        [(55, 15, 0.845883), (55, 20, 0.866796), (54, 15, 0.792914), (56, 15, 0.886485)],
    )
    def test_worked_interval(self, agents: int, within: float, expected: float) -> None:
        # REFERENCE_VALUES.md worked interval [R]: 360 arrivals per 30 min, AHT 240 s.
        goal = ServiceTarget(handle_time=240, answer_within=within, share=0.8)
        level = service_level_at(360.0, agents, interval_seconds=HALF_HOUR, target=goal)
        assert float(level) == pytest.approx(expected, abs=6e-7)

    def test_answer_time_zero_is_one_minus_tijms_wait_probability(self) -> None:
        # Tijms 2003 p.200 [T], value [R]: C(A = 95, N = 100) = 0.5064569.
        goal = ServiceTarget(handle_time=3600, answer_within=0, share=0.5)
        level = service_level_at(95.0, 100, interval_seconds=3600, target=goal)
        assert float(level) == pytest.approx(1 - 0.5064569, abs=1e-7)

    def test_equals_the_erlang_b_recursion_everywhere(self) -> None:
        # models.capacity.queueing.service_level runs the Erlang B recursion; here B comes in closed form.
        rng = np.random.default_rng(3)
        loads = np.concatenate([rng.uniform(0.01, 400, 300), [1500.0, 2999.5]])
        agents = np.floor(loads + rng.uniform(-5, 60, loads.size)).clip(0).astype(int)
        agents[-2:] = [1560, 3100]
        goal = ServiceTarget(handle_time=300, answer_within=20, share=0.8)
        mine = service_level_at(loads * 3, agents, interval_seconds=900, target=goal)
        reference = [
            queueing.service_level(float(a), int(n), handle_time=300.0, answer_within=20.0)
            for a, n in zip(loads, agents, strict=True)
        ]
        np.testing.assert_allclose(mine, reference, rtol=0, atol=1e-12)

    @pytest.mark.parametrize(
        ("lam", "theta", "n", "wait"),
        [(10, 0.5, 10, 0.6196552309), (100, 0.1, 95, 0.9695036566), (100, 1.0, 100, 0.5132987983)],
    )
    def test_erlang_a_answer_time_zero_is_one_minus_wait_probability(
        self, lam: float, theta: float, n: int, wait: float
    ) -> None:
        # REFERENCE_VALUES.md Erlang A (Garnett, Mandelbaum & Reiman 2002) [R]; mu = 1 per
        # minute, so handle time 60 s, patience 60 / theta s, lam arrivals per 60 s.
        goal = ServiceTarget(handle_time=60, answer_within=0, share=0.5, patience=60 / theta)
        level = service_level_at(float(lam), n, interval_seconds=60, target=goal)
        assert float(level) == pytest.approx(1 - wait, abs=1e-9)

    def test_erlang_a_patience_equal_to_handle_time_is_a_poisson_queue(self) -> None:
        # REFERENCE_VALUES.md [R]: theta = mu makes M/M/infinity; P(wait) = P(Poisson(10) >= 10).
        goal = ServiceTarget(handle_time=60, answer_within=0, share=0.5, patience=60)
        level = service_level_at(10.0, 10, interval_seconds=60, target=goal)
        assert float(level) == pytest.approx(stats.poisson.cdf(9, 10), rel=1e-12)

    def test_erlang_a_equals_the_library_birth_death_sum(self) -> None:
        rng = np.random.default_rng(4)
        arrivals = rng.uniform(1, 600, 60)
        agents = rng.integers(1, 90, 60)
        goal = ServiceTarget(handle_time=240, answer_within=30, share=0.8, patience=90)
        mine = service_level_at(arrivals, agents, interval_seconds=HALF_HOUR, target=goal)
        reference = np.array(
            [
                queueing.erlang_a(
                    a / HALF_HOUR, 1 / 240, 1 / 90, int(n), answer_within=30.0
                ).service_level
                for a, n in zip(arrivals, agents, strict=True)
            ],
            dtype=np.float64,
        )
        np.testing.assert_allclose(mine, reference, rtol=0, atol=1e-11)

    def test_very_patient_callers_give_erlang_c(self) -> None:
        patient = ServiceTarget(handle_time=240, answer_within=15, share=0.8, patience=1e9)
        a = service_level_at(360.0, 55, interval_seconds=HALF_HOUR, target=patient)
        c = service_level_at(360.0, 55, interval_seconds=HALF_HOUR, target=WORKED_15)
        assert float(a) == pytest.approx(float(c), abs=1e-5)

    @pytest.mark.parametrize("patience", [None, 45.0, 600.0])
    def test_more_agents_never_lower_and_more_arrivals_never_raise_it(
        self, patience: float | None
    ) -> None:
        # Common practice, no source: a queue with more servers serves no worse.
        goal = ServiceTarget(handle_time=240, answer_within=20, share=0.8, patience=patience)
        arrivals = np.arange(1.0, 500.0, 7.0)
        agents = np.arange(1, 80)
        level = service_level_at(
            arrivals[:, None], agents[None, :], interval_seconds=HALF_HOUR, target=goal
        )
        assert np.all(np.diff(level, axis=1) >= -1e-12)
        assert np.all(np.diff(level, axis=0) <= 1e-12)

    def test_no_arrivals_miss_nothing(self) -> None:
        level = service_level_at([0.0, 0.0], [0, 3], interval_seconds=900, target=WORKED_15)
        assert level.tolist() == [1.0, 1.0]


# Tijms 2003, Table 5.3.2 p.201 [T][R]: load -> smallest c with P(wait > 0) <= alpha.
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


class TestRequiredAgents:
    @pytest.mark.parametrize(("column", "alpha"), [(0, 0.5), (1, 0.2), (2, 0.1)])
    def test_tijms_table_5_3_2(self, column: int, alpha: float) -> None:
        goal = ServiceTarget(handle_time=3600, answer_within=0, share=1 - alpha)
        loads = np.array(sorted(TIJMS_TABLE_5_3_2), dtype=float)
        need = required_agents(loads, interval_seconds=3600, target=goal)
        assert need.tolist() == [TIJMS_TABLE_5_3_2[int(r)][column] for r in loads]

    def test_worked_interval_needs_55_for_80_percent_in_15_seconds(self) -> None:
        # [R]: SL(15 s) is 0.792914 with 54 agents and 0.845883 with 55.
        assert required_agents(360.0, interval_seconds=HALF_HOUR, target=WORKED_15).tolist() == [55]

    def test_equals_a_one_by_one_search(self) -> None:
        rng = np.random.default_rng(5)
        arrivals = rng.uniform(0.5, 900, 80)
        goal = ServiceTarget(handle_time=200, answer_within=30, share=0.9)
        need = required_agents(arrivals, interval_seconds=HALF_HOUR, target=goal)
        reference = [
            queueing.agents_for_service_level(
                a * 200 / HALF_HOUR, handle_time=200.0, answer_within=30.0, target=0.9
            )
            for a in arrivals
        ]
        assert need.tolist() == reference

    def test_erlang_a_equals_a_one_by_one_search(self) -> None:
        goal = ServiceTarget(handle_time=240, answer_within=20, share=0.8, patience=60)
        arrivals = np.array([3.0, 40.0, 360.0, 900.0])
        need = required_agents(arrivals, interval_seconds=HALF_HOUR, target=goal)
        for a, n in zip(arrivals, need, strict=True):

            def level(m: int, a: float = a) -> float:
                result = queueing.erlang_a(a / HALF_HOUR, 1 / 240, 1 / 60, m, answer_within=20.0)
                assert result.service_level is not None
                return result.service_level

            assert level(int(n)) >= 0.8 > level(int(n) - 1)

    def test_no_arrivals_need_nobody(self) -> None:
        assert required_agents([0.0], interval_seconds=900, target=WORKED_15).tolist() == [0]


class TestStaffIntervals:
    def test_degenerate_posterior_plug_in_is_the_published_55(self) -> None:
        plan = staff_intervals(
            np.full((50, 1), 360.0), interval_seconds=HALF_HOUR, target=WORKED_15
        )
        assert plan.plug_in.agents.tolist() == [55]

    @pytest.mark.parametrize("p", [0.5, 0.8, 0.9, 0.99])
    def test_degenerate_posterior_assured_is_agents_at_the_poisson_quantile(self, p: float) -> None:
        # All draws equal: the count is still Poisson(360), so "met with probability p" asks for
        # the agents needed at the Poisson p-quantile (scipy.stats.poisson.ppf), not at the mean.
        plan = staff_intervals(
            np.full((50, 1), 360.0),
            interval_seconds=HALF_HOUR,
            target=WORKED_15,
            meet_probability=p,
        )
        quantile = stats.poisson.ppf(p, 360.0)
        assert plan.quantile_arrivals.tolist() == [int(quantile)]
        expected = required_agents(quantile, interval_seconds=HALF_HOUR, target=WORKED_15)
        assert plan.assured.agents.tolist() == expected.tolist()

    def test_degenerate_posterior_at_the_median_equals_plug_in(self) -> None:
        # The median of Poisson(360) is 360 (scipy), so at p = 0.5 both answers coincide; for
        # p > 0.5 the Poisson scatter alone already asks for more.
        assert stats.poisson.median(360.0) == 360.0
        lam = np.full((50, 1), 360.0)
        half = staff_intervals(
            lam, interval_seconds=HALF_HOUR, target=WORKED_15, meet_probability=0.5
        )
        high = staff_intervals(
            lam, interval_seconds=HALF_HOUR, target=WORKED_15, meet_probability=0.9
        )
        assert half.assured.agents.tolist() == half.plug_in.agents.tolist() == [55]
        assert high.assured.agents[0] > high.plug_in.agents[0]

    def test_material_uncertainty_asks_for_more_than_the_plug_in(self) -> None:
        lam = np.column_stack([lognormal_draws(360, 0.2), lognormal_draws(40, 0.3, seed=8)])
        plug = staff_intervals(
            lam, interval_seconds=HALF_HOUR, target=WORKED_15, meet_probability=0.9
        )
        tight = staff_intervals(
            np.tile(lam.mean(axis=0), (50, 1)),
            interval_seconds=HALF_HOUR,
            target=WORKED_15,
            meet_probability=0.9,
        )
        assert np.all(plug.assured.agents > plug.plug_in.agents)
        # The same mean without posterior spread needs fewer for the same assurance.
        assert np.all(plug.assured.agents > tight.assured.agents)
        assert plug.plug_in.agents.tolist() == tight.plug_in.agents.tolist()

    @pytest.mark.parametrize("p", [0.75, 0.9, 0.97])
    def test_assured_is_the_fewest_meeting_the_target_with_probability_p(self, p: float) -> None:
        lam = lognormal_draws(300, 0.25)[:, None]
        plan = staff_intervals(
            lam, interval_seconds=HALF_HOUR, target=WORKED_15, meet_probability=p
        )
        n = int(plan.assured.agents[0])
        _, miss_at_n = brute_force(lam[:, 0], n, HALF_HOUR, WORKED_15)
        _, miss_below = brute_force(lam[:, 0], n - 1, HALF_HOUR, WORKED_15)
        assert 1 - miss_at_n >= p > 1 - miss_below
        assert plan.assured.miss_probability[0] <= 1 - p + 1e-9

    def test_expected_level_and_miss_probability_match_a_direct_sum(self) -> None:
        lam = np.column_stack([lognormal_draws(300, 0.25), lognormal_draws(12, 0.4, seed=9)])
        agents = np.array([50, 5])
        check = evaluate_staffing(lam, agents, interval_seconds=HALF_HOUR, target=WORKED_15)
        for w in range(2):
            level, miss = brute_force(lam[:, w], int(agents[w]), HALF_HOUR, WORKED_15)
            assert check.expected_service_level[w] == pytest.approx(level, abs=1e-7)
            assert check.miss_probability[w] == pytest.approx(miss, abs=1e-7)

    def test_count_distribution_keeps_the_predictive_mean_and_variance(self) -> None:
        # The internal count pmf against models.prediction.mixture.summarise (exact moments of the mixture).
        lam = np.column_stack([lognormal_draws(100, 0.3), lognormal_draws(2.5, 0.6, seed=3)])
        grid = counts.count_grid(lam)
        exact = summarise(lam, levels=())
        mean = (grid.counts * grid.pmf).sum(axis=1)
        var = (grid.counts**2 * grid.pmf).sum(axis=1) - mean**2
        np.testing.assert_allclose(mean, exact.mean, rtol=1e-10)
        np.testing.assert_allclose(np.sqrt(var), exact.sd, rtol=1e-9)

    @pytest.mark.parametrize("patience", [None, 120.0])
    def test_more_agents_never_lower_expected_level_nor_raise_the_miss(
        self, patience: float | None
    ) -> None:
        goal = ServiceTarget(handle_time=240, answer_within=15, share=0.8, patience=patience)
        lam = lognormal_draws(300, 0.25)[:, None]
        checks = [
            evaluate_staffing(lam, n, interval_seconds=HALF_HOUR, target=goal)
            for n in range(45, 75)
        ]
        level = np.array([c.expected_service_level[0] for c in checks])
        miss = np.array([c.miss_probability[0] for c in checks])
        assert np.all(np.diff(level) >= -1e-12)
        assert np.all(np.diff(miss) <= 1e-12)

    def test_erlang_a_assured_meets_its_definition(self) -> None:
        goal = ServiceTarget(handle_time=240, answer_within=20, share=0.8, patience=60)
        lam = lognormal_draws(60, 0.3, draws=400)[:, None]
        plan = staff_intervals(lam, interval_seconds=HALF_HOUR, target=goal, meet_probability=0.9)
        n = int(plan.assured.agents[0])
        k = np.arange(1, 400)
        pmf = stats.poisson.pmf(k[None, :], lam).mean(axis=0)

        def met(m: int) -> float:
            levels = [
                queueing.erlang_a(kk / HALF_HOUR, 1 / 240, 1 / 60, m, answer_within=20.0)
                for kk in k
            ]
            ok = np.array([r.service_level is not None and r.service_level >= 0.8 for r in levels])
            return float(stats.poisson.pmf(0, lam[:, 0]).mean() + pmf[ok].sum())

        assert met(n) >= 0.9 > met(n - 1)
        assert plan.assured.agents[0] >= plan.plug_in.agents[0]

    def test_day_totals_and_shrinkage(self) -> None:
        lam = np.tile([[20.0, 40.0, 0.0, 30.0]], (10, 1))
        plan = staff_intervals(
            lam,
            interval_seconds=900,
            target=WORKED_15,
            shrinkage=0.3,
            day=["mon", "mon", "mon", "tue"],
        )
        hours = plan.plug_in.agents * 0.25
        mon, tue = plan.day_totals()
        assert (mon.day, tue.day) == ("mon", "tue")
        assert mon.plug_in_hours == pytest.approx(hours[:3].sum())
        assert mon.plug_in_paid_hours == pytest.approx(hours[:3].sum() / 0.7)
        assert tue.assured_hours == pytest.approx(plan.assured.agents[3] * 0.25)
        expected = np.ceil(np.round(plan.plug_in.agents / 0.7, 9)).astype(int)
        assert plan.scheduled(plan.plug_in.agents).tolist() == expected.tolist()
        # 7 agents at 30% shrinkage is exactly 10 paid (7 / 0.7 = 10.000000000000002 in floats).
        assert plan.scheduled(np.array([7])).tolist() == [10]

    def test_closed_interval_gets_nobody_and_a_quiet_one_the_floor(self) -> None:
        lam = np.tile([[0.0, 0.02]], (20, 1))
        plan = staff_intervals(lam, interval_seconds=900, target=WORKED_15, meet_probability=0.9)
        assert plan.assured.agents.tolist() == [0, 1]
        assert plan.assured.expected_service_level[0] == 1.0
        assert plan.assured.miss_probability[0] == 0.0
        bare = staff_intervals(
            lam, interval_seconds=900, target=WORKED_15, meet_probability=0.9, min_agents=0
        )
        # P(no arrival) = exp(-0.02) > 0.9: the target is met with probability p by nobody.
        assert bare.assured.agents.tolist() == [0, 0]

    def test_rows_are_json_ready(self) -> None:
        plan = staff_intervals(np.full((5, 1), 30.0), interval_seconds=900, target=WORKED_15)
        (row,) = plan.rows([("a", "b")])
        assert set(row) >= {"start", "end", "mean_arrivals", "plug_in", "assured"}
        assert isinstance(row["plug_in"]["agents"], int)


class TestBadInputs:
    @pytest.mark.parametrize(
        ("options", "named"),
        [
            ({"handle_time": 0}, "handle_time"),
            ({"handle_time": -240}, "-240"),
            ({"handle_time": float("nan")}, "handle_time"),
            ({"answer_within": -1}, "answer_within"),
            ({"share": 0}, "share"),
            ({"share": 1}, "share"),
            ({"share": 1.2}, "1.2"),
            ({"patience": 0}, "patience"),
        ],
    )
    def test_service_target(self, options: dict[str, float], named: str) -> None:
        base = {"handle_time": 240.0, "answer_within": 20.0, "share": 0.8}
        with pytest.raises(StaffingError, match=named):
            ServiceTarget(**{**base, **options})

    @pytest.mark.parametrize(
        ("options", "named"),
        [
            ({"meet_probability": 0.0}, "meet_probability"),
            ({"meet_probability": 1.0}, "meet_probability"),
            ({"shrinkage": 1.0}, "shrinkage"),
            ({"shrinkage": -0.1}, "shrinkage"),
            ({"interval_seconds": 0}, "interval_seconds"),
            ({"min_agents": -1}, "min_agents"),
            ({"day": ["a", "b"]}, "day"),
        ],
    )
    def test_plan_options(self, options: dict[str, object], named: str) -> None:
        kwargs: dict[str, object] = {"interval_seconds": 900, "target": WORKED_15, **options}
        with pytest.raises(StaffingError, match=named):
            staff_intervals(np.full((3, 1), 30.0), **kwargs)  # type: ignore[arg-type]

    @pytest.mark.parametrize(
        ("lam", "named"),
        [
            (np.array([[1.0, -2.0]]), "-2.0"),
            (np.array([[1.0, np.nan]]), "nan"),
            (np.array([1.0, 2.0]), "shape"),
        ],
    )
    def test_expected_arrivals(self, lam: np.ndarray, named: str) -> None:
        with pytest.raises(StaffingError, match=named):
            staff_intervals(lam, interval_seconds=900, target=WORKED_15)

    def test_agents_at_or_below_the_load_name_the_interval_and_value(self) -> None:
        lam = np.full((5, 2), 360.0)
        with pytest.raises(StaffingError, match=r"agents\[1\] = 48 .* 48 erlangs"):
            evaluate_staffing(lam, [60, 48], interval_seconds=HALF_HOUR, target=WORKED_15)

    def test_agents_below_the_load_are_allowed_when_callers_hang_up(self) -> None:
        goal = ServiceTarget(handle_time=240, answer_within=15, share=0.8, patience=60)
        check = evaluate_staffing(
            np.full((5, 1), 360.0), 40, interval_seconds=HALF_HOUR, target=goal
        )
        assert 0 < check.expected_service_level[0] < 0.8
        assert check.miss_probability[0] > 0.99

    @pytest.mark.parametrize("agents", [[2.5], [-1], ["x"]])
    def test_agents_must_be_whole_numbers(self, agents: list[Any]) -> None:
        with pytest.raises(StaffingError, match="agents"):
            evaluate_staffing(np.full((5, 1), 3.0), agents, interval_seconds=900, target=WORKED_15)


def _forced(**values: Any) -> ServiceTarget:
    """A target whose fields are set past the checks, as a caller bypassing them could."""
    target = ServiceTarget(handle_time=240, answer_within=20, share=0.8, patience=60)
    for name, value in values.items():
        object.__setattr__(target, name, value)
    return target


class TestSpinInputs:
    """Issue 12 item 1: these inputs once kept the agents search doubling for ever.

    Each call runs under a watchdog (tests/models/capacity/support.py) so that a regression
    fails here instead of hanging the run.
    """

    LAM = np.full((20, 4), 30.0)

    def test_subnormal_handle_time_and_patience_are_refused(self) -> None:
        def call() -> None:
            goal = ServiceTarget(handle_time=5e-324, answer_within=20, share=0.8, patience=5e-324)
            staff_intervals(self.LAM, interval_seconds=HALF_HOUR, target=goal)

        message = refusal(call)
        assert "handle_time must be seconds in [0.001, 86400]; got 5e-324" in message

    @pytest.mark.parametrize("within", [0.0, 20.0])
    def test_subnormal_patience_with_zero_agents_is_refused(self, within: float) -> None:
        # The staffing document's sequence: plan, then the given staffing agents = [0].
        def call() -> None:
            goal = ServiceTarget(handle_time=240, answer_within=within, share=0.8, patience=5e-324)
            staff_intervals(self.LAM, interval_seconds=HALF_HOUR, target=goal)
            evaluate_staffing(self.LAM, np.asarray(0), interval_seconds=HALF_HOUR, target=goal)

        message = refusal(call)
        assert "patience must be finite seconds >= 0.001, or None (nobody hangs up)" in message
        assert "got 5e-324" in message

    @pytest.mark.parametrize(
        "values",
        [
            {"patience": 5e-324, "answer_within": 0.0},  # theta t = inf x 0 = NaN
            {"handle_time": 5e-324, "patience": 5e-324},  # mu = theta = inf
        ],
    )
    def test_a_nan_service_level_ends_the_search(self, values: dict[str, float]) -> None:
        # Past the target checks, the search itself must stop at the first NaN and say so.
        goal = _forced(**values)
        message = refusal(
            lambda: required_agents([360.0, 3.0], interval_seconds=HALF_HOUR, target=goal)
        )
        assert "the service level is" in message and "nan" in message
        assert "allowed: inputs that give a finite service level" in message

    @pytest.mark.parametrize("patience", [None, 60.0])
    def test_a_search_beyond_the_agent_limit_is_refused(self, patience: float | None) -> None:
        # A share above 1, forced past the check, is met by no staffing: the doubling must stop
        # at MAX_AGENTS rather than run on.
        goal = _forced(share=1.5, patience=patience)
        message = refusal(lambda: required_agents([360.0], interval_seconds=HALF_HOUR, target=goal))
        assert f"no staffing of up to {queueing.MAX_AGENTS} agents" in message


class TestServiceTargetRanges:
    @pytest.mark.parametrize("handle_time", [0.001, 240, 86_400])
    def test_handle_times_from_a_millisecond_to_a_day_are_accepted(self, handle_time) -> None:
        assert ServiceTarget(handle_time=handle_time, answer_within=0, share=0.5).handle_time == (
            float(handle_time)
        )

    @pytest.mark.parametrize("handle_time", [5e-324, 0.000999, 86_400.5, float("inf")])
    def test_handle_times_outside_are_refused_with_the_range(self, handle_time) -> None:
        with pytest.raises(StaffingError) as caught:
            ServiceTarget(handle_time=handle_time, answer_within=20, share=0.8)
        assert str(caught.value) == (
            f"handle_time must be seconds in [0.001, 86400]; got {handle_time!r}"
        )

    @pytest.mark.parametrize("patience", [5e-324, 1e-300, 0.000999, 0.0, -1.0, float("nan")])
    def test_patience_below_a_millisecond_is_refused_with_the_range(self, patience) -> None:
        with pytest.raises(StaffingError, match=r"patience must be finite seconds >= 0\.001"):
            ServiceTarget(handle_time=240, answer_within=20, share=0.8, patience=patience)

    def test_patience_of_a_millisecond_is_accepted(self) -> None:
        goal = ServiceTarget(handle_time=240, answer_within=0, share=0.5, patience=0.001)
        # Callers who wait hang up within about a millisecond, so the queue is nearly the loss
        # system M/M/1/1: at load 1 (one arrival per 240 s, AHT 240 s) a share B(1, 1) = 1/2
        # finds the agent busy (REFERENCE_VALUES.md exact rational) and 1/2 is answered at once.
        level = service_level_at(1.0, 1, interval_seconds=240, target=goal)
        assert float(level) == pytest.approx(0.5, abs=1e-5)

    @pytest.mark.parametrize(
        ("options", "named"),
        [
            ({"share": float("nan")}, "share must be in (0, 1); got nan"),
            ({"share": float("inf")}, "share must be in (0, 1); got inf"),
            ({"answer_within": float("inf")}, "answer_within must be finite seconds >= 0"),
            ({"answer_within": "20"}, "answer_within must be a number"),
        ],
    )
    def test_non_finite_targets_are_refused(self, options: dict[str, Any], named: str) -> None:
        base = {"handle_time": 240.0, "answer_within": 20.0, "share": 0.8}
        with pytest.raises(StaffingError) as caught:
            ServiceTarget(**{**base, **options})
        assert named in str(caught.value)


class TestStaffingEqualsQueueing:
    """One implementation: staffing's figures are queueing's, with the same queue-state limit."""

    @pytest.mark.parametrize(
        ("arrivals", "agents", "within"),
        [(360.0, 55, 15.0), (360.0, 54, 20.0), (95.0 * 1800 / 240, 100, 0.0), (3.0, 1, 30.0)],
    )
    def test_erlang_c(self, arrivals: float, agents: int, within: float) -> None:
        # Includes the worked interval and Tijms 2003 p.200 (95 erlangs on 100 agents) [R].
        goal = ServiceTarget(handle_time=240, answer_within=within, share=0.8)
        mine = float(service_level_at(arrivals, agents, interval_seconds=HALF_HOUR, target=goal))
        load = arrivals * 240 / HALF_HOUR
        theirs = queueing.service_level(load, agents, handle_time=240.0, answer_within=within)
        assert mine == pytest.approx(theirs, rel=0, abs=1e-12)

    @pytest.mark.parametrize(
        ("arrivals", "agents", "patience"),
        [(360.0, 55, 90.0), (360.0, 40, 90.0), (600.0, 10, 1.0), (3.0, 1, 3600.0)],
    )
    def test_erlang_a(self, arrivals: float, agents: int, patience: float) -> None:
        goal = ServiceTarget(handle_time=240, answer_within=20, share=0.8, patience=patience)
        mine = float(service_level_at(arrivals, agents, interval_seconds=HALF_HOUR, target=goal))
        theirs = queueing.erlang_a(
            arrivals / HALF_HOUR, 1 / 240, 1 / patience, agents, answer_within=20.0
        ).service_level
        assert mine == pytest.approx(theirs, rel=1e-12)

    def test_one_queue_state_limit_accepts_the_same_queues(self) -> None:
        # 1 arrival per second against 120 agents x 1/240 s = 0.5 answered per second: about
        # 0.5 x patience callers queue, so 8e5 s of patience needs some 8e5 of the 1e6 states.
        # Nearly every answered caller is served within 1e6 s, and in this overload all agents
        # are busy, so the answered share is close to 0.5 / 1 (flow balance: common practice, no
        # source); both modules give the same figure.
        goal = ServiceTarget(handle_time=240, answer_within=1e6, share=0.5, patience=8e5)
        mine = float(service_level_at(1800.0, 120, interval_seconds=HALF_HOUR, target=goal))
        theirs = queueing.erlang_a(1.0, 1 / 240, 1 / 8e5, 120, answer_within=1e6).service_level
        assert mine == pytest.approx(theirs, rel=1e-12)
        assert mine == pytest.approx(0.5, abs=1e-3)

    def test_one_queue_state_limit_refuses_the_same_queues(self) -> None:
        # With 1.2e6 s of patience about 6e5 callers would queue: more than half the limit.
        # Before the limit was one, queueing allowed 5e6 states and would have answered.
        goal = ServiceTarget(handle_time=240, answer_within=20, share=0.8, patience=1.2e6)
        limit = f"at most {queueing.MAX_QUEUE_STATES:,} queue states"
        assert queueing.MAX_QUEUE_STATES == 1_000_000
        with pytest.raises(StaffingError, match=r"patience of 1\.2e\+06 s is too long") as mine:
            service_level_at(1800.0, 120, interval_seconds=HALF_HOUR, target=goal)
        with pytest.raises(StaffingError, match=r"patience_rate 8\.3333") as theirs:
            queueing.erlang_a(1.0, 1 / 240, 1 / 1.2e6, 120, answer_within=20.0)
        assert limit in str(mine.value) and limit in str(theirs.value)


class TestHeavyInputs:
    def test_a_load_above_the_limit_is_refused_naming_the_interval(self) -> None:
        goal = ServiceTarget(handle_time=86_400, answer_within=20, share=0.8)
        lam = np.full((3, 2), 30.0)
        lam[:, 1] = 30_000.0  # 30,000 calls of a day each in 30 min: 1.44e6 erlangs
        with pytest.raises(StaffingError, match=r"interval 1: 30000 arrivals .* at most 1e\+06"):
            staff_intervals(lam, interval_seconds=HALF_HOUR, target=goal)
        with pytest.raises(StaffingError, match=r"interval 1: 30000 arrivals"):
            evaluate_staffing(lam, 10**6, interval_seconds=HALF_HOUR, target=goal)

    def test_a_forecast_too_wide_for_the_count_grid_is_refused_before_work(self) -> None:
        # Draws from 1e3 to 1e9 arrivals would need a grid of about 1e9 counts (and the exact
        # quantile a sum as long): refused at once, under the watchdog.
        goal = ServiceTarget(handle_time=0.001, answer_within=0, share=0.8)
        lam = np.array([[1e3], [1e9]])
        message = refusal(lambda: staff_intervals(lam, interval_seconds=HALF_HOUR, target=goal))
        assert "interval 0 spans 785 to 1000222459 arrivals" in message
        assert f"{counts.MAX_GRID_FLOATS:,} probabilities" in message

    def test_agents_above_the_limit_are_refused(self) -> None:
        with pytest.raises(StaffingError, match=r"agents\[0\] = 2000001.0; allowed: .* 2000000"):
            evaluate_staffing(
                np.full((3, 1), 30.0), 2_000_001, interval_seconds=900, target=WORKED_15
            )

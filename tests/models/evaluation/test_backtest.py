"""Rolling-origin backtests: the machinery with a known-truth fitter, then small real fits."""

from __future__ import annotations

import dataclasses
import datetime as dt
import json
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from models.evaluation.backtest import (
    BacktestConfig,
    FittedModel,
    NutsFitter,
    band_labels,
    load_records,
    make_origins,
    run_backtest,
    slice_series,
    summarise_records,
    window_table,
)
from models.evaluation.report import write_report
from models.exceptions import InputError
from models.fitting.options import FitOptions, GateThresholds
from models.prediction.posterior import CompactPosterior
from models.ratemodel.binning import BinnedSeries, bin_counts, bin_grid, local_features
from models.ratemodel.design import Calendar
from models.ratemodel.spec import HolidayCalendar, ModelSpec
from tests.conftest import auckland_hourly

DUBLIN = "Europe/Dublin"
FIRST = dt.date(2026, 1, 5)  # a Monday, clear of clock changes for ten weeks


def weekly_rates() -> np.ndarray:
    """An hourly weekly rate table of our own: a daytime hump, quieter weekends."""
    hours = np.arange(24)
    shape = 1.5 + 14.0 * np.exp(-0.5 * ((hours - 13) / 3.5) ** 2)
    return np.array([1.0, 1.1, 1.0, 1.0, 1.3, 0.6, 0.5])[:, None] * shape[None, :]


def simulated(days: int, *, dispersion: float | None = None, seed: int = 3) -> BinnedSeries:
    """Hourly counts from the weekly table: Poisson, or negative binomial with ``dispersion``."""
    grid = bin_grid(FIRST, FIRST + dt.timedelta(days=days), tz=DUBLIN, bin_minutes=60)
    dow, slot, _, _ = local_features(grid, tz=DUBLIN, bin_minutes=60)
    rate = weekly_rates()[dow, slot]
    rng = np.random.default_rng(seed)
    if dispersion is not None:
        rate = rate * rng.gamma(dispersion, 1.0 / dispersion, size=rate.size)
    counts = rng.poisson(rate)
    return BinnedSeries(
        grid, counts, np.ones(len(grid)), DUBLIN, 60, FIRST, FIRST + dt.timedelta(days=days)
    )


class TruthFitter:
    """Returns the true rates as a one-draw posterior, and counts its calls."""

    def __init__(self) -> None:
        self.calls: list[dt.date] = []

    def __call__(self, history: BinnedSeries, *, seed: int) -> FittedModel:
        self.calls.append(history.end_day)
        n_days = (history.end_day - history.first_day).days
        spec = ModelSpec(trend=False, latent_daily=False)
        posterior = CompactPosterior(
            week_log_rate=np.log(weekly_rates())[None],
            trend=np.zeros(1),
            holiday_effect=np.zeros(1),
            latent=np.zeros((1, n_days)),
            latent_rho=np.zeros(1),
            latent_sd=np.zeros(1),
            calendar=Calendar(DUBLIN, 60, history.first_day, history.first_day),
            spec=spec,
            opening=None,
            seed=seed,
        )
        return FittedModel(posterior, {"ok": True})

    def describe(self) -> dict[str, Any]:
        return {"kind": "truth"}


def origins(first_week: int, count: int, *, every: int = 7) -> tuple[dt.date, ...]:
    start = FIRST + dt.timedelta(days=7 * first_week)
    return tuple(start + dt.timedelta(days=every * k) for k in range(count))


# ----------------------------------------------------------------------------- settings


class TestConfig:
    @pytest.mark.parametrize(
        ("changes", "message"),
        [
            ({"origins": ()}, "at least one origin"),
            ({"origins": (dt.date(2026, 2, 9), dt.date(2026, 2, 2))}, "increasing order"),
            ({"lead_bands": (1, 6)}, "ending at horizon_days=7"),
            ({"refit_every": 0}, "refit_every=0"),
            ({"levels": (0.8, 1.0)}, "strictly between 0 and 1"),
            ({"history_days": 3}, "history_days=3"),
        ],
    )
    def test_bad_settings_are_refused(self, changes, message) -> None:
        settings = {"origins": (dt.date(2026, 2, 2),), **changes}
        with pytest.raises(InputError, match=message):
            BacktestConfig(**settings)

    def test_to_dict_is_json(self) -> None:
        config = BacktestConfig(origins=(dt.date(2026, 2, 2),))
        assert json.loads(json.dumps(config.to_dict()))["origins"] == ["2026-02-02"]

    def test_band_labels(self) -> None:
        assert band_labels((1, 7)) == ["day 1", "days 2-7"]

    def test_make_origins_steps_and_bounds(self) -> None:
        series = simulated(42)
        got = make_origins(series, first=dt.date(2026, 1, 19), last=dt.date(2026, 2, 2))
        assert got == (dt.date(2026, 1, 19), dt.date(2026, 1, 26), dt.date(2026, 2, 2))
        with pytest.raises(InputError, match="before its end"):
            make_origins(series, first=dt.date(2026, 1, 19), last=dt.date(2026, 3, 30))


class TestSliceSeries:
    def test_cuts_at_local_midnight_across_a_clock_change(self) -> None:
        # Ireland's clocks go forward on Sunday 29 March 2026 (common practice, no source).
        first = dt.date(2026, 3, 23)
        grid = bin_grid(first, first + dt.timedelta(days=14), tz=DUBLIN, bin_minutes=60)
        series = BinnedSeries(
            grid,
            np.ones(len(grid), dtype=np.int64),
            np.ones(len(grid)),
            DUBLIN,
            60,
            first,
            first + dt.timedelta(days=14),
        )
        part = slice_series(series, start=dt.date(2026, 3, 29), end=dt.date(2026, 3, 31))
        assert len(part.count) == 23 + 24
        local = part.start.tz_convert(DUBLIN)
        assert (local[0].hour, local[-1].hour, local[-1].day) == (0, 23, 30)
        assert (part.first_day, part.end_day) == (dt.date(2026, 3, 29), dt.date(2026, 3, 31))

    def test_an_empty_range_is_refused(self) -> None:
        with pytest.raises(InputError, match="no observed bins"):
            slice_series(simulated(14), start=dt.date(2027, 1, 1), end=dt.date(2027, 1, 2))


# ----------------------------------------------------------------------------- known truth


@pytest.fixture(scope="module")
def truth_run() -> tuple[BinnedSeries, BacktestConfig, list[dict[str, Any]]]:
    series = simulated(70)
    config = BacktestConfig(origins=origins(4, 6), history_days=28)
    return series, config, run_backtest(series, TruthFitter(), config, progress=False)


class TestKnownTruth:
    def test_coverage_is_what_the_true_law_gives_those_intervals(self, truth_run) -> None:
        # The true model's intervals cover each window with probability p_w (scipy.stats.poisson,
        # at least the nominal level for counts); the empirical coverage is a sum of independent
        # Bernoulli(p_w): allow 4 binomial sd.
        _, config, records = truth_run
        table = window_table(records)
        y, mean = table["y"], table["model"]["mean"]
        assert y.size == 6 * 7 * 24
        for level in config.levels:
            key = format(level, "g")
            lo, hi = table["model"]["lower"][key], table["model"]["upper"][key]
            p = stats.poisson.cdf(hi, mean) - stats.poisson.cdf(lo - 1, mean)
            assert p.mean() >= level
            empirical = np.mean((lo <= y) & (y <= hi))
            tolerance = 4 * np.sqrt(np.sum(p * (1 - p))) / y.size
            assert abs(empirical - p.mean()) < tolerance

    def test_pit_histogram_is_flat(self, truth_run) -> None:
        # Under the true law the non-randomised PIT histogram has expectation 1/10 per bin
        # (Czado, Gneiting & Held, Biometrics 65(4) 2009); each window adds a value in [0, 1]
        # with variance <= 0.09 per bin: allow 4 sd.
        _, config, records = truth_run
        metrics = summarise_records(records, lead_bands=config.lead_bands, levels=config.levels)
        pit = np.asarray(metrics["overall"]["model"]["pit"])
        windows = metrics["overall"]["model"]["windows"]
        assert np.all(np.abs(pit - 0.1) < 4 * 0.3 / np.sqrt(windows))

    def test_truth_beats_every_baseline_on_crps(self, truth_run) -> None:
        _, config, records = truth_run
        overall = summarise_records(records, lead_bands=config.lead_bands, levels=config.levels)[
            "overall"
        ]
        for name in ("seasonal_naive", "weekday_mean_poisson", "weekday_mean_negbin"):
            assert overall["model"]["crps"] < overall[name]["crps"]

    def test_metrics_per_band_count_their_windows(self, truth_run) -> None:
        _, config, records = truth_run
        bands = summarise_records(records, lead_bands=config.lead_bands, levels=config.levels)[
            "bands"
        ]
        assert bands["day 1"]["model"]["windows"] == 6 * 24
        assert bands["days 2-7"]["model"]["windows"] == 6 * 6 * 24


class TestSummaries:
    def test_metrics_by_hand(self) -> None:
        record = {
            "y": [3, 10],
            "day": [0, 3],
            "dow": [0, 3],
            "hour": [9, 9],
            "forecasts": {
                "model": {
                    "mean": [4.0, 6.0],
                    "crps": [0.5, 2.5],
                    "pit_lower": [0.2, 0.95],
                    "pit_upper": [0.4, 0.97],
                    "lower": {"0.8": [2, 4]},
                    "upper": {"0.8": [6, 8]},
                }
            },
        }
        metrics = summarise_records([record], lead_bands=(1, 7), levels=(0.8,))
        overall = metrics["overall"]["model"]
        assert overall["rmse"] == pytest.approx(np.sqrt((1 + 16) / 2))
        assert overall["mae"] == pytest.approx(2.5)
        assert overall["crps"] == pytest.approx(1.5)
        assert overall["coverage"]["0.8"] == 0.5
        assert overall["width"]["0.8"] == 4.0
        # Interval score (Gneiting & Raftery 2007, eq. 43), alpha 0.2: 4 and 4 + 10 * 2.
        assert overall["interval_score"]["0.8"] == pytest.approx((4 + 24) / 2)
        assert metrics["bands"]["day 1"]["model"]["windows"] == 1


# ----------------------------------------------------------------------------- resume, cadence


class TestResume:
    def test_an_interrupted_run_resumes_and_matches_an_uninterrupted_one(self, tmp_path) -> None:
        series = simulated(56)
        config = BacktestConfig(
            origins=origins(4, 3), history_days=28, horizon_days=2, lead_bands=(1, 2)
        )
        whole = run_backtest(series, TruthFitter(), config, progress=False)

        def stop_after_first(record: dict[str, Any]) -> None:
            raise KeyboardInterrupt

        with pytest.raises(KeyboardInterrupt):
            run_backtest(
                series,
                TruthFitter(),
                config,
                results_dir=tmp_path,
                progress=False,
                on_origin=stop_after_first,
            )
        assert len(list((tmp_path / "origins").glob("*.json"))) == 1
        fitter = TruthFitter()
        resumed = run_backtest(series, fitter, config, results_dir=tmp_path, progress=False)
        assert fitter.calls == [config.origins[1], config.origins[2]]

        def scores(records: list[dict[str, Any]]) -> list[dict[str, Any]]:
            return [{k: v for k, v in r.items() if k != "diagnostics"} for r in records]

        assert scores(resumed) == scores(json.loads(json.dumps(whole)))
        assert load_records(tmp_path) == resumed

    def test_a_folder_of_another_backtest_is_refused(self, tmp_path) -> None:
        series = simulated(56)
        config = BacktestConfig(origins=origins(4, 1), history_days=28)
        run_backtest(series, TruthFitter(), config, results_dir=tmp_path, progress=False)
        other = dataclasses.replace(config, history_days=21)
        with pytest.raises(InputError, match=r"different backtest \(config differ\)"):
            run_backtest(series, TruthFitter(), other, results_dir=tmp_path, progress=False)

    def test_a_folder_from_before_a_model_option_existed_still_matches(self, tmp_path) -> None:
        from models.evaluation.backtest import NutsFitter, _claim_folder
        from models.ratemodel.spec import ModelSpec

        series = simulated(56)
        config = BacktestConfig(origins=origins(4, 1), history_days=28)
        _claim_folder(tmp_path, series, NutsFitter(ModelSpec()), config)
        meta = tmp_path / "backtest.json"
        identity = json.loads(meta.read_text())
        for key in ("annual_harmonics", "within_day"):  # as written before these existed
            del identity["fitter"]["spec"][key]
        del identity["fitter"]["spec"]["priors"]["annual_sigma"]
        meta.write_text(json.dumps(identity))
        _claim_folder(tmp_path, series, NutsFitter(ModelSpec()), config)
        with pytest.raises(InputError, match=r"different backtest \(fitter differ\)"):
            _claim_folder(tmp_path, series, NutsFitter(ModelSpec(within_day=3)), config)

    def test_refit_cadence_reuses_the_last_fit(self) -> None:
        series = simulated(70)
        config = BacktestConfig(origins=origins(4, 5, every=3), refit_every=3, history_days=28)
        fitter = TruthFitter()
        records = run_backtest(series, fitter, config, progress=False)
        assert fitter.calls == [config.origins[0], config.origins[3]]
        assert [r["fitted_at"] for r in records] == [
            config.origins[i].isoformat() for i in (0, 0, 0, 3, 3)
        ]


class TestExclusions:
    def test_closed_partial_and_baseline_less_windows_are_not_scored(self) -> None:
        series = simulated(28)
        local = series.start.tz_convert(DUBLIN)
        open_hours = (local.hour >= 8) & (local.hour < 20)  # closed bins are absent from the data
        exposure = np.where(local.hour == 19, 0.5, 1.0)[open_hours]  # closes at 19:30
        shop = BinnedSeries(
            series.start[open_hours],
            series.count[open_hours],
            exposure,
            DUBLIN,
            60,
            series.first_day,
            series.end_day,
        )
        config = BacktestConfig(origins=(dt.date(2026, 1, 12),), horizon_days=7)
        [record] = run_backtest(shop, TruthFitter(), config, progress=False)
        assert set(record["hour"]) == set(range(8, 19))
        assert record["excluded"] == {"partly_observed": 7, "no_baseline": 0}
        # One week of history: the NB baseline has one past week, which is enough for a mean.
        assert len(record["y"]) == 7 * 11


# ----------------------------------------------------------------------------- report


class TestReport:
    def test_writes_metrics_markdown_and_plots(self, truth_run, tmp_path) -> None:
        _, config, records = truth_run
        metrics = write_report(
            records,
            tmp_path,
            lead_bands=config.lead_bands,
            levels=config.levels,
            title="Simulated",
            tz=DUBLIN,
            bin_minutes=60,
        )
        assert metrics["origins"] == 6 and metrics["gate_failures"] == 0
        text = (tmp_path / "report.md").read_text()
        assert "## Lead day 1" in text and "Forecasts are probabilistic" in text
        for name in ("bands.png", "pit.png", "coverage.png", "error_by_time.png"):
            assert (tmp_path / name).stat().st_size > 1000
        assert json.loads((tmp_path / "metrics.json").read_text())["origins"] == 6


# ----------------------------------------------------------------------------- real fits


@pytest.fixture(scope="session")
def negbin_run() -> tuple[BinnedSeries, list[dict[str, Any]]]:
    """One real NUTS fit of the negative binomial model to data simulated from it."""
    series = simulated(42, dispersion=10.0, seed=11)
    spec = ModelSpec(
        observation="negbin", trend=False, latent_daily=False, dispersion_by_slot=False
    )
    config = BacktestConfig(origins=origins(4, 2), refit_every=2, history_days=28)
    fitter = NutsFitter(spec, options=FitOptions(draws=250, tune=300, chains=2))
    return series, run_backtest(series, fitter, config, progress=False)


@pytest.mark.slow
class TestNutsOnSimulatedNegbin:
    """The negative binomial model fitted by NUTS to data simulated from it."""

    def test_intervals_cover_as_often_as_the_true_laws_intervals(self, negbin_run) -> None:
        # Reference law: scipy.stats.nbinom(10, 10 / (10 + rate)) per window. The fitted model's
        # intervals must hold about as much true probability as the true law's own intervals
        # (within 0.04), and the empirical coverage must match that probability within 4
        # binomial sd.
        _, records = negbin_run
        table = window_table(records)
        y = table["y"]
        assert y.size == 2 * 7 * 24
        starts = pd.DatetimeIndex([t for r in records for t in r["start"]])
        dow, slot, _, _ = local_features(starts, tz=DUBLIN, bin_minutes=60)
        rate = weekly_rates()[dow, slot]
        n, p = 10.0, 10.0 / (10.0 + rate)
        for level in (0.8, 0.95):
            key = format(level, "g")
            lo, hi = table["model"]["lower"][key], table["model"]["upper"][key]
            mass = stats.nbinom.cdf(hi, n, p) - stats.nbinom.cdf(lo - 1, n, p)
            q_lo = stats.nbinom.ppf((1 - level) / 2, n, p)
            q_hi = stats.nbinom.ppf((1 + level) / 2, n, p)
            true_mass = stats.nbinom.cdf(q_hi, n, p) - stats.nbinom.cdf(q_lo - 1, n, p)
            assert abs(mass.mean() - true_mass.mean()) < 0.04
            empirical = np.mean((lo <= y) & (y <= hi))
            assert abs(empirical - mass.mean()) < 4 * np.sqrt(np.sum(mass * (1 - mass))) / y.size

    def test_the_fit_recorded_its_diagnostics(self, negbin_run) -> None:
        # What was asked for (2 chains x 250 draws), and a gate verdict that follows from the
        # recorded figures and the gate's thresholds (r_hat <= 1.01, bulk ESS >= 400, no
        # divergences: common practice, no source).
        _, records = negbin_run
        diagnostics = records[0]["diagnostics"]
        assert (diagnostics["chains"], diagnostics["draws"]) == (2, 250)
        gate = GateThresholds()
        passes = (
            diagnostics["max_r_hat"] <= gate.max_r_hat
            and diagnostics["min_ess_bulk"] >= gate.min_ess_bulk
            and diagnostics["divergences"] <= gate.max_divergences
        )
        assert diagnostics["ok"] is passes
        assert diagnostics["ok"] is not bool(diagnostics["problems"])
        assert records[1]["fitted_at"] == records[0]["origin"]
        assert records[1]["diagnostics"] == diagnostics  # the second origin reuses the fit


def auckland(first: str, end: str) -> BinnedSeries:
    """Hourly counts at 45 Queen Street, Auckland (see ``tests.conftest.auckland_hourly``)."""
    return bin_counts(auckland_hourly(first, end), tz="Pacific/Auckland", bin_minutes=60)


@pytest.fixture(scope="session")
def auckland_run(tmp_path_factory) -> tuple[Path, list[dict[str, Any]]]:
    """A small backtest on open data, end to end: NUTS, exact scoring, report."""
    series = auckland("2023-05-01", "2023-06-01")  # New Zealand standard time all month
    holidays = HolidayCalendar(country="NZ", subdivision="AUK")
    spec = ModelSpec(observation="negbin", trend=False, holidays=holidays)
    config = BacktestConfig(
        origins=(dt.date(2023, 5, 22), dt.date(2023, 5, 24)),
        refit_every=2,
        horizon_days=2,
        lead_bands=(1, 2),
        history_days=21,
    )
    folder = tmp_path_factory.mktemp("akl")
    fitter = NutsFitter(spec, options=FitOptions(draws=150, tune=200, chains=2))
    records = run_backtest(
        series,
        fitter,
        config,
        results_dir=folder / "results",
        holidays=holidays,
        progress=False,
    )
    write_report(
        records,
        folder / "report",
        lead_bands=config.lead_bands,
        levels=config.levels,
        title="45 Queen Street",
        tz="Pacific/Auckland",
        bin_minutes=60,
    )
    return folder, records


@pytest.mark.slow
class TestRealDataBacktest:
    """A small backtest on open data (45 Queen Street, May 2023)."""

    def test_every_window_is_scored_by_every_forecaster(self, auckland_run) -> None:
        _, records = auckland_run
        for record in records:
            assert len(record["y"]) == 48
            assert set(record["forecasts"]) == {
                "model",
                "seasonal_naive",
                "weekday_mean_poisson",
                "weekday_mean_negbin",
                "glm_poisson",
            }

    def test_model_intervals_are_not_grossly_off(self, auckland_run) -> None:
        # A gross-miscalibration alarm, not a calibration claim (96 windows; see docs/evidence.md
        # for 12 weeks). Calibrated 95% intervals miss at most 5% of windows on average, so by
        # Markov's inequality they miss 25% or more with probability at most 0.05 / 0.25 = 0.2,
        # however the hours of a day depend on each other; with independent windows the chance
        # would be scipy.stats.binom.sf(23, 96, 0.05) < 1e-8. Accuracy is not asserted: over
        # these four days the level rose and last week's counts beat every average.
        folder, _ = auckland_run
        overall = json.loads((folder / "report" / "metrics.json").read_text())["overall"]
        alarm = 0.75
        assert overall["model"]["coverage"]["0.95"] > alarm
        # The alarm does fire where it should: these counts are overdispersed
        # (../shared/REFERENCE_VALUES.md, open data), so Poisson intervals around the weekday
        # mean are far too narrow.
        assert overall["weekday_mean_poisson"]["coverage"]["0.95"] <= alarm

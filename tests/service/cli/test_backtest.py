"""``ratecast backtest``: input errors, and a full run with the sampler replaced by known rates."""

from __future__ import annotations

import datetime as dt
import json
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pytest

import models.evaluation.backtest
from models.evaluation.backtest import FittedModel
from models.prediction.posterior import CompactPosterior
from models.ratemodel.binning import BinnedSeries, bin_grid, local_features
from models.ratemodel.design import Calendar
from service.cli import main

TZ = "Europe/Dublin"
FIRST = dt.date(2026, 1, 5)


def rates() -> np.ndarray:
    hours = np.arange(24)
    return np.ones((7, 1)) * (2.0 + 10.0 * np.exp(-0.5 * ((hours - 12) / 3.0) ** 2))


@pytest.fixture
def counts_file(tmp_path: Path) -> Path:
    grid = bin_grid(FIRST, FIRST + dt.timedelta(days=35), tz=TZ, bin_minutes=60)
    dow, slot, _, _ = local_features(grid, tz=TZ, bin_minutes=60)
    counts = np.random.default_rng(2).poisson(rates()[dow, slot])
    path = tmp_path / "counts.csv"
    pd.DataFrame({"start": [t.isoformat() for t in grid], "count": counts}).to_csv(
        path, index=False
    )
    return path


class KnownRates:
    """Stands in for NutsFitter: the true rates as a one-draw posterior."""

    def __init__(self, spec: Any, **_: Any) -> None:
        self.spec = spec

    def __call__(self, history: BinnedSeries, *, seed: int) -> FittedModel:
        days = (history.end_day - history.first_day).days
        posterior = CompactPosterior(
            week_log_rate=np.log(rates())[None],
            trend=np.zeros(1),
            holiday_effect=np.zeros(1),
            latent=np.zeros((1, days)),
            latent_rho=np.zeros(1),
            latent_sd=np.zeros(1),
            calendar=Calendar(TZ, 60, history.first_day, history.first_day),
            spec=self.spec.with_(trend=False, latent_daily=False, observation="poisson"),
            opening=None,
            seed=seed,
        )
        return FittedModel(posterior, {"ok": True})

    def describe(self) -> dict[str, Any]:
        return {"kind": "known-rates"}


def args(counts: Path, results: Path, *extra: str) -> list[str]:
    return [
        "backtest", "--counts", str(counts), "--tz", TZ, "--first-origin", "2026-01-26",
        "--last-origin", "2026-02-02", "--results", str(results), "--no-progress", *extra,
    ]  # fmt: skip


class TestBacktestCommand:
    def test_runs_and_writes_the_report(self, counts_file, tmp_path, monkeypatch, capsys) -> None:
        monkeypatch.setattr(models.evaluation.backtest, "NutsFitter", KnownRates)
        assert main(args(counts_file, tmp_path / "out", "--horizon", "2")) == 0
        out = capsys.readouterr().out
        assert "weekday_mean_negbin" in out and "report:" in out
        assert "Forecasts are probabilistic" in out
        metrics = json.loads((tmp_path / "out" / "report" / "metrics.json").read_text())
        assert metrics["origins"] == 2
        assert set(metrics["bands"]) == {"day 1", "day 2"}

    def test_a_bad_date_exits_2_naming_it(self, counts_file, tmp_path, capsys) -> None:
        bad = args(counts_file, tmp_path / "out")
        bad[bad.index("--first-origin") + 1] = "26/01/2026"
        assert main(bad) == 2
        assert "--first-origin '26/01/2026' is not a date" in capsys.readouterr().err

    def test_origins_outside_the_data_exit_2(self, counts_file, tmp_path, capsys) -> None:
        late = args(counts_file, tmp_path / "out")
        late[late.index("--last-origin") + 1] = "2026-06-01"
        assert main(late) == 2
        assert "before its end (2026-02-09)" in capsys.readouterr().err

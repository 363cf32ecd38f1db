"""How good are the forecasts: scoring rules, baselines, rolling-origin backtests, reports.

:func:`run_backtest` refits at rolling origins (:class:`NutsFitter`) and scores the model and the
baselines (:mod:`.baselines`) with exact CRPS, interval scores, coverage and PIT
(:mod:`.scoring`); :func:`write_report` turns the records into Markdown, JSON and plots.
"""

from __future__ import annotations

from models.evaluation.backtest import (
    BacktestConfig,
    NutsFitter,
    make_origins,
    run_backtest,
    summarise_records,
)
from models.evaluation.report import write_report

__all__ = [
    "BacktestConfig",
    "NutsFitter",
    "make_origins",
    "run_backtest",
    "summarise_records",
    "write_report",
]

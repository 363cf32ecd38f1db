"""``ratecast backtest``: rolling-origin evaluation of the model against planners' baselines.

Reads a history file as ``ratecast fit`` does, fits the model at each origin, scores it and the
baselines on the same windows, and writes per-origin results (resumable), ``metrics.json``,
``report.md`` and PNG plots.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path
from typing import Any

from models.exceptions import InputError
from service.cli.common import (
    OPEN_HELP,
    add_model_options,
    add_sampling_options,
    fit_progress,
    holiday_calendar,
    model_spec,
    number_list,
    parse_date,
    progress_bar_wanted,
    quiet_arviz_nan_note,
    read_history,
    sampling_options,
)

__all__ = ["register"]


def register(sub: Any) -> None:
    """Add the ``backtest`` subcommand to the ``ratecast`` parser's subparsers."""
    p = sub.add_parser(
        "backtest",
        help="rolling-origin backtest of the model against baselines (resumable)",
        description=(
            "Fit on the history before each origin, forecast the next days bin by bin, and score "
            "the model and four baselines (same slot last week; weekday mean with Poisson and "
            "with negative binomial intervals; a Poisson GLM plug-in) on the same windows."
        ),
    )
    src = p.add_mutually_exclusive_group(required=True)
    src.add_argument("--events", help="CSV/Parquet file, one row per arrival")
    src.add_argument("--counts", help="CSV/Parquet file with columns start,count")
    p.add_argument("--tz", required=True, help="IANA time zone of the series, e.g. America/Chicago")
    p.add_argument("--time-column", default="timestamp", help="arrival time column (events)")
    p.add_argument(
        "--bin",
        default=None,
        help="bin width: 15min, 30min, 1h or 1d (default: 1h for events, inferred for counts)",
    )
    p.add_argument("--open", dest="opening", default=None, help=OPEN_HELP)
    p.add_argument("--holidays", default=None, help="COUNTRY or COUNTRY:SUBDIVISION, e.g. NZ:AUK")
    p.add_argument("--first-origin", required=True, help="first origin date, YYYY-MM-DD (local)")
    p.add_argument("--last-origin", required=True, help="last origin date, YYYY-MM-DD (local)")
    p.add_argument("--every", type=int, default=7, help="days between origins (default 7)")
    p.add_argument("--horizon", type=int, default=7, help="days forecast after each origin")
    p.add_argument("--lead-bands", default=None, help="report bands, e.g. 1,7 (default: 1,HORIZON)")
    p.add_argument("--refit-every", type=int, default=1, help="refit at every n-th origin")
    p.add_argument(
        "--history-days",
        type=int,
        default=None,
        help="fit on the last N days only (default: all the history before the origin)",
    )
    p.add_argument("--levels", default="0.5,0.8,0.95", help="interval levels to score")
    p.add_argument("--baseline-weeks", type=int, default=4, help="weeks in the weekday mean")
    add_model_options(p)
    add_sampling_options(p)
    p.add_argument("--results", required=True, help="folder for per-origin results (resumable)")
    p.add_argument("--report", default=None, help="folder for the report (default RESULTS/report)")
    p.add_argument("--title", default=None, help="report title (default: Backtest of FILE)")
    p.set_defaults(run=_run)


def _run(args: argparse.Namespace) -> int:
    from models.evaluation.backtest import BacktestConfig, NutsFitter, make_origins, run_backtest
    from models.evaluation.report import CAUTION, skill, write_report
    from models.ratemodel.binning import OpeningHours

    opening = OpeningHours.parse(args.opening) if args.opening else None
    binned = read_history(args, opening=opening)
    holidays = holiday_calendar(args.holidays)
    origins = make_origins(
        binned,
        first=parse_date(args.first_origin, option="--first-origin"),
        last=parse_date(args.last_origin, option="--last-origin"),
        every_days=args.every,
    )
    levels = _numbers(args.levels, "--levels", float)
    bands = _numbers(args.lead_bands, "--lead-bands", int) if args.lead_bands else None
    config = BacktestConfig(
        origins=origins,
        horizon_days=args.horizon,
        lead_bands=bands or tuple(sorted({1, args.horizon})),
        refit_every=args.refit_every,
        history_days=args.history_days,
        levels=levels,
        baseline_weeks=args.baseline_weeks,
        seed=args.seed,
    )
    spec = model_spec(args, bin_minutes=binned.bin_minutes, holidays=holidays)
    fitter = NutsFitter(spec, options=sampling_options(args), opening=opening)
    print(
        f"backtest: {len(origins)} origins {origins[0]}..{origins[-1]}, {args.horizon}-day "
        f"horizon, {len(range(0, len(origins), args.refit_every))} fits "
        "(about a minute each; finished origins in --results are not redone)",
        file=sys.stderr,
    )
    import models.fitting.sampling  # noqa: F401  (the sampler loads anyway; quiet its notes now)

    quiet_arviz_nan_note()
    with fit_progress(args, "backtest"):
        records = run_backtest(
            binned,
            fitter,
            config,
            results_dir=args.results,
            holidays=holidays,
            progress=progress_bar_wanted(args),
        )
    report = Path(args.report) if args.report else Path(args.results) / "report"
    metrics = write_report(
        records,
        report,
        lead_bands=config.lead_bands,
        levels=config.levels,
        title=args.title or f"Backtest of {Path(args.counts or args.events).name}",
        tz=binned.tz,
        bin_minutes=binned.bin_minutes,
    )
    overall = metrics["overall"]
    print(f"{'forecaster':<22}{'windows':>8}{'CRPS':>10}{'RMSE':>10}{'CRPS skill':>12}", end="")
    print("".join(f"{'cover ' + k:>12}" for k in overall["model"]["coverage"]))
    for name, m in overall.items():
        cover = "".join(f"{v:>12.3f}" for v in m["coverage"].values())
        print(
            f"{name:<22}{m['windows']:>8}{m['crps']:>10.3f}{m['rmse']:>10.2f}"
            f"{skill(overall, name, score='crps'):>12.1%}{cover}"
        )
    print(f"report: {report / 'report.md'}")
    print(CAUTION)
    return 0


def _numbers(text: str, option: str, kind: Any) -> tuple[Any, ...]:
    values = number_list(text, option=option, kind=kind)
    if not values:
        raise InputError(f"{option} {text!r} holds no numbers")
    return values

"""The ``ratecast`` command line: thin commands over :mod:`models`.

Every command prints errors as one clear line on stderr and exits with status 2 for bad input,
3 for a missing series, 4 for a rejected fit and 5 for a store problem.
"""

from __future__ import annotations

import argparse
import json
import os
import sys
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Any

from models.exceptions import FitRejected, InputError, RatecastError, SeriesNotFound, StoreError
from service.cli_backtest import register as _add_backtest
from service.cli_capacity import register as _add_capacity
from service.cli_common import (
    add_model_options,
    grid,
    holiday_calendar,
    model_spec,
    number_list,
    read_history,
    store_from_args,
)
from service.cli_serve import register as _add_serve
from service.queries import CAUTION, forecast_csv, forecast_document, range_windows

__all__ = ["CAUTION", "main"]


_EXIT = ((InputError, 2), (SeriesNotFound, 3), (FitRejected, 4), (StoreError, 5))


# ----------------------------------------------------------------------------- fit
def _add_fit(sub: Any) -> None:
    p = sub.add_parser("fit", help="fit a series' history and publish it to the store")
    p.add_argument("--series", required=True, help="series name (lowercase, digits, . _ -)")
    src = p.add_mutually_exclusive_group(required=True)
    src.add_argument("--events", help="CSV/Parquet file, one row per arrival")
    src.add_argument("--counts", help="CSV/Parquet file with columns start,count")
    p.add_argument("--tz", required=True, help="IANA time zone of the series, e.g. America/Chicago")
    p.add_argument("--time-column", default="timestamp", help="arrival time column (events)")
    p.add_argument("--bin", default=None, help="bin width: 15min, 30min, 1h or 1d (events default 1h)")
    p.add_argument(
        "--open",
        dest="opening",
        default=None,
        help="opening hours, e.g. 'Mon-Fri 07:00-21:00; Sat 09:00-13:00'",
    )
    p.add_argument("--until", default=None, help="end of observed history (events), ISO 8601")
    p.add_argument(
        "--holidays",
        default=None,
        help="public holidays as COUNTRY or COUNTRY:SUBDIVISION, e.g. US:DC, NZ:AUK",
    )
    p.add_argument(
        "--special-days", default=None, help="extra special dates, comma-separated YYYY-MM-DD"
    )
    add_model_options(p)
    p.add_argument("--draws", type=int, default=1000, help="posterior draws per chain")
    p.add_argument("--tune", type=int, default=1000, help="warm-up steps per chain")
    p.add_argument("--chains", type=int, default=4)
    p.add_argument("--seed", type=int, default=20261202)
    p.add_argument("--sampler", choices=("pymc", "nutpie"), default="pymc")
    p.add_argument(
        "--force", action="store_true", help="publish even if the diagnostics gate fails"
    )
    p.add_argument("--no-progress", action="store_true", help="hide the progress bar")
    p.add_argument(
        "--store", default=None, help="store folder (default $RATECAST_STORE or ./store)"
    )
    p.set_defaults(run=_run_fit)


def _run_fit(args: argparse.Namespace) -> int:

    from models.binning import OpeningHours
    from models.pipeline import FitOptions, fit_and_publish
    from models.predict import parse_instant
    from models.store import check_series_name

    check_series_name(args.series)
    opening = OpeningHours.parse(args.opening) if args.opening else None
    path = args.events or args.counts
    until = parse_instant(args.until, tz=args.tz).to_pydatetime() if args.until else None
    binned = read_history(args, opening=opening, until=until)
    calendar = holiday_calendar(args.holidays, args.special_days)
    spec = model_spec(args, bin_minutes=binned.bin_minutes, holidays=calendar)
    print(
        f"{args.series}: {binned.total} arrivals in {len(binned.count)} observed "
        f"{binned.bin_minutes}-minute bins, {binned.first_day} to {binned.end_day} ({args.tz}). "
        "Fitting (the first fit on a machine compiles the model and takes about a minute more)...",
        file=sys.stderr,
    )
    options = FitOptions(
        draws=args.draws,
        tune=args.tune,
        chains=args.chains,
        seed=args.seed,
        sampler=args.sampler,
        progressbar=not args.no_progress,
    )
    outcome = fit_and_publish(
        binned,
        spec,
        store=store_from_args(args),
        series=args.series,
        opening=opening,
        options=options,
        force=args.force,
        source={"file": Path(path).name},
    )
    diag = outcome.fit.diagnostics
    assert outcome.version is not None
    status = "passed" if diag.ok else "FAILED (published because of --force)"
    print(
        f"published {args.series} {outcome.version.version}: diagnostics {status}; "
        f"max r_hat {diag.max_r_hat:.3f}, min bulk ESS {diag.min_ess_bulk:.0f}, "
        f"{diag.divergences} divergences, sampling {diag.sampling_seconds:.0f} s"
    )
    for problem in diag.problems:
        print(f"  - {problem}")
    return 0


# ----------------------------------------------------------------------------- fit-group
def _add_fit_group(sub: Any) -> None:
    p = sub.add_parser(
        "fit-group",
        help="fit related series jointly (shared weekly shape, per-series deviations) and "
        "publish each as its own series",
    )
    p.add_argument(
        "--member",
        action="append",
        required=True,
        metavar="NAME=FILE",
        help="a series name and its counts file (CSV/Parquet, columns start,count); repeat",
    )
    p.add_argument("--tz", required=True, help="IANA time zone shared by the series")
    p.add_argument("--bin", default=None, help="bin width: 15min, 30min, 1h or 1d (default: inferred)")
    p.add_argument("--open", dest="opening", default=None, help="opening hours shared by all")
    p.add_argument("--holidays", default=None, help="COUNTRY or COUNTRY:SUBDIVISION")
    p.add_argument("--special-days", default=None, help="extra dates, YYYY-MM-DD,...")
    add_model_options(p)
    p.add_argument("--draws", type=int, default=1000)
    p.add_argument("--tune", type=int, default=1000)
    p.add_argument("--chains", type=int, default=4)
    p.add_argument("--seed", type=int, default=20261202)
    p.add_argument("--force", action="store_true", help="publish even if the gate fails")
    p.add_argument("--no-progress", action="store_true")
    p.add_argument("--store", default=None)
    p.set_defaults(run=_run_fit_group)


def _run_fit_group(args: argparse.Namespace) -> int:
    from models.binning import OpeningHours, bin_counts, parse_bin_width, read_table
    from models.joint import fit_joint, make_joint_data, publish_joint
    from models.pipeline import FitOptions

    opening = OpeningHours.parse(args.opening) if args.opening else None
    bin_minutes = parse_bin_width(args.bin) if args.bin else None
    histories = {}
    for member in args.member:
        name, sep, path = member.partition("=")
        if not sep or not name or not path:
            raise InputError(f"--member {member!r} must be NAME=FILE, e.g. queue-a=queue_a.csv")
        if name in histories:
            raise InputError(f"--member names series {name!r} twice")
        histories[name] = bin_counts(
            read_table(path), tz=args.tz, bin_minutes=bin_minutes, opening=opening
        )
    widths = {h.bin_minutes for h in histories.values()}
    calendar = holiday_calendar(args.holidays, args.special_days)
    spec = model_spec(args, bin_minutes=min(widths), holidays=calendar)
    data = make_joint_data(histories, spec)
    print(
        f"fitting {', '.join(histories)} jointly ({sum(h.total for h in histories.values())} "
        f"arrivals, {data.n_days} days, {args.tz})...",
        file=sys.stderr,
    )
    options = FitOptions(
        draws=args.draws,
        tune=args.tune,
        chains=args.chains,
        seed=args.seed,
        progressbar=not args.no_progress,
    )
    fit = fit_joint(data, spec, options=options)
    published = publish_joint(
        fit,
        store_from_args(args),
        openings=dict.fromkeys(histories, opening),
        force=args.force,
    )
    diag = fit.diagnostics
    status = "passed" if diag.ok else "FAILED (published because of --force)"
    print(
        f"published {', '.join(f'{n} {v.version}' for n, v in published.items())}: diagnostics "
        f"{status}; max r_hat {diag.max_r_hat:.3f}, min bulk ESS {diag.min_ess_bulk:.0f}, "
        f"{diag.divergences} divergences"
    )
    for problem in diag.problems:
        print(f"  - {problem}")
    return 0


# ----------------------------------------------------------------------------- forecast
def _add_forecast(sub: Any) -> None:
    p = sub.add_parser("forecast", help="predictive counts for windows of a published series")
    p.add_argument("--series", required=True)
    p.add_argument("--start", required=True, help="ISO 8601; local time of the series if no offset")
    p.add_argument("--end", required=True, help="ISO 8601 (exclusive)")
    p.add_argument(
        "--step", default=None, help="cut the range into windows: 15min, 30min, 1h, 1d..."
    )
    p.add_argument("--levels", default="0.8,0.95", help="central interval levels")
    p.add_argument("--quantiles", default="", help="quantile levels, e.g. 0.05,0.5,0.95")
    p.add_argument("--at-least", default="", help="thresholds k for P(N >= k), e.g. 10,20")
    p.add_argument("--total", action="store_true", help="also give the total over all windows")
    p.add_argument("--version", default=None, help="a stored version (default: current)")
    p.add_argument("--format", choices=("table", "json", "csv"), default="table")
    p.add_argument("--store", default=None)
    p.set_defaults(run=_run_forecast)


def _run_forecast(args: argparse.Namespace) -> int:

    stored = store_from_args(args).load(args.series, args.version)
    starts, ends = range_windows(
        args.start, args.end, step=args.step, tz=stored.posterior.calendar.tz
    )
    doc = forecast_document(
        stored,
        starts,
        ends,
        levels=number_list(args.levels, option="--levels"),
        quantiles=number_list(args.quantiles, option="--quantiles"),
        at_least=number_list(args.at_least, option="--at-least", kind=int),
        total=args.total,
    )
    if args.format == "json":
        print(json.dumps(doc, indent=2))
    elif args.format == "csv":
        sys.stdout.write(forecast_csv(doc))
    else:
        sys.stdout.write(forecast_table(doc))
    return 0


def forecast_table(doc: dict[str, Any]) -> str:
    """A fixed-width table for people, with the caution underneath."""
    rows = list(doc["windows"])
    if doc.get("total"):
        rows.append({**doc["total"], "start": "total", "end": ""})
    headers = ["window", "mean", "sd"]
    first = rows[0]
    headers += [f"{float(k) * 100:g}% interval" for k in first["intervals"]]
    headers += [f"q{float(k) * 100:g}" for k in first["quantiles"]]
    headers += ["P(0)"] + [f"P(>={k})" for k in first.get("at_least", {})]
    body = []
    for row in rows:
        label = row["start"] if row["start"] == "total" else _window_label(row["start"], row["end"])
        cells = [label, f"{row['mean']:.1f}", f"{row['sd']:.1f}"]
        cells += [f"{lo}-{hi}" for lo, hi in row["intervals"].values()]
        cells += [str(v) for v in row["quantiles"].values()]
        cells += [f"{row['p_zero']:.3f}"] + [f"{p:.3f}" for p in row.get("at_least", {}).values()]
        body.append(cells)
    lines = [
        f"{doc['series']} {doc['model_version']} ({doc['tz']}): predicted arrivals per window",
        *grid(headers, body),
    ]
    lines.append("")
    lines.append(CAUTION)
    return "\n".join(lines) + "\n"


def _window_label(start: str, end: str) -> str:
    import pandas as pd

    a, b = pd.Timestamp(start), pd.Timestamp(end)
    same_day = a.date() == b.date() or (
        b - a <= pd.Timedelta(days=1) and b.hour == 0 and b.minute == 0
    )
    tail = b.strftime("%H:%M") if same_day else b.strftime("%Y-%m-%d %H:%M")
    return f"{a.strftime('%a %Y-%m-%d %H:%M')}-{tail}"


# ----------------------------------------------------------------------------- series
def _add_series(sub: Any) -> None:
    p = sub.add_parser("series", help="list published series, or show one")
    p.add_argument("name", nargs="?", help="a series to show in detail")
    p.add_argument("--store", default=None)
    p.set_defaults(run=_run_series)


def _run_series(args: argparse.Namespace) -> int:

    store = store_from_args(args)
    if args.name:
        stored = store.load(args.name)
        print(json.dumps({**stored.manifest, "versions": store.versions(args.name)}, indent=2))
        return 0
    names = store.series()
    if not names:
        print(f"no series published in {store.root}")
    for name in names:
        manifest = store.load(name).manifest
        data = manifest["data"]
        print(
            f"{name}  {manifest['version']}  {data['first_day']}..{data['end_day']}  {data['tz']}  "
            f"fitted {manifest['created_at']}  gate {'ok' if manifest['diagnostics']['ok'] else 'FAILED'}"
        )
    return 0


# ----------------------------------------------------------------------------- example data
def _add_example(sub: Any) -> None:
    p = sub.add_parser("example-data", help="write the invented ferry-desk demo history")
    p.add_argument("--out", default="demo", help="folder to write into")
    p.set_defaults(run=_run_example)


def _run_example(args: argparse.Namespace) -> int:
    from service import scenario

    path = scenario.write_events(args.out)
    print(path)
    print(
        f"# fit with: ratecast fit --series ferry-desk --events {path} --tz {scenario.TZ} "
        f"--open '{scenario.OPENING_HOURS}' --holidays CA:NS",
        file=sys.stderr,
    )
    return 0


_COMMANDS: list[Callable[[Any], None]] = [
    _add_fit,
    _add_fit_group,
    _add_forecast,
    _add_series,
    _add_example,
]
_COMMANDS.append(_add_serve)
_COMMANDS.append(_add_capacity)
_COMMANDS.append(_add_backtest)


def build_parser() -> argparse.ArgumentParser:
    """The argument parser with every subcommand."""
    parser = argparse.ArgumentParser(
        prog="ratecast",
        description="Learn arrival rates from history and forecast counts for any window.",
        epilog=CAUTION,
    )
    sub = parser.add_subparsers(dest="command", required=True)
    for add in _COMMANDS:
        add(sub)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``ratecast`` console script."""
    os.environ.setdefault(
        "PYTENSOR_FLAGS", f"compiledir={Path.home() / '.cache' / 'ratecast-pytensor'}"
    )
    args = build_parser().parse_args(argv)
    try:
        return int(args.run(args))
    except BrokenPipeError:
        # Output piped into `head` and the like: stop quietly, as Unix tools do.
        sys.stderr.close()
        return 0
    except RatecastError as exc:
        print(f"ratecast {args.command}: error: {exc}", file=sys.stderr)
        for kind, code in _EXIT:
            if isinstance(exc, kind):
                return code
        return 1


if __name__ == "__main__":
    raise SystemExit(main())

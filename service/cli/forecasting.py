"""Forecast commands: ``ratecast forecast``, ``ratecast series`` and ``ratecast example-data``.

Forecast documents come from :mod:`service.queries.forecast`, the same code as the HTTP API.
"""

from __future__ import annotations

import argparse
import json
import sys
from typing import Any

from models.exceptions import RatecastError
from service.cli.common import (
    STORE_HELP,
    add_degraded_option,
    check_degraded,
    emit,
    grid,
    number_list,
    store_from_args,
    window_label,
)
from service.queries.forecast import (
    CAUTION,
    forecast_csv,
    forecast_document,
    range_windows,
)

__all__ = ["forecast_table", "register"]


# ----------------------------------------------------------------------------- forecast
def _add_forecast(sub: Any) -> None:
    p = sub.add_parser("forecast", help="predictive counts for windows of a published series")
    p.add_argument("--series", required=True, help="a published series (see ratecast series)")
    p.add_argument(
        "--start",
        required=True,
        help="ISO 8601 date or date-time, e.g. 2026-04-27T09:00; local time of the series "
        "without an offset",
    )
    p.add_argument("--end", required=True, help="ISO 8601, as --start (exclusive)")
    p.add_argument(
        "--step",
        default=None,
        help="cut the range into windows: 15min, 30min, 1h, 1d... (default: one window)",
    )
    p.add_argument("--levels", default="0.8,0.95", help="central interval levels")
    p.add_argument("--quantiles", default="", help="quantile levels, e.g. 0.05,0.5,0.95")
    p.add_argument("--at-least", default="", help="thresholds k for P(N >= k), e.g. 10,20")
    p.add_argument("--total", action="store_true", help="also give the total over all windows")
    p.add_argument("--version", default=None, help="a stored version (default: the current one)")
    p.add_argument("--format", choices=("table", "json", "csv"), default="table", help="output")
    p.add_argument("--store", default=None, help=STORE_HELP)
    add_degraded_option(p)
    p.set_defaults(run=_run_forecast)


def _run_forecast(args: argparse.Namespace) -> int:
    stored = store_from_args(args).load(args.series, args.version)
    check_degraded(args, stored)
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
    return emit(doc, args.format, csv=forecast_csv, table=forecast_table)


def forecast_table(doc: dict[str, Any]) -> str:
    """A fixed-width table for people, with the caution underneath."""
    rows = list(doc["windows"])
    if doc.get("total"):
        rows.append({**doc["total"], "label": "total"})
    headers = ["window", "mean", "sd"]
    first = rows[0]
    headers += [f"{float(k) * 100:g}% interval" for k in first["intervals"]]
    headers += [f"q{float(k) * 100:g}" for k in first["quantiles"]]
    headers += ["P(0)"] + [f"P(>={k})" for k in first.get("at_least", {})]
    body = []
    for row in rows:
        label = row.get("label") or window_label(row["start"], row["end"], doc["tz"])
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


# ----------------------------------------------------------------------------- series
def _add_series(sub: Any) -> None:
    p = sub.add_parser("series", help="list published series, or show one")
    p.add_argument("name", nargs="?", help="a series to show in detail")
    p.add_argument("--store", default=None, help=STORE_HELP)
    p.set_defaults(run=_run_series)


def _run_series(args: argparse.Namespace) -> int:
    store = store_from_args(args)
    if args.name:
        stored = store.load(args.name)
        print(json.dumps({**stored.manifest, "versions": store.versions(args.name)}, indent=2))
        return 0
    names = store.series()
    if not names:
        print(f"no series published in {store.location}")
    damaged = 0
    for name in names:
        try:
            stored = store.load(name)
        except RatecastError as exc:  # one damaged series must not hide the others
            damaged += 1
            print(f"{name}  DAMAGED: {exc}")
            continue
        manifest, calendar = stored.manifest, stored.posterior.calendar
        gate = {True: "ok", False: "FAILED"}.get(manifest.get("diagnostics", {}).get("ok"), "-")
        print(
            f"{name}  {stored.version}  history {calendar.first_day} up to "
            f"{stored.posterior.history_end} (end exclusive)  {calendar.tz}  fitted "
            f"{manifest.get('created_at', '-')}  gate {gate}"
            + ("  DEGRADED (published with --force)" if stored.degraded else "")
        )
    return 5 if damaged else 0


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


def register(subparsers: Any) -> None:
    """Add ``forecast``, ``series`` and ``example-data`` to the ``ratecast`` command line."""
    _add_forecast(subparsers)
    _add_series(subparsers)
    _add_example(subparsers)

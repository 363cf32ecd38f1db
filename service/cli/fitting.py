"""Fitting commands: ``ratecast fit`` (one series) and ``ratecast fit-group`` (related series).

Both read history files, build the model description from the shared model options, sample with
the shared sampling options and publish through the diagnostics gate.
"""

from __future__ import annotations

import argparse
import datetime as dt
import sys
from pathlib import Path
from typing import Any

from models.exceptions import InputError
from service.cli.common import (
    OPEN_HELP,
    STORE_HELP,
    add_model_options,
    add_sampling_options,
    fit_progress,
    holiday_calendar,
    model_spec,
    named_file_errors,
    quiet_arviz_nan_note,
    read_history,
    sampling_options,
    store_from_args,
)

__all__ = ["register"]


# ----------------------------------------------------------------------------- fit
def _add_fit(sub: Any) -> None:
    p = sub.add_parser("fit", help="fit a series' history and publish it to the store")
    p.add_argument("--series", required=True, help="series name (lowercase, digits, . _ -)")
    src = p.add_mutually_exclusive_group(required=True)
    src.add_argument("--events", help="CSV/Parquet file, one row per arrival")
    src.add_argument("--counts", help="CSV/Parquet file with columns start,count")
    p.add_argument("--tz", required=True, help="IANA time zone of the series, e.g. America/Chicago")
    p.add_argument("--time-column", default="timestamp", help="arrival time column (events)")
    p.add_argument(
        "--bin",
        default=None,
        help="bin width: 15min, 30min, 1h or 1d; must match a counts file's rows (default: 1h "
        "for events, inferred from the rows for counts)",
    )
    p.add_argument("--open", dest="opening", default=None, help=OPEN_HELP)
    p.add_argument(
        "--until",
        default=None,
        help="end of the observed history (events only), ISO 8601, to cut the last day short "
        "(a log taken at 14:30): after the last arrival, no later than the end of its day or "
        "now (default: the end of the last arrival's day)",
    )
    p.add_argument(
        "--holidays",
        default=None,
        help="public holidays as COUNTRY or COUNTRY:SUBDIVISION, e.g. US:DC, NZ:AUK",
    )
    p.add_argument(
        "--special-days", default=None, help="extra special dates, comma-separated YYYY-MM-DD"
    )
    add_model_options(p)
    add_sampling_options(p)
    p.add_argument(
        "--force", action="store_true", help="publish even if the diagnostics gate fails"
    )
    p.add_argument("--store", default=None, help=STORE_HELP + "; created if missing")
    p.set_defaults(run=_run_fit)


def _run_fit(args: argparse.Namespace) -> int:
    from models.fitting.publish import fit_and_publish
    from models.prediction.windows import parse_instant
    from models.ratemodel.binning import OpeningHours
    from models.store import check_series_name

    check_series_name(args.series)
    opening = OpeningHours.parse(args.opening) if args.opening else None
    path = args.events or args.counts
    until = parse_instant(args.until, tz=args.tz).to_pydatetime() if args.until else None
    now = dt.datetime.now(dt.UTC)
    binned = read_history(args, opening=opening, until=until, now=now)
    calendar = holiday_calendar(args.holidays, args.special_days)
    spec = model_spec(args, bin_minutes=binned.bin_minutes, holidays=calendar)
    end = f"{until.isoformat()}" if until else f"{binned.end_day} 00:00"
    print(
        f"{args.series}: {binned.total} arrivals in {len(binned.count)} observed "
        f"{binned.bin_minutes}-minute bins, history {binned.first_day} 00:00 up to {end} (end "
        f"exclusive, {args.tz}). Fitting (the first fit on a machine compiles the model and "
        "takes about a minute more)...",
        file=sys.stderr,
        flush=True,
    )
    options = sampling_options(args)
    store = store_from_args(args, create=True)
    with fit_progress(args, f"fitting {args.series}"):
        quiet_arviz_nan_note()
        outcome = fit_and_publish(
            binned,
            spec,
            store=store,
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
    print_left_out(outcome.fit.data.left_out_days)
    return 0


def print_left_out(days: tuple[Any, ...]) -> None:
    """Say which unusual days of history the fit left out (``--unusual-days keep`` keeps them)."""
    if not days:
        return
    shown = ", ".join(d.isoformat() for d in days[:12])
    more = f" and {len(days) - 12} more" if len(days) > 12 else ""
    print(
        f"left out {len(days)} unusual day(s) of history (their level stands far out from the "
        f"same weekdays around them; listed in the version's manifest): {shown}{more}. "
        "--unusual-days keep fits them"
    )


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
    p.add_argument(
        "--bin",
        default=None,
        help="bin width: 15min, 30min, 1h or 1d; must match the rows (default: inferred)",
    )
    p.add_argument("--open", dest="opening", default=None, help=OPEN_HELP + "; shared by all")
    p.add_argument(
        "--holidays", default=None, help="public holidays as COUNTRY or COUNTRY:SUBDIVISION"
    )
    p.add_argument("--special-days", default=None, help="extra dates, YYYY-MM-DD,...")
    add_model_options(p)
    add_sampling_options(p)
    p.add_argument("--force", action="store_true", help="publish even if the gate fails")
    p.add_argument("--store", default=None, help=STORE_HELP + "; created if missing")
    p.set_defaults(run=_run_fit_group)


def _run_fit_group(args: argparse.Namespace) -> int:
    from models.fitting.joint import fit_joint, make_joint_data, publish_joint
    from models.ratemodel.binning import (
        OpeningHours,
        bin_counts,
        check_zone,
        parse_bin_width,
        read_table,
    )

    check_zone(args.tz)
    opening = OpeningHours.parse(args.opening) if args.opening else None
    bin_minutes = parse_bin_width(args.bin) if args.bin else None
    histories = {}
    for member in args.member:
        name, sep, path = member.partition("=")
        if not sep or not name or not path:
            raise InputError(f"--member {member!r} must be NAME=FILE, e.g. queue-a=queue_a.csv")
        if name in histories:
            raise InputError(f"--member names series {name!r} twice")
        table = read_table(path)
        with named_file_errors(path):
            histories[name] = bin_counts(
                table, tz=args.tz, bin_minutes=bin_minutes, opening=opening
            )
    widths = {h.bin_minutes for h in histories.values()}
    calendar = holiday_calendar(args.holidays, args.special_days)
    spec = model_spec(args, bin_minutes=min(widths), holidays=calendar, joint=True)
    data = make_joint_data(histories, spec)
    print(
        f"fitting {', '.join(histories)} jointly ({sum(h.total for h in histories.values())} "
        f"arrivals, {data.n_days} days, {args.tz})...",
        file=sys.stderr,
        flush=True,
    )
    options = sampling_options(args)
    store = store_from_args(args, create=True)
    with fit_progress(args, f"fitting {', '.join(histories)}"):
        quiet_arviz_nan_note()
        fit = fit_joint(data, spec, options=options)
    published = publish_joint(
        fit,
        store,
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


def register(subparsers: Any) -> None:
    """Add ``fit`` and ``fit-group`` to the ``ratecast`` command line."""
    _add_fit(subparsers)
    _add_fit_group(subparsers)

"""Capacity commands: ``ratecast staff``, ``ratecast update`` and ``ratecast simulate``.

The documents come from :mod:`service.queries.capacity`, shared with the capacity routes of the
HTTP API. Every staffing output carries :data:`models.capacity.staffing.STAFFING_CAUTION`.
"""

from __future__ import annotations

import argparse
from functools import partial
from typing import Any

import numpy as np

from models.capacity.staffing import (
    STAFFING_CAUTION,
    ServiceTarget,
)
from models.exceptions import InputError
from models.prediction.windows import (
    parse_instant,
)
from service.cli.common import (
    STORE_HELP,
    add_degraded_option,
    check_degraded,
    emit,
    grid,
    named_file_errors,
    number_list,
    store_from_args,
    window_label,
)
from service.queries.capacity import (
    plan_windows,
    read_observed,
    staffing_csv,
    staffing_document,
    update_csv,
    update_document,
    update_range,
)

__all__ = ["register", "staffing_table", "update_table"]

# ----------------------------------------------------------------------------- rendering


def _pct(value: float) -> str:
    return f"{100.0 * value:.1f}%"


def staffing_table(doc: dict[str, Any]) -> str:
    """Fixed-width tables (intervals, then days) with the caution underneath."""
    p = doc["meet_probability"]
    given = "given" in doc["intervals"][0]
    headers = ["interval", "mean", f"q{p:g}", "erlangs", "N mean", "E[SL]", "P(miss)"]
    headers += [f"N p{p:g}", "E[SL]", "P(miss)", "scheduled mean", f"scheduled p{p:g}"]
    if given:
        headers += ["N given", "E[SL]", "P(miss)"]
    body = []
    for row in doc["intervals"]:
        plug, sure = row["plug_in"], row["assured"]
        cells = [
            window_label(row["start"], row["end"], doc["tz"]),
            f"{row['mean_arrivals']:.1f}",
            str(row["quantile_arrivals"]),
            f"{row['mean_load_erlangs']:.2f}",
            str(plug["agents"]),
            _pct(plug["expected_service_level"]),
            f"{plug['miss_probability']:.3f}",
            str(sure["agents"]),
            _pct(sure["expected_service_level"]),
            f"{sure['miss_probability']:.3f}",
            str(plug["scheduled"]),
            str(sure["scheduled"]),
        ]
        if given:
            g = row["given"]
            cells += [
                str(g["agents"]),
                _pct(g["expected_service_level"]),
                f"{g['miss_probability']:.3f}",
            ]
        body.append(cells)
    target = doc["target"]
    patience = (
        f", mean patience {target['patience_seconds']:g} s"
        if target["patience_seconds"] is not None
        else ""
    )
    lines = [
        f"{doc['series']} {doc['model_version']} ({doc['tz']}): staffing for "
        f"{_pct(target['share'])} answered within {target['answer_within_seconds']:g} s, "
        f"handle time {target['handle_time_seconds']:g} s{patience} ({target['queue']}), "
        f"shrinkage {_pct(doc['shrinkage'])}",
        *grid(headers, body),
        "",
        *grid(
            [
                "day",
                "mean arrivals",
                "agent-h mean",
                f"agent-h p{p:g}",
                "scheduled-h mean",
                f"scheduled-h p{p:g}",
            ],
            [
                [
                    d["day"],
                    f"{d['mean_arrivals']:.0f}",
                    f"{d['plug_in_hours']:.2f}",
                    f"{d['assured_hours']:.2f}",
                    f"{d['plug_in_paid_hours']:.2f}",
                    f"{d['assured_paid_hours']:.2f}",
                ]
                for d in doc["days"]
            ],
        ),
        "",
        f"N mean: {doc['definitions']['plug_in']}. N p{p:g}: {doc['definitions']['assured']}.",
        f"P(miss): {doc['definitions']['miss_probability']}. Scheduled: "
        f"{doc['definitions']['scheduled']}.",
        "",
        f"CAUTION: {doc['caution']}",
    ]
    return "\n".join(lines) + "\n"


def update_table(doc: dict[str, Any]) -> str:
    """Before and after per window, with the update's facts and the caution."""
    first = doc["windows"][0]
    headers = ["window", "before", "updated", "sd"]
    headers += [f"{float(k) * 100:g}% interval" for k in first["intervals"]]
    headers += [f"q{float(k) * 100:g}" for k in first["quantiles"]]
    body = []
    for row in doc["windows"]:
        cells = [
            window_label(row["start"], row["end"], doc["tz"]),
            f"{row['before']['mean']:.1f}",
            f"{row['mean']:.1f}",
            f"{row['sd']:.1f}",
        ]
        cells += [f"{lo}-{hi}" for lo, hi in row["intervals"].values()]
        cells += [str(v) for v in row["quantiles"].values()]
        body.append(cells)
    latent = doc["latent_today"]
    level = (
        ""
        if latent is None
        else f"; today's level x{np.exp(latent['mean']):.3f} (log sd {latent['sd']:.3f})"
    )
    lines = [
        f"{doc['series']} {doc['model_version']} ({doc['tz']}): forecast updated with "
        f"{doc['observed_total']} arrivals observed on {doc['day']} (expected "
        f"{doc['expected_before']:.1f} before){level}; effective draws "
        f"{doc['effective_sample_size']:.0f} of {doc['draws']}",
        *grid(headers, body),
        "",
        doc["caution"],
    ]
    return "\n".join(lines) + "\n"


# ----------------------------------------------------------------------------- commands

_START_HELP = (
    "ISO 8601 date or date-time, e.g. 2026-04-27T08:00; local time of the series without an offset"
)


def _common(p: argparse.ArgumentParser) -> None:
    p.add_argument("--series", required=True, help="a published series (see ratecast series)")
    p.add_argument("--version", default=None, help="a stored version (default: the current one)")
    p.add_argument("--store", default=None, help=STORE_HELP)


def _add_staff(sub: Any) -> None:
    p = sub.add_parser(
        "staff",
        help="agents per interval for a service-level target, under forecast uncertainty",
        epilog=STAFFING_CAUTION,
    )
    _common(p)
    p.add_argument("--start", required=True, help=_START_HELP)
    p.add_argument("--end", required=True, help="ISO 8601, as --start (exclusive)")
    p.add_argument("--step", default="30min", help="plan interval: 15min, 30min or 1h")
    p.add_argument("--handle-time", type=float, required=True, help="mean handle time, seconds")
    p.add_argument("--answer-within", type=float, required=True, help="target answer time, seconds")
    p.add_argument("--target", type=float, required=True, help="share answered in time, e.g. 0.8")
    p.add_argument(
        "--patience",
        type=float,
        default=None,
        help="mean patience, seconds, for Erlang A (default: none, Erlang C: nobody hangs up)",
    )
    p.add_argument(
        "--shrinkage", type=float, default=0.0, help="share of scheduled time off the queue"
    )
    p.add_argument(
        "--meet-probability",
        type=float,
        default=0.9,
        help="probability of meeting the target over the forecast's arrival counts",
    )
    p.add_argument(
        "--min-agents", type=int, default=1, help="floor for intervals that can get calls"
    )
    p.add_argument(
        "--agents",
        default=None,
        help="a staffing to evaluate: one number, or one per interval (default: none)",
    )
    p.add_argument("--format", choices=("table", "json", "csv"), default="table", help="output")
    add_degraded_option(p)
    p.set_defaults(run=_run_staff)


def _run_staff(args: argparse.Namespace) -> int:
    stored = store_from_args(args).load(args.series, args.version)
    check_degraded(args, stored)
    tz = stored.posterior.calendar.tz
    starts, ends = plan_windows(args.start, args.end, step=args.step, tz=tz)
    target = ServiceTarget(
        handle_time=args.handle_time,
        answer_within=args.answer_within,
        share=args.target,
        patience=args.patience,
    )
    agents = number_list(args.agents, option="--agents", kind=int) if args.agents else None
    doc = staffing_document(
        stored,
        starts,
        ends,
        target=target,
        meet_probability=args.meet_probability,
        shrinkage=args.shrinkage,
        min_agents=args.min_agents,
        agents=agents,
    )
    return emit(
        doc, args.format, csv=partial(staffing_csv, caution_column=True), table=staffing_table
    )


def _observed(path: str, *, tz: str, bin_minutes: int) -> tuple[Any, Any, Any]:
    """Today's observed counts: the file is checked first so that every problem names it and
    its line (the shared reader then takes the checked rows)."""
    from models.ratemodel.binning import check_counts, read_table

    table = read_table(path)
    with named_file_errors(path):
        if "count" in table.columns:
            check_counts(table["count"], column="count")
        return read_observed(path, tz=tz, bin_minutes=bin_minutes)


def _add_update(sub: Any) -> None:
    p = sub.add_parser(
        "update", help="revise today's forecast from the counts observed so far today"
    )
    _common(p)
    p.add_argument(
        "--observed",
        required=True,
        help="CSV/Parquet of today's counts: columns start,count (and end; default one bin)",
    )
    p.add_argument("--start", default=None, help="forecast from (default: end of the observations)")
    p.add_argument("--end", default=None, help="forecast until (default: end of today)")
    p.add_argument("--step", default=None, help="window length (default: the model's bin)")
    p.add_argument("--levels", default="0.8,0.95", help="central interval levels")
    p.add_argument("--quantiles", default="", help="quantile levels, e.g. 0.5,0.9")
    p.add_argument("--seed", type=int, default=None, help="seed (default: the version's own)")
    p.add_argument("--format", choices=("table", "json", "csv"), default="table", help="output")
    add_degraded_option(p)
    p.set_defaults(run=_run_update)


def _run_update(args: argparse.Namespace) -> int:
    stored = store_from_args(args).load(args.series, args.version)
    check_degraded(args, stored)
    calendar = stored.posterior.calendar
    tz = calendar.tz
    o_starts, o_ends, counts = _observed(args.observed, tz=tz, bin_minutes=calendar.bin_minutes)
    if len(o_ends) == 0:
        raise InputError(f"observed-counts file {args.observed} has no rows")
    starts, ends = update_range(
        args.start,
        args.end,
        args.step,
        observed_ends=o_ends,
        tz=tz,
        zone=tz,
        bin_minutes=calendar.bin_minutes,
    ).windows()
    doc = update_document(
        stored,
        o_starts,
        o_ends,
        counts,
        starts,
        ends,
        levels=number_list(args.levels, option="--levels"),
        quantiles=number_list(args.quantiles, option="--quantiles"),
        seed=args.seed,
    )
    return emit(doc, args.format, csv=update_csv, table=update_table)


def _add_simulate(sub: Any) -> None:
    p = sub.add_parser(
        "simulate", help="sample arrival times from the posterior process (CSV or Parquet)"
    )
    _common(p)
    p.add_argument("--start", required=True, help=_START_HELP)
    p.add_argument("--end", required=True, help="ISO 8601, as --start (exclusive)")
    p.add_argument("--replicates", type=int, default=1, help="independent streams to sample")
    p.add_argument("--seed", type=int, default=None, help="seed (default: the version's own)")
    p.add_argument("--out", required=True, help="output file ending in .csv or .parquet")
    add_degraded_option(p)
    p.set_defaults(run=_run_simulate)


def _run_simulate(args: argparse.Namespace) -> int:
    from models.prediction.simulate import simulate_arrivals, write_arrivals

    stored = store_from_args(args).load(args.series, args.version)
    check_degraded(args, stored)
    tz = stored.posterior.calendar.tz
    start, end = parse_instant(args.start, tz=tz), parse_instant(args.end, tz=tz)
    arrivals = simulate_arrivals(
        stored.posterior, start, end, replicates=args.replicates, seed=args.seed
    )
    path = write_arrivals(arrivals, args.out)
    counts = arrivals.counts()
    print(
        f"wrote {counts.sum()} arrivals in {counts.size} replicate(s) of "
        f"{start.isoformat()}..{end.isoformat()} to {path} "
        f"(per replicate: mean {counts.mean():.1f}, min {counts.min()}, max {counts.max()})"
    )
    return 0


def register(subparsers: Any) -> None:
    """Add ``staff``, ``update`` and ``simulate`` to the ``ratecast`` command line."""
    _add_staff(subparsers)
    _add_update(subparsers)
    _add_simulate(subparsers)

"""Pieces every CLI command module shares: the store, number lists, history files, tables."""

from __future__ import annotations

import argparse
import datetime as dt
from pathlib import Path
from typing import Any

from models.exceptions import InputError
from models.fitting.options import FitOptions

__all__ = [
    "add_model_options",
    "grid",
    "holiday_calendar",
    "model_spec",
    "number_list",
    "read_history",
    "store_from_args",
]

#: Count law of ``ratecast fit`` and ``ratecast backtest`` unless told otherwise: measured on real
#: hourly series, Poisson intervals covered 0.28-0.48 at the 80% level and negative binomial ones
#: 0.81 (docs/evidence.md, docs/calibration.md). (The library's ModelSpec stays Poisson.)
DEFAULT_OBSERVATION = "negbin"


def add_model_options(p: argparse.ArgumentParser) -> None:
    """The model-term options shared by ``fit`` and ``backtest``."""
    p.add_argument("--no-trend", action="store_true", help="leave out the linear trend")
    p.add_argument("--no-latent", action="store_true", help="leave out the daily latent deviation")
    p.add_argument(
        "--observation",
        choices=("poisson", "negbin"),
        default=DEFAULT_OBSERVATION,
        help="count law per bin: negbin (default: extra bin-level scatter, one dispersion per slot "
        "of the day; measured calibrated on real hourly data, docs/calibration.md) or poisson",
    )
    p.add_argument(
        "--annual",
        type=int,
        default=0,
        metavar="PAIRS",
        help="annual season with this many Fourier pairs (0 = off, up to 12; needs about two "
        "years of history; 4 suits daily data)",
    )
    p.add_argument(
        "--within-day",
        type=int,
        default=0,
        metavar="TERMS",
        help="let each day's shape vary: this many smooth within-day terms (0 = off; 3 is a good "
        "start for hourly data); intraday updates then learn today's shape from the morning",
    )


def model_spec(args: argparse.Namespace, *, bin_minutes: int, holidays: Any) -> Any:
    """The :class:`~models.ratemodel.spec.ModelSpec` the options of :func:`add_model_options` describe."""
    from models.ratemodel.spec import ModelSpec

    return ModelSpec(
        bin_minutes=bin_minutes,
        trend=not args.no_trend,
        latent_daily=not args.no_latent,
        holidays=holidays,
        observation=args.observation,
        annual_harmonics=args.annual,
        within_day=args.within_day,
    )


def store_from_args(args: argparse.Namespace) -> Any:
    """The file store named by ``--store``, else ``$RATECAST_STORE``, else ``./store``."""
    from models.store import FileStore
    from service.config import get_settings

    return FileStore(Path(args.store) if getattr(args, "store", None) else get_settings().store)


def number_list(text: str, *, option: str, kind: type = float) -> tuple[Any, ...]:
    """Parse ``"0.8,0.95"`` (or whole numbers with ``kind=int``); the error names the option."""
    try:
        return tuple(kind(v) for v in text.split(",") if v.strip())
    except ValueError as exc:
        example = "5,10" if kind is int else "0.8,0.95"
        raise InputError(
            f"{option} {text!r} must be comma-separated {'whole ' if kind is int else ''}numbers "
            f"like {example}"
        ) from exc


def holiday_calendar(holidays: str | None, special_days: str | None = None) -> Any:
    """The calendar of ``COUNTRY[:SUBDIVISION]`` plus ``YYYY-MM-DD,...`` extra dates, or None."""
    from models.ratemodel.spec import HolidayCalendar

    if not (holidays or special_days):
        return None
    country, _, subdivision = (holidays or "").partition(":")
    extra: tuple[dt.date, ...] = ()
    if special_days:
        try:
            extra = tuple(dt.date.fromisoformat(d.strip()) for d in special_days.split(","))
        except ValueError as exc:
            raise InputError(
                f"--special-days {special_days!r} must be YYYY-MM-DD dates separated by commas"
            ) from exc
    return HolidayCalendar(
        country=country.upper() or None, subdivision=subdivision.upper() or None, extra=extra
    )


def read_history(args: argparse.Namespace, *, opening: Any, until: Any = None) -> Any:
    """Bin ``--events`` (column ``--time-column``) or ``--counts`` into a BinnedSeries."""
    from models.ratemodel.binning import (
        bin_counts,
        bin_events,
        parse_bin_width,
        parse_timestamps,
        read_table,
    )

    bin_minutes = parse_bin_width(args.bin) if args.bin else None
    table = read_table(args.events or args.counts)
    if args.counts:
        return bin_counts(table, tz=args.tz, bin_minutes=bin_minutes, opening=opening)
    if args.time_column not in table.columns:
        raise InputError(
            f"events file has no column {args.time_column!r}; columns: "
            f"{', '.join(map(str, table.columns))} (choose one with --time-column)"
        )
    stamps = parse_timestamps(table[args.time_column], tz=args.tz, column=args.time_column)
    return bin_events(
        stamps, tz=args.tz, bin_minutes=bin_minutes or 60, opening=opening, until=until
    )


def grid(headers: list[str], body: list[list[str]]) -> list[str]:
    """Fixed-width lines: the first column left-aligned, the others right-aligned."""
    widths = [max(len(h), *(len(r[i]) for r in body)) for i, h in enumerate(headers)]

    def line(cells: list[str]) -> str:
        return "  ".join(
            c.rjust(w) if i else c.ljust(w)
            for i, (c, w) in enumerate(zip(cells, widths, strict=True))
        )

    return [line(headers), *(line(cells) for cells in body)]


def add_sampling_options(p: argparse.ArgumentParser) -> None:
    """``--draws``, ``--tune``, ``--chains``, ``--seed``, ``--sampler`` and ``--no-progress``, with
    the defaults of :class:`~models.fitting.options.FitOptions` (the only place they are set)."""
    d = FitOptions()
    p.add_argument(
        "--draws", type=int, default=d.draws, help=f"posterior draws per chain (default {d.draws})"
    )
    p.add_argument(
        "--tune", type=int, default=d.tune, help=f"warm-up steps per chain (default {d.tune})"
    )
    p.add_argument("--chains", type=int, default=d.chains, help=f"chains (default {d.chains})")
    p.add_argument("--seed", type=int, default=d.seed, help=f"random seed (default {d.seed})")
    p.add_argument(
        "--sampler",
        choices=("pymc", "nutpie"),
        default=d.sampler,
        help=f"NUTS implementation (default {d.sampler})",
    )
    p.add_argument("--no-progress", action="store_true", help="hide the progress bar")


def sampling_options(args: argparse.Namespace) -> FitOptions:
    """The :class:`~models.fitting.options.FitOptions` a command's arguments ask for."""
    return FitOptions(
        draws=args.draws,
        tune=args.tune,
        chains=args.chains,
        seed=args.seed,
        sampler=args.sampler,
        progressbar=not args.no_progress,
    )

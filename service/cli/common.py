"""Pieces every CLI command module shares: the store, number lists, history files, labels, help
that states defaults, and quiet, line-by-line progress for fits."""

from __future__ import annotations

import argparse
import datetime as dt
import json
import logging
import os
import sys
import threading
import time
import warnings
from collections.abc import Iterator
from contextlib import contextmanager
from typing import Any, TextIO
from zoneinfo import ZoneInfo

from models.exceptions import DegradedVersion, InputError, StoreError
from models.fitting.options import FitOptions
from service.defaults import (
    DEFAULT_HOLIDAY_EFFECTS,
    DEFAULT_LATENT_BY_WEEKDAY,
    DEFAULT_OBSERVATION,
    DEFAULT_UNUSUAL_DAYS,
    resolved_choices,
)
from service.history import (
    holiday_calendar,
    named_file_errors,
    parse_date,
    read_history_file,
)

__all__ = [
    "DefaultsHelpFormatter",
    "add_degraded_option",
    "add_model_options",
    "check_degraded",
    "emit",
    "grid",
    "holiday_calendar",
    "model_spec",
    "named_file_errors",
    "number_list",
    "parse_date",
    "progress_lines",
    "quiet_library_warnings",
    "read_history",
    "store_from_args",
    "window_label",
]

#: Help text of every ``--store`` option.
STORE_HELP = (
    "store folder, file:// or s3://BUCKET/PREFIX URL (default $RATECAST_STORE, else ./store)"
)
#: Help text of every ``--open`` option: the syntax of opening hours, overnight and always-open.
OPEN_HELP = (
    "opening hours, e.g. 'Mon-Fri 07:00-21:00; Sat 09:00-13:00'. A span closing before it opens "
    "runs overnight ('Mon-Fri 18:00-08:00' closes at 08:00 the next morning); 'always' keeps "
    "every hour open (default: always open)"
)


def add_model_options(p: argparse.ArgumentParser) -> None:
    """The model-term options shared by ``fit`` and ``backtest``."""
    p.add_argument("--no-trend", action="store_true", help="leave out the linear trend")
    p.add_argument("--no-latent", action="store_true", help="leave out the daily latent deviation")
    p.add_argument(
        "--observation",
        choices=("auto", "poisson", "negbin"),
        default=DEFAULT_OBSERVATION,
        help="count law per bin: negbin (extra bin-level scatter, one dispersion per slot of the "
        "day; measured calibrated on real hourly data, docs/calibration.md), poisson, or auto "
        "(default: negbin, but poisson for daily bins with the daily latent, which carries their "
        "day-level scatter)",
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
    p.add_argument(
        "--unusual-days",
        choices=("auto", "leave-out", "keep"),
        default=DEFAULT_UNUSUAL_DAYS,
        help="days whose level stands far out from the same weekdays around them and that no "
        "listed holiday explains (outages, storms, events): leave-out (fitted as missing days, "
        "listed in the manifest), keep, or auto (default: leave-out for daily bins, keep for "
        "finer bins, as measured in docs/evidence.md)",
    )
    p.add_argument(
        "--latent-by-weekday",
        choices=("auto", "on", "off"),
        default=DEFAULT_LATENT_BY_WEEKDAY,
        help="give each weekday, and holidays, its own loading on the daily latent deviation so "
        "steady weekdays get narrow intervals when weekends or holidays swing: on, off, or auto "
        "(default: on for daily bins, off for finer bins)",
    )
    p.add_argument(
        "--holiday-effects",
        choices=("auto", "named", "shared"),
        default=DEFAULT_HOLIDAY_EFFECTS,
        help="named: each named holiday (Memorial Day, Christmas Day, ...) its own effect, "
        "partially pooled; shared: one effect for all holidays; auto (default: named for daily "
        "bins, shared for finer bins and groups)",
    )


def model_spec(
    args: argparse.Namespace, *, bin_minutes: int, holidays: Any, joint: bool = False
) -> Any:
    """The :class:`~models.ratemodel.spec.ModelSpec` the options of :func:`add_model_options` describe."""
    from models.ratemodel.spec import ModelSpec

    return ModelSpec(
        bin_minutes=bin_minutes,
        trend=not args.no_trend,
        latent_daily=not args.no_latent,
        holidays=holidays,
        annual_harmonics=args.annual,
        within_day=args.within_day,
        **resolved_choices(
            bin_minutes=bin_minutes,
            latent=not args.no_latent,
            joint=joint,
            observation=args.observation,
            unusual_days=args.unusual_days,
            latent_by_weekday=args.latent_by_weekday,
            holiday_effects=args.holiday_effects,
        ),
    )


def store_from_args(args: argparse.Namespace, *, create: bool = False) -> Any:
    """The store named by ``--store``, else ``$RATECAST_STORE``, else ``./store``: a folder, a
    ``file://`` URL or an ``s3://`` URL (:func:`models.storage.open_store`).

    A folder that does not exist is refused naming it (and where the name came from), unless
    ``create`` (a fit publishes into a new store). An object store has no folder to check; a
    missing bucket is refused when the store is first read.
    """
    from models.ratemodel.binning import shown_path
    from models.storage import open_store
    from models.store import FileStore
    from service.config import get_settings

    if getattr(args, "store", None):
        location, source = str(args.store), "--store"
    else:
        location = get_settings().store
        source = "$RATECAST_STORE" if os.environ.get("RATECAST_STORE") else "the default ./store"
    try:
        store = open_store(location)
    except (InputError, StoreError) as exc:
        raise type(exc)(f"{exc} ({source})") from None
    if not isinstance(store, FileStore):
        return store
    root = store.root
    try:
        exists, folder = root.exists(), root.is_dir()
    except OSError as exc:
        raise StoreError(
            f"store folder {shown_path(root)} ({source}) cannot be opened: {exc.strerror}"
        ) from exc
    if exists and not folder:
        raise StoreError(f"store {shown_path(root)} ({source}) is a file; give the store folder")
    if not exists and not create:
        raise StoreError(
            f"store folder {shown_path(root)} ({source}) does not exist; give the folder a fit "
            "published to (--store or $RATECAST_STORE), or run ratecast fit first"
        )
    return store


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


def read_history(
    args: argparse.Namespace, *, opening: Any, until: Any = None, now: Any = None
) -> Any:
    """Bin a command's ``--events`` or ``--counts`` file (:func:`~service.history.read_history_file`)."""
    return read_history_file(
        args.events or args.counts,
        kind="counts" if args.counts else "events",
        tz=args.tz,
        bin=args.bin,
        time_column=getattr(args, "time_column", "timestamp"),
        opening=opening,
        until=until,
        now=now,
    )


def emit(doc: Any, fmt: str, *, csv: Any, table: Any) -> int:
    """Write a command's document as ``fmt``: ``json``, ``csv`` (via ``csv(doc)``) or the table
    for people (``table(doc)``, under a warning when the version is degraded); returns 0."""
    if fmt == "json":
        print(json.dumps(doc, indent=2))
    elif fmt == "csv":
        sys.stdout.write(csv(doc))
    else:
        if doc.get("degraded"):
            print(
                f"WARNING: {doc['series']} {doc['model_version']} is DEGRADED: it was published "
                "with --force although its fit failed the diagnostics gate; do not plan on it "
                "(refit it, or pass --refuse-degraded in pipelines)."
            )
        sys.stdout.write(table(doc))
    return 0


def add_degraded_option(p: argparse.ArgumentParser) -> None:
    """``--refuse-degraded``: fail (exit 6) instead of answering from a degraded version."""
    p.add_argument(
        "--refuse-degraded",
        action="store_true",
        help="exit with status 6 instead of answering when the version was published with "
        "--force although its fit failed the diagnostics gate (for pipelines)",
    )


def check_degraded(args: argparse.Namespace, stored: Any) -> None:
    """Raise :class:`~models.exceptions.DegradedVersion` if ``--refuse-degraded`` was given and
    ``stored`` is degraded."""
    if getattr(args, "refuse_degraded", False) and stored.degraded:
        problems = "; ".join(stored.degraded_problems[:3]) or "the gate's report is not stored"
        raise DegradedVersion(
            f"{stored.series} {stored.version} is degraded (published with --force although its "
            f"fit failed the diagnostics gate: {problems}); refusing it as --refuse-degraded asks"
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


def _repeated(wall: dt.datetime, zone: ZoneInfo) -> bool:
    """Whether the local wall-clock time ``wall`` occurs twice (the hour daylight saving repeats)."""
    first = wall.replace(tzinfo=zone, fold=0).utcoffset()
    second = wall.replace(tzinfo=zone, fold=1).utcoffset()
    return first != second


def _clock(stamp: Any, zone: ZoneInfo, *, midnight_as_24: bool = False) -> str:
    """``HH:MM``, with the UTC offset added when the wall-clock time is one daylight saving
    repeats, e.g. ``01:00 (UTC-05:00)``."""
    if midnight_as_24 and stamp.hour == 0 and stamp.minute == 0:
        return "24:00"
    text = stamp.strftime("%H:%M")
    if _repeated(stamp.to_pydatetime().replace(tzinfo=None), zone):
        offset = stamp.strftime("%z")
        text += f" (UTC{offset[:3]}:{offset[3:]})"
    return text


def window_label(start: str, end: str, tz: str) -> str:
    """A window ``[start, end)`` for people, in the series' zone.

    A window of whole local days is named by its dates; one within a day by the day and its
    times (the following midnight is ``24:00``); a time daylight saving repeats carries its UTC
    offset so the two hours are told apart.

    Examples
    --------
    >>> window_label("2026-04-27T06:00-03:00", "2026-04-27T06:30-03:00", "America/Halifax")
    'Mon 2026-04-27 06:00-06:30'
    >>> window_label("2026-04-27T00:00-03:00", "2026-04-28T00:00-03:00", "America/Halifax")
    'Mon 2026-04-27'
    >>> window_label("2026-11-01T01:00-05:00", "2026-11-01T01:00-06:00", "America/Chicago")
    'Sun 2026-11-01 01:00 (UTC-05:00)-01:00 (UTC-06:00)'
    """
    import pandas as pd

    zone = ZoneInfo(tz)
    a = pd.Timestamp(start).tz_convert(tz)
    b = pd.Timestamp(end).tz_convert(tz)
    last = b - pd.Timedelta(1, "ns")
    if a == a.normalize() and b == b.normalize():
        days = (b.date() - a.date()).days
        if days <= 1:
            return a.strftime("%a %Y-%m-%d")
        return f"{a.strftime('%a %Y-%m-%d')} to {last.strftime('%a %Y-%m-%d')} ({days} days)"
    day = a.strftime("%a %Y-%m-%d")
    if last.date() == a.date():
        return f"{day} {_clock(a, zone)}-{_clock(b, zone, midnight_as_24=True)}"
    return f"{day} {_clock(a, zone)} to {b.strftime('%a %Y-%m-%d')} {_clock(b, zone)}"


class DefaultsHelpFormatter(argparse.HelpFormatter):
    """Help that states every option's default, unless its text already says it."""

    def _get_help_string(self, action: argparse.Action) -> str:
        text = action.help or ""
        if (
            not action.option_strings
            or action.required
            or "default" in text.lower()
            or action.default is argparse.SUPPRESS
            or isinstance(action, argparse._StoreConstAction | argparse._VersionAction)
            or action.nargs == 0
        ):
            return text
        if action.default is None or action.default == "":
            return f"{text} (default: none)"
        return f"{text} (default: %(default)s)"


#: Library messages a normal fit prints that tell the user nothing they can act on: ArviZ's
#: once-a-day notice of its coming refactor, PyTensor's note that pip builds have no BLAS (the
#: model runs on numba, which needs none) and ArviZ's NaN note (the diagnostics gate leaves out
#: the cells no bin observes, such as closed hours, whose statistics are undefined).
_QUIET_WARNINGS = (
    (r"\s*ArviZ is undergoing a major refactor", FutureWarning),
    (r"PyTensor could not link to a BLAS installation", UserWarning),
)
_QUIET_LOGS = {"pytensor.tensor.blas": logging.ERROR}


def quiet_library_warnings() -> None:
    """Silence the library notices of :data:`_QUIET_WARNINGS` (nothing else) in this process."""
    for message, category in _QUIET_WARNINGS:
        warnings.filterwarnings("ignore", message=message, category=category)
    for name, level in _QUIET_LOGS.items():
        logging.getLogger(name).setLevel(level)


def quiet_arviz_nan_note() -> None:
    """Drop ArviZ's "Array contains NaN-value." log line, once ArviZ is loaded by a fit.

    ArviZ logs through a logger of its own that is not registered with :mod:`logging`, so the
    filter goes on that logger (reached through the loaded module, never imported from here).
    """
    arviz = sys.modules.get("arviz")
    log = getattr(arviz, "_log", None)
    if isinstance(log, logging.Logger) and not getattr(log, "_ratecast_quiet", False):
        log.addFilter(lambda record: "NaN-value" not in record.getMessage())
        log._ratecast_quiet = True  # type: ignore[attr-defined]


@contextmanager
def progress_lines(
    what: str, *, every: float = 15.0, stream: TextIO | None = None
) -> Iterator[None]:
    """While the block runs, write ``what: still running, 0:45 elapsed`` every ``every`` seconds.

    Each line is flushed as it is written, so a log fed through a pipe shows the fit's progress
    as it happens (a terminal progress bar redraws one line and reaches a pipe only at the end).
    """
    out = stream or sys.stderr
    stop = threading.Event()
    started = time.monotonic()

    def beat() -> None:
        while not stop.wait(every):
            seconds = int(time.monotonic() - started)
            print(
                f"{what}: still running, {seconds // 60}:{seconds % 60:02d} elapsed",
                file=out,
                flush=True,
            )

    thread = threading.Thread(target=beat, name="ratecast-progress", daemon=True)
    thread.start()
    try:
        yield
    finally:
        stop.set()
        thread.join()


def progress_bar_wanted(args: argparse.Namespace) -> bool:
    """A redrawn progress bar only on a terminal; a pipe gets :func:`progress_lines` instead."""
    return not args.no_progress and sys.stderr.isatty()


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
    p.add_argument(
        "--no-progress",
        action="store_true",
        help="no progress at all (default: a progress bar on a terminal, a line every 15 s "
        "when output goes to a pipe or file)",
    )


def sampling_options(args: argparse.Namespace) -> FitOptions:
    """The :class:`~models.fitting.options.FitOptions` a command's arguments ask for (the
    sampler's own progress bar only on a terminal)."""
    return FitOptions(
        draws=args.draws,
        tune=args.tune,
        chains=args.chains,
        seed=args.seed,
        sampler=args.sampler,
        progressbar=progress_bar_wanted(args),
    )


@contextmanager
def fit_progress(args: argparse.Namespace, what: str) -> Iterator[None]:
    """Progress lines for a fit whose output is not a terminal (see :func:`progress_lines`)."""
    if args.no_progress or sys.stderr.isatty():
        yield
        return
    with progress_lines(what):
        yield

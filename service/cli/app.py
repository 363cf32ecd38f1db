"""The ``ratecast`` command line: the parser of every command group and the exit codes.

Exit codes: 0 success, 2 bad input, 3 unknown series, 4 fit refused by the diagnostics gate,
5 store problem, 1 any other library error. Every failure is one line on stderr, never a
traceback (``RATECAST_DEBUG=1`` shows the traceback of an unexpected error).
"""

from __future__ import annotations

import argparse
import os
import sys
from collections.abc import Sequence
from pathlib import Path
from typing import NoReturn

from models.exceptions import (
    DegradedVersion,
    FitRejected,
    InputError,
    RatecastError,
    SeriesNotFound,
    StoreError,
)
from service.cli import backtest, capacity, fitting, forecasting, plan, serve
from service.cli.common import DefaultsHelpFormatter, quiet_library_warnings
from service.queries.forecast import CAUTION

__all__ = ["build_parser", "main", "package_version"]

_EXIT = (
    (InputError, 2),
    (SeriesNotFound, 3),
    (FitRejected, 4),
    (StoreError, 5),
    (DegradedVersion, 6),
)
_GROUPS = (fitting, forecasting, plan, serve, capacity, backtest)


def package_version() -> str:
    """The installed ratecast version (``unknown`` when running from a bare source tree)."""
    from importlib.metadata import PackageNotFoundError, version

    try:
        return version("ratecast")
    except PackageNotFoundError:
        return "unknown"


class _Parser(argparse.ArgumentParser):
    """argparse, with usage mistakes reported on one line that points to ``--help``."""

    def error(self, message: str) -> NoReturn:
        self.exit(2, f"{self.prog}: error: {message} (see {self.prog} --help)\n")


def build_parser() -> argparse.ArgumentParser:
    """The argument parser with every subcommand; every ``--help`` states the defaults."""
    parser = _Parser(
        prog="ratecast",
        description="Learn arrival rates from history and forecast counts for any window.",
        epilog=CAUTION,
        formatter_class=DefaultsHelpFormatter,
    )
    parser.add_argument("--version", action="version", version=f"ratecast {package_version()}")
    sub = parser.add_subparsers(dest="command", required=True)
    for group in _GROUPS:
        group.register(sub)
    for command in sub.choices.values():
        command.formatter_class = DefaultsHelpFormatter
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``ratecast`` console script."""
    os.environ.setdefault(
        "PYTENSOR_FLAGS", f"compiledir={Path.home() / '.cache' / 'ratecast-pytensor'}"
    )
    quiet_library_warnings()
    args = build_parser().parse_args(argv)
    try:
        return int(args.run(args))
    except BrokenPipeError:
        # Output piped into `head` and the like: stop quietly, as Unix tools do.
        sys.stderr.close()
        return 0
    except KeyboardInterrupt:
        print(f"ratecast {args.command}: interrupted", file=sys.stderr)
        return 130
    except RatecastError as exc:
        print(f"ratecast {args.command}: error: {exc}", file=sys.stderr)
        for kind, code in _EXIT:
            if isinstance(exc, kind):
                return code
        return 1
    except Exception as exc:
        if os.environ.get("RATECAST_DEBUG"):
            raise
        detail = " ".join(str(exc).split()) or type(exc).__name__
        print(
            f"ratecast {args.command}: unexpected error ({type(exc).__name__}: {detail}); "
            "this is a bug, please report it (RATECAST_DEBUG=1 shows the traceback)",
            file=sys.stderr,
        )
        return 1

"""The ``ratecast`` command line: the parser of every command group and the exit codes.

Exit codes: 0 success, 2 bad input, 3 unknown series, 4 fit refused by the diagnostics gate,
5 store problem, 1 any other library error.
"""

from __future__ import annotations

import argparse
import os
import sys
from collections.abc import Sequence
from pathlib import Path

from models.exceptions import FitRejected, InputError, RatecastError, SeriesNotFound, StoreError
from service.cli import backtest, capacity, fitting, forecasting, plan, serve
from service.queries.forecast import CAUTION

__all__ = ["build_parser", "main"]

_EXIT = ((InputError, 2), (SeriesNotFound, 3), (FitRejected, 4), (StoreError, 5))
_GROUPS = (fitting, forecasting, plan, serve, capacity, backtest)


def build_parser() -> argparse.ArgumentParser:
    """The argument parser with every subcommand."""
    parser = argparse.ArgumentParser(
        prog="ratecast",
        description="Learn arrival rates from history and forecast counts for any window.",
        epilog=CAUTION,
    )
    sub = parser.add_subparsers(dest="command", required=True)
    for group in _GROUPS:
        group.register(sub)
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

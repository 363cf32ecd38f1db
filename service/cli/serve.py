"""``ratecast serve``: run the HTTP API on uvicorn.

The store reaches the worker processes through ``RATECAST_STORE`` (each worker imports
``service.main:app`` afresh and reads its settings from the environment).
"""

from __future__ import annotations

import argparse
import os
from typing import Any

from models.exceptions import InputError

__all__ = ["default_workers", "register"]

_WORKERS_ENV = "RATECAST_WORKERS"


def default_workers() -> int:
    """One worker per CPU this process may run on (answering is CPU-bound numpy work)."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # not on Linux
        return max(1, os.cpu_count() or 1)


def _workers(text: str) -> int:
    if text == "auto":
        return default_workers()
    try:
        count = int(text)
    except ValueError:
        count = 0
    if count < 1:
        raise argparse.ArgumentTypeError(
            f"--workers {text!r} is not allowed: use a whole number >= 1 or 'auto' (one per CPU)"
        )
    return count


def _port(text: str) -> int:
    try:
        port = int(text)
    except ValueError:
        port = -1
    if not 0 < port < 65536:
        raise argparse.ArgumentTypeError(f"--port {text!r} is not allowed: use 1-65535")
    return port


def register(sub: Any) -> None:
    """Add the ``serve`` subcommand to the ``ratecast`` parser's subparsers."""
    p = sub.add_parser("serve", help="serve forecasts over HTTP (uvicorn)")
    p.add_argument("--host", default="127.0.0.1", help="address to listen on (default 127.0.0.1)")
    p.add_argument("--port", type=_port, default=8000, help="TCP port (default 8000)")
    p.add_argument(
        "--workers",
        type=_workers,
        default=os.environ.get(_WORKERS_ENV, "1"),
        help=f"worker processes: a number or 'auto' (one per CPU); default ${_WORKERS_ENV} or 1",
    )
    p.add_argument(
        "--store",
        default=None,
        help="store folder, file:// or s3://BUCKET/PREFIX URL (default $RATECAST_STORE or ./store)",
    )
    p.add_argument(
        "--log-level",
        choices=("critical", "error", "warning", "info", "debug"),
        default="info",
    )
    p.add_argument("--no-access-log", action="store_true", help="do not log one line per request")
    p.add_argument(
        "--keep-alive",
        type=_bounded("--keep-alive", 1, 300),
        default=5,
        metavar="SECONDS",
        help="close an idle keep-alive connection after this long (default 5, 1-300)",
    )
    p.add_argument(
        "--max-connections",
        type=_bounded("--max-connections", 1, 100_000),
        default=512,
        help="connections (and requests) open at once per worker; beyond it new requests get "
        "503 at once instead of queueing (default 512)",
    )
    p.add_argument(
        "--max-header-bytes",
        type=_bounded("--max-header-bytes", 1024, 1_048_576),
        default=16_384,
        help="largest request head (request line and headers) read before refusing with 400 "
        "(default 16384)",
    )
    p.set_defaults(run=_run_serve)


def _bounded(option: str, low: int, high: int) -> Any:
    def parse(text: str) -> int:
        try:
            number = int(text)
        except ValueError:
            number = low - 1
        if not low <= number <= high:
            raise argparse.ArgumentTypeError(
                f"{option} {text!r} is not allowed: use a whole number from {low} to {high}"
            )
        return number

    return parse


def _run_serve(args: argparse.Namespace) -> int:
    import uvicorn

    from models.storage import local_folder, open_store

    if args.store:
        folder = local_folder(args.store)
        if folder is not None and folder.exists() and not folder.is_dir():
            raise InputError(f"--store {args.store!r} is a file; give the store folder")
        # A folder travels to the workers as an absolute path, a URL as it is.
        os.environ["RATECAST_STORE"] = str(folder.resolve()) if folder else args.store
    from service.config import get_settings

    get_settings.cache_clear()  # settings read from here on see the store chosen above
    open_store(get_settings().store)  # a bad location is one line here, not a worker traceback
    uvicorn.run(
        "service.main:app",
        host=args.host,
        port=args.port,
        workers=args.workers,
        log_level=args.log_level,
        access_log=not args.no_access_log,
        server_header=False,
        timeout_graceful_shutdown=10,
        timeout_keep_alive=args.keep_alive,
        limit_concurrency=args.max_connections,
        h11_max_incomplete_event_size=args.max_header_bytes,
    )
    return 0

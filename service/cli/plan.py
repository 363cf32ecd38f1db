"""``ratecast fit-plan``: refit every series of a plan file on a Dask cluster and publish each.

Exit status: 0 when every entry was published or was unchanged, 4 when some were refused by the
diagnostics gate (and none failed), 1 when some failed, 2 when the plan itself is bad (nothing
is fitted then).
"""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path
from typing import Any

from service.cli.common import grid

__all__ = ["register"]


def register(sub: Any) -> None:
    """Add ``fit-plan`` to the ``ratecast`` command line."""
    p = sub.add_parser(
        "fit-plan",
        help="fit every series of a plan file on a Dask cluster and publish each",
        description="Fit every [[series]] and [[group]] of a TOML plan file (format: see the "
        "README) in parallel, skipping entries whose inputs and settings are unchanged since "
        "their published version.",
    )
    p.add_argument("plan", help="the plan file (TOML)")
    p.add_argument(
        "--scheduler",
        default=None,
        metavar="ADDRESS",
        help="address of a running Dask scheduler, e.g. tcp://10.0.0.5:8786 (default: a local "
        "cluster of worker processes on this machine)",
    )
    p.add_argument(
        "--workers",
        type=int,
        default=None,
        help="worker processes of the local cluster (default: one per core)",
    )
    p.add_argument(
        "--store",
        default=None,
        help="store every worker can reach: a shared folder, file:// or s3://BUCKET/PREFIX URL "
        "(default: the plan's 'store', else $RATECAST_STORE, else ./store)",
    )
    p.add_argument(
        "--cache",
        default=None,
        help="folder for the workers' compile caches (default: .cache/ratecast-workers beside "
        "a store folder, or in the current folder for a URL store)",
    )
    p.add_argument("--json", default=None, metavar="FILE", help="also write the results as JSON")
    p.add_argument(
        "--check", action="store_true", help="validate the plan and list its entries; fit nothing"
    )
    p.set_defaults(run=_run)


def _run(args: argparse.Namespace) -> int:
    from models.exceptions import InputError
    from models.storage import local_folder, open_store
    from service.config import get_settings
    from service.plans import load_plan, run_plan

    if args.workers is not None and args.workers < 1:
        raise InputError(f"--workers {args.workers} must be at least 1")
    plan = load_plan(args.plan)
    if args.check:
        for entry in plan.entries:
            members = ", ".join(m.name for m in entry.members)
            print(f"{'group' if entry.group else 'series'} {entry.name}: {members}")
        print(f"plan {args.plan}: {len(plan.entries)} entries, {len(plan.series)} series, valid")
        return 0
    location = args.store or plan.store or get_settings().store
    open_store(location)  # a bad location is refused here, before any worker starts
    folder = local_folder(location)
    # Workers get a folder as an absolute path and a URL as it is; each opens the store itself.
    store = str(folder.resolve()) if folder is not None else location
    cache_base = folder.resolve().parent if folder is not None else Path.cwd()
    cache = Path(args.cache).resolve() if args.cache else cache_base / ".cache" / "ratecast-workers"
    tty = sys.stderr.isatty()

    def progress(record: dict[str, Any], done: int, total: int) -> None:
        line = f"[{done}/{total}] {record['entry']}: {_outcome(record)}"
        print(("\r\033[K" if tty else "") + line, file=sys.stderr, flush=True)

    where = args.scheduler or f"a local cluster of {args.workers or 'one worker per core'}"
    print(
        f"fitting {len(plan.entries)} entries ({len(plan.series)} series) on {where}...",
        file=sys.stderr,
        flush=True,
    )
    report = run_plan(
        plan,
        store_root=store,
        cache_root=str(cache),
        scheduler=args.scheduler,
        workers=args.workers,
        on_result=progress,
    )
    rows = [
        [r["entry"], r["status"], _versions(r), f"{r.get('seconds', 0):.0f}", _detail(r)]
        for r in report.records
    ]
    print("\n".join(grid(["entry", "status", "versions", "seconds", "detail"], rows)))
    counts = report.counts()
    print(
        f"{counts['published']} published, {counts['unchanged']} unchanged, {counts['refused']} "
        f"refused, {counts['failed']} failed on {report.workers} workers in {report.seconds:.0f} s"
    )
    if args.json:
        Path(args.json).write_text(json.dumps(report.to_dict(), indent=2))
    if report.all_published:
        return 0
    return 1 if counts["failed"] else 4


def _versions(record: dict[str, Any]) -> str:
    return " ".join(f"{n} {v}" for n, v in record.get("versions", {}).items()) or "-"


def _outcome(record: dict[str, Any]) -> str:
    return f"{record['status']} {_versions(record)} {_detail(record)}".strip()


def _detail(record: dict[str, Any]) -> str:
    if record["status"] == "refused":
        return "; ".join(record.get("problems", [])[:2]) or record.get("reason", "")
    if record["status"] == "failed":
        return str(record.get("error", ""))[:160]
    if record["status"] == "published":
        d = record.get("diagnostics", {})
        return f"r_hat {d.get('max_r_hat', float('nan')):.3f}, ESS {d.get('min_ess_bulk', 0):.0f}"
    return ""

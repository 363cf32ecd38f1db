"""Where one forecast request's time goes: py-spy samples ``ratecast serve`` under wrk load.

Starts the server of ``bench/bench_api.py`` on its synthetic negative-binomial store, loads one
route with ``wrk`` (1 thread, 16 connections) while ``py-spy record`` samples the server process,
and prints the share of samples inside the parts of a request (inclusive, so nested parts are
counted in their parents too). Needs ``wrk`` (Debian) and ``py-spy`` (PyPI, in the dev extra);
py-spy needs permission to read another process (root, or ptrace allowed).

    python bench/profile_api.py [--route forecast|bands|health] [--seconds 8]
"""

from __future__ import annotations

import argparse
import collections
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

import bench_api

#: Parts of a request, as (label, substring of a py-spy frame).
PARTS = (
    ("whole request (ASGI app)", "FastAPI.__call__"),
    ("  route handler", "run_endpoint_function"),
    ("    forecast document (the computation)", "forecast_document"),
    ("      expected counts per window and draw", "expected_counts"),
    ("      mixture summaries", "summarise"),
    ("    windows read from the body", "window_index"),
    ("    work estimate", "Windows.cells"),
    ("  body read and validated (FastAPI)", "routing.py:528"),
    ("  dependencies (FastAPI)", "solve_dependencies"),
    ("  response sent", "Response.__call__"),
    ("socket writes (uvicorn)", "RequestResponseCycle.send"),
)


def shares(raw: Path) -> tuple[int, dict[str, float]]:
    """Total samples and the inclusive share of each part in a py-spy ``raw`` file."""
    counts: collections.Counter[str] = collections.Counter()
    total = 0
    for line in raw.read_text().splitlines():
        stack, _, n = line.rpartition(" ")
        total += int(n)
        for label, needle in PARTS:
            if needle in stack:
                counts[label] += int(n)
    return total, {label: counts[label] / max(total, 1) for label, _ in PARTS}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--route", choices=("forecast", "bands", "health"), default="forecast")
    parser.add_argument("--seconds", type=float, default=8.0)
    args = parser.parse_args()
    spy = shutil.which("py-spy") or str(Path(sys.executable).with_name("py-spy"))
    if not Path(spy).exists() or not shutil.which("wrk"):
        raise SystemExit("needs py-spy (pip install py-spy) and wrk (apt-get install wrk)")
    path, body = {
        "forecast": (bench_api.FORECAST, bench_api.FORECAST_BODY),
        "bands": (bench_api.BANDS, None),
        "health": (bench_api.HEALTH, None),
    }[args.route]
    with tempfile.TemporaryDirectory() as folder:
        tmp = Path(folder)
        bench_api.build_store(tmp / "store", draws=1000, series=0, series_draws=100)
        raw = tmp / "profile.txt"
        with bench_api.server(tmp / "store", tmp / "server.log") as (base, pid):
            record = subprocess.Popen(
                [spy, "record", "-p", str(pid), "-d", f"{args.seconds:g}", "-r", "400",
                 "-f", "raw", "-o", str(raw)],
                stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
            )  # fmt: skip
            time.sleep(0.5)
            load = bench_api.wrk_load(
                base, path, body=body, seconds=args.seconds, connections=16, tmp=tmp
            )
            record.wait()
        total, parts = shares(raw)
    print(
        f"{args.route}: {load.rps:.0f} req/s, p50 {load.p50_ms:.1f} ms, p99 {load.p99_ms:.1f} ms; "
        f"{1000 / load.rps:.2f} ms per request; {total} samples"
    )
    for label, share in parts.items():
        print(f"{share:6.1%}  {label}")


if __name__ == "__main__":
    main()

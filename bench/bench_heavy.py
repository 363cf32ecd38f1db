"""Benchmark: the single-window forecast's latency while a heavy request computes.

Issue 12 asks that a heavy-but-allowed request does not take the service down: the p99 latency
of the single-window forecast route should stay within 2x of its value without it. On a real
``ratecast serve`` (one worker, default settings) on loopback, each round sends a fixed count of
single-window forecasts (asyncio raw sockets, ``--connections`` keep-alive connections, every
request's latency recorded; wrk cannot stop after a count) twice: alone, then while one 400-day
hourly window at 2,000 draws (within the default work budget, so it is accepted and computes in
the work pool) is always in flight: a side thread re-issues it whenever one finishes, and the
load starts only once the server reports it running. Each round prints requests per second,
p50 and p99 both ways, the heavy requests completed (and their status codes) and the p99 ratio.
Rounds are repeated because other work on the shared machine moves the figures.

The store is synthetic (``bench_api.build_store``: negative binomial, no PyMC). Figures only,
no pass/fail.

Run: ``python bench/bench_heavy.py [--count 3000 --connections 16 --rounds 3]``.
"""

from __future__ import annotations

import argparse
import collections
import os
import sys
import tempfile
import threading
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import httpx
import pandas as pd

sys.path.insert(0, str(Path(__file__).resolve().parent))

from bench_api import (
    FIRST_DAY,
    FORECAST,
    FORECAST_BODY,
    TZ,
    Load,
    build_store,
    count_load,
    loopback_ceiling,
    server,
)

from service.api.work import window_cells
from service.config import Settings

HISTORY_DAYS = 365  # build_store's desk-a


def heavy_body(days: int) -> dict[str, Any]:
    """One window of ``days`` days from the end of desk-a's history (local midnights)."""
    start = FIRST_DAY + pd.Timedelta(days=HISTORY_DAYS)
    end = start + pd.Timedelta(days=days)
    return {"windows": [{"start": f"{start}T00:00", "end": f"{end}T00:00"}], "tz": TZ}


def heavy_cells(days: int, draws: int) -> int:
    """The server's estimate of the heavy window (hourly bins), in bin-draws."""
    window = heavy_body(days)["windows"][0]
    starts = pd.DatetimeIndex([pd.Timestamp(window["start"], tz=TZ)])
    ends = pd.DatetimeIndex([pd.Timestamp(window["end"], tz=TZ)])
    return window_cells(starts, ends, bin_minutes=60, draws=draws)


def work_running(http: httpx.Client) -> int:
    """``ratecast_work_running`` from the server's metrics."""
    for line in http.get("/v1/metrics").text.splitlines():
        if line.startswith("ratecast_work_running "):
            return int(float(line.split()[1]))
    raise SystemExit("the server's metrics have no ratecast_work_running")


@dataclass
class Heavy:
    """A side thread keeping one heavy request in flight until :meth:`stop`."""

    base: str
    body: dict[str, Any]
    statuses: collections.Counter[int] = field(default_factory=collections.Counter)
    seconds: list[float] = field(default_factory=list)
    spans: list[tuple[float, float]] = field(default_factory=list)  # perf_counter begin, end
    _halt: threading.Event = field(default_factory=threading.Event)
    _thread: threading.Thread | None = None

    def start(self) -> None:
        self._thread = threading.Thread(target=self._loop, name="heavy", daemon=True)
        self._thread.start()

    def _loop(self) -> None:
        with httpx.Client(base_url=self.base, timeout=600) as http:
            while not self._halt.is_set():
                began = time.perf_counter()
                status = http.post(FORECAST, json=self.body).status_code
                ended = time.perf_counter()
                self.statuses[status] += 1
                self.seconds.append(ended - began)
                self.spans.append((began, ended))

    def stop(self) -> None:
        """Issue no more; wait for the one in flight to finish."""
        self._halt.set()
        if self._thread is not None:
            self._thread.join()

    def covered(self, began: float, ended: float) -> float:
        """The share of ``[began, ended]`` during which a heavy request was in flight."""
        inside = sum(max(0.0, min(e, ended) - max(b, began)) for b, e in self.spans)
        return inside / (ended - began)


def load(base: str, args: argparse.Namespace) -> tuple[Load, float, float]:
    began = time.perf_counter()
    result = count_load(
        base, FORECAST, count=args.count, connections=args.connections, body=FORECAST_BODY
    )
    return result, began, time.perf_counter()


def row(label: str, r: Load) -> str:
    return f"  {label:<22}{r.rps:>8.0f} req/s  p50 {r.p50_ms:>6.2f} ms  p99 {r.p99_ms:>7.2f} ms" + (
        f"  errors {r.errors}" if r.errors else ""
    )


def rounds(base: str, args: argparse.Namespace) -> None:
    body = heavy_body(args.heavy_days)
    with httpx.Client(base_url=base, timeout=600) as http:
        began = time.perf_counter()
        alone = http.post(FORECAST, json=body)
        first = time.perf_counter() - began
        began = time.perf_counter()
        again = http.post(FORECAST, json=body)
        second = time.perf_counter() - began
        print(
            f"heavy request alone: {first:.2f} s the first time (status {alone.status_code}), "
            f"{second:.2f} s again (status {again.status_code})"
        )
        if alone.status_code != 200:
            raise SystemExit(f"the heavy request was refused: {alone.text}")
        count_load(base, FORECAST, count=300, connections=args.connections, body=FORECAST_BODY)
        ratios = []
        for round_ in range(1, args.rounds + 1):
            print(f"round {round_} (load average {os.getloadavg()[0]:.1f}):", flush=True)
            quiet, _, _ = load(base, args)
            print(row("alone", quiet), flush=True)
            heavy = Heavy(base, body)
            heavy.start()
            deadline = time.monotonic() + 60
            while work_running(http) < 1:
                if time.monotonic() > deadline:
                    raise SystemExit("the heavy request did not start within 60 s")
                time.sleep(0.02)
            busy, began, ended = load(base, args)
            still = work_running(http)
            heavy.stop()
            ratio = busy.p99_ms / quiet.p99_ms
            ratios.append(ratio)
            codes = ", ".join(f"{n} x {code}" for code, n in sorted(heavy.statuses.items()))
            print(row("with a heavy in flight", busy))
            print(
                f"    heavy: {codes} ({', '.join(f'{s:.1f}' for s in heavy.seconds)} s each); "
                f"in flight {100 * heavy.covered(began, ended):.0f}% of the load's "
                f"{ended - began:.1f} s, work threads busy at its end: {still}"
            )
            print(
                f"    p99 ratio {ratio:.2f} ({'within' if ratio <= 2 else 'NOT within'} 2x); "
                f"req/s ratio {busy.rps / quiet.rps:.2f}",
                flush=True,
            )
        print(f"p99 ratios: {', '.join(f'{r:.2f}' for r in ratios)}")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--count", type=int, default=3000, help="forecasts per load")
    parser.add_argument("--connections", type=int, default=16)
    parser.add_argument("--rounds", type=int, default=3)
    parser.add_argument("--draws", type=int, default=2000, help="draws of desk-a")
    parser.add_argument("--heavy-days", type=int, default=400, help="length of the heavy window")
    args = parser.parse_args()
    settings = Settings()
    cells = heavy_cells(args.heavy_days, args.draws)
    print(
        f"heavy request: one {args.heavy_days}-day hourly window at {args.draws} draws, about "
        f"{cells:,} bin-draws (budget {settings.work_budget:,}, {settings.work_threads} work "
        f"threads, deadline {settings.deadline_seconds:g} s); load: {args.count} single-window "
        f"forecasts over {args.connections} connections; {os.cpu_count()} CPUs"
    )
    print(
        "  the client's own ceiling (a minimal asyncio answerer): "
        f"{loopback_ceiling(3.0, args.connections):.0f} req/s"
    )
    with tempfile.TemporaryDirectory(prefix="ratecast-heavy-") as folder:
        tmp = Path(folder)
        build_store(tmp / "store", draws=args.draws, series=0, series_draws=args.draws)
        with server(tmp / "store", tmp / "server.log") as (base, pid):
            print(f"ratecast serve --workers 1 (pid {pid}) ready")
            rounds(base, args)


if __name__ == "__main__":
    main()

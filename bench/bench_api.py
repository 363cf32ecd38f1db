"""Benchmark of the HTTP API: a real uvicorn process on loopback, a bounded async load.

Prints throughput and latency percentiles for the trivial health route (the framework's ceiling
on this machine, measured in the same run) and a single-window forecast, then the time of a
168-window bands call and of a streamed batch of many series x 24 windows with the server's peak
memory (``VmHWM`` of ``/proc/<pid>/status``). Figures only, no pass/fail.

The load generator (httpx) runs on the same machine and takes CPU from the server: on a small
machine the health figure is partly the client's ceiling.

Run: ``python bench/bench_api.py [--requests 2000 --concurrency 16 --batch-series 1000]``.
"""

from __future__ import annotations

import argparse
import asyncio
import datetime as dt
import json
import os
import socket
import statistics
import subprocess
import sys
import tempfile
import time
from collections.abc import Callable
from pathlib import Path
from typing import Any

import httpx
import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from models.store import FileStore  # noqa: E402
from tests.conftest import synthetic_posterior  # noqa: E402

TZ = "America/Chicago"
FIRST_DAY = dt.date(2025, 3, 3)
MANIFEST: dict[str, Any] = {"diagnostics": {"ok": True}}


def weekly_table(scale: float) -> np.ndarray:
    hours = np.arange(24)
    day = 1.0 + 9.0 * np.exp(-0.5 * ((hours - 13) / 3.5) ** 2)
    return scale * np.array([1.0, 1.1, 1.05, 1.0, 1.3, 0.6, 0.5])[:, None] * day[None, :]


def build_store(root: Path, *, draws: int, batch_series: int, batch_draws: int) -> None:
    store = FileStore(root)
    # A realistic main series: a year of history, the draws a default fit keeps, daily deviations.
    store.publish(
        "desk-a",
        synthetic_posterior(
            weekly_table(1.0), tz=TZ, first_day=FIRST_DAY, n_days=365, draws=draws,
            latent_rho=0.8, latent_sd=0.2,
        ),
        manifest=MANIFEST,
    )  # fmt: skip
    # Smaller posteriors for the many-series batch, so the server's memory stays modest.
    small = synthetic_posterior(
        weekly_table(0.5), tz=TZ, first_day=FIRST_DAY, n_days=56, draws=batch_draws,
        latent_rho=0.8, latent_sd=0.2,
    )  # fmt: skip
    for i in range(batch_series):
        store.publish(f"s{i:04d}", small, manifest=MANIFEST)


def free_port() -> int:
    with socket.socket() as probe:
        probe.bind(("127.0.0.1", 0))
        return int(probe.getsockname()[1])


def status_kb(pid: int, field: str) -> int:
    for line in Path(f"/proc/{pid}/status").read_text().splitlines():
        if line.startswith(field + ":"):
            return int(line.split()[1])
    return -1


def start_server(store: Path, port: int, log: Path) -> subprocess.Popen[bytes]:
    env = {**os.environ, "RATECAST_WATCH_SECONDS": "0"}
    for name in ("RATECAST_READ_TOKEN", "RATECAST_MAX_WINDOWS", "RATECAST_MAX_BATCH_ITEMS"):
        env.pop(name, None)
    with log.open("wb") as sink:
        process = subprocess.Popen(
            [sys.executable, "-m", "service.cli", "serve", "--host", "127.0.0.1", "--port",
             str(port), "--store", str(store), "--workers", "1", "--no-access-log",
             "--log-level", "warning"],
            stdout=sink, stderr=subprocess.STDOUT, env=env, cwd=ROOT,
        )  # fmt: skip
    deadline = time.monotonic() + 180
    while time.monotonic() < deadline:
        if process.poll() is not None:
            raise SystemExit(f"server exited:\n{log.read_text()}")
        try:
            if httpx.get(f"http://127.0.0.1:{port}/v1/health/ready", timeout=2).status_code == 200:
                return process
        except httpx.TransportError:
            pass
        time.sleep(0.2)
    process.kill()
    raise SystemExit("server not ready within 180 s")


async def load(
    base: str, make: Callable[[httpx.AsyncClient], Any], *, requests: int, concurrency: int
) -> dict[str, float]:
    """``requests`` calls, at most ``concurrency`` in flight; throughput and latency percentiles."""
    latencies: list[float] = []
    failures = 0
    queue: asyncio.Queue[int] = asyncio.Queue()
    for i in range(requests):
        queue.put_nowait(i)
    limits = httpx.Limits(max_connections=concurrency, max_keepalive_connections=concurrency)

    async def worker(client: httpx.AsyncClient) -> None:
        nonlocal failures
        while True:
            try:
                queue.get_nowait()
            except asyncio.QueueEmpty:
                return
            began = time.perf_counter()
            response = await make(client)
            latencies.append(time.perf_counter() - began)
            failures += response.status_code != 200

    async with httpx.AsyncClient(base_url=base, limits=limits, timeout=60) as client:
        await make(client)  # warm the connection and the route
        began = time.perf_counter()
        await asyncio.gather(*(worker(client) for _ in range(concurrency)))
        wall = time.perf_counter() - began
    ordered = sorted(latencies)
    return {
        "rps": requests / wall,
        "p50_ms": 1000 * statistics.median(ordered),
        "p99_ms": 1000 * ordered[min(len(ordered) - 1, int(0.99 * len(ordered)))],
        "failures": failures,
    }


async def run(args: argparse.Namespace, base: str, pid: int) -> None:
    load1, _, _ = os.getloadavg()
    forecast_body = {
        "windows": [{"start": "2026-03-10T09:00", "end": "2026-03-10T09:30"}],
        "tz": TZ,
        "quantiles": [0.5],
        "at_least": [10],
    }
    week = {"start": "2026-03-09", "end": "2026-03-16", "step": "1h", "tz": TZ}

    health = await load(
        base, lambda c: c.get("/v1/health/live"),
        requests=args.requests, concurrency=args.concurrency,
    )  # fmt: skip
    single = await load(
        base, lambda c: c.post("/v1/series/desk-a/forecast", json=forecast_body),
        requests=args.requests, concurrency=args.concurrency,
    )  # fmt: skip
    # One connection: latency without queueing behind other requests (the service time).
    single_seq = await load(
        base,
        lambda c: c.post("/v1/series/desk-a/forecast", json=forecast_body),
        requests=max(100, args.requests // 5),
        concurrency=1,
    )
    bands = await load(
        base, lambda c: c.get("/v1/series/desk-a/bands", params=week),
        requests=max(20, args.requests // 40), concurrency=4,
    )  # fmt: skip

    print(f"server pid {pid}, 1 uvicorn worker, {os.cpu_count()} CPUs (load average {load1:.1f} "
          f"before the run), client httpx (same machine), {args.concurrency} connections")  # fmt: skip
    print(f"{'call':<44}{'req/s':>9}{'p50 ms':>9}{'p99 ms':>9}{'errors':>8}")
    rows = [
        ("GET /v1/health/live (ceiling)", health),
        (f"POST forecast, 1 window, {args.draws} draws", single),
        ("  the same, 1 connection", single_seq),
        ("GET bands, 168 windows, 4 connections", bands),
    ]
    for label, r in rows:
        print(f"{label:<44}{r['rps']:>9.0f}{r['p50_ms']:>9.2f}{r['p99_ms']:>9.2f}"
              f"{r['failures']:>8.0f}")  # fmt: skip
    print(f"forecast / health throughput: {single['rps'] / health['rps']:.0%}")

    items = [
        {"series": f"s{i:04d}", "start": "2026-03-10", "end": "2026-03-11", "step": "1h", "tz": TZ}
        for i in range(args.batch_series)
    ]
    before = status_kb(pid, "VmHWM")
    rss_before = status_kb(pid, "VmRSS")
    records = ok = 0
    began = time.perf_counter()
    first_byte = None
    async with (
        httpx.AsyncClient(base_url=base, timeout=600) as client,
        client.stream("POST", "/v1/batch", json={"items": items}) as response,
    ):
        async for line in response.aiter_lines():
            if first_byte is None:
                first_byte = time.perf_counter() - began
            if line:
                records += 1
                ok += json.loads(line)["ok"]
    elapsed = time.perf_counter() - began
    after = status_kb(pid, "VmHWM")
    print(
        f"batch {args.batch_series} series x 24 windows ({args.batch_draws} draws each): "
        f"{elapsed:.2f} s ({records / elapsed:.0f} items/s, first record after "
        f"{1000 * (first_byte or 0):.0f} ms), {ok}/{records} ok; server RSS before "
        f"{rss_before / 1024:.0f} MiB, peak (VmHWM) before {before / 1024:.0f} MiB, "
        f"after {after / 1024:.0f} MiB (the growth is mostly the per-version caches the "
        "prediction code keeps once a series has been queried)"
    )


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--requests", type=int, default=2000)
    parser.add_argument("--concurrency", type=int, default=16)
    parser.add_argument("--draws", type=int, default=2000, help="draws of the main series")
    parser.add_argument("--batch-series", type=int, default=1000)
    parser.add_argument("--batch-draws", type=int, default=200)
    args = parser.parse_args()
    with tempfile.TemporaryDirectory(prefix="ratecast-bench-") as tmp:
        store = Path(tmp) / "store"
        began = time.perf_counter()
        build_store(
            store, draws=args.draws, batch_series=args.batch_series, batch_draws=args.batch_draws
        )
        print(f"store of {args.batch_series + 1} series written in "
              f"{time.perf_counter() - began:.1f} s")  # fmt: skip
        port = free_port()
        began = time.perf_counter()
        process = start_server(store, port, Path(tmp) / "server.log")
        print(f"server ready (all series loaded) in {time.perf_counter() - began:.1f} s")
        try:
            asyncio.run(run(args, f"http://127.0.0.1:{port}", process.pid))
        finally:
            process.terminate()
            try:
                process.wait(timeout=15)
            except subprocess.TimeoutExpired:
                process.kill()
                process.wait()


if __name__ == "__main__":
    main()

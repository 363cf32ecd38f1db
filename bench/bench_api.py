"""Benchmark of the HTTP API: a real ``ratecast serve`` on loopback, loaded by ``wrk``.

The load generator must be faster than the server, or it measures itself: ``wrk`` (C, the Debian
package ``wrk``) with 1 thread and 16 connections. Each round loads, one after the other and in
the same run, the trivial health route (the framework's ceiling on this machine *now*), a
single-window forecast (POST with a JSON body, through a small Lua script) and bands of 168 hourly
windows (GET), and prints requests per second, p50/p99 latency and the ratio to health. Rounds are
repeated because other work on the machine moves the figures; compare ratios within a round.
Without ``wrk`` the load comes from an asyncio client on raw sockets (one process, pipelined
keep-alive requests), whose own ceiling is printed beside it.

Then, with httpx (one request, so the client is no bottleneck): a streamed batch of many series x
24 windows (seconds, first record, the server's RSS), and optionally (``--rss-workers 2``) the
memory of each worker process of ``--workers 2`` on a store of ``--rss-series`` series.

The store is synthetic (negative-binomial posteriors from ``tests.conftest.synthetic_posterior``,
no PyMC). Figures only, no pass/fail.

Run: ``python bench/bench_api.py [--seconds 8 --rounds 2 --connections 16 --batch-series 1000]``.
"""

from __future__ import annotations

import argparse
import asyncio
import datetime as dt
import json
import os
import re
import shutil
import socket
import statistics
import subprocess
import sys
import tempfile
import time
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path
from typing import Any
from urllib.parse import urlencode

import httpx
import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from models.store import FileStore  # noqa: E402
from tests.conftest import synthetic_posterior  # noqa: E402

TZ = "America/Chicago"
FIRST_DAY = dt.date(2025, 3, 3)
MANIFEST: dict[str, Any] = {"diagnostics": {"ok": True}}
HEALTH = "/v1/health/live"
FORECAST = "/v1/series/desk-a/forecast"
FORECAST_BODY = {
    "windows": [{"start": "2026-03-10T09:00", "end": "2026-03-10T09:30"}],
    "tz": TZ,
    "quantiles": [0.5],
    "at_least": [10],
}
BANDS = "/v1/series/desk-a/bands?" + urlencode(
    {"start": "2026-03-09", "end": "2026-03-16", "step": "1h", "tz": TZ}
)


def weekly_table(scale: float) -> np.ndarray:
    hours = np.arange(24)
    day = 1.0 + 9.0 * np.exp(-0.5 * ((hours - 13) / 3.5) ** 2)
    return scale * np.array([1.0, 1.1, 1.05, 1.0, 1.3, 0.6, 0.5])[:, None] * day[None, :]


def build_store(root: Path, *, draws: int, series: int, series_draws: int) -> None:
    """``desk-a`` (a year of history, ``draws`` draws) and ``series`` smaller ones ``sNNNN``."""
    store = FileStore(root)
    store.publish(
        "desk-a",
        synthetic_posterior(
            weekly_table(1.0), tz=TZ, first_day=FIRST_DAY, n_days=365, draws=draws,
            latent_rho=0.8, latent_sd=0.2, dispersion=20.0,
        ),
        manifest=MANIFEST,
    )  # fmt: skip
    small = synthetic_posterior(
        weekly_table(0.5), tz=TZ, first_day=FIRST_DAY, n_days=56, draws=series_draws,
        latent_rho=0.8, latent_sd=0.2, dispersion=20.0,
    )  # fmt: skip
    for i in range(series):
        store.publish(f"s{i:04d}", small, manifest=MANIFEST)


def free_port() -> int:
    with socket.socket() as probe:
        probe.bind(("127.0.0.1", 0))
        return int(probe.getsockname()[1])


def status_kb(pid: int, field: str) -> int:
    """A ``kB`` field of ``/proc/<pid>/status`` (``VmRSS``, ``VmHWM``...)."""
    for line in Path(f"/proc/{pid}/status").read_text().splitlines():
        if line.startswith(field + ":"):
            return int(line.split()[1])
    return -1


def rollup_kb(pid: int) -> dict[str, int]:
    """``Rss``, ``Pss`` and the shared/private split of ``/proc/<pid>/smaps_rollup``, in kB."""
    out: dict[str, int] = {}
    for line in Path(f"/proc/{pid}/smaps_rollup").read_text().splitlines()[1:]:
        name, _, rest = line.partition(":")
        out[name] = int(rest.split()[0])
    return out


@contextmanager
def server(store: Path, log: Path, *, workers: int = 1) -> Iterator[tuple[str, int]]:
    """``ratecast serve`` on a free loopback port, ready; yields its base URL and pid."""
    port = free_port()
    env = {**os.environ, "RATECAST_WATCH_SECONDS": "0", "PYTHONPATH": str(ROOT)}
    for name in ("RATECAST_READ_TOKEN", "RATECAST_MAX_WINDOWS", "RATECAST_MAX_BATCH_ITEMS"):
        env.pop(name, None)
    with log.open("wb") as sink:
        process = subprocess.Popen(
            [sys.executable, "-m", "service.cli", "serve", "--host", "127.0.0.1", "--port",
             str(port), "--store", str(store), "--workers", str(workers), "--no-access-log",
             "--log-level", "warning"],
            stdout=sink, stderr=subprocess.STDOUT, env=env, cwd=ROOT,
        )  # fmt: skip
    base = f"http://127.0.0.1:{port}"
    try:
        deadline = time.monotonic() + 300
        while True:
            if process.poll() is not None:
                raise SystemExit(f"server exited:\n{log.read_text()}")
            if time.monotonic() > deadline:
                raise SystemExit("server not ready within 300 s")
            try:
                if httpx.get(base + "/v1/health/ready", timeout=2).status_code == 200:
                    break
            except httpx.TransportError:
                pass
            time.sleep(0.2)
        yield base, process.pid
    finally:
        process.terminate()
        try:
            process.wait(timeout=15)
        except subprocess.TimeoutExpired:
            process.kill()
            process.wait()


@dataclass(frozen=True)
class Load:
    """One load run's figures."""

    rps: float
    p50_ms: float
    p99_ms: float
    requests: int
    errors: int


_UNIT_MS = {"us": 1e-3, "ms": 1.0, "s": 1e3, "m": 6e4}


def _ms(text: str) -> float:
    number, unit = re.fullmatch(r"([0-9.]+)(us|ms|s|m)", text).groups()  # type: ignore[union-attr]
    return float(number) * _UNIT_MS[unit]


def wrk_load(
    base: str,
    path: str,
    *,
    seconds: float,
    connections: int,
    body: dict[str, Any] | None,
    tmp: Path,
) -> Load:
    """``wrk -t1 -c<connections> -d<seconds>s --latency`` on ``path`` (POST ``body`` if given)."""
    command = ["wrk", "-t1", f"-c{connections}", f"-d{seconds:g}s", "--latency", "--timeout", "10s"]
    if body is not None:
        script = tmp / "post.lua"
        payload = json.dumps(body).replace("\\", "\\\\").replace('"', '\\"')
        script.write_text(
            'wrk.method = "POST"\n'
            f'wrk.body = "{payload}"\n'
            'wrk.headers["Content-Type"] = "application/json"\n'
        )
        command += ["-s", str(script)]
    out = subprocess.run([*command, base + path], capture_output=True, text=True, check=True).stdout
    rps = float(re.search(r"Requests/sec:\s+([0-9.]+)", out).group(1))  # type: ignore[union-attr]
    p50 = _ms(re.search(r"\s50%\s+(\S+)", out).group(1))  # type: ignore[union-attr]
    p99 = _ms(re.search(r"\s99%\s+(\S+)", out).group(1))  # type: ignore[union-attr]
    requests = int(re.search(r"(\d+) requests in", out).group(1))  # type: ignore[union-attr]
    bad = re.search(r"Non-2xx or 3xx responses: (\d+)", out)
    errors = int(bad.group(1)) if bad else 0
    failed = re.search(r"Socket errors: connect (\d+), read (\d+), write (\d+), timeout (\d+)", out)
    if failed:
        errors += sum(int(g) for g in failed.groups())
    return Load(rps, p50, p99, requests, errors)


def _request_bytes(path: str, body: dict[str, Any] | None) -> bytes:
    if body is None:
        return f"GET {path} HTTP/1.1\r\nHost: 127.0.0.1\r\n\r\n".encode()
    data = json.dumps(body).encode()
    head = (
        f"POST {path} HTTP/1.1\r\nHost: 127.0.0.1\r\nContent-Type: application/json\r\n"
        f"Content-Length: {len(data)}\r\n\r\n"
    )
    return head.encode() + data


async def _connection(
    host: str,
    port: int,
    request: bytes,
    more: Callable[[], bool],
    latencies: list[float],
    errors: list[int],
) -> None:
    """One keep-alive connection sending ``request`` (one at a time) while ``more()`` says so."""
    reader, writer = await asyncio.open_connection(host, port)
    try:
        while more():
            began = time.perf_counter()
            writer.write(request)
            head = await reader.readuntil(b"\r\n\r\n")
            status = int(head[9:12])
            length = int(re.search(rb"(?i)content-length: *(\d+)", head).group(1))  # type: ignore[union-attr]
            await reader.readexactly(length)
            latencies.append(time.perf_counter() - began)
            if status != 200:
                errors.append(status)
    finally:
        writer.close()


def _summary(latencies: list[float], errors: list[int], wall: float) -> Load:
    ordered = sorted(latencies)
    return Load(
        len(ordered) / wall,
        1000 * statistics.median(ordered),
        1000 * ordered[min(len(ordered) - 1, int(0.99 * len(ordered)))],
        len(ordered),
        len(errors),
    )


def _socket_run(
    base: str,
    request: bytes,
    connections: int,
    more: Callable[[], bool],
    latencies: list[float],
    errors: list[int],
) -> float:
    """Run ``connections`` connections to ``base`` until ``more()`` is false; the wall seconds."""
    host, port = base.removeprefix("http://").split(":")

    async def run() -> float:
        began = time.perf_counter()
        await asyncio.gather(
            *(_connection(host, int(port), request, more, latencies, errors)
              for _ in range(connections))
        )  # fmt: skip
        return time.perf_counter() - began

    return asyncio.run(run())


def socket_load(
    base: str, path: str, *, seconds: float, connections: int, body: dict[str, Any] | None
) -> Load:
    """The same load as :func:`wrk_load` from asyncio raw sockets (used when wrk is missing)."""
    latencies: list[float] = []
    errors: list[int] = []
    stop = time.perf_counter() + seconds
    wall = _socket_run(
        base, _request_bytes(path, body), connections, lambda: time.perf_counter() < stop,
        latencies, errors,
    )  # fmt: skip
    return _summary(latencies, errors, wall)


def count_load(
    base: str, path: str, *, count: int, connections: int, body: dict[str, Any] | None
) -> Load:
    """Exactly ``count`` requests over ``connections`` keep-alive connections (asyncio raw
    sockets), each one's latency recorded: a fixed amount of work, whatever the speed."""
    latencies: list[float] = []
    errors: list[int] = []
    left = [count]

    def more() -> bool:  # one ticket per request; the connections share them
        left[0] -= 1
        return left[0] >= 0

    wall = _socket_run(base, _request_bytes(path, body), connections, more, latencies, errors)
    return _summary(latencies, errors, wall)


def loopback_ceiling(seconds: float, connections: int) -> float:
    """Requests per second the asyncio client reaches against a minimal asyncio HTTP answerer
    in a child process: the client's own ceiling (printed beside its figures)."""
    port = free_port()
    code = (
        "import asyncio\n"
        'R=b\'HTTP/1.1 200 OK\\r\\ncontent-length: 17\\r\\n\\r\\n{"status":"alive"}\'\n'
        "async def h(r,w):\n"
        "  try:\n"
        "    while True:\n"
        "      await r.readuntil(b'\\r\\n\\r\\n'); w.write(R)\n"
        "  except Exception: w.close()\n"
        "async def m():\n"
        f"  s=await asyncio.start_server(h,'127.0.0.1',{port})\n"
        "  await s.serve_forever()\n"
        "asyncio.run(m())\n"
    )
    child = subprocess.Popen([sys.executable, "-c", code])
    try:
        time.sleep(1.0)
        return socket_load(
            f"http://127.0.0.1:{port}", "/", seconds=seconds, connections=connections, body=None
        ).rps
    finally:
        child.terminate()
        child.wait()


def load_rounds(base: str, args: argparse.Namespace, tmp: Path) -> None:
    tool = "wrk" if shutil.which("wrk") else "asyncio raw sockets"
    load1, _, _ = os.getloadavg()
    print(
        f"load generator: {tool}, 1 thread, {args.connections} connections, {args.seconds:g} s "
        f"per route; {os.cpu_count()} CPUs, load average {load1:.1f} before the run"
    )
    if tool != "wrk":
        ceiling = loopback_ceiling(args.seconds, args.connections)
        print(f"  the client's own ceiling (a minimal asyncio answerer): {ceiling:.0f} req/s")
    routes = [
        ("GET health/live", HEALTH, None),
        ("POST forecast, 1 window", FORECAST, FORECAST_BODY),
        ("GET bands, 168 hourly windows", BANDS, None),
    ]
    print(f"{'round':<6}{'call':<32}{'req/s':>9}{'x health':>10}{'p50 ms':>9}{'p99 ms':>9}"
          f"{'errors':>8}")  # fmt: skip
    for round_ in range(1, args.rounds + 1):
        health = None
        for label, path, body in routes:
            if tool == "wrk":
                r = wrk_load(
                    base, path, seconds=args.seconds, connections=args.connections, body=body,
                    tmp=tmp,
                )  # fmt: skip
            else:
                r = socket_load(
                    base, path, seconds=args.seconds, connections=args.connections, body=body
                )
            health = health or r.rps
            print(f"{round_:<6}{label:<32}{r.rps:>9.0f}{r.rps / health:>10.2f}{r.p50_ms:>9.2f}"
                  f"{r.p99_ms:>9.2f}{r.errors:>8}", flush=True)  # fmt: skip


def batch(base: str, pid: int, args: argparse.Namespace) -> None:
    items = [
        {"series": f"s{i:04d}", "start": "2026-03-10", "end": "2026-03-11", "step": "1h", "tz": TZ}
        for i in range(args.batch_series)
    ]
    rss_before = status_kb(pid, "VmRSS")
    records = ok = 0
    first = None
    began = time.perf_counter()
    with (
        httpx.Client(base_url=base, timeout=600) as client,
        client.stream("POST", "/v1/batch", json={"items": items}) as response,
    ):
        for line in response.iter_lines():
            if line:
                if first is None:
                    first = time.perf_counter() - began
                records += 1
                ok += json.loads(line)["ok"]
    elapsed = time.perf_counter() - began
    print(
        f"batch {args.batch_series} series x 24 hourly windows ({args.series_draws} draws each, "
        f"httpx, one streamed request): {elapsed:.2f} s ({records / elapsed:.0f} items/s), first "
        f"record after {1000 * (first or 0):.0f} ms, {ok}/{records} ok; server RSS "
        f"{rss_before / 1024:.0f} MiB before, {status_kb(pid, 'VmRSS') / 1024:.0f} MiB after, "
        f"peak {status_kb(pid, 'VmHWM') / 1024:.0f} MiB"
    )


def _workers(pid: int) -> list[int]:
    """The worker processes of the uvicorn supervisor ``pid`` (not multiprocessing's helpers)."""
    children = [int(p) for p in Path(f"/proc/{pid}/task/{pid}/children").read_text().split()]
    return [c for c in children if b"spawn_main" in Path(f"/proc/{c}/cmdline").read_bytes()]


def _memory_lines(workers: list[int]) -> list[str]:
    lines = []
    for child in workers:
        roll = rollup_kb(child)
        shared = roll.get("Shared_Clean", 0) + roll.get("Shared_Dirty", 0)
        private = roll.get("Private_Clean", 0) + roll.get("Private_Dirty", 0)
        lines.append(
            f"    worker pid {child}: RSS {roll['Rss'] / 1024:.0f} MiB (shared {shared / 1024:.0f},"
            f" private {private / 1024:.0f}), PSS {roll['Pss'] / 1024:.0f} MiB"
        )
    return lines


def worker_memory(args: argparse.Namespace, tmp: Path) -> None:
    """RSS and PSS of each worker of ``--workers N`` on a store of ``--rss-series`` series,
    once loaded and again after every series was queried through each worker."""
    store = tmp / "store-rss"
    build_store(store, draws=args.draws, series=args.rss_series - 1, series_draws=args.draws)
    draws_mb = sum(f.stat().st_size for f in store.rglob("draws.npz")) / 2**20
    print(
        f"--workers {args.rss_workers} on {args.rss_series} series x {args.draws} draws (desk-a "
        f"365 history days, the others 56; draws files {draws_mb:.0f} MiB on disk in all):"
    )
    with server(store, tmp / "server-rss.log", workers=args.rss_workers) as (base, pid):
        time.sleep(2.0)  # every worker loads the store before it answers; let the last finish
        print("  loaded, before any forecast:")
        print("\n".join(_memory_lines(_workers(pid))))
        names = [s["series"] for s in httpx.get(base + "/v1/series", timeout=60).json()["series"]]
        for _ in range(2 * args.rss_workers):
            # A new connection each round, so the kernel spreads the rounds over the workers.
            with httpx.Client(base_url=base, timeout=60) as client:
                for name in names:
                    client.post(f"/v1/series/{name}/forecast", json=FORECAST_BODY)
        print(f"  after {2 * args.rss_workers} rounds of one forecast per series:")
        print("\n".join(_memory_lines(_workers(pid))))


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seconds", type=float, default=8.0, help="seconds of load per route")
    parser.add_argument("--rounds", type=int, default=2, help="times the three routes are loaded")
    parser.add_argument("--connections", type=int, default=16)
    parser.add_argument("--draws", type=int, default=2000, help="draws of the main series")
    parser.add_argument("--batch-series", type=int, default=1000)
    parser.add_argument("--series-draws", type=int, default=200, help="draws of the batch series")
    parser.add_argument("--rss-workers", type=int, default=2, help="0: skip the memory run")
    parser.add_argument("--rss-series", type=int, default=100)
    args = parser.parse_args()
    with tempfile.TemporaryDirectory(prefix="ratecast-bench-") as folder:
        tmp = Path(folder)
        began = time.perf_counter()
        build_store(
            tmp / "store", draws=args.draws, series=args.batch_series,
            series_draws=args.series_draws,
        )  # fmt: skip
        print(f"store of {args.batch_series + 1} series written in "
              f"{time.perf_counter() - began:.1f} s")  # fmt: skip
        began = time.perf_counter()
        with server(tmp / "store", tmp / "server.log") as (base, pid):
            print(
                f"ratecast serve --workers 1 (pid {pid}) ready, all series loaded, in "
                f"{time.perf_counter() - began:.1f} s; desk-a: negative binomial, {args.draws} "
                "draws, 365 history days"
            )
            load_rounds(base, args, tmp)
            batch(base, pid, args)
        if args.rss_workers:
            worker_memory(args, tmp)


if __name__ == "__main__":
    main()

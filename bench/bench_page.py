"""Benchmark of the capacity page: first render of a week at 30-minute windows, server warm.

Starts a real ``ratecast serve`` (one worker, loopback) on a synthetic store and drives headless
Chromium (Debian's /usr/bin/chromium through Playwright). Each run opens the page's link for a
week at 30 minutes in a fresh tab and reads the page's own performance marks: ``ratecast:drawn``
(catalogue and bands fetched, chart and table drawn) and ``ratecast:staffed`` (staffing panel
filled too), both in ms since the navigation began; plus the bands call's own time from the
browser's resource timing. Figures only, no pass/fail. The target is a first render <= 1 s.

Run: ``python bench/bench_page.py [--runs 15 --draws 2000 --days 365] [--screenshot docs/page.png]``.
"""

from __future__ import annotations

import argparse
import datetime as dt
import socket
import statistics
import sys
import tempfile
from pathlib import Path
from typing import Any

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from playwright.sync_api import sync_playwright  # noqa: E402

from bench.bench_api import start_server, weekly_table  # noqa: E402
from models.ratemodel.binning import OpeningHours  # noqa: E402
from models.store import FileStore  # noqa: E402
from tests.conftest import synthetic_posterior  # noqa: E402

TZ = "America/Chicago"
CHROMIUM = "/usr/bin/chromium"


def build_store(root: Path, *, draws: int, days: int) -> dt.date:
    """One desk open every hour (the heavier case: no window is skipped as closed), one with
    opening hours; both with daily deviations of the latent path. Returns the history end."""
    first = dt.date(2025, 3, 3)
    store = FileStore(root)
    for name, opening in (("desk-a", None), ("desk-hours", "Mon-Fri 07:00-19:00; Sat 09:00-13:00")):
        posterior = synthetic_posterior(
            weekly_table(1.0), tz=TZ, first_day=first, n_days=days, draws=draws,
            latent_rho=0.8 if opening is None else 0.0, latent_sd=0.2 if opening is None else 0.0,
            opening=OpeningHours.parse(opening) if opening else None,
        )  # fmt: skip
        store.publish(name, posterior, manifest={"diagnostics": {"ok": True}})
    return first + dt.timedelta(days=days)


def free_port() -> int:
    with socket.socket() as probe:
        probe.bind(("127.0.0.1", 0))
        return int(probe.getsockname()[1])


def one_render(context: Any, url: str) -> dict[str, float]:
    tab = context.new_page()
    tab.goto(url)
    tab.wait_for_function("() => document.body.dataset.staffed === '1'", timeout=60_000)
    marks = tab.evaluate(
        """() => ({
          drawn: performance.getEntriesByName('ratecast:drawn:1')[0].startTime,
          staffed: performance.getEntriesByName('ratecast:staffed:1')[0].startTime,
          bands: performance.getEntriesByType('resource').filter((r) => r.name.includes('/bands?'))
                   .map((r) => r.responseEnd - r.startTime)[0],
          bandsAsked: performance.getEntriesByType('resource').filter((r) => r.name.includes('/bands?'))
                   .map((r) => r.startTime)[0],
          windows: document.querySelectorAll('#chart g.win').length,
        })"""
    )
    tab.close()
    return marks


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--runs", type=int, default=15)
    parser.add_argument("--draws", type=int, default=2000)
    parser.add_argument("--days", type=int, default=365)
    parser.add_argument("--screenshot", type=Path, default=None, help="save a 1280x800 picture")
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        store = Path(tmp) / "store"
        end = build_store(store, draws=args.draws, days=args.days)
        port = free_port()
        server = start_server(store, port, Path(tmp) / "server.log")
        try:
            last = end + dt.timedelta(days=6)
            with sync_playwright() as p:
                browser = p.chromium.launch(executable_path=CHROMIUM, headless=True)
                context = browser.new_context(viewport={"width": 1280, "height": 800})
                print(f"store: {args.draws} draws, {args.days} days of history; week {end}..{last}")
                for series in ("desk-a", "desk-hours"):
                    url = (f"http://127.0.0.1:{port}/page?series={series}&from={end}&to={last}"
                           "&step=30min&levels=0.8,0.95&k=10")  # fmt: skip
                    for _ in range(3):  # warm the server's caches and the browser's
                        one_render(context, url)
                    runs = [one_render(context, url) for _ in range(args.runs)]
                    drawn = sorted(r["drawn"] for r in runs)
                    staffed = sorted(r["staffed"] for r in runs)
                    bands = sorted(r["bands"] for r in runs)
                    asked = statistics.median(r["bandsAsked"] for r in runs)
                    print(
                        f"{series}: {runs[0]['windows']} windows; first render (chart + table) "
                        f"median {statistics.median(drawn):.0f} ms, max {drawn[-1]:.0f} ms; "
                        f"bands call asked at {asked:.0f} ms, took median {statistics.median(bands):.0f} ms; "
                        f"with staffing "
                        f"median {statistics.median(staffed):.0f} ms, max {staffed[-1]:.0f} ms "
                        f"({args.runs} runs)"
                    )
                if args.screenshot:
                    tab = context.new_page()
                    tab.goto(url)
                    tab.wait_for_function("() => document.body.dataset.staffed === '1'")
                    tab.screenshot(path=str(args.screenshot))
                browser.close()
        finally:
            server.terminate()
            server.wait(timeout=15)


if __name__ == "__main__":
    main()

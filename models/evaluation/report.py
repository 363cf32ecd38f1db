"""Write a backtest's metrics as JSON and a Markdown report with PNG plots.

Plots (matplotlib, Agg backend, imported only here): forecast bands over the actual counts for
the last origin, the non-randomised PIT histogram of every forecaster, empirical against nominal
interval coverage, and mean CRPS by local hour of day (by day of week for daily bins).
"""

from __future__ import annotations

import json
import os
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from models.evaluation.backtest import band_labels, summarise_records, window_table
from models.exceptions import InputError

__all__ = ["CAUTION", "REFERENCE", "skill", "write_report"]

#: The baseline skill is measured against (the planner's usual average of past same weekdays).
REFERENCE = "weekday_mean_poisson"
CAUTION = (
    "Forecasts are probabilistic: a backtest shows how often the truth fell inside the intervals "
    "in the past, not a guarantee for the future. Staffing figures built on them are advisory; "
    "local labour rules and the responsible people decide."
)
_LABELS = {
    "model": "model",
    "seasonal_naive": "seasonal naive",
    "weekday_mean_poisson": "weekday mean (Poisson)",
    "weekday_mean_negbin": "weekday mean (NB)",
    "glm_poisson": "Poisson GLM plug-in",
}
_DAYS = ("Mon", "Tue", "Wed", "Thu", "Fri", "Sat", "Sun")


def skill(metrics: dict[str, Any], name: str, *, score: str) -> float:
    """Relative improvement of ``name`` over :data:`REFERENCE`: ``1 - score / reference score``.

    Examples
    --------
    >>> skill({"model": {"crps": 8.0}, REFERENCE: {"crps": 10.0}}, "model", score="crps")
    0.2
    """
    reference = float(metrics[REFERENCE][score])
    if reference == 0:
        return float("nan")
    return round(1.0 - float(metrics[name][score]) / reference, 12)


def write_report(
    records: Sequence[dict[str, Any]],
    out_dir: str | os.PathLike[str],
    *,
    lead_bands: Sequence[int],
    levels: Sequence[float],
    title: str,
    tz: str,
    bin_minutes: int,
    notes: Sequence[str] = (),
) -> dict[str, Any]:
    """Write ``metrics.json``, ``report.md`` and the PNG plots into ``out_dir``.

    Returns
    -------
    dict
        The metrics written to ``metrics.json`` (see :func:`models.evaluation.backtest.summarise_records`),
        plus ``origins`` and ``gate_failures`` (fits that failed the diagnostics gate).
    """
    scored = [r for r in records if r.get("forecasts")]
    if not scored:
        raise InputError("no origin has any scored window; nothing to report")
    folder = Path(out_dir)
    folder.mkdir(parents=True, exist_ok=True)
    metrics = summarise_records(records, lead_bands=lead_bands, levels=levels)
    fits = {r["fitted_at"]: r["diagnostics"] for r in records}
    metrics["origins"] = len(records)
    metrics["fits"] = len(fits)
    metrics["gate_failures"] = sum(1 for d in fits.values() if d and not d.get("ok", True))
    metrics["excluded"] = {
        key: int(sum(r["excluded"][key] for r in records))
        for key in ("partly_observed", "no_baseline")
    }
    (folder / "metrics.json").write_text(json.dumps(metrics, indent=2))
    plots = _plots(scored, folder, levels=levels, tz=tz, bin_minutes=bin_minutes)
    (folder / "report.md").write_text(
        _markdown(
            metrics, title=title, levels=levels, lead_bands=lead_bands, plots=plots, notes=notes
        )
    )
    return metrics


# --------------------------------------------------------------------------- Markdown


def metrics_table(metrics: dict[str, Any], *, levels: Sequence[float]) -> list[str]:
    """Markdown table rows of one band's metrics (one row per forecaster)."""
    keys = [format(level, "g") for level in levels]
    header = (
        "| forecaster | windows | CRPS | RMSE | MAE | CRPS skill | RMSE skill | "
        + " | ".join(f"cover {float(k) * 100:g}%" for k in keys)
        + " | width 80% | IS 80% | PIT tails |"
    )
    rows = [header, "|" + "---|" * (header.count("|") - 1)]
    for name, m in metrics.items():
        cover = " | ".join(f"{m['coverage'][k]:.3f}" for k in keys)
        tails = m["pit"][0] + m["pit"][-1]
        rows.append(
            f"| {_LABELS.get(name, name)} | {m['windows']} | {m['crps']:.3f} | {m['rmse']:.2f} | "
            f"{m['mae']:.2f} | {skill(metrics, name, score='crps'):+.1%} | "
            f"{skill(metrics, name, score='rmse'):+.1%} | {cover} | "
            f"{m['width'].get('0.8', float('nan')):.1f} | "
            f"{m['interval_score'].get('0.8', float('nan')):.2f} | {tails:.3f} |"
        )
    return rows


def _markdown(
    metrics: dict[str, Any],
    *,
    title: str,
    levels: Sequence[float],
    lead_bands: Sequence[int],
    plots: dict[str, str],
    notes: Sequence[str],
) -> str:
    lines = [f"# {title}", ""]
    lines += [
        f"{metrics['origins']} origins, {metrics['fits']} fits "
        f"({metrics['gate_failures']} failed the diagnostics gate and were scored anyway); "
        f"windows left out: {metrics['excluded']['partly_observed']} partly observed, "
        f"{metrics['excluded']['no_baseline']} without baseline history.",
        "",
        "CRPS is the exact mean continuous ranked probability score (counts; lower is better). "
        "RMSE and MAE are of the predictive mean. Skill is the improvement over the weekday mean "
        "with Poisson intervals. IS 80% is the mean interval score of the 80% interval. "
        "PIT tails is the PIT mass in the outer two of ten bins (0.2 when calibrated; more "
        "means intervals too narrow, less too wide).",
        "",
    ]
    lines += [f"- {note}" for note in notes]
    if notes:
        lines.append("")
    for label in band_labels(lead_bands):
        if label in metrics["bands"]:
            lines += [
                f"## Lead {label}",
                "",
                *metrics_table(metrics["bands"][label], levels=levels),
                "",
            ]
    lines += ["## All leads", "", *metrics_table(metrics["overall"], levels=levels), ""]
    for caption, name in plots.items():
        lines += [f"![{caption}]({name})", ""]
    lines += [f"*{CAUTION}*", ""]
    return "\n".join(lines)


# --------------------------------------------------------------------------- plots


def _plots(
    records: Sequence[dict[str, Any]],
    folder: Path,
    *,
    levels: Sequence[float],
    tz: str,
    bin_minutes: int,
) -> dict[str, str]:
    try:
        import matplotlib

        matplotlib.use("Agg")
        import matplotlib.pyplot as plt
    except ImportError as exc:  # matplotlib is an optional (dev) dependency
        raise InputError("plots need matplotlib: pip install matplotlib") from exc
    table = window_table(records)
    names = table["names"]
    out: dict[str, str] = {}

    last = records[-1]
    model = last["forecasts"]["model"]
    times = pd.DatetimeIndex(pd.to_datetime(last["start"], utc=True)).tz_convert(tz)
    # Steps drawn "post" need the end of the last bin, or the last bin has no width.
    edges = times.append(pd.DatetimeIndex([times[-1] + pd.Timedelta(minutes=bin_minutes)]))

    def stepped(values: Sequence[float]) -> list[float]:
        return [*values, values[-1]]

    fig, ax = plt.subplots(figsize=(11, 4))
    for level in sorted(levels, reverse=True):
        key = format(level, "g")
        ax.fill_between(
            edges,
            stepped(model["lower"][key]),
            stepped(model["upper"][key]),
            step="post",
            alpha=0.25,
            color="tab:blue",
            linewidth=0,
            label=f"{level:.0%} interval",
        )
    ax.step(edges, stepped(model["mean"]), where="post", color="tab:blue", label="model mean")
    centres = times + pd.Timedelta(minutes=bin_minutes / 2)
    ax.plot(centres, last["y"], "k.", markersize=3, label="actual")
    ax.set_title(f"Forecast from origin {last['origin']} (fitted up to {last['fitted_at']})")
    ax.set_ylabel("count per bin")
    ax.legend(loc="upper right", fontsize=8)
    fig.autofmt_xdate()
    out["Forecast bands over actual counts"] = _save(fig, folder / "bands.png")

    fig, axes = plt.subplots(1, len(names), figsize=(3 * len(names), 2.8), sharey=True)
    from models.evaluation.scoring import pit_histogram

    for ax, name in zip(np.atleast_1d(axes), names, strict=True):
        hist = pit_histogram(table[name]["pit_lower"], table[name]["pit_upper"], bins=10)
        ax.bar(np.arange(10) / 10 + 0.05, hist * 10, width=0.1, color="tab:gray")
        ax.axhline(1.0, color="k", linewidth=0.8)
        ax.set_title(_LABELS.get(name, name), fontsize=9)
        ax.set_xlabel("PIT")
    np.atleast_1d(axes)[0].set_ylabel("density")
    out["Non-randomised PIT histograms"] = _save(fig, folder / "pit.png")

    fig, ax = plt.subplots(figsize=(4.5, 4.5))
    y = table["y"]
    keys = [format(level, "g") for level in levels]
    for name in names:
        cover = [
            np.mean((table[name]["lower"][k] <= y) & (y <= table[name]["upper"][k])) for k in keys
        ]
        ax.plot(list(levels), cover, "o-", label=_LABELS.get(name, name))
    ax.plot([0, 1], [0, 1], "k--", linewidth=0.8)
    ax.set_xlabel("nominal level")
    ax.set_ylabel("empirical coverage")
    ax.set_xlim(min(levels) - 0.1, 1.0)
    ax.set_ylim(0.0, 1.0)
    ax.legend(fontsize=7)
    out["Interval coverage by level"] = _save(fig, folder / "coverage.png")

    daily = bin_minutes >= 1440
    group = table["dow"] if daily else table["hour"]
    ticks = np.arange(7) if daily else np.arange(24)
    fig, ax = plt.subplots(figsize=(8, 3.5))
    for name in names:
        crps = table[name]["crps"]
        means = [crps[group == g].mean() if (group == g).any() else np.nan for g in ticks]
        ax.plot(ticks, means, "o-", markersize=3, label=_LABELS.get(name, name))
    if daily:
        ax.set_xticks(ticks, list(_DAYS))
    ax.set_xlabel("day of week" if daily else "local hour of day")
    ax.set_ylabel("mean CRPS")
    ax.legend(fontsize=7)
    caption = "Error by day of week" if daily else "Error by hour of day"
    out[caption] = _save(fig, folder / "error_by_time.png")
    return out


def _save(fig: Any, path: Path) -> str:
    fig.tight_layout()
    fig.savefig(path, dpi=110)
    import matplotlib.pyplot as plt

    plt.close(fig)
    return path.name

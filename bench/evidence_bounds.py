"""How much better than the weekday mean could any forecaster be? Reference points, no fitting.

For the windows ``bench/evidence.py`` scores (same series, origins and horizons), RMSE of:

* the weekday mean (the last four same weekdays and times): the skill reference;
* **Poisson floor**: ``sqrt(mean count)``. When the counts are Poisson given a rate (a Cox process)
  no forecast made from earlier information has a smaller mean squared error: for any forecast
  ``f`` built from information ``F``, ``E[(Y - f)^2] >= E[Var(Y | F)] >= E[E(Lambda | F)] = E[Y]``
  (the law of total variance; common practice, no source). A hard bound;
* **day total known**: the weekday mean rescaled so each forecast day's total is exactly right.
  Hindsight, not a bound: it shows how much of the error is the day's level (which a latent daily
  term can only partly foresee) rather than its shape;
* **centred 8-week mean**: the mean of the same weekday and time over the four weeks before *and*
  the four weeks after. Hindsight too: a profile free of drift, with twice the weeks.

Beside them, the lag-1 autocorrelation of the day-level surprise (log of a day's count over its
weekday-mean forecast, on consecutive scored days): how much of today's level a forecaster could
carry over from yesterday.

Run: ``.venv/bin/python bench/evidence_bounds.py`` (a minute); ``bench/evidence.py`` includes the
same table in docs/evidence.md.
"""

from __future__ import annotations

import datetime as dt
import sys
from pathlib import Path

import numpy as np
import pandas as pd

sys.path.insert(0, str(Path(__file__).resolve().parent))
sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from models.evaluation.backtest import slice_series
from models.evaluation.baselines import same_slot_history, weekday_mean
from models.ratemodel.binning import BinnedSeries

__all__ = ["bounds_rows", "bounds_table"]


def _scored(binned: BinnedSeries, origin: dt.date, horizon: int) -> np.ndarray:
    local = binned.start.tz_convert(binned.tz)
    days = np.asarray(local.date)
    end = origin + dt.timedelta(days=horizon)
    return (days >= origin) & (days < end) & (binned.exposure >= 1.0)


def _future(binned: BinnedSeries, starts: pd.DatetimeIndex, weeks: int) -> np.ndarray:
    """``(weeks, window)`` counts of the same wall-clock slot 1..weeks weeks *after* each start."""
    local = binned.start.tz_convert(binned.tz).tz_localize(None)
    table = pd.Series(
        np.where(binned.exposure >= 1.0, binned.count.astype(float), np.nan), index=local
    )
    table = table[~table.index.duplicated()]
    wall = starts.tz_convert(binned.tz).tz_localize(None)
    out = np.full((weeks, len(starts)), np.nan)
    for k in range(1, weeks + 1):
        out[k - 1] = table.reindex(wall + pd.Timedelta(days=7 * k)).to_numpy()
    return out


def bounds_rows(
    binned: BinnedSeries, origins: tuple[dt.date, ...], *, horizon: int, history_days: int
) -> dict[str, float]:
    """RMSE of the weekday mean, the Poisson floor and the two hindsight references."""
    y_all, wm_all, day_all, centred_all = [], [], [], []
    surprise: dict[dt.date, float] = {}
    for origin in origins:
        mask = _scored(binned, origin, horizon)
        if not mask.any():
            continue
        history = slice_series(binned, start=origin - dt.timedelta(days=history_days), end=origin)
        starts = binned.start[mask]
        y = binned.count[mask].astype(float)
        wm = weekday_mean(history, starts, weeks=4).mean()
        past = same_slot_history(history, starts, weeks=4)
        centred = np.nanmean(np.vstack([past, _future(binned, starts, 4)]), axis=0)
        ok = np.isfinite(wm) & np.isfinite(centred)
        starts, y, wm, centred = starts[ok], y[ok], wm[ok], centred[ok]
        day = np.asarray(starts.tz_convert(binned.tz).date)
        scaled = wm.copy()
        for d in np.unique(day):
            on = day == d
            if wm[on].sum() > 0:
                scaled[on] = wm[on] * y[on].sum() / wm[on].sum()
                if y[on].sum() > 0:
                    surprise[d] = float(np.log(y[on].sum() / wm[on].sum()))
        y_all.append(y)
        wm_all.append(wm)
        day_all.append(scaled)
        centred_all.append(centred)
    y = np.concatenate(y_all)

    def rmse(pred: list[np.ndarray]) -> float:
        return float(np.sqrt(np.mean((np.concatenate(pred) - y) ** 2)))

    after = dt.timedelta(days=1)
    pairs = [(v, surprise[d + after]) for d, v in surprise.items() if d + after in surprise]
    lag1 = float(np.corrcoef(np.array(pairs).T)[0, 1]) if len(pairs) > 2 else float("nan")
    return {
        "lag1": lag1,
        "weekday_mean": rmse(wm_all),
        "poisson_floor": float(np.sqrt(y.mean())),
        "day_total_known": rmse(day_all),
        "centred_mean": rmse(centred_all),
    }


def bounds_table(datasets: dict, modes: tuple[str, ...]) -> list[str]:
    """Markdown rows: per series and mode, each reference's RMSE and its skill over the mean."""
    lines = [
        "| series | mode | weekday mean RMSE | Poisson floor (bound) | day total known "
        "(hindsight) | centred 8-week mean (hindsight) | day-level surprise, lag-1 "
        "autocorrelation |",
        "|---|---|---|---|---|---|---|",
    ]
    for name, dataset in datasets.items():
        binned = dataset.load()
        for mode in modes:
            config = dataset.config(mode)
            r = bounds_rows(
                binned,
                config.origins,
                horizon=config.horizon_days,
                history_days=config.history_days,
            )
            base = r["weekday_mean"]
            cells = [
                "- (daily bins)"
                if k == "day_total_known" and binned.bin_minutes == 1440
                else f"{r[k]:.1f} ({1 - r[k] / base:+.0%})"
                for k in ("poisson_floor", "day_total_known", "centred_mean")
            ]
            lines.append(
                f"| {name} | {mode} | {base:.1f} | "
                + " | ".join(cells)
                + (
                    f" | {r['lag1']:.2f} |"
                    if np.isfinite(r["lag1"])
                    else " | - (no consecutive days) |"
                )
            )
    return lines


if __name__ == "__main__":
    from evidence import DATASETS, MODES

    print("\n".join(bounds_table(DATASETS, MODES)))

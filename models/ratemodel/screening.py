"""Find the unusual days of a history: days whose level no term of the model explains.

A commuter station's history holds days its holiday calendar does not name: a storm, an outage,
the days between Christmas and New Year, an event downtown. Left in, each one is a large surprise
for the daily latent deviation, whose spread then grows until every forecast interval is wide
enough to hold them (measured on daily train entries: 80% intervals about 13,000 wide on a
usual weekday of 21,000, docs/evidence.md). Left out, they are missing days: the latent of such a
day is free and its arrivals say nothing about the weekly profile, the trend or the spread of
ordinary days.

The rule, numpy only and the same for every series:

* a day's level is its arrivals per observed hour (``count / exposure``), on days observed for at
  least :data:`MIN_EXPOSURE_SHARE` of the usual open time of their weekday;
* its residual is the log of that level over the median level of the same weekday within
  :data:`WINDOW_WEEKS` weeks either side (a centred median, so a step change in level is followed,
  not flagged), with half an arrival added so an empty day has a finite log;
* a day is unusual when its residual is more than :data:`ROBUST_Z` robust standard deviations
  (1.4826 x the median absolute deviation of all residuals) from their median, and also more than
  :data:`MIN_LOG_RATIO` from zero (about 15%), so a very regular series does not lose its ordinary
  small wobbles;
* holidays of the model's calendar are never unusual (the model has a term for them), and neither
  are the last :data:`PROTECTED_DAYS` days of history, which carry the most information about the
  level a forecast starts from: a change there is news, not an outlier.

Robust z-scores from the median absolute deviation: Hampel, "The influence curve and its role in
robust estimation", JASA 69 (1974); Iglewicz & Hoaglin, "How to Detect and Handle Outliers" (ASQC,
1993), whose modified z-score uses 3.5 as its cut on single values. The cut here (5) is higher
because every series is screened without a person looking at the days, and the 1.4826 factor
makes the MAD consistent for the standard deviation of a normal sample (common practice).
"""

from __future__ import annotations

import dataclasses
import datetime as dt

import numpy as np

from models.ratemodel.binning import BinnedSeries, local_features
from models.ratemodel.spec import HolidayCalendar

__all__ = [
    "MIN_EXPOSURE_SHARE",
    "MIN_LOG_RATIO",
    "PROTECTED_DAYS",
    "ROBUST_Z",
    "WINDOW_WEEKS",
    "find_unusual_days",
    "leave_out_days",
]

ROBUST_Z = 5.0
MIN_LOG_RATIO = 0.15
PROTECTED_DAYS = 14
WINDOW_WEEKS = 4
MIN_EXPOSURE_SHARE = 0.8
#: Same weekdays (the day itself included) a window needs before its median is trusted.
MIN_NEIGHBOURS = 5
MAD_TO_SD = 1.4826


def find_unusual_days(
    binned: BinnedSeries,
    *,
    holidays: HolidayCalendar | None = None,
    robust_z: float = ROBUST_Z,
    min_log_ratio: float = MIN_LOG_RATIO,
    protected_days: int = PROTECTED_DAYS,
) -> tuple[dt.date, ...]:
    """The local dates of ``binned`` whose level is unusual for their weekday (rule above).

    Parameters
    ----------
    binned
        Observed bins of one series.
    holidays
        The model's holiday calendar: its days are never unusual.
    robust_z, min_log_ratio, protected_days
        The cuts of the rule; the module's constants by default.

    Returns
    -------
    tuple of datetime.date
        Ascending; empty when the history is too short to judge (fewer than
        ``MIN_NEIGHBOURS`` observed weeks) or nothing stands out.

    Examples
    --------
    >>> import pandas as pd
    >>> days = pd.date_range("2026-01-05", periods=70, freq="D", tz="UTC")
    >>> counts = np.full(70, 100)
    >>> counts[20] = 10                       # one day with a tenth of the usual arrivals
    >>> series = BinnedSeries(days, counts, np.ones(70), "UTC", 1440,
    ...                       days[0].date(), days[-1].date() + dt.timedelta(days=1))
    >>> find_unusual_days(series)
    (datetime.date(2026, 1, 25),)
    """
    n_days = (binned.end_day - binned.first_day).days
    if n_days < 7 * MIN_NEIGHBOURS or len(binned.count) == 0:
        return ()
    _, _, date, _ = local_features(binned.start, tz=binned.tz, bin_minutes=binned.bin_minutes)
    index = (date - np.datetime64(binned.first_day, "D")).astype(np.int64)
    arrivals = np.bincount(index, weights=binned.count, minlength=n_days)
    hours = np.bincount(index, weights=binned.exposure, minlength=n_days) * (
        binned.bin_minutes / 60.0
    )
    weekday = (np.arange(n_days) + binned.first_day.weekday()) % 7
    usual = np.zeros(n_days)
    for d in range(7):
        on = (weekday == d) & (hours > 0)
        if on.any():
            usual[weekday == d] = np.median(hours[on])
    judged = (hours > 0) & (hours >= MIN_EXPOSURE_SHARE * usual)
    level = np.full(n_days, np.nan)
    level[judged] = np.log((arrivals[judged] + 0.5) / hours[judged])

    residual = np.full(n_days, np.nan)
    for day in np.flatnonzero(judged):
        same = np.arange(day - 7 * WINDOW_WEEKS, day + 7 * WINDOW_WEEKS + 1, 7)
        same = same[(same >= 0) & (same < n_days)]
        values = level[same]
        values = values[~np.isnan(values)]
        if len(values) >= MIN_NEIGHBOURS:
            residual[day] = level[day] - np.median(values)
    scored = ~np.isnan(residual)
    if scored.sum() < 7 * MIN_NEIGHBOURS:
        return ()
    centre = np.median(residual[scored])
    spread = MAD_TO_SD * np.median(np.abs(residual[scored] - centre))
    if spread <= 0:
        spread = np.finfo(float).tiny
    unusual = scored & (np.abs(residual - centre) > robust_z * spread)
    unusual &= np.abs(residual) > min_log_ratio
    unusual[max(0, n_days - protected_days) :] = False
    dates = [binned.first_day + dt.timedelta(days=int(k)) for k in np.flatnonzero(unusual)]
    if holidays is not None and dates:
        named = holidays.is_holiday(dates)
        dates = [d for d, h in zip(dates, named, strict=True) if not h]
    return tuple(dates)


def leave_out_days(binned: BinnedSeries, days: tuple[dt.date, ...]) -> BinnedSeries:
    """``binned`` without the bins of local dates ``days`` (they become missing, not closed).

    The series keeps its first and end day, so day indices, the trend's origin and the calendar
    of a forecast are the same as without screening.
    """
    if not days:
        return binned
    _, _, date, _ = local_features(binned.start, tz=binned.tz, bin_minutes=binned.bin_minutes)
    keep = ~np.isin(date, np.array(days, dtype="datetime64[D]"))
    return dataclasses.replace(
        binned,
        start=binned.start[keep],
        count=binned.count[keep],
        exposure=binned.exposure[keep],
    )

"""The demo scenario: an invented ferry booking desk, used by ``make demo`` and nowhere in tests.

*Marrowby Sound Ferries* runs a phone-and-walk-in booking desk for an island ferry. The desk keeps
Atlantic time (``America/Halifax``), opens Mon-Fri 06:30-21:00 and Sat-Sun 08:00-18:00, is quieter
on Nova Scotia public holidays, busier on Fridays and Sundays, and slowly growing. Days also drift
up and down together (weather, events on the island): a daily AR(1) on the log rate. The history
runs 16 weeks from Monday 2026-01-05, across the start of daylight saving on 2026-03-08.
"""

from __future__ import annotations

import datetime as dt
from pathlib import Path

import numpy as np
import pandas as pd

from models.ratemodel.binning import local_features
from models.ratemodel.spec import HolidayCalendar

__all__ = ["FIRST_DAY", "OPENING_HOURS", "TZ", "WEEKS", "write_events"]

TZ = "America/Halifax"
OPENING_HOURS = "Mon-Fri 06:30-21:00; Sat-Sun 08:00-18:00"
HOLIDAYS = HolidayCalendar(country="CA", subdivision="NS")
FIRST_DAY = dt.date(2026, 1, 5)
WEEKS = 16


def _rate_per_hour(minute: np.ndarray, dow: np.ndarray) -> np.ndarray:
    hour = minute / 60.0
    morning = np.exp(-0.5 * ((hour - 9.5) / 1.6) ** 2)
    evening = np.exp(-0.5 * ((hour - 17.0) / 1.8) ** 2)
    weekday_shape = 3.0 + 14.0 * morning + 10.0 * evening
    weekend_shape = 4.0 + 12.0 * np.exp(-0.5 * ((hour - 12.5) / 2.5) ** 2)
    shape = np.where(dow >= 5, weekend_shape, weekday_shape)
    day_factor = np.array([1.0, 0.92, 0.9, 0.97, 1.25, 0.85, 1.15])[dow]
    return shape * day_factor


def write_events(folder: str | Path, *, seed: int = 7) -> Path:
    """Simulate the desk's arrivals and write them as ``ferry_desk_events.csv`` in ``folder``.

    Returns the path written. One row per arrival, ISO 8601 with the local UTC offset.
    """
    rng = np.random.default_rng(seed)
    end_day = FIRST_DAY + dt.timedelta(weeks=WEEKS)
    start = pd.Timestamp(FIRST_DAY).tz_localize(TZ)
    end = pd.Timestamp(end_day).tz_localize(TZ)
    minutes = pd.date_range(start, end, freq="1min", inclusive="left").tz_convert("UTC")
    dow, _, day, minute = local_features(minutes, tz=TZ, bin_minutes=1)
    day_index = (day - np.datetime64(FIRST_DAY, "D")).astype(int)
    n_days = int(day_index.max()) + 1
    latent = np.zeros(n_days)
    for k in range(1, n_days):
        latent[k] = 0.6 * latent[k - 1] + 0.12 * rng.standard_normal()
    dates = [FIRST_DAY + dt.timedelta(days=k) for k in range(n_days)]
    holiday = np.asarray(HOLIDAYS.is_holiday(dates), dtype=bool)
    growth = np.exp(0.15 * day_index / 365.25)
    rate = _rate_per_hour(minute.astype(float), dow) * growth * np.exp(latent[day_index])
    rate = np.where(holiday[day_index], rate * 0.6, rate)
    weekday_open = (minute >= 6 * 60 + 30) & (minute < 21 * 60)
    weekend_open = (minute >= 8 * 60) & (minute < 18 * 60)
    is_open = np.where(dow >= 5, weekend_open, weekday_open)
    counts = rng.poisson(np.where(is_open, rate / 60.0, 0.0))
    minute_ns = minutes.as_unit("ns").asi8
    arrivals = np.repeat(minute_ns, counts) + rng.integers(0, 60 * 10**9, counts.sum())
    stamps = pd.DatetimeIndex(np.sort(arrivals)).tz_localize("UTC").tz_convert(TZ).floor("s")
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / "ferry_desk_events.csv"
    temporary = path.with_suffix(".csv.tmp")
    pd.DataFrame({"timestamp": stamps.map(lambda t: t.isoformat())}).to_csv(temporary, index=False)
    temporary.replace(path)
    return path

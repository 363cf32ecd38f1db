"""Windows of a range: the one place where ``[start, end)`` is cut into windows (CLI and API).

:func:`parse_range` reads the two times and the step, each failure naming its field
(``start``, ``end``, ``step``) on the raised :class:`~models.exceptions.InputError`;
:meth:`Range.windows` cuts it, after counting the windows, so a tiny step over a long range is
refused before millions of windows exist. Instants are nanoseconds in the caller's zone (UTC if
none): the library compares nanosecond instants, and answers are given in the series' zone
whatever zone the times came in.
"""

from __future__ import annotations

import datetime as dt
import functools
import math
from collections.abc import Sequence
from dataclasses import dataclass

import pandas as pd

from models.exceptions import InputError, LimitError, WindowError
from models.prediction.windows import parse_instant, parse_step, split_range

__all__ = ["STEP_ALLOWED", "Range", "parse_range", "parse_time", "range_windows"]

#: What a step may be, for messages.
STEP_ALLOWED = "a whole number of minutes, hours or days, e.g. 15min, 1h, 1d"


def parse_time(text: str | dt.datetime, *, tz: str | None, field: str) -> pd.Timestamp:
    """An instant in nanoseconds, in the zone ``tz`` (UTC if none); a time without an offset
    is local to ``tz``.

    One zone for every time of a request, so that they make one index, and messages about
    them read in the zone the caller gave. Instants parsed from text are remembered: clients ask
    for the same few times again and again, and parsing is most of the cost of a small
    request's windows. (Datetimes are not: two aware datetimes on either side of a repeated
    hour compare equal, so they cannot key a cache.)

    Raises
    ------
    InputError
        With ``field`` and ``value`` set, if the time cannot be read or represented.
    """
    try:
        return _text_instant(text, tz) if isinstance(text, str) else _instant(text, tz)
    except InputError as exc:
        exc.locate(field, text)
        raise
    except _Unrepresentable as exc:
        raise WindowError(
            f"time {text!r} is outside the range that can be represented",
            field=field,
            value=text,
            allowed="dates between 1678 and 2261",
        ) from exc.__cause__


class _Unrepresentable(Exception):
    """A parsed instant that nanoseconds in the caller's zone cannot hold."""


def _instant(text: str | dt.datetime, tz: str | None) -> pd.Timestamp:
    stamp = parse_instant(text, tz=tz)
    try:
        return stamp.tz_convert(tz or "UTC").as_unit("ns")
    except (ValueError, OverflowError) as exc:
        raise _Unrepresentable from exc


# Timestamps are immutable, so a remembered one can be handed out again; errors are not
# remembered (lru_cache keeps only returned values) and are raised afresh each time.
_text_instant = functools.lru_cache(maxsize=4096)(_instant)


@dataclass(frozen=True)
class Range:
    """A range ``[start, end)`` and the step that cuts it (``None``: one window)."""

    start: pd.Timestamp
    end: pd.Timestamp
    step: pd.Timedelta | None = None

    def count(self) -> int:
        """How many windows :meth:`windows` gives (0 if the range is empty or reversed)."""
        if self.end <= self.start:
            return 0
        return 1 if self.step is None else math.ceil((self.end - self.start) / self.step)

    def windows(
        self, *, max_windows: int | None = None
    ) -> tuple[pd.DatetimeIndex, pd.DatetimeIndex]:
        """Starts and ends of consecutive windows of ``step``; the last may be shorter.

        Raises
        ------
        LimitError
            If there would be more than ``max_windows`` windows (counted before cutting).
        WindowError
            If the end is not after the start (field ``end``).
        """
        count = self.count()
        if max_windows is not None and count > max_windows:
            raise LimitError(
                f"{count} windows requested; at most {max_windows} are allowed in one request",
                field="step",
                value=count,
                allowed=f"at most {max_windows} windows",
            )
        try:
            return split_range(self.start, self.end, self.step)
        except InputError as exc:
            exc.locate("end", self.end.isoformat(), allowed="an end after the start")
            raise


def parse_range(
    start: str | dt.datetime,
    end: str | dt.datetime,
    step: str | pd.Timedelta | None = None,
    *,
    tz: str | None,
    steps_minutes: Sequence[int] | None = None,
) -> Range:
    """Read a range and its step; times without an offset are local to ``tz``.

    Parameters
    ----------
    start, end
        ISO 8601 texts or tz-aware datetimes.
    step
        Window length (``15min``, ``1h``, ``1d``...), or ``None`` for one window.
    tz
        IANA zone for times given without an offset.
    steps_minutes
        If given, the only step lengths allowed, in minutes.
    """
    first = parse_time(start, tz=tz, field="start")
    last = parse_time(end, tz=tz, field="end")
    width = None
    if isinstance(step, pd.Timedelta):
        width = step
    elif step is not None:
        try:
            # pandas 3 deprecates the unit "d" (it warns); "D" is the same day of 24 hours.
            width = parse_step(step[:-1] + "D" if step.endswith("d") else step)
        except InputError as exc:
            exc.locate("step", step, allowed=STEP_ALLOWED)
            raise
    if steps_minutes is not None and (
        width is None or width / pd.Timedelta(minutes=1) not in steps_minutes
    ):
        allowed = ", ".join(f"{m}min" for m in steps_minutes)
        raise WindowError(
            f"step {step!r} is not allowed; allowed: {allowed}",
            field="step",
            value=step,
            allowed=allowed,
        )
    return Range(first, last, width)


def range_windows(
    start: str | dt.datetime,
    end: str | dt.datetime,
    step: str | pd.Timedelta | None = None,
    *,
    tz: str | None,
    steps_minutes: Sequence[int] | None = None,
    max_windows: int | None = None,
) -> tuple[pd.DatetimeIndex, pd.DatetimeIndex]:
    """Windows cutting ``[start, end)`` by ``step``: :func:`parse_range` then :meth:`Range.windows`.

    Examples
    --------
    >>> starts, ends = range_windows("2026-03-09T09:00", "2026-03-09T10:10", "30min",
    ...                              tz="America/Chicago")
    >>> [e.tz_convert("America/Chicago").strftime("%H:%M") for e in ends]
    ['09:30', '10:00', '10:10']
    """
    span = parse_range(start, end, step, tz=tz, steps_minutes=steps_minutes)
    return span.windows(max_windows=max_windows)

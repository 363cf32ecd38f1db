"""Reading a series' history and calendar from files and text, for every command that fits.

The CLI's ``fit``, ``fit-group`` and ``backtest`` and the fit-plan workers read history the
same way, through :func:`read_history_file`; every problem with a file comes back as one
:class:`~models.exceptions.InputError` line naming the file.
"""

from __future__ import annotations

import datetime as dt
import re
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Any

from models.exceptions import InputError

__all__ = ["holiday_calendar", "named_file_errors", "parse_date", "read_history_file"]


_DATE = re.compile(r"^[0-9]{4}-[0-9]{2}-[0-9]{2}$")


def parse_date(text: str, *, option: str) -> dt.date:
    """A calendar date written ``YYYY-MM-DD`` (ISO 8601), or :class:`InputError` naming the option.

    Examples
    --------
    >>> parse_date("2026-04-27", option="--first-origin")
    datetime.date(2026, 4, 27)
    """
    value = text.strip()
    try:
        if not _DATE.match(value):
            raise ValueError(value)
        return dt.date.fromisoformat(value)
    except ValueError as exc:
        raise InputError(
            f"{option} {text!r} is not a date written YYYY-MM-DD (ISO 8601), e.g. 2026-04-27"
        ) from exc


def holiday_calendar(holidays: str | None, special_days: str | None = None) -> Any:
    """The calendar of ``COUNTRY[:SUBDIVISION]`` plus ``YYYY-MM-DD,...`` extra dates, or None."""
    from models.ratemodel.spec import HolidayCalendar

    if not (holidays or special_days):
        return None
    country, _, subdivision = (holidays or "").partition(":")
    extra: tuple[dt.date, ...] = ()
    if special_days:
        extra = tuple(
            parse_date(d, option="--special-days") for d in special_days.split(",") if d.strip()
        )
    return HolidayCalendar(
        country=country.upper() or None, subdivision=subdivision.upper() or None, extra=extra
    )


def read_history_file(
    path: str | Path,
    *,
    kind: str,
    tz: str,
    bin: str | None = None,
    time_column: str = "timestamp",
    opening: Any = None,
    until: Any = None,
    now: Any = None,
) -> Any:
    """Bin a file of arrivals (``kind="events"``, one row per arrival in column ``time_column``)
    or of counts per bin (``kind="counts"``, columns ``start,count``) into a BinnedSeries.

    Every problem with the file comes back as one :class:`InputError` line that starts with the
    file's name and names rows by their line in the file.
    """
    from models.ratemodel.binning import (
        bin_counts,
        bin_events,
        check_zone,
        parse_bin_width,
        parse_timestamps,
        read_table,
    )

    check_zone(tz)  # before the file: a bad zone is not the file's fault
    bin_minutes = parse_bin_width(bin) if bin else None
    if kind == "counts" and until is not None:
        raise InputError(
            "--until applies to --events only: a counts file says itself which bins were "
            "observed (leave out the rows after the end instead)"
        )
    table = read_table(path)
    with named_file_errors(path):
        if kind == "counts":
            return bin_counts(table, tz=tz, bin_minutes=bin_minutes, opening=opening)
        if time_column not in table.columns:
            raise InputError(
                f"no column {time_column!r}; columns: {', '.join(map(str, table.columns))} "
                "(choose one with --time-column)"
            )
        stamps = parse_timestamps(table[time_column], tz=tz, column=time_column)
        return bin_events(
            stamps,
            tz=tz,
            bin_minutes=bin_minutes or 60,
            opening=opening,
            until=until,
            now=now,
            rows=table.index,
        )


@contextmanager
def named_file_errors(path: str | Path) -> Iterator[None]:
    """Start every :class:`InputError` raised inside with the file's name (the library sees only
    the file's rows)."""
    from models.ratemodel.binning import shown_path

    try:
        yield
    except InputError as exc:
        raise type(exc)(f"file {shown_path(path)}: {exc}") from exc

"""Errors raised by the modelling library.

Every error sits on a standard base so callers can catch it either way::

    RatecastError
    ├── InputError (ValueError)          bad data or arguments; the message names the value
    │   ├── TimestampError               unparseable, naive-without-zone or mixed-offset times
    │   ├── CountError                   negative, fractional or missing counts
    │   ├── WindowError                  a forecast window that cannot be answered
    │   ├── StaffingError                impossible queueing inputs (handle time, targets, agents)
    │   └── LimitError                   more than a configured limit (windows, work) asks for
    ├── SeriesNotFound (LookupError)     no published series of that name
    ├── StoreError (RuntimeError)        the store cannot be read or written
    │   └── CorruptArtefact              checksum or structure mismatch in a stored version
    ├── FitRejected (RuntimeError)       the diagnostics gate refused to publish a fit
    └── DegradedVersion (RuntimeError)   a caller refused a version published despite the gate

An :class:`InputError` may also carry *where* it is, as fields a caller can read without parsing
the message: ``field`` (the argument or input field, e.g. ``"start"``), ``value`` (what was
received), ``window`` (the index of the window concerned) and ``allowed`` (what would be
accepted). The API edge maps these onto HTTP responses in one place; nothing here knows about HTTP.
"""

from __future__ import annotations

from typing import Any

__all__ = [
    "CorruptArtefact",
    "CountError",
    "DegradedVersion",
    "FitRejected",
    "InputError",
    "LimitError",
    "RatecastError",
    "SeriesNotFound",
    "StaffingError",
    "StoreError",
    "TimestampError",
    "WindowError",
]


class RatecastError(Exception):
    """Base class of every ratecast error."""


class InputError(RatecastError, ValueError):
    """Input data or arguments are outside what is allowed.

    Parameters
    ----------
    message
        One line for people: the bad value and what is allowed.
    field
        The argument or input field the error is about (``"start"``, ``"agents"``...), if known.
    value
        The value received, if known.
    window
        Index of the window the error is about, when the input is a list of windows.
    allowed
        What would be accepted, in a few words.

    Examples
    --------
    >>> err = InputError("window 3: end is not after start", window=3)
    >>> err.window, err.field
    (3, None)
    >>> err.locate("end", "2026-03-09T09:00").field
    'end'
    """

    def __init__(
        self,
        message: str,
        *,
        field: str | None = None,
        value: Any = None,
        window: int | None = None,
        allowed: str | None = None,
    ) -> None:
        super().__init__(message)
        self.field = field
        self.value = value
        self.window = window
        self.allowed = allowed

    def locate(self, field: str, value: Any = None, *, allowed: str | None = None) -> InputError:
        """Fill in the field (and value, allowed) unless already known; returns ``self``.

        Lets a caller that knows which argument it passed say so, then re-raise the same error.
        """
        if self.field is None:
            self.field = field
            if self.value is None:
                self.value = value
        if self.allowed is None:
            self.allowed = allowed
        return self


class TimestampError(InputError):
    """A timestamp cannot be parsed, lacks a zone, or mixes offsets."""


class CountError(InputError):
    """A count is negative, fractional or missing."""


class WindowError(InputError):
    """A forecast window is empty, reversed, or outside what the model can answer."""


class StaffingError(InputError):
    """Queueing or staffing inputs are impossible (e.g. handle time <= 0)."""


class LimitError(InputError):
    """A request asks for more than a configured limit allows (``value`` is what it asks for)."""


class SeriesNotFound(RatecastError, LookupError):
    """No published series has the requested name."""


class StoreError(RatecastError, RuntimeError):
    """The posterior store cannot be read or written."""


class CorruptArtefact(StoreError):
    """A stored version fails its checksum or has an unexpected structure."""


class FitRejected(RatecastError, RuntimeError):
    """The diagnostics gate refused to publish a fit.

    Parameters
    ----------
    message
        Human-readable summary.
    problems
        One line per failed check, naming the parameter and its value.
    """

    def __init__(self, message: str, problems: list[str]) -> None:
        super().__init__(message + "\n" + "\n".join(f"  - {p}" for p in problems))
        self.problems = problems


class DegradedVersion(RatecastError, RuntimeError):
    """The version asked about was published with ``--force`` although its fit failed the
    diagnostics gate, and the caller asked to refuse such versions."""

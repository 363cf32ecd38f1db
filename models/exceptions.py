"""Errors raised by the modelling library.

Every error sits on a standard base so callers can catch it either way::

    RatecastError
    ├── InputError (ValueError)          bad data or arguments; the message names the value
    │   ├── TimestampError               unparseable, naive-without-zone or mixed-offset times
    │   ├── CountError                   negative, fractional or missing counts
    │   ├── WindowError                  a forecast window that cannot be answered
    │   └── StaffingError                impossible queueing inputs (handle time, targets, agents)
    ├── SeriesNotFound (LookupError)     no published series of that name
    ├── StoreError (RuntimeError)        the store cannot be read or written
    │   └── CorruptArtefact              checksum or structure mismatch in a stored version
    └── FitRejected (RuntimeError)       the diagnostics gate refused to publish a fit

The API edge maps these onto HTTP status codes in one place; nothing here knows about HTTP.
"""

from __future__ import annotations


class RatecastError(Exception):
    """Base class of every ratecast error."""


class InputError(RatecastError, ValueError):
    """Input data or arguments are outside what is allowed."""


class TimestampError(InputError):
    """A timestamp cannot be parsed, lacks a zone, or mixes offsets."""


class CountError(InputError):
    """A count is negative, fractional or missing."""


class WindowError(InputError):
    """A forecast window is empty, reversed, or outside what the model can answer."""


class StaffingError(InputError):
    """Queueing or staffing inputs are impossible (e.g. handle time <= 0)."""


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

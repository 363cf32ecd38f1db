"""Smooth basis functions for the seasonal and within-day terms (numpy only).

Two families:

* **annual**: Fourier pairs ``sin(2 pi k u), cos(2 pi k u)``, ``k = 1..K``, of the phase ``u`` in
  the year. The phase is the local date's day count since 1970-01-01 divided by the mean Gregorian
  year (365.2425 days), so it runs on smoothly across leap years and every series shares it.
* **within the day**: the cosines of the type-II discrete cosine transform,
  ``sqrt(2) cos(pi k (s + 1/2) / S)``, ``k = 1..K``, over the ``S`` slots of a day. They are
  orthogonal to the constant (the daily latent deviation already moves the whole day) and to each
  other, have unit mean square, and ``k = 1`` is a smooth morning-against-evening tilt, ``k = 2``
  middle-against-ends, and so on.
"""

from __future__ import annotations

import numpy as np
import numpy.typing as npt

__all__ = ["DAYS_PER_GREGORIAN_YEAR", "annual_basis", "within_day_basis", "year_phase"]

#: Mean length of the Gregorian calendar year in days.
DAYS_PER_GREGORIAN_YEAR = 365.2425


def year_phase(dates: npt.ArrayLike) -> np.ndarray:
    """Phase in the year, in [0, 1), of local dates (``datetime64[D]``).

    Examples
    --------
    >>> import numpy as np
    >>> year_phase(np.array(["1970-01-01", "1970-07-02"], dtype="datetime64[D]")).round(3)
    array([0.   , 0.498])
    """
    days = np.asarray(dates, dtype="datetime64[D]").astype(np.int64)
    return np.asarray(np.mod(days / DAYS_PER_GREGORIAN_YEAR, 1.0), dtype=np.float64)


def annual_basis(phase: npt.ArrayLike, harmonics: int) -> np.ndarray:
    """Fourier basis of the year, shape ``(n, 2 * harmonics)``: sin and cos of each harmonic.

    Examples
    --------
    >>> annual_basis([0.25], 1).round(6).tolist()
    [[1.0, 0.0]]
    """
    u = np.asarray(phase, dtype=np.float64)[:, None]
    k = np.arange(1, harmonics + 1)[None, :]
    angle = 2.0 * np.pi * k * u
    out = np.empty((u.shape[0], 2 * harmonics))
    out[:, 0::2] = np.sin(angle)
    out[:, 1::2] = np.cos(angle)
    return out


def within_day_basis(slots_per_day: int, harmonics: int) -> np.ndarray:
    """Cosine basis over the slots of a day, shape ``(slots_per_day, harmonics)``.

    Each column sums to zero over the day and has mean square one.

    Examples
    --------
    >>> basis = within_day_basis(24, 3)
    >>> bool(abs(basis.sum(axis=0)).max() < 1e-12), bool(abs((basis**2).mean(axis=0) - 1).max() < 1e-12)
    (True, True)
    """
    s = np.arange(slots_per_day)[:, None] + 0.5
    k = np.arange(1, harmonics + 1)[None, :]
    return np.asarray(np.sqrt(2.0) * np.cos(np.pi * k * s / slots_per_day))

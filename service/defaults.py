"""The model settings ``ratecast fit``, ``ratecast backtest`` and fit plans use unless told otherwise.

The library's :class:`~models.ratemodel.spec.ModelSpec` keeps its own neutral defaults (Poisson
counts, every day kept, one latent scale), so specs stored before a default changed read back
unchanged. Two choices are ``"auto"`` here and resolved from the bin width by
:func:`resolve_day_choices`, because they were measured to help on daily series and not (yet)
on hourly or half-hourly ones (docs/evidence.md, "Unusual days and weekday loadings").
"""

from __future__ import annotations

__all__ = [
    "AUTO",
    "DEFAULT_LATENT_BY_WEEKDAY",
    "DEFAULT_OBSERVATION",
    "DEFAULT_UNUSUAL_DAYS",
    "resolve_day_choices",
]

AUTO = "auto"
#: Count law per bin: measured on real hourly series, Poisson intervals covered 0.28-0.48 at the
#: 80% level and negative binomial ones 0.81 (docs/evidence.md, docs/calibration.md).
DEFAULT_OBSERVATION = "negbin"
#: Unusual days of history (models/ratemodel/screening.py): ``auto`` leaves them out of daily
#: series and keeps them in finer bins.
DEFAULT_UNUSUAL_DAYS = AUTO
#: Weekday and holiday loadings on the daily latent deviation: ``auto`` is on for daily series
#: fitted alone, off otherwise.
DEFAULT_LATENT_BY_WEEKDAY = AUTO


def resolve_day_choices(
    unusual_days: str, latent_by_weekday: str, *, bin_minutes: int, latent: bool, joint: bool
) -> tuple[str, bool]:
    """The ``(unusual_days, latent_by_weekday)`` a spec gets from the options as given.

    ``unusual_days`` is ``auto``, ``keep`` or ``leave-out``; ``latent_by_weekday`` is ``auto``,
    ``on`` or ``off``. ``auto`` means: on (``leave-out``) for whole-day bins, off (``keep``) for
    finer bins; the loadings are also off without the daily latent and for joint fits, which do
    not have them.

    Examples
    --------
    >>> resolve_day_choices("auto", "auto", bin_minutes=1440, latent=True, joint=False)
    ('leave-out', True)
    >>> resolve_day_choices("auto", "auto", bin_minutes=60, latent=True, joint=False)
    ('keep', False)
    >>> resolve_day_choices("leave-out", "on", bin_minutes=60, latent=True, joint=False)
    ('leave-out', True)
    """
    daily = bin_minutes == 1440
    days = ("leave-out" if daily else "keep") if unusual_days == AUTO else unusual_days
    # "on" is passed through as asked: the spec refuses it, naming why, without a latent.
    auto = daily and latent and not joint
    return days, auto if latent_by_weekday == AUTO else latent_by_weekday == "on"

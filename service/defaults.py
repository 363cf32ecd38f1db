"""The model settings ``ratecast fit``, ``ratecast backtest`` and fit plans use unless told otherwise.

The library's :class:`~models.ratemodel.spec.ModelSpec` keeps its own neutral defaults (Poisson
counts, every day kept, one latent scale), so specs stored before a default changed read back
unchanged. Four choices are ``"auto"`` here and resolved from the bin width by
:func:`resolve_observation`, :func:`resolve_day_choices` and :func:`resolve_holiday_effects`: the
count law, because daily bins with the daily latent sample badly with negative binomial days, and
the unusual days, weekday loadings and named holiday effects, because they were measured to help
on daily series and not (yet) on hourly or half-hourly ones (docs/evidence.md).
"""

from __future__ import annotations

from typing import Any

__all__ = [
    "AUTO",
    "DEFAULT_HOLIDAY_EFFECTS",
    "DEFAULT_LATENT_BY_WEEKDAY",
    "DEFAULT_OBSERVATION",
    "DEFAULT_UNUSUAL_DAYS",
    "resolve_day_choices",
    "resolve_holiday_effects",
    "resolve_observation",
    "resolved_choices",
]

AUTO = "auto"
#: Count law per bin: ``auto`` is the negative binomial, except for whole-day bins with the daily
#: latent, which get Poisson days. On real hourly series Poisson intervals covered 0.28-0.48 at
#: the 80% level and negative binomial ones 0.81; with whole-day bins the negative binomial and the
#: daily latent are both day-level noise and sampled badly together (r_hat 1.11, bulk ESS 16 on a
#: year of births), so daily series take their day-level scatter from the latent
#: (docs/calibration.md, docs/evidence.md).
DEFAULT_OBSERVATION = AUTO
#: Unusual days of history (models/ratemodel/screening.py): ``auto`` leaves them out of daily
#: series and keeps them in finer bins.
DEFAULT_UNUSUAL_DAYS = AUTO
#: Weekday and holiday loadings on the daily latent deviation: ``auto`` is on for daily series
#: fitted alone, off otherwise.
DEFAULT_LATENT_BY_WEEKDAY = AUTO
#: One effect per named holiday (partially pooled) or one shared by all: ``auto`` is named for
#: daily series fitted alone, shared otherwise (groups have one effect per series).
DEFAULT_HOLIDAY_EFFECTS = AUTO


def resolve_holiday_effects(holiday_effects: str, *, bin_minutes: int, joint: bool) -> str:
    """The ``holiday_effects`` a spec gets: ``named`` or ``shared`` as given, or from ``auto``.

    Examples
    --------
    >>> resolve_holiday_effects("auto", bin_minutes=1440, joint=False)
    'named'
    >>> resolve_holiday_effects("auto", bin_minutes=60, joint=False)
    'shared'
    >>> resolve_holiday_effects("auto", bin_minutes=1440, joint=True)
    'shared'
    """
    if holiday_effects != AUTO:
        return holiday_effects
    return "named" if bin_minutes == 1440 and not joint else "shared"


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


def resolve_observation(observation: str, *, bin_minutes: int, latent: bool) -> str:
    """The count law a spec gets: ``poisson`` or ``negbin`` as given, or from ``auto``.

    ``auto`` means Poisson days for whole-day bins with the daily latent (the latent carries the
    day-level scatter), the negative binomial otherwise.

    Examples
    --------
    >>> resolve_observation("auto", bin_minutes=1440, latent=True)
    'poisson'
    >>> resolve_observation("auto", bin_minutes=1440, latent=False)
    'negbin'
    >>> resolve_observation("auto", bin_minutes=30, latent=True)
    'negbin'
    >>> resolve_observation("negbin", bin_minutes=1440, latent=True)
    'negbin'
    """
    if observation != AUTO:
        return observation
    return "poisson" if bin_minutes == 1440 and latent else "negbin"


def resolved_choices(
    *,
    bin_minutes: int,
    latent: bool,
    joint: bool,
    observation: str = DEFAULT_OBSERVATION,
    unusual_days: str = DEFAULT_UNUSUAL_DAYS,
    latent_by_weekday: str = DEFAULT_LATENT_BY_WEEKDAY,
    holiday_effects: str = DEFAULT_HOLIDAY_EFFECTS,
) -> dict[str, Any]:
    """The :class:`~models.ratemodel.spec.ModelSpec` fields the four choices give (each as given,
    or resolved from ``auto``), as keyword arguments: what ``ratecast fit``, fit plans and the
    battery build alike.

    Examples
    --------
    >>> resolved_choices(bin_minutes=1440, latent=True, joint=False)["holiday_effects"]
    'named'
    """
    days, by_weekday = resolve_day_choices(
        unusual_days, latent_by_weekday, bin_minutes=bin_minutes, latent=latent, joint=joint
    )
    return {
        "observation": resolve_observation(observation, bin_minutes=bin_minutes, latent=latent),
        "unusual_days": days,
        "latent_by_weekday": by_weekday,
        "holiday_effects": resolve_holiday_effects(
            holiday_effects, bin_minutes=bin_minutes, joint=joint
        ),
    }

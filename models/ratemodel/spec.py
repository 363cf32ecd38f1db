"""The model *description*: which terms, which priors. No PyMC here.

``models.fitting.build`` turns a :class:`ModelSpec` plus data into a PyMC model; the store keeps the spec
in each version's manifest (``to_dict``/``from_dict``) so a forecast knows what produced it.

The log arrival rate per hour in a bin starting at local time t is::

    log λ(t) = α + β_dow[d(t)] + β_slot[s(t)] + β_dow×slot[d(t), s(t)]
             + γ · years(t) + η · holiday(t) + Σ_j a_j f_j(phase(t))
             + z[day(t)] + Σ_j w[day(t), j] g_j(s(t))

with day-of-week, slot-of-day and interaction effects summing to zero (each block with a learned
scale), a linear trend, a holiday effect, an optional annual season (Fourier pairs f_j of the
phase in the year), a latent daily AR(1) deviation z[k] = ρ z[k-1] + σ_z ε[k] (a discretised
log-Gaussian Cox process) and an optional latent deviation of each day's *shape*: smooth cosines
g_j over the day (:mod:`models.ratemodel.bases`) with independent Normal(0, σ_j) weights per day, so a day
can run busy in the morning and quiet in the evening beyond what its level says.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import asdict, dataclass, field, fields, replace
from typing import Any

from models.exceptions import InputError

__all__ = [
    "BIN_MINUTES",
    "HOLIDAY_EFFECTS",
    "MAX_ANNUAL_HARMONICS",
    "MAX_WITHIN_DAY",
    "OBSERVATIONS",
    "UNUSUAL_DAYS",
    "HolidayCalendar",
    "ModelSpec",
    "Priors",
]

#: Allowed observation models: ``poisson`` counts given the rate, or ``negbin`` (gamma-Poisson:
#: each bin's rate is further multiplied by independent Gamma(k, k) noise, k the dispersion).
OBSERVATIONS: tuple[str, ...] = ("poisson", "negbin")
#: Allowed bin widths in minutes; 1440 is a whole day (for daily counts, in a zone without
#: daylight saving, where the time-of-day terms have nothing to describe and are left out).
BIN_MINUTES: tuple[int, ...] = (15, 30, 60, 1440)
#: Most Fourier pairs of the annual season (more resolves features shorter than a month).
MAX_ANNUAL_HARMONICS = 12
#: Most within-day shape terms (and never more than half the slots of a day).
MAX_WITHIN_DAY = 8
#: What a fit does with the history's unusual days (:mod:`models.ratemodel.screening`): ``keep``
#: fits them like any other day, ``leave-out`` treats them as missing.
UNUSUAL_DAYS: tuple[str, ...] = ("keep", "leave-out")
#: How holidays move the rate: ``shared``, one effect for every holiday of the calendar, or
#: ``named``, one effect per named holiday (Memorial Day, Christmas Day, ...) partially pooled
#: toward their common mean; a holiday the history never saw gets a draw from that population.
HOLIDAY_EFFECTS: tuple[str, ...] = ("shared", "named")
#: The name the days listed by hand (``HolidayCalendar.extra``) share.
LISTED_DAY = "listed day"


@dataclass(frozen=True)
class Priors:
    """Prior scales. Log-rate effects are on the natural-log scale, rates are per hour.

    Attributes
    ----------
    baseline_sigma
        Sd of the Normal prior on the log baseline rate, centred on the log of the observed mean
        rate (weakly data-centred, so the prior is on the right order of magnitude for any series).
    baseline_gamma
        If given as ``(shape, rate)``, the baseline rate per hour has a Gamma prior instead (useful
        with prior knowledge, and gives the conjugate Gamma-Poisson model when no other term is on).
    dow_scale, slot_scale, interaction_scale
        Half-normal prior scale of each block's learned sd.
    trend_sigma
        Sd of the trend slope, in log-rate per year.
    holiday_sigma
        Sd of the holiday effect on the log rate (with named effects: of their common mean).
    holiday_spread_scale
        Named holiday effects: half-normal prior scale of their sd around the common mean.
    latent_scale
        Half-normal prior scale of the daily latent deviation's innovation sd.
    annual_sigma
        Sd of each annual Fourier coefficient on the log rate (0.1: seasons of about ±10%).
    within_day_scale
        Half-normal prior scale of the sd of each within-day shape weight.
    overdispersion_median, overdispersion_log_sd
        Negative binomial observation: the coefficient of variation of the per-bin gamma noise,
        ``1 / sqrt(dispersion)``, has a log-normal prior with this median and log-scale sd
        (0.2 and 1: hour-to-hour noise of a few % to about 50% of the rate).
    overdispersion_slot_scale
        Half-normal prior scale of the sd of that log coefficient across slots of the day.
    """

    baseline_sigma: float = 2.0
    baseline_gamma: tuple[float, float] | None = None
    dow_scale: float = 0.5
    slot_scale: float = 1.0
    interaction_scale: float = 0.25
    trend_sigma: float = 0.5
    holiday_sigma: float = 1.0
    holiday_spread_scale: float = 0.5
    latent_scale: float = 0.2
    annual_sigma: float = 0.1
    within_day_scale: float = 0.2
    overdispersion_median: float = 0.2
    overdispersion_log_sd: float = 1.0
    overdispersion_slot_scale: float = 0.5

    def __post_init__(self) -> None:
        for f in fields(self):
            value = getattr(self, f.name)
            if f.name == "baseline_gamma":
                if value is not None and (len(value) != 2 or min(value) <= 0):
                    raise InputError(f"baseline_gamma {value!r} must be (shape > 0, rate > 0)")
            elif not value > 0:
                raise InputError(f"prior scale {f.name}={value!r} must be > 0")


@dataclass(frozen=True)
class HolidayCalendar:
    """Public holidays of a country (and subdivision) from the ``holidays`` package, plus extra dates.

    Examples
    --------
    >>> import datetime as dt
    >>> cal = HolidayCalendar(country="IE", extra=(dt.date(2026, 7, 4),))
    >>> cal.is_holiday([dt.date(2026, 12, 25), dt.date(2026, 7, 4), dt.date(2026, 7, 6)])
    [True, True, False]
    """

    country: str | None = None
    subdivision: str | None = None
    extra: tuple[dt.date, ...] = ()

    def __post_init__(self) -> None:
        if self.country is not None:
            import holidays

            try:
                holidays.country_holidays(self.country, subdiv=self.subdivision, years=2000)
            except (NotImplementedError, KeyError) as exc:
                raise InputError(
                    f"holiday calendar country={self.country!r} subdivision={self.subdivision!r} "
                    "is not known to the 'holidays' package (use ISO 3166 codes, e.g. 'US', 'NZ')"
                ) from exc

    def dates(self, years: range) -> set[dt.date]:
        """All holiday dates in ``years``."""
        found = {d for d in self.extra if d.year in years}
        if self.country is not None and len(years):
            import holidays

            found |= set(
                holidays.country_holidays(self.country, subdiv=self.subdivision, years=list(years))
            )
        return found

    def is_holiday(self, days: list[dt.date]) -> list[bool]:
        """Whether each day is a holiday."""
        if not days:
            return []
        known = self.dates(range(min(days).year, max(days).year + 1))
        return [d in known for d in days]

    def names(self, days: list[dt.date]) -> list[str | None]:
        """The holiday's name on each day, None on other days.

        The ``holidays`` package's name, the first one where two fall on a day; an observed
        day keeps its own name ("Independence Day (observed)" moves a Friday, the day itself a
        Saturday); the listed extra dates share the name ``"listed day"``.

        Examples
        --------
        >>> import datetime as dt
        >>> cal = HolidayCalendar(country="US", extra=(dt.date(2015, 12, 24),))
        >>> cal.names([dt.date(2015, 5, 25), dt.date(2015, 12, 24), dt.date(2015, 12, 23)])
        ['Memorial Day', 'listed day', None]
        """
        if not days:
            return []
        years = list(range(min(days).year, max(days).year + 1))
        named: dict[dt.date, str] = {}
        if self.country is not None:
            import holidays

            found = holidays.country_holidays(self.country, subdiv=self.subdivision, years=years)
            named = {d: str(name).split("; ")[0] for d, name in found.items()}
        extra = set(self.extra)
        return [named.get(d, LISTED_DAY if d in extra else None) for d in days]


@dataclass(frozen=True)
class ModelSpec:
    """Which terms the model has, and their priors.

    ``observation`` chooses how counts scatter around the rate: ``"poisson"`` (the default) or
    ``"negbin"``, where each bin's rate carries its own Gamma(k, k) noise so a bin's count is
    negative binomial with variance ``mu + mu**2 / k``; real arrival series are usually
    overdispersed at the bin level beyond what the daily latent deviation explains.
    With ``dispersion_by_slot`` (the default) each slot of the day has its own dispersion,
    partially pooled: measured on pedestrian counts, night hours scatter relatively several times
    more than daytime hours (docs/calibration.md). ``bin_minutes=1440`` models daily counts; the
    time-of-day terms are then left out.

    ``centred_interaction`` chooses how the day-of-week x time-of-day interaction (and the
    per-slot dispersions) are parameterised: ``None`` (the default) decides each from the data
    (:func:`models.fitting.geometry.choose_geometry`: the interaction centred when its estimated
    spread is well above the standard error of a cell, the dispersions centred when the counts
    scatter clearly beyond Poisson; non-centred otherwise); ``True`` or ``False`` force both.

    ``annual_harmonics`` (0 = off) adds an annual season with that many Fourier pairs; it needs
    about two years of history to tell the season from the level and trend. ``within_day``
    (0 = off) adds that many smooth within-day shape deviations per day (3 is a good start for
    hourly bins): days then differ in shape as well as level, forecasts of multi-hour windows carry
    that extra spread, and an intraday update learns today's shape from the morning
    (:mod:`models.prediction.intraday`).

    ``unusual_days="leave-out"`` fits without the days whose level stands far out from the same
    weekdays around them and that no listed holiday explains (:mod:`models.ratemodel.screening`);
    they become missing days, so the daily latent's spread is learned from ordinary days.
    ``latent_by_weekday`` gives each weekday, and the calendar's holidays as one more kind of
    day, its own loading on the daily latent deviation (``exp(l_kind) * z[day]``, the log
    loadings summing to zero): weekdays whose level moves little from day to day get narrow
    intervals even when other weekdays, or holidays, move a lot.

    ``holiday_effects`` (:data:`HOLIDAY_EFFECTS`) is ``"shared"`` (one effect for all the
    calendar's holidays) or ``"named"`` (an effect per named holiday, partially pooled).

    Examples
    --------
    >>> spec = ModelSpec(bin_minutes=30, trend=False)
    >>> ModelSpec.from_dict(spec.to_dict()) == spec
    True
    >>> ModelSpec(observation="negbin").to_dict()["observation"]
    'negbin'
    """

    bin_minutes: int = 60
    day_of_week: bool = True
    time_of_day: bool = True
    interaction: bool = True
    trend: bool = True
    holidays: HolidayCalendar | None = None
    latent_daily: bool = True
    centred_interaction: bool | None = None
    centred_latent: bool = False
    priors: Priors = field(default_factory=Priors)
    observation: str = "poisson"
    dispersion_by_slot: bool = True
    annual_harmonics: int = 0
    within_day: int = 0
    unusual_days: str = "keep"
    latent_by_weekday: bool = False
    holiday_effects: str = "shared"

    def __post_init__(self) -> None:
        if self.bin_minutes not in BIN_MINUTES:
            raise InputError(
                f"bin_minutes {self.bin_minutes!r} is not one of {', '.join(map(str, BIN_MINUTES))}"
            )
        if self.observation not in OBSERVATIONS:
            raise InputError(
                f"observation {self.observation!r} is not one of {', '.join(OBSERVATIONS)}"
            )
        if self.latent_by_weekday and not (self.latent_daily and self.day_of_week):
            raise InputError(
                "latent_by_weekday needs the daily latent deviation and the day-of-week effect on"
            )
        if self.latent_by_weekday and self.centred_latent:
            raise InputError("latent_by_weekday is built on the non-centred latent path only")
        if self.holiday_effects not in HOLIDAY_EFFECTS:
            raise InputError(
                f"holiday_effects {self.holiday_effects!r} is not one of "
                f"{', '.join(HOLIDAY_EFFECTS)}"
            )
        if self.unusual_days not in UNUSUAL_DAYS:
            raise InputError(
                f"unusual_days {self.unusual_days!r} is not one of {', '.join(UNUSUAL_DAYS)}"
            )
        if self.interaction and not (self.day_of_week and self.time_of_day):
            raise InputError("the day-of-week x time-of-day interaction needs both main effects on")
        if not 0 <= self.annual_harmonics <= MAX_ANNUAL_HARMONICS:
            raise InputError(
                f"annual_harmonics {self.annual_harmonics!r} must be a whole number from 0 (off) "
                f"to {MAX_ANNUAL_HARMONICS}"
            )
        limit = min(self.slots_per_day // 2, MAX_WITHIN_DAY)
        if self.within_day and limit == 0:
            raise InputError(
                f"within_day {self.within_day!r}: whole-day bins have no shape within the day; "
                "use 0 (off)"
            )
        if not 0 <= self.within_day <= limit:
            raise InputError(
                f"within_day {self.within_day!r} must be 0 (off) or a whole number from 1 to "
                f"{limit} for {self.bin_minutes}-minute bins"
            )

    @property
    def slots_per_day(self) -> int:
        """Bins in a 24-hour day."""
        return 24 * 60 // self.bin_minutes

    @property
    def has_time_of_day(self) -> bool:
        """Whether the time-of-day terms are in the model (a one-slot day has no shape)."""
        return self.time_of_day and self.slots_per_day > 1

    @classmethod
    def intercept_only(cls, *, bin_minutes: int = 60, priors: Priors | None = None) -> ModelSpec:
        """A constant rate: the conjugate Gamma-Poisson model when ``priors.baseline_gamma`` is set."""
        return cls(
            bin_minutes=bin_minutes,
            day_of_week=False,
            time_of_day=False,
            interaction=False,
            trend=False,
            latent_daily=False,
            priors=priors or Priors(),
        )

    def with_(self, **changes: Any) -> ModelSpec:
        """A copy with some fields changed."""
        return replace(self, **changes)

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form (dates as ISO strings)."""
        out = asdict(self)
        # Fields added later are left out at their defaults, so specs written before they
        # existed read (and identify backtest results) the same.
        if self.unusual_days == "keep":
            del out["unusual_days"]
        if not self.latent_by_weekday:
            del out["latent_by_weekday"]
        if self.holiday_effects == "shared":
            del out["holiday_effects"]
        if self.priors.holiday_spread_scale == Priors.holiday_spread_scale:
            del out["priors"]["holiday_spread_scale"]
        if self.holidays is not None:
            out["holidays"]["extra"] = [d.isoformat() for d in self.holidays.extra]
        gamma = self.priors.baseline_gamma
        out["priors"]["baseline_gamma"] = list(gamma) if gamma is not None else None
        return out

    @classmethod
    def from_dict(cls, data: dict[str, Any]) -> ModelSpec:
        """Inverse of :meth:`to_dict`."""
        data = dict(data)
        cal = data.get("holidays")
        if cal is not None:
            data["holidays"] = HolidayCalendar(
                country=cal.get("country"),
                subdivision=cal.get("subdivision"),
                extra=tuple(dt.date.fromisoformat(d) for d in cal.get("extra", ())),
            )
        priors = dict(data.get("priors") or {})
        if priors.get("baseline_gamma") is not None:
            priors["baseline_gamma"] = tuple(priors["baseline_gamma"])
        data["priors"] = Priors(**priors)
        return cls(**data)

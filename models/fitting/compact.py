"""From a fitted model's inference data to the compact posterior that is stored and forecast from."""

from __future__ import annotations

from typing import Any

import numpy as np

from models.exceptions import CorruptArtefact
from models.prediction.posterior import CompactPosterior
from models.ratemodel.binning import OpeningHours
from models.ratemodel.design import Calendar
from models.ratemodel.spec import ModelSpec

__all__ = ["compact_from_fit"]


def compact_from_fit(
    posterior_group: Any,
    *,
    calendar: Calendar,
    spec: ModelSpec,
    n_days: int,
    opening: OpeningHours | None,
    seed: int,
    max_draws: int | None = 2000,
) -> CompactPosterior:
    """Extract a :class:`CompactPosterior` from an ArviZ ``posterior`` group.

    Draws from all chains are pooled; if there are more than ``max_draws`` they are thinned evenly.
    """
    stacked = posterior_group.stack(sample=("chain", "draw"))
    total = stacked.sizes["sample"]
    keep = np.arange(total)
    if max_draws is not None and total > max_draws:
        keep = np.unique(np.linspace(0, total - 1, max_draws).round().astype(int))

    def take(name: str, dims: tuple[str, ...]) -> np.ndarray | None:
        if name not in stacked:
            return None
        values = stacked[name].transpose("sample", *dims).to_numpy()
        return np.asarray(values[keep], dtype=np.float32)

    d = len(keep)
    zeros = np.zeros(d, dtype=np.float32)
    week = take("week_log_rate", ("dow", "slot"))
    if week is None:
        raise CorruptArtefact("the fit has no week_log_rate; was it built by models.fitting.build?")
    latent = take("latent", ("day",))
    dispersion = take("dispersion", ("slot",)) if spec.observation == "negbin" else None
    if spec.observation == "negbin" and dispersion is None:
        raise CorruptArtefact("the negative binomial fit has no dispersion draws")
    named = bool(calendar.holiday_names)
    return CompactPosterior(
        week_log_rate=week,
        trend=_or(take("trend", ()), zeros),
        holiday_effect=_or(take("holiday_effect", ()), zeros),
        latent=latent if latent is not None else np.zeros((d, n_days), dtype=np.float32),
        latent_rho=_or(take("latent_rho", ()), zeros),
        latent_sd=_or(take("latent_sd", ()), zeros),
        calendar=calendar,
        spec=spec,
        opening=opening,
        seed=seed,
        dispersion=dispersion,
        annual=take("annual", ("annual_term",)) if spec.annual_harmonics else None,
        within_day=take("within_day", ("day", "within_term")) if spec.within_day else None,
        within_day_sd=take("within_day_sd", ("within_term",)) if spec.within_day else None,
        latent_loading=take("latent_loading", ("day_kind",)) if spec.latent_by_weekday else None,
        holiday_named=take("holiday_named", ("holiday_name",)) if named else None,
        holiday_spread=take("holiday_spread", ()) if named else None,
    )


def _or(value: np.ndarray | None, default: np.ndarray) -> np.ndarray:
    return default if value is None else value

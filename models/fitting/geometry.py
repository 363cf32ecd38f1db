"""Choose the parameterisation of the interaction and of the per-slot dispersions from the data.

A hierarchical block is best sampled centred when the data pin each member more tightly than the
block's own spread (the posterior is then close to the likelihood), and non-centred when they do
not (the prior dominates and a centred form makes a funnel as the spread shrinks). So what
decides is the size of the effect relative to how well the data measure it, not the amount of
data alone: a busy series whose weekly shape is additive has an interaction near zero, and its
centred interaction funnels however many arrivals each cell holds (measured: r_hat 1.09, bulk
ESS 18 on 8 weeks at ~300 an hour, docs/fit-gate.md).

Both statistics are moments of the history, computed once before the model is built; this
module imports no PyMC.
"""

from __future__ import annotations

import functools
import warnings
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

import numpy as np

from models.ratemodel.design import ModelData
from models.ratemodel.spec import ModelSpec

__all__ = [
    "CENTRE_RATIO",
    "Geometry",
    "choose_geometry",
    "dispersion_signal",
    "excess_scatter",
    "interaction_signal",
]


def _empty_cells_allowed(estimate: Callable[..., Any]) -> Callable[..., Any]:
    """Cells (or whole weeks) never observed are NaN columns by design; numpy's notes about the
    mean and variance of an all-NaN slice say nothing the estimate does not already handle."""

    @functools.wraps(estimate)
    def quiet(*args: Any, **kwargs: Any) -> Any:
        with warnings.catch_warnings():
            warnings.filterwarnings("ignore", "Mean of empty slice", RuntimeWarning)
            warnings.filterwarnings("ignore", "Degrees of freedom <= 0", RuntimeWarning)
            return estimate(*args, **kwargs)

    return quiet


#: Centred when the estimated spread of a block is at least this many times the standard error
#: with which the data measure one member (common practice, no source: the centred form pays
#: once the likelihood is narrower than the prior).
CENTRE_RATIO = 2.0


@dataclass(frozen=True)
class Geometry:
    """How the blocks are parameterised, and the statistics that chose it."""

    centred_interaction: bool
    centred_dispersion: bool
    interaction_sd: float = float("nan")
    cell_se: float = float("nan")
    excess: float = float("nan")
    dispersion_spread: float = float("nan")
    dispersion_se: float = float("nan")

    def to_dict(self) -> dict[str, object]:
        """JSON-ready form (for the manifest)."""
        return {
            "centred_interaction": self.centred_interaction,
            "centred_dispersion": self.centred_dispersion,
            "interaction_sd_estimate": _round(self.interaction_sd),
            "cell_se_estimate": _round(self.cell_se),
            "excess_scatter": _round(self.excess),
            "dispersion_spread_estimate": _round(self.dispersion_spread),
            "dispersion_se_estimate": _round(self.dispersion_se),
        }


def _round(value: float) -> float | None:
    return None if not np.isfinite(value) else round(float(value), 4)


def _cell_weeks(data: ModelData, slots: int) -> tuple[np.ndarray, np.ndarray]:
    """Counts and exposure hours per (week, dow, slot) of the history."""
    feats = data.features
    weeks = int(feats.day.max()) // 7 + 1 if len(feats.day) else 1
    week = np.asarray(feats.day) // 7
    counts = np.zeros((weeks, 7, slots))
    exposure = np.zeros((weeks, 7, slots))
    np.add.at(counts, (week, feats.dow, feats.slot), data.count)
    np.add.at(exposure, (week, feats.dow, feats.slot), data.exposure_hours)
    return counts, exposure


@_empty_cells_allowed
def interaction_signal(data: ModelData, slots: int) -> tuple[float, float]:
    """Estimated sd of the day-of-week x slot interaction on the log rate, and the typical
    standard error of one cell's log rate, from the history.

    Each cell's log rate is ``log((C + 0.5) / E)`` over all weeks; the interaction is what is
    left after removing row and column means (cells never observed left out); its variance is
    the residual variance less the cells' mean sampling variance, each cell's variance taken
    from the scatter of its weekly rates (so daily and bin-level noise count, not just Poisson).
    """
    counts, exposure = _cell_weeks(data, slots)
    total, hours = counts.sum(axis=0), exposure.sum(axis=0)
    seen = hours > 0
    if seen.sum() < 4:
        return 0.0, float("inf")
    log_rate = np.where(seen, np.log((total + 0.5) / np.where(seen, hours, 1.0)), np.nan)
    grand = float(np.nanmean(log_rate))
    rows = np.nanmean(log_rate, axis=1, keepdims=True)
    cols = np.nanmean(log_rate, axis=0, keepdims=True)
    resid = (log_rate - np.nan_to_num(rows, nan=grand) - np.nan_to_num(cols, nan=grand) + grand)[
        seen
    ]
    # Sampling variance of each cell's log rate: Poisson part, or the week-to-week scatter of
    # its rate when that is larger.
    poisson = 1.0 / (total[seen] + 0.5)
    with np.errstate(invalid="ignore", divide="ignore"):
        weekly = np.where(exposure > 0, counts / np.where(exposure > 0, exposure, 1.0), np.nan)
        observed_weeks = np.sum(exposure > 0, axis=0)
        spread = np.nanvar(weekly, axis=0, ddof=1) / np.maximum(observed_weeks, 1)
        rate = total / np.where(seen, hours, 1.0)
        scatter = (spread / np.maximum(rate, 1e-12) ** 2)[seen]
    noise = np.where(np.isfinite(scatter), np.maximum(poisson, scatter), poisson)
    dof = (1.0 - 1.0 / 7.0) * (1.0 - 1.0 / slots)
    signal = max(float(np.mean(resid**2)) - dof * float(np.mean(noise)), 0.0) / dof
    return float(np.sqrt(signal)), float(np.sqrt(np.mean(noise)))


@_empty_cells_allowed
def excess_scatter(data: ModelData, slots: int) -> float:
    """Median over weekly cells of ``(variance - mean) / mean`` of the counts across weeks: 0
    for Poisson counts, ``mu / k`` for negative binomial ones (the latent daily path adds to it)."""
    counts, exposure = _cell_weeks(data, slots)
    full = exposure > 0
    usable = full.sum(axis=0) >= 3
    if not usable.any():
        return 0.0
    with np.errstate(invalid="ignore"):
        masked = np.where(full, counts, np.nan)
        mean = np.nanmean(masked, axis=0)[usable]
        var = np.nanvar(masked, axis=0, ddof=1)[usable]
    ratio = (var - mean) / np.maximum(mean, 1e-12)
    return float(np.nanmedian(ratio[mean > 0])) if np.any(mean > 0) else 0.0


@_empty_cells_allowed
def dispersion_signal(data: ModelData, slots: int) -> tuple[float, float]:
    """Estimated sd across slots of the log coefficient of variation of the bin noise, and the
    typical standard error of one slot's value, from the history.

    Per slot, ``cv^2 = sum(var - mean) / sum(mean^2)`` over its weekly cells (moments across
    weeks; the daily latent adds to it, which only matters if it differs by slot); the standard
    error of ``log cv`` is about ``sqrt(2 / n) (1 + 1 / (mean cv^2)) / 2`` for ``n`` bins (the
    variance of a sample variance, inflated where Poisson noise swamps the excess). Slots with
    no measurable excess are left out; with fewer than 3 left, the spread is 0.
    """
    counts, exposure = _cell_weeks(data, slots)
    full = exposure > 0
    ok = full.sum(axis=0) >= 3
    with np.errstate(invalid="ignore", divide="ignore"):
        masked = np.where(full, counts, np.nan)
        mean = np.nanmean(masked, axis=0)
        var = np.nanvar(masked, axis=0, ddof=1)
    n = np.where(ok, full.sum(axis=0), 0)
    excess = np.nansum(np.where(ok, var - mean, 0.0), axis=0)
    square = np.nansum(np.where(ok, mean**2, 0.0), axis=0)
    bins = n.sum(axis=0)
    level = np.nansum(np.where(ok, mean * n, 0.0), axis=0) / np.maximum(bins, 1)
    good = (square > 0) & (excess > 0) & (bins >= 6)
    if good.sum() < 3:
        return 0.0, float("inf")
    cv2 = excess[good] / square[good]
    log_cv = 0.5 * np.log(cv2)
    se = 0.5 * np.sqrt(2.0 / bins[good]) * (1.0 + 1.0 / (level[good] * cv2))
    noise = float(np.median(se**2))  # a few slots with barely any excess would swamp a mean
    return float(np.sqrt(max(float(np.var(log_cv, ddof=1)) - noise, 0.0))), float(np.sqrt(noise))


def choose_geometry(data: ModelData, spec: ModelSpec) -> Geometry:
    """The parameterisation :func:`models.fitting.build.build_model` uses.

    ``spec.centred_interaction`` True or False forces both blocks; None (the default) decides
    each from the data: the interaction centred when its estimated sd is at least
    :data:`CENTRE_RATIO` cell standard errors, the per-slot dispersions centred when their
    estimated spread across slots is at least :data:`CENTRE_RATIO` standard errors of one slot's
    value (:func:`dispersion_signal`; a dispersion common to all slots funnels when centred:
    r_hat 1.04 and bulk ESS 53-107 on two synthetic series, docs/fit-gate.md).
    """
    if spec.centred_interaction is not None:
        forced = spec.centred_interaction
        return Geometry(forced, forced)
    if not spec.has_time_of_day:
        return Geometry(False, False)
    slots = spec.slots_per_day
    signal, se = interaction_signal(data, slots)
    spread, spread_se = dispersion_signal(data, slots)
    return Geometry(
        centred_interaction=bool(signal >= CENTRE_RATIO * se),
        centred_dispersion=bool(spread >= CENTRE_RATIO * spread_se),
        interaction_sd=signal,
        cell_se=se,
        excess=excess_scatter(data, slots),
        dispersion_spread=spread,
        dispersion_se=spread_se,
    )

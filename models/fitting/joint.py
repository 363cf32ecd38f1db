"""Several related series fitted together (queues of one site, sites of one organisation).

The series share one day-of-week x time-of-day shape; each series adds its own day-of-week,
time-of-day and interaction deviations with its own scales, its own level, trend, holiday effect
and latent daily path (and, with negative binomial bins, its own dispersions). A series with a
few weeks of history so borrows the weekly shape of its siblings, while a series with plenty of
data keeps its own. After the joint fit every series gets
an ordinary :class:`~models.prediction.posterior.CompactPosterior`, so storing and forecasting are unchanged.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass
from typing import Any

import numpy as np

from models.exceptions import InputError
from models.fitting.build import build_joint_model
from models.fitting.compact import compact_from_fit
from models.fitting.escalation import attempt_record, stronger_options
from models.fitting.gate import Diagnostics, check_diagnostics
from models.fitting.sampling import FitOptions, sample_model
from models.prediction.posterior import CompactPosterior
from models.ratemodel.binning import BinnedSeries, OpeningHours
from models.ratemodel.design import JointData, make_model_data
from models.ratemodel.spec import ModelSpec
from models.store import PosteriorStore, StoredVersion, check_series_name

__all__ = [
    "JointFit",
    "fit_joint",
    "joint_posteriors",
    "make_joint_data",
    "publish_joint",
]


def make_joint_data(histories: dict[str, BinnedSeries], spec: ModelSpec) -> JointData:
    """Put every series on the union of their calendars.

    Raises
    ------
    InputError
        If fewer than two series are given, or they differ in zone or bin width.
    """
    if len(histories) < 2:
        raise InputError(f"a joint fit needs at least two series; got {len(histories)}")
    if spec.annual_harmonics or spec.within_day:
        raise InputError(
            f"annual_harmonics={spec.annual_harmonics} and within_day={spec.within_day}: the "
            "annual and within-day terms are not available for joint fits yet; set both to 0"
        )
    if spec.latent_by_weekday:
        raise InputError(
            "latent_by_weekday=True: weekday loadings on the daily deviation are not available "
            "for joint fits yet; set it to False"
        )
    names = tuple(check_series_name(n) for n in histories)
    zones = {h.tz for h in histories.values()}
    widths = {h.bin_minutes for h in histories.values()}
    if len(zones) > 1 or len(widths) > 1:
        raise InputError(
            f"series fitted jointly must share one zone and bin width; got zones {sorted(zones)} "
            f"and widths {sorted(widths)} minutes"
        )
    first = min(h.first_day for h in histories.values())
    end = max(h.end_day for h in histories.values())
    members = tuple(
        make_model_data(dataclasses.replace(h, first_day=first, end_day=end), spec)
        for h in histories.values()
    )
    return JointData(names=names, members=members)


@dataclass(frozen=True)
class JointFit:
    """A joint fit: the inference data (with a ``series`` dim) and its diagnostics."""

    idata: Any
    diagnostics: Diagnostics
    data: JointData
    spec: ModelSpec
    seed: int
    timings: dict[str, float]
    options: FitOptions = dataclasses.field(default_factory=FitOptions)
    retry: str | None = None
    attempts: tuple[dict[str, Any], ...] = ()


def fit_joint(data: JointData, spec: ModelSpec, *, options: FitOptions | None = None) -> JointFit:
    """Fit the joint model with NUTS and run the diagnostics gate; if it fails and
    ``options.retry`` is on, fit once more with stronger settings and keep that attempt."""
    options = options or FitOptions()
    model = build_joint_model(data, spec)
    idata, timings = sample_model(model, **options.sampling())
    diagnostics = check_diagnostics(idata, thresholds=options.thresholds)
    attempts = [attempt_record(options, diagnostics, timings["sampling_seconds"])]
    retry = None
    if not diagnostics.ok and options.retry:
        options, retry = stronger_options(options, diagnostics)
        idata, timings = sample_model(model, **options.sampling())
        diagnostics = check_diagnostics(idata, thresholds=options.thresholds)
        attempts.append(attempt_record(options, diagnostics, timings["sampling_seconds"]))
    diagnostics = dataclasses.replace(diagnostics, sampling_seconds=timings["sampling_seconds"])
    return JointFit(
        idata, diagnostics, data, spec, options.seed, timings, options, retry, tuple(attempts)
    )


def joint_posteriors(
    fit: JointFit,
    *,
    openings: dict[str, OpeningHours | None] | None = None,
    max_draws: int | None = 2000,
) -> dict[str, CompactPosterior]:
    """One compact posterior per series, each with the shared shape folded into its weekly rates."""
    out = {}
    for name, member in zip(fit.data.names, fit.data.members, strict=True):
        out[name] = compact_from_fit(
            fit.idata["posterior"].sel(series=name),
            calendar=member.calendar,
            spec=fit.spec,
            n_days=member.n_days,
            opening=(openings or {}).get(name),
            seed=fit.seed,
            max_draws=max_draws,
        )
    return out


def publish_joint(
    fit: JointFit,
    store: PosteriorStore,
    *,
    openings: dict[str, OpeningHours | None] | None = None,
    force: bool = False,
    max_draws: int | None = 2000,
    source: dict[str, Any] | None = None,
) -> dict[str, StoredVersion]:
    """Publish every series of a joint fit (all or none: the gate is checked first); a forced
    publish of a failing fit marks every version degraded.

    Raises
    ------
    FitRejected
        If the gate failed (after the retry of :func:`fit_joint`) and ``force`` is false.
    """
    from models.fitting.publish import fit_section, refusal

    if not fit.diagnostics.ok and not force:
        raise refusal(
            f"joint fit of {', '.join(fit.data.names)} (nothing published)",
            fit.diagnostics,
            fit.spec,
            fit.retry,
        )
    posteriors = joint_posteriors(fit, openings=openings, max_draws=max_draws)
    published = {}
    for name, posterior in posteriors.items():
        member = fit.data.members[fit.data.names.index(name)]
        manifest = {
            "data": {
                "first_day": member.calendar.first_day.isoformat(),
                "end_day": member.end_day.isoformat(),
                "tz": member.calendar.tz,
                "bin_minutes": member.calendar.bin_minutes,
                "observed_bins": len(member.count),
                "arrivals": int(np.sum(member.count)),
                **(source or {}),
            },
            "fit": {
                "joint_with": [n for n in fit.data.names if n != name],
                **fit_section(
                    fit.options, fit.diagnostics, fit.retry, list(fit.attempts), fit.timings
                ),
            },
            "diagnostics": fit.diagnostics.to_dict(),
        }
        published[name] = store.publish(name, posterior, manifest=manifest)
    return published

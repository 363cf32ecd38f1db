"""From binned history to a published version: fit, gate, compact, publish."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from models.exceptions import FitRejected
from models.fitting.sampling import FitOptions, FitResult, fit_model
from models.ratemodel.binning import BinnedSeries, OpeningHours
from models.ratemodel.design import make_model_data
from models.ratemodel.spec import ModelSpec
from models.store import PosteriorStore, StoredVersion

__all__ = ["PublishOutcome", "fit_and_publish"]


@dataclass(frozen=True)
class PublishOutcome:
    """A fit and, when the gate passed (or was forced), the version it became."""

    fit: FitResult
    version: StoredVersion | None


def fit_and_publish(
    binned: BinnedSeries,
    spec: ModelSpec,
    *,
    store: PosteriorStore,
    series: str,
    opening: OpeningHours | None = None,
    options: FitOptions | None = None,
    force: bool = False,
    source: dict[str, Any] | None = None,
) -> PublishOutcome:
    """Fit ``spec`` to ``binned`` and publish it to ``store`` as a new version of ``series``.

    Raises
    ------
    FitRejected
        If the diagnostics gate fails and ``force`` is false; nothing is published.
    """
    options = options or FitOptions()
    data = make_model_data(binned, spec)
    fit = fit_model(data, spec, options=options)
    if not fit.diagnostics.ok and not force:
        raise FitRejected(
            f"fit of series {series!r} failed the diagnostics gate and was not published "
            "(more --draws/--tune usually helps; --force publishes anyway)",
            list(fit.diagnostics.problems),
        )
    posterior = fit.compact(opening=opening, max_draws=options.max_stored_draws)
    manifest = {
        "data": {
            "first_day": binned.first_day.isoformat(),
            "end_day": binned.end_day.isoformat(),
            "tz": binned.tz,
            "bin_minutes": binned.bin_minutes,
            "observed_bins": len(binned.count),
            "arrivals": binned.total,
            **(source or {}),
        },
        "fit": {
            "sampler": options.sampler,
            "draws": options.draws,
            "tune": options.tune,
            "chains": options.chains,
            "forced": force and not fit.diagnostics.ok,
            **{k: round(v, 2) for k, v in fit.timings.items()},
        },
        "diagnostics": fit.diagnostics.to_dict(),
    }
    version = store.publish(
        series,
        posterior,
        manifest=manifest,
        idata=fit.idata if options.keep_full_posterior else None,
    )
    return PublishOutcome(fit=fit, version=version)

"""From binned history to a published version: fit, gate, compact, publish."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from models.binning import BinnedSeries, OpeningHours
from models.design import make_model_data
from models.exceptions import FitRejected
from models.fit import FitResult, GateThresholds, Sampler, fit_model
from models.posterior import compact_from_fit
from models.spec import ModelSpec
from models.store import PosteriorStore, StoredVersion

__all__ = ["FitOptions", "PublishOutcome", "fit_and_publish"]


@dataclass(frozen=True)
class FitOptions:
    """Sampling settings for :func:`fit_and_publish`."""

    draws: int = 1000
    tune: int = 1000
    chains: int = 4
    seed: int = 20261202
    sampler: Sampler = "pymc"
    target_accept: float = 0.9
    progressbar: bool = True
    max_stored_draws: int = 2000
    thresholds: GateThresholds = field(default_factory=GateThresholds)
    keep_full_posterior: bool = True

    def sampling(self) -> dict[str, Any]:
        """The options the sampler takes, as keyword arguments."""
        return {
            "draws": self.draws,
            "tune": self.tune,
            "chains": self.chains,
            "seed": self.seed,
            "sampler": self.sampler,
            "target_accept": self.target_accept,
            "progressbar": self.progressbar,
        }


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
    fit = fit_model(data, spec, thresholds=options.thresholds, **options.sampling())
    if not fit.diagnostics.ok and not force:
        raise FitRejected(
            f"fit of series {series!r} failed the diagnostics gate and was not published "
            "(more --draws/--tune usually helps; --force publishes anyway)",
            list(fit.diagnostics.problems),
        )
    posterior = compact_from_fit(
        fit.idata["posterior"],
        calendar=data.calendar,
        spec=spec,
        n_days=data.n_days,
        opening=opening,
        seed=options.seed,
        max_draws=options.max_stored_draws,
    )
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

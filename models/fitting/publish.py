"""From binned history to a published version: fit, gate (with one stronger retry), compact,
publish; a forced publish of a failing fit is marked degraded in its manifest."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from models.exceptions import FitRejected
from models.fitting.escalation import attempt_record, remedy, stronger_options
from models.fitting.geometry import choose_geometry
from models.fitting.sampling import FitOptions, FitResult, fit_model
from models.ratemodel.binning import BinnedSeries, OpeningHours
from models.ratemodel.design import make_model_data
from models.ratemodel.spec import ModelSpec
from models.store import PosteriorStore, StoredVersion

__all__ = ["PublishOutcome", "fit_and_publish", "fit_section", "refusal"]


@dataclass(frozen=True)
class PublishOutcome:
    """A fit and, when the gate passed (or was forced), the version it became.

    Attributes
    ----------
    fit
        The attempt that was kept (the retry, if there was one).
    version
        The published version.
    retry
        What the automatic retry changed (``"target_accept 0.95 -> 0.98, tune 1000 -> 2000"``),
        or None when the first attempt passed (or retries were off).
    attempts
        One record per attempt (settings, gate result, problems), first attempt first.
    degraded
        True when the kept fit failed the gate and was published because of ``force``.
    """

    fit: FitResult
    version: StoredVersion | None
    retry: str | None = None
    attempts: tuple[dict[str, Any], ...] = field(default_factory=tuple)
    degraded: bool = False


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

    If the first attempt fails the diagnostics gate and ``options.retry`` is on, the fit is run
    once more with stronger settings (:func:`~models.fitting.escalation.stronger_options`); the
    retry is kept whatever its result.

    Raises
    ------
    FitRejected
        If the kept attempt fails the gate and ``force`` is false; nothing is published. The
        message says what the retry changed and what would help.
    """
    options = options or FitOptions()
    data = make_model_data(binned, spec)
    fit = fit_model(data, spec, options=options)
    attempts = [attempt_record(options, fit.diagnostics, fit.timings["sampling_seconds"])]
    retry = None
    used = options
    if not fit.diagnostics.ok and options.retry:
        used, retry = stronger_options(options, fit.diagnostics)
        fit = fit_model(data, spec, options=used)
        attempts.append(attempt_record(used, fit.diagnostics, fit.timings["sampling_seconds"]))
    if not fit.diagnostics.ok and not force:
        raise refusal(f"fit of series {series!r}", fit.diagnostics, spec, retry)
    posterior = fit.compact(opening=opening, max_draws=used.max_stored_draws)
    manifest = {
        "data": {
            "first_day": binned.first_day.isoformat(),
            "end_day": binned.end_day.isoformat(),
            "tz": binned.tz,
            "bin_minutes": binned.bin_minutes,
            "observed_bins": len(binned.count),
            "arrivals": binned.total,
            "unusual_days_left_out": [d.isoformat() for d in data.left_out_days],
            **(source or {}),
        },
        "fit": {
            **fit_section(used, fit.diagnostics, retry, attempts, fit.timings),
            "parameterisation": choose_geometry(data, spec).to_dict(),
        },
        "diagnostics": fit.diagnostics.to_dict(),
    }
    version = store.publish(
        series,
        posterior,
        manifest=manifest,
        idata=fit.idata if used.keep_full_posterior else None,
    )
    return PublishOutcome(
        fit=fit,
        version=version,
        retry=retry,
        attempts=tuple(attempts),
        degraded=not fit.diagnostics.ok,
    )


def refusal(what: str, diagnostics: Any, spec: ModelSpec, retry: str | None) -> FitRejected:
    """The :class:`FitRejected` for a fit that failed the gate (after its retry, if any)."""
    tried = f" after one retry ({retry})" if retry else ""
    return FitRejected(
        f"{what} failed the diagnostics gate{tried} and was not published. What would help: "
        f"{remedy(diagnostics, observation=spec.observation, bin_minutes=spec.bin_minutes)}. "
        "--force publishes it anyway, marked degraded",
        list(diagnostics.problems),
    )


def fit_section(
    options: FitOptions,
    diagnostics: Any,
    retry: str | None,
    attempts: list[dict[str, Any]],
    timings: dict[str, float],
) -> dict[str, Any]:
    """The manifest's ``fit`` block: settings of the kept attempt, whether it was forced past a
    failing gate (``degraded``, with the ``problems``), the retry and every attempt."""
    degraded = not diagnostics.ok
    return {
        **options.sampler_settings(),
        "forced": degraded,
        "degraded": degraded,
        "problems": list(diagnostics.problems) if degraded else [],
        "retry": retry,
        "attempts": attempts,
        **{k: round(v, 2) for k, v in timings.items()},
    }

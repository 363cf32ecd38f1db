"""What to do when a fit fails the diagnostics gate: one stronger retry, then a remedy that helps.

A failure is read by kind. Divergent transitions mean the sampler met curvature its step size
cannot follow (a funnel or a ridge); more draws do not cure them, a smaller step (a higher target
acceptance) and a longer warm-up sometimes do, and otherwise the model must change. A low bulk
ESS alone means the chains mix slowly but agree: more draws do help, in proportion. A high r_hat
means the chains disagree: a longer warm-up and more draws.

This module imports no PyMC.
"""

from __future__ import annotations

import math
from typing import Any

from models.fitting.options import FitOptions

__all__ = ["RETRY_TARGET_ACCEPT", "attempt_record", "remedy", "stronger_options"]

#: Target acceptance of the retry after divergences (smaller steps).
RETRY_TARGET_ACCEPT = 0.98
#: The retry never asks for more than this multiple of the first attempt's draws.
MAX_DRAW_FACTOR = 3.0


def stronger_options(options: FitOptions, diagnostics: Any) -> tuple[FitOptions, str]:
    """Settings for the one automatic retry after ``diagnostics`` failed, and what they change.

    Divergences: target acceptance raised to :data:`RETRY_TARGET_ACCEPT` and the warm-up doubled.
    r_hat: warm-up doubled and draws raised. Bulk ESS alone: draws raised so the worst ESS,
    scaled, would reach the threshold with 20% to spare (at most :data:`MAX_DRAW_FACTOR` times).
    """
    changes: dict[str, Any] = {}
    thresholds = options.thresholds
    if diagnostics.divergences > thresholds.max_divergences:
        changes["target_accept"] = max(options.target_accept, RETRY_TARGET_ACCEPT)
        changes["tune"] = 2 * options.tune
    if options.chains > 1 and diagnostics.max_r_hat > thresholds.max_r_hat:
        changes["tune"] = 2 * options.tune
    if diagnostics.min_ess_bulk < thresholds.min_ess_bulk or "tune" in changes:
        ess = max(float(diagnostics.min_ess_bulk), 1.0)
        factor = min(MAX_DRAW_FACTOR, max(1.5, 1.2 * thresholds.min_ess_bulk / ess))
        if math.isnan(ess):
            factor = MAX_DRAW_FACTOR
        changes["draws"] = int(math.ceil(options.draws * factor / 50.0) * 50)
    if not changes:  # failed on nothing we know: a longer warm-up is the safe step
        changes["tune"] = 2 * options.tune
    note = ", ".join(f"{k} {getattr(options, k)} -> {v}" for k, v in changes.items())
    return options.with_changes(**changes), note


def remedy(diagnostics: Any, *, observation: str, bin_minutes: int) -> str:
    """One sentence on what would actually help, from which parameters failed and how."""
    names = " ".join([*diagnostics.problems, *getattr(diagnostics, "divergent_at", ())])
    advice: list[str] = []
    if diagnostics.divergences > 0:
        if observation == "negbin" and "overdispersion" in names:
            advice.append(
                "the bin-level scatter is barely identified (counts close to Poisson): "
                "--observation poisson"
            )
        if "latent" in names or "trend" in names:
            advice.append(
                "the latent daily path and the trend trade off (a level shift or too short a "
                "history): --no-trend, or a history that starts after the shift"
            )
        if "interaction" in names:
            advice.append(
                f"weekly cells hold too few arrivals for their own shape: a wider bin than "
                f"{bin_minutes} minutes, or more weeks of history"
            )
        if not advice:
            advice.append(
                "divergences are not cured by more draws; try --no-latent or --no-trend, or "
                "more weeks of history"
            )
    else:
        advice.append(
            "the chains mix slowly but without divergences: more --draws (and --tune) will help"
        )
    return "; ".join(advice)


def attempt_record(options: FitOptions, diagnostics: Any, seconds: float) -> dict[str, Any]:
    """What one attempt used and got, for the outcome and the manifest."""
    return {
        **options.sampler_settings(),
        "ok": bool(diagnostics.ok),
        "divergences": int(diagnostics.divergences),
        "min_ess_bulk": round(float(diagnostics.min_ess_bulk), 1),
        "max_r_hat": round(float(diagnostics.max_r_hat), 4),
        "problems": list(diagnostics.problems),
        "sampling_seconds": round(seconds, 2),
    }

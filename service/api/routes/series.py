"""The series catalogue: what is served, from which fit, over which history."""

from __future__ import annotations

import asyncio
from typing import Any

from fastapi import APIRouter

from models.store import StoredVersion
from service.api.deps import ReadAccess, RegistryDep, SettingsDep
from service.api.forecasting import forecast_until, served_version
from service.api.schemas import SeriesDetail, SeriesList, SeriesSummary, error_responses

__all__ = ["router", "summary"]

router = APIRouter(
    prefix="/v1/series",
    tags=["series"],
    dependencies=[ReadAccess],
    responses=error_responses(401, 403),
)


def _diagnostics(manifest: dict[str, Any]) -> dict[str, Any] | None:
    diag = manifest.get("diagnostics")
    if not isinstance(diag, dict) or "ok" not in diag:
        return None
    keys = ("ok", "max_r_hat", "min_ess_bulk", "divergences", "problems")
    return {k: diag[k] for k in keys if k in diag}


def summary(stored: StoredVersion, *, horizon_days: int) -> dict[str, Any]:
    """Catalogue entry of one served version."""
    posterior = stored.posterior
    calendar = posterior.calendar
    return {
        "series": stored.series,
        "model_version": stored.version,
        "tz": calendar.tz,
        "bin_minutes": calendar.bin_minutes,
        "history": {
            "first_day": calendar.first_day.isoformat(),
            "end_day": posterior.history_end.isoformat(),
            "days": posterior.n_days,
        },
        "forecast_until": forecast_until(stored, horizon_days).isoformat(),
        "fitted_at": stored.manifest.get("created_at"),
        "draws": posterior.n_draws,
        "degraded": stored.degraded,
        "diagnostics": _diagnostics(stored.manifest),
    }


@router.get("", summary="List the served series")
async def list_series(registry: RegistryDep, settings: SettingsDep) -> SeriesList:
    """Every series served now, with its model version, history, zone, fit time and diagnostics."""
    served = registry.snapshot()
    items = [
        SeriesSummary.model_validate(summary(served[name], horizon_days=settings.max_horizon_days))
        for name in sorted(served)
    ]
    return SeriesList(count=len(items), series=items)


@router.get(
    "/{series}",
    summary="One series in detail",
    responses=error_responses(404, 422),
)
async def series_detail(series: str, registry: RegistryDep, settings: SettingsDep) -> SeriesDetail:
    """The served version of one series, its manifest's description and all stored versions."""
    stored = served_version(registry, series)
    versions = await asyncio.to_thread(registry.store.versions, series)
    manifest = stored.manifest
    return SeriesDetail.model_validate(
        {
            **summary(stored, horizon_days=settings.max_horizon_days),
            "versions": versions,
            "loaded_at": registry.loaded_at(series) or "",
            "opening_hours": manifest.get("opening_hours"),
            "spec": manifest.get("spec"),
            "data": manifest.get("data"),
            "fit": manifest.get("fit"),
            "packages": manifest.get("packages"),
        }
    )

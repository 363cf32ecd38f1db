"""The series catalogue: what is served, from which fit, over which history."""

from __future__ import annotations

from typing import Any

from pydantic import BaseModel, Field

__all__ = ["DiagnosticsSummary", "History", "SeriesDetail", "SeriesList", "SeriesSummary"]


class DiagnosticsSummary(BaseModel):
    """Sampler diagnostics recorded when the version was fitted."""

    ok: bool
    max_r_hat: float | None = None
    min_ess_bulk: float | None = None
    divergences: int | None = None
    problems: list[str] = Field(default_factory=list)


class History(BaseModel):
    """History the version was fitted on (local dates of the series' zone)."""

    first_day: str = Field(examples=["2025-03-03"])
    end_day: str = Field(description="Day after the last history day.", examples=["2026-03-02"])
    days: int


class SeriesSummary(BaseModel):
    """A published series as currently served."""

    series: str = Field(examples=["desk-a"])
    model_version: str = Field(examples=["v0003"])
    tz: str = Field(examples=["America/Chicago"])
    bin_minutes: int
    history: History
    forecast_until: str = Field(description="Latest window end allowed (local date, exclusive).")
    fitted_at: str | None = Field(None, description="When the version was published (UTC).")
    draws: int
    degraded: bool = Field(
        False,
        description="Published although its fit failed the diagnostics gate (with --force): do "
        "not plan on it.",
    )
    diagnostics: DiagnosticsSummary | None = None


class SeriesList(BaseModel):
    """All series currently served."""

    count: int
    series: list[SeriesSummary]


class SeriesDetail(SeriesSummary):
    """One series in detail: the summary plus its manifest's description of the fit."""

    versions: list[str] = Field(description="All complete versions in the store, oldest first.")
    loaded_at: str
    opening_hours: str | None = None
    spec: dict[str, Any] | None = None
    data: dict[str, Any] | None = None
    fit: dict[str, Any] | None = None
    packages: dict[str, str] | None = None

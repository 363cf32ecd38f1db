"""Forecast queries shared by the CLI and the API: one implementation, one document shape."""

from __future__ import annotations

import csv
import io
from collections.abc import Sequence
from typing import Any

import pandas as pd

from models.prediction.windows import (
    MAX_HORIZON_DAYS,
    forecast,
    parse_instant,
    parse_step,
    split_range,
)
from models.store import StoredVersion

__all__ = ["CAUTION", "flat_row", "forecast_csv", "forecast_document", "range_windows"]

CAUTION = (
    "Forecasts are probabilistic: real counts fall outside the intervals at about the stated "
    "rate, and more often when conditions change. Decisions about staff and safety stay with the "
    "people responsible and local rules."
)


def range_windows(
    start: str, end: str, *, step: str | None, tz: str
) -> tuple[pd.DatetimeIndex, pd.DatetimeIndex]:
    """Windows cutting ``[start, end)`` by ``step``; times without an offset are local to ``tz``."""
    return split_range(
        parse_instant(start, tz=tz), parse_instant(end, tz=tz), parse_step(step) if step else None
    )


def forecast_document(
    stored: StoredVersion,
    starts: pd.DatetimeIndex,
    ends: pd.DatetimeIndex,
    *,
    levels: Sequence[float],
    quantiles: Sequence[float] = (),
    at_least: Sequence[int] = (),
    total: bool = False,
    horizon_days: int = MAX_HORIZON_DAYS,
) -> dict[str, Any]:
    """The forecast document: ``{"series", "model_version", "tz", "windows": [...], ...}``."""
    result = forecast(
        stored.posterior,
        starts,
        ends,
        levels=levels,
        quantiles=quantiles,
        at_least=at_least,
        total=total,
        horizon_days=horizon_days,
    )
    doc: dict[str, Any] = {
        "series": stored.series,
        "model_version": stored.version,
        "tz": stored.posterior.calendar.tz,
        "windows": result.rows(),
    }
    if total:
        doc["total"] = result.total_row()
    doc["caution"] = CAUTION
    return doc


def flat_row(row: dict[str, Any]) -> dict[str, Any]:
    """One window as flat columns (``lo_0.8``, ``hi_0.8``, ``q_0.5``, ``p_at_least_10``...)."""
    flat = {
        "start": row["start"],
        "end": row["end"],
        "mean": round(row["mean"], 3),
        "sd": round(row["sd"], 3),
        "p_zero": round(row["p_zero"], 4),
    }
    for level, (lo, hi) in row["intervals"].items():
        flat[f"lo_{level}"], flat[f"hi_{level}"] = lo, hi
    for q, v in row["quantiles"].items():
        flat[f"q_{q}"] = v
    for k, p in row.get("at_least", {}).items():
        flat[f"p_at_least_{k}"] = round(p, 4)
    return flat


def forecast_csv(doc: dict[str, Any]) -> str:
    """Flat CSV of a forecast document, one row per window."""
    rows = [flat_row(r) for r in doc["windows"]]
    buffer = io.StringIO()
    writer = csv.DictWriter(buffer, fieldnames=list(rows[0]))
    writer.writeheader()
    writer.writerows(rows)
    return buffer.getvalue()

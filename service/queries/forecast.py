"""Forecast queries shared by the CLI and the API: one implementation, one document shape.

A forecast document (:class:`ForecastDocument`) holds one :class:`~models.prediction.windows.
ForecastRow` per window, the only definition of a row: the API's response schema is derived from
these types (``service.api.schemas``), and the flat CSV columns from the row's keys.
"""

from __future__ import annotations

import csv
import io
from collections.abc import Mapping, Sequence
from typing import Any, NotRequired, TypedDict

import pandas as pd

from models.prediction.windows import MAX_HORIZON_DAYS, ForecastRow, forecast
from models.store import StoredVersion
from service.queries.windows import range_windows

__all__ = [
    "CAUTION",
    "ForecastDocument",
    "flat_row",
    "forecast_csv",
    "forecast_document",
    "range_windows",
    "table_csv",
]

CAUTION = (
    "Forecasts are probabilistic: real counts fall outside the intervals at about the stated "
    "rate, and more often when conditions change. Decisions about staff and safety stay with the "
    "people responsible and local rules."
)


class ForecastDocument(TypedDict):
    """Forecast document: the same shape for ``ratecast forecast --format json`` and the API.

    ``tz`` is the series' zone, in which window times are given; ``total`` (present when asked
    for) is the distribution of the sum over all windows, from the same draws. ``degraded`` is
    true when the version was published although its fit failed the diagnostics gate: a
    pipeline should not plan on it.
    """

    series: str
    model_version: str
    degraded: bool
    tz: str
    windows: list[ForecastRow]
    total: NotRequired[ForecastRow]
    caution: str


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
    """The forecast document, shaped as :class:`ForecastDocument`.

    Typed ``dict`` for the CLI's renderers, which take plain dicts; the API validates it against
    the response model derived from :class:`ForecastDocument`.
    """
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
        "degraded": stored.degraded,
        "tz": stored.posterior.calendar.tz,
        "windows": result.rows(),
    }
    total_row = result.total_row()
    if total_row is not None:
        doc["total"] = total_row
    doc["caution"] = CAUTION
    return doc


#: Digits kept in CSV cells, by the key they come from (others: 6).
_DIGITS = {"mean": 3, "sd": 3, "p_zero": 4, "at_least": 4}


def flat_row(row: Mapping[str, Any]) -> dict[str, Any]:
    """One window as flat columns (``lo_0.8``, ``hi_0.8``, ``q_0.5``, ``p_at_least_10``...).

    Column names come from the row's own keys, so the CSV says what the JSON says: intervals
    become ``lo_<level>``/``hi_<level>``, quantiles ``q_<level>``, ``at_least`` becomes
    ``p_at_least_<k>``, and any other nested object ``<key>_<name>`` (``before_mean``).
    """
    flat: dict[str, Any] = {}
    for key, value in row.items():
        if key == "intervals":
            for level, (lo, hi) in value.items():
                flat[f"lo_{level}"], flat[f"hi_{level}"] = lo, hi
        elif key == "quantiles":
            flat.update({f"q_{q}": v for q, v in value.items()})
        elif key == "at_least":
            flat.update({f"p_at_least_{k}": _cell("at_least", p) for k, p in value.items()})
        elif isinstance(value, Mapping):
            flat.update({f"{key}_{name}": _cell(name, v) for name, v in value.items()})
        else:
            flat[key] = _cell(key, value)
    return flat


def _cell(key: str, value: Any) -> Any:
    return round(value, _DIGITS.get(key, 6)) if isinstance(value, float) else value


def document_csv(
    rows: Sequence[Mapping[str, Any]], doc: Mapping[str, Any], *, caution_column: bool = False
) -> str:
    """Plain CSV of a document's flat rows; every row also says whether the version is
    ``degraded`` (so a pipeline that filters rows still sees it) and, with ``caution_column``
    (where no HTTP header can carry it, as on the command line), the caution."""
    extra: dict[str, Any] = {"degraded": bool(doc.get("degraded", False))}
    if caution_column:
        extra["caution"] = doc["caution"]
    return table_csv([{**row, **extra} for row in rows])


def table_csv(rows: Sequence[Mapping[str, Any]]) -> str:
    """Plain CSV of flat rows: one header line, one line per row, nothing else."""
    buffer = io.StringIO()
    writer = csv.DictWriter(buffer, fieldnames=list(rows[0]) if rows else [])
    writer.writeheader()
    writer.writerows(rows)
    return buffer.getvalue()


def forecast_csv(doc: Mapping[str, Any], *, caution_column: bool = False) -> str:
    """Flat CSV of a forecast document, one row per window.

    With a total, a first column ``row`` says ``window`` or ``total``, and the total is the last
    row (its ``start`` and ``end`` span all the windows). See :func:`document_csv` for the last
    columns.
    """
    rows = [flat_row(r) for r in doc["windows"]]
    if "total" in doc:
        rows = [{"row": "window", **r} for r in rows]
        rows.append({"row": "total", **flat_row(doc["total"])})
    return document_csv(rows, doc, caution_column=caution_column)

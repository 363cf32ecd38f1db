"""Batch requests (many series x windows) and the NDJSON records that answer them."""

from __future__ import annotations

from typing import Any

from pydantic import BaseModel, ConfigDict, Field, SkipValidation, model_validator

from service.api.schemas.common import STEP_PATTERN, Instant, Zone
from service.api.schemas.errors import ErrorResponse
from service.api.schemas.forecast import ForecastOptions, ForecastResponse, WindowIn

__all__ = ["BatchItem", "BatchRecord", "BatchRequest"]

_ITEM_EXAMPLE: Any = {
    "id": "desk-a/monday",
    "series": "desk-a",
    "start": "2026-03-09T00:00",
    "end": "2026-03-10T00:00",
    "step": "1h",
    "tz": "America/Chicago",
}


class BatchItem(ForecastOptions):
    """One series and its windows: either ``windows`` or ``start`` + ``end`` (+ ``step``)."""

    model_config = ConfigDict(
        extra="forbid", strict=True, json_schema_extra={"examples": [_ITEM_EXAMPLE]}
    )

    id: str | None = Field(None, max_length=128, description="Echoed in the result record.")
    series: str = Field(min_length=1, max_length=64)
    windows: list[WindowIn] | None = Field(None, min_length=1)
    start: Instant | None = None
    end: Instant | None = None
    step: str | None = Field(None, pattern=STEP_PATTERN)
    tz: Zone | None = None
    total: bool = False

    @model_validator(mode="after")
    def _one_way_of_giving_windows(self) -> BatchItem:
        ranged = self.start is not None or self.end is not None or self.step is not None
        if self.windows is not None and ranged:
            raise ValueError("give either windows or start/end/step, not both")
        if self.windows is None and (self.start is None or self.end is None):
            raise ValueError("give windows, or start and end (and optionally step)")
        return self


class BatchRequest(BaseModel):
    """Many series x windows; answered as NDJSON, one record per item, in order.

    Items are checked one by one, so a bad item becomes an error record and the rest of the
    batch is still answered. The work budget applies to the whole batch: it is estimated over
    every valid item before the first is answered.
    """

    model_config = ConfigDict(
        extra="forbid",
        strict=True,
        json_schema_extra={
            "examples": [
                {
                    "items": [
                        {
                            "series": "desk-a",
                            "start": "2026-03-09",
                            "end": "2026-03-10",
                            "step": "1h",
                            "tz": "America/Chicago",
                        },
                        {
                            "series": "desk-b",
                            "windows": [
                                {"start": "2026-03-09T09:00-06:00", "end": "2026-03-09T12:00-06:00"}
                            ],
                        },
                    ]
                }
            ]
        },
    )

    # Validated item by item in the route (see the class docstring); documented as BatchItem.
    items: SkipValidation[list[BatchItem]] = Field(
        min_length=1, description="The items, answered in order."
    )


class BatchRecord(BaseModel):
    """One NDJSON line of a batch answer."""

    index: int
    id: str | None = None
    series: str | None = None
    ok: bool
    result: ForecastResponse | None = None  # type: ignore[valid-type]
    error: ErrorResponse | None = None

"""Capacity requests (a staffing plan, an intraday update) and the documents answering them."""

from __future__ import annotations

from typing import Annotated, Literal

from pydantic import ConfigDict, Field

from models.capacity.staffing import DayTotal
from service.api.schemas.common import (
    STEP_PATTERN,
    Instant,
    RequestModel,
    Zone,
    typed_model,
)
from service.api.schemas.forecast import SummaryOptions, WindowIn
from service.queries.capacity import StaffingDocument, UpdateDocument

__all__ = [
    "IntradayRequest",
    "IntradayResponse",
    "ObservedWindow",
    "StaffingRequest",
    "StaffingResponse",
]

#: Shortest handle time or patience that keeps a queue meaningful (below it the rates overflow).
MIN_SECONDS = 0.001
AgentCount = Annotated[int, Field(ge=0, le=1_000_000)]


class StaffingRequest(RequestModel):
    """A plan ``[start, end)`` cut into intervals, and the service-level goal."""

    model_config = ConfigDict(
        extra="forbid",
        strict=True,
        json_schema_extra={
            "examples": [
                {
                    "start": "2026-03-09T08:00",
                    "end": "2026-03-09T18:00",
                    "step": "30min",
                    "tz": "America/Chicago",
                    "handle_time_seconds": 240,
                    "answer_within_seconds": 20,
                    "share": 0.8,
                    "meet_probability": 0.9,
                    "shrinkage": 0.3,
                }
            ]
        },
    )

    start: Instant
    end: Instant
    step: Literal["15min", "30min", "1h"] = Field("30min", description="Plan interval length.")
    tz: Zone | None = None
    handle_time_seconds: float = Field(
        ge=MIN_SECONDS, le=86_400, description="Mean handle time, 1 ms to a day."
    )
    answer_within_seconds: float = Field(ge=0, le=86_400, description="Target answer time T.")
    share: float = Field(gt=0, lt=1, description="Share of callers to answer within T.")
    patience_seconds: float | None = Field(
        None,
        ge=MIN_SECONDS,
        le=86_400,
        description="Mean patience if callers hang up (Erlang A), 1 ms to a day.",
    )
    meet_probability: float = Field(
        0.9,
        gt=0,
        lt=1,
        description="Probability of meeting the target over the predictive arrival count.",
    )
    shrinkage: float = Field(0.0, ge=0, lt=1, description="Share of paid time off the queue.")
    min_agents: int = Field(1, ge=0, le=100_000, description="Floor where calls can arrive.")
    agents: list[AgentCount] | None = Field(
        None,
        min_length=1,
        description="A staffing to evaluate: one number for all intervals, or one per interval.",
    )


class ObservedWindow(WindowIn):
    """A window of today and the arrivals counted in it."""

    count: int = Field(ge=0, le=1_000_000_000)


class IntradayRequest(SummaryOptions):
    """Today's observed counts, and the windows to forecast again.

    As with ``ratecast update``: ``start`` defaults to the end of the observations, ``end`` to
    the next local midnight after ``start``, and ``step`` to one model bin.
    """

    observed: list[ObservedWindow] = Field(min_length=1, description="Today's observed windows.")
    start: Instant | None = None
    end: Instant | None = None
    step: str | None = Field(
        None, pattern=STEP_PATTERN, description="Window length (default: one model bin)."
    )
    tz: Zone | None = None
    seed: int | None = Field(None, ge=0, le=2**32 - 1, description="Default: the version's seed.")


#: The staffing document of :mod:`service.queries.capacity` (days as :class:`DayTotal`).
StaffingResponse = typed_model(StaffingDocument, days=list[DayTotal])
#: The updated forecast document of :mod:`service.queries.capacity`.
IntradayResponse = typed_model(UpdateDocument)

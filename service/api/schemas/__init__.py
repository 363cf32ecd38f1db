"""Request and response shapes of the HTTP API, one module per resource.

Requests are strict and forbid unknown fields (:mod:`.common`); documents built by
:mod:`service.queries` are typed there and their response models derived from those types, so
each shape is written once. Errors have one body (:mod:`.errors`).
"""

from __future__ import annotations

from service.api.schemas.batch import BatchItem, BatchRecord, BatchRequest
from service.api.schemas.capacity import (
    IntradayRequest,
    IntradayResponse,
    ObservedWindow,
    StaffingRequest,
    StaffingResponse,
)
from service.api.schemas.common import (
    INSTANT_ALLOWED,
    INSTANT_PATTERN,
    STEP_PATTERN,
    Instant,
    Level,
    QueryBool,
    RequestModel,
    Threshold,
    Zone,
    typed_model,
)
from service.api.schemas.errors import ErrorResponse, Problem, error_responses
from service.api.schemas.forecast import (
    BandsQuery,
    ForecastOptions,
    ForecastRequest,
    ForecastResponse,
    SummaryOptions,
    WindowIn,
    WindowResult,
)
from service.api.schemas.health import HealthLive, HealthReady
from service.api.schemas.series import (
    DiagnosticsSummary,
    History,
    SeriesDetail,
    SeriesList,
    SeriesSummary,
)

__all__ = [
    "INSTANT_ALLOWED",
    "INSTANT_PATTERN",
    "STEP_PATTERN",
    "BandsQuery",
    "BatchItem",
    "BatchRecord",
    "BatchRequest",
    "DiagnosticsSummary",
    "ErrorResponse",
    "ForecastOptions",
    "ForecastRequest",
    "ForecastResponse",
    "HealthLive",
    "HealthReady",
    "History",
    "Instant",
    "IntradayRequest",
    "IntradayResponse",
    "Level",
    "ObservedWindow",
    "Problem",
    "QueryBool",
    "RequestModel",
    "SeriesDetail",
    "SeriesList",
    "SeriesSummary",
    "StaffingRequest",
    "StaffingResponse",
    "SummaryOptions",
    "Threshold",
    "WindowIn",
    "WindowResult",
    "Zone",
    "error_responses",
    "typed_model",
]

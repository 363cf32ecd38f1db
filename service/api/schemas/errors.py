"""The one error body, and how routes document the errors they answer with."""

from __future__ import annotations

from typing import Any

from pydantic import BaseModel, ConfigDict, Field

from service.api.schemas.common import INSTANT_ALLOWED

__all__ = ["ErrorResponse", "Problem", "error_responses"]


class Problem(BaseModel):
    """One thing wrong with a request."""

    field: str | None
    value: Any = None
    message: str
    allowed: str | None = None


class ErrorResponse(BaseModel):
    """Every error has this body."""

    model_config = ConfigDict(
        json_schema_extra={
            "examples": [
                {
                    "status": 422,
                    "code": "invalid_input",
                    "message": "time 2026-03-09 09:00:00 has no UTC offset and no zone was given; "
                    "add an offset (e.g. 2026-03-09T09:00-03:00) or a zone",
                    "field": "windows[0].start",
                    "value": "2026-03-09T09:00",
                    "allowed": INSTANT_ALLOWED,
                    "problems": [],
                }
            ]
        }
    )

    status: int
    code: str
    message: str
    field: str | None = None
    value: Any = None
    allowed: str | None = None
    problems: list[Problem] = Field(default_factory=list)


#: What each error status means, as routes document it.
_MEANING = {
    401: "A token is needed (read token configured, or an admin call) and none was given.",
    403: "The token given is not valid, or admin calls are disabled.",
    404: "No such series is served.",
    406: "Neither JSON nor CSV is acceptable (Accept header).",
    413: "The request body is too large.",
    422: "A field is invalid, or the request asks for more than the limits or the work budget "
    "allow: the body names the field, the value and what is allowed.",
    503: "The server is busy, the request ran past its deadline, or the store cannot be read; "
    "try again after Retry-After seconds.",
}


def error_responses(*statuses: int) -> dict[int | str, dict[str, Any]]:
    """OpenAPI ``responses`` for error statuses, each an :class:`ErrorResponse` in JSON.

    The media type is spelt out so that routes answering in another type (NDJSON, Prometheus
    text) still document their errors as the JSON they are.
    """
    schema = {"$ref": "#/components/schemas/ErrorResponse"}
    return {
        status: {
            "description": _MEANING[status],
            "content": {"application/json": {"schema": schema}},
        }
        for status in statuses
    }

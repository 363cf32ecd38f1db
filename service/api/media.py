"""Content negotiation for routes that answer tables: JSON by default, plain CSV on request.

A CSV answer is plain CSV (one header line, one line per row): what JSON puts beside the rows
travels in HTTP headers, the caution in ``X-Caution`` and the version in ``X-Model-Version``.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

from fastapi.responses import Response
from pydantic import BaseModel

from models.store import StoredVersion
from service.api.errors import ApiError

__all__ = ["CSV_RESPONSES", "csv_response", "json_response", "table_route", "wants_csv"]

#: OpenAPI ``responses`` entry of a route that may answer CSV.
CSV_RESPONSES: dict[int | str, dict[str, Any]] = {
    200: {
        "content": {"text/csv": {"schema": {"type": "string"}}},
        "description": "JSON by default; plain CSV (one row per window or interval) with "
        "`Accept: text/csv`, the caution in the `X-Caution` header.",
    }
}


def wants_csv(accept: str | None) -> bool:
    """Content negotiation between JSON (default) and CSV, honouring q-values.

    Raises
    ------
    ApiError
        406 if the client accepts neither.
    """
    if not accept:
        return False
    offers: list[tuple[float, int, str]] = []
    for position, part in enumerate(accept.split(",")):
        media, *params = (p.strip() for p in part.split(";"))
        q = 1.0
        for param in params:
            name, _, value = param.partition("=")
            if name.strip().lower() == "q":
                try:
                    q = float(value)
                except ValueError:
                    q = 0.0
        if q > 0:
            offers.append((-q, position, media.lower()))
    for _, _, media in sorted(offers):
        if media in ("application/json", "application/*", "*/*"):
            return False
        if media in ("text/csv", "text/*"):
            return True
    raise ApiError(
        406,
        "not_acceptable",
        f"cannot answer in any of the media types accepted ({accept[:100]!r})",
        field="Accept",
        value=accept,
        allowed="application/json (default) or text/csv",
    )


def version_headers(stored: StoredVersion) -> dict[str, str]:
    """The version an answer comes from, and whether it is degraded (``true``/``false``)."""
    return {
        "X-Model-Version": stored.version,
        "X-Model-Degraded": "true" if stored.degraded else "false",
    }


def csv_response(text: str, stored: StoredVersion, *, caution: str, name: str) -> Response:
    """A CSV answer with the version, whether it is degraded, and the caution in its headers."""
    return Response(
        text,
        media_type="text/csv; charset=utf-8",
        headers={
            "Content-Disposition": (
                f'inline; filename="{stored.series}-{stored.version}-{name}.csv"'
            ),
            **version_headers(stored),
            "X-Caution": caution,
        },
    )


def json_response(document: BaseModel, stored: StoredVersion) -> Response:
    """A JSON answer of a document already validated as its response model, with the version
    headers.

    Serialised once, as the route's ``response_model`` would (keys left unset stay out), without
    the second validation FastAPI gives a returned model.
    """
    return Response(
        document.model_dump_json(exclude_unset=True),
        media_type="application/json",
        headers=version_headers(stored),
    )


def table_route(method: Callable[..., Any], path: str, summary: str, model: Any) -> Any:
    """Declare a route answering ``model`` in JSON, or plain CSV on request.

    ``method`` is the router's ``post`` or ``get``. Keys a document leaves out (``total``,
    ``at_least``...) stay out of the JSON rather than appearing as null.
    """
    return method(
        path,
        summary=summary,
        response_model=model,
        response_model_exclude_unset=True,
        responses=CSV_RESPONSES,
    )

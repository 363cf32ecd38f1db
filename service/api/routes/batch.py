"""Many series x windows in one call, answered as a stream of NDJSON records.

Each item is validated and answered on its own while the response streams, so memory holds one
item's answer at a time and a bad item becomes an error record instead of failing the batch. The
whole batch is answered from one snapshot of the served versions.
"""

from __future__ import annotations

import asyncio
import json
from collections.abc import AsyncIterator, Mapping
from typing import Any

from fastapi import APIRouter
from fastapi.responses import StreamingResponse
from pydantic import ValidationError

from models.store import StoredVersion
from service.api.deps import ReadAccess, RegistryDep, SettingsDep
from service.api.errors import ApiError, error_from_exception, problems_from_validation
from service.api.forecasting import answer, range_index, served_version, window_index
from service.api.registry import Registry
from service.api.schemas import BatchItem, BatchRecord, BatchRequest
from service.config import Settings

__all__ = ["NDJSONResponse", "router"]


class NDJSONResponse(StreamingResponse):
    """Newline-delimited JSON, one record per line."""

    media_type = "application/x-ndjson"


def _json_error(description: str) -> dict[str, Any]:
    # Spelt out: with "model" FastAPI would document errors as NDJSON, the route's media type.
    schema = {"$ref": "#/components/schemas/ErrorResponse"}
    return {"description": description, "content": {"application/json": {"schema": schema}}}


router = APIRouter(
    prefix="/v1/batch",
    tags=["batch"],
    dependencies=[ReadAccess],
    responses={
        401: _json_error("A read token is configured and missing."),
        403: _json_error("The token given is not valid."),
        413: _json_error("The request body is too large."),
        422: _json_error("The envelope is invalid or has too many items."),
    },
)


def _check_envelope(items: Any, limit: int) -> list[Any]:
    if not isinstance(items, list):
        raise ApiError(
            422,
            "invalid_input",
            f"items must be a list of batch items, not {type(items).__name__}",
            field="items",
            value=items,
            allowed="a JSON array of 1 or more items",
        )
    if not 1 <= len(items) <= limit:
        raise ApiError(
            422,
            "too_many_items" if items else "invalid_input",
            f"{len(items)} batch items given; between 1 and {limit} are allowed",
            field="items",
            value=len(items),
            allowed=f"1 to {limit} items (RATECAST_MAX_BATCH_ITEMS)",
        )
    return items


async def _record(
    index: int,
    raw: Any,
    served: Mapping[str, StoredVersion],
    registry: Registry,
    settings: Settings,
) -> dict[str, Any]:
    meta = raw if isinstance(raw, dict) else {}
    record: dict[str, Any] = {
        "index": index,
        "id": meta.get("id") if isinstance(meta.get("id"), str) else None,
        "series": meta.get("series") if isinstance(meta.get("series"), str) else None,
    }
    try:
        try:
            item = BatchItem.model_validate(raw)
        except ValidationError as exc:
            problems = problems_from_validation(exc.errors(), root="item")
            first = problems[0]
            raise ApiError(
                422,
                "invalid_input",
                f"{first['field']}: {first['message']}",
                field=first["field"],
                value=first["value"],
                allowed=first["allowed"],
                problems=problems,
            ) from exc
        stored = served.get(item.series) or served_version(registry, item.series)
        if item.windows is not None:
            starts, ends = window_index(item.windows, tz=item.tz, max_windows=settings.max_windows)
        else:
            assert item.start is not None and item.end is not None  # by BatchItem's validator
            starts, ends = range_index(
                item.start, item.end, item.step, tz=item.tz, max_windows=settings.max_windows
            )
        doc = await answer(
            stored,
            starts,
            ends,
            levels=item.levels,
            quantiles=item.quantiles,
            at_least=item.at_least,
            total=item.total,
            horizon_days=settings.max_horizon_days,
            windows=[w.model_dump() for w in item.windows] if item.windows else None,
        )
    except Exception as exc:  # every failure is this item's record, never the batch's
        return {**record, "ok": False, "error": error_from_exception(exc).body()}
    return {**record, "ok": True, "result": doc}


def _record_schema() -> dict[str, Any]:
    # The models it refers to are in the document's components already (other routes use them).
    schema = BatchRecord.model_json_schema(ref_template="#/components/schemas/{model}")
    schema.pop("$defs", None)
    return schema


@router.post(
    "",
    summary="Forecast many series x windows (NDJSON stream)",
    response_class=NDJSONResponse,
    responses={
        200: {
            "description": "One JSON record per line, in item order.",
            "content": {"application/x-ndjson": {"schema": _record_schema()}},
        }
    },
)
async def batch(body: BatchRequest, registry: RegistryDep, settings: SettingsDep) -> NDJSONResponse:
    """Each item names a series and either explicit ``windows`` or ``start``/``end``/``step``.

    The answer streams one record per item: ``{"index", "id", "series", "ok", "result"}`` or, for
    an item that cannot be answered, ``{"index", "id", "series", "ok": false, "error"}`` with the
    usual error body (its ``field`` is relative to the item).
    """
    items = _check_envelope(body.items, settings.max_batch_items)
    served = registry.snapshot()

    async def lines() -> AsyncIterator[str]:
        for index, raw in enumerate(items):
            record = await _record(index, raw, served, registry, settings)
            yield json.dumps(record, separators=(",", ":")) + "\n"
            await asyncio.sleep(0)  # let other requests in between items

    return NDJSONResponse(lines())

"""Many series x windows in one call, answered as a stream of NDJSON records.

The whole batch is read first: every item is validated and its work estimated (without cutting
a range into windows), and the batch as a whole must fit the work budget before any item is
answered. Then each item is answered in the work pool while the response streams, so memory
holds one item's answer at a time and a bad item becomes an error record instead of failing the
batch. The batch is answered from one snapshot of the served versions and has one deadline; a
client that disconnects stops it between items.
"""

from __future__ import annotations

import asyncio
import json
from collections.abc import AsyncIterator, Mapping
from dataclasses import dataclass
from typing import Any

from fastapi import APIRouter
from fastapi.responses import StreamingResponse
from pydantic import ValidationError

from models.store import StoredVersion
from service.api.deps import ReadAccess, RegistryDep, SettingsDep, WorkDep
from service.api.errors import ApiError, error_from_exception, validation_error
from service.api.forecasting import (
    ForecastPlan,
    Windows,
    answer,
    read_range,
    served_version,
    window_index,
)
from service.api.registry import Registry
from service.api.schemas import BatchItem, BatchRecord, BatchRequest, error_responses
from service.config import Settings

__all__ = ["NDJSONResponse", "router"]


class NDJSONResponse(StreamingResponse):
    """Newline-delimited JSON, one record per line."""

    media_type = "application/x-ndjson"


router = APIRouter(
    prefix="/v1/batch",
    tags=["batch"],
    dependencies=[ReadAccess],
    responses=error_responses(401, 403, 413, 422, 503),
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


@dataclass(frozen=True)
class _Item:
    """One item read and planned: its record's head, and its plan or why it has none."""

    head: dict[str, Any]
    plan: ForecastPlan | None = None
    error: ApiError | None = None


def _plan(
    index: int,
    raw: Any,
    served: Mapping[str, StoredVersion],
    registry: Registry,
    settings: Settings,
) -> _Item:
    meta = raw if isinstance(raw, dict) else {}
    head = {
        "index": index,
        "id": meta.get("id") if isinstance(meta.get("id"), str) else None,
        "series": meta.get("series") if isinstance(meta.get("series"), str) else None,
    }
    try:
        try:
            item = BatchItem.model_validate(raw)
        except ValidationError as exc:
            raise validation_error(exc.errors(), root="item") from exc
        stored = served.get(item.series) or served_version(registry, item.series)
        if item.windows is not None:
            starts, ends = window_index(item.windows, tz=item.tz, max_windows=settings.max_windows)
            windows = Windows(starts, ends, given=[w.model_dump() for w in item.windows])
        else:
            assert item.start is not None and item.end is not None  # by BatchItem's validator
            span = read_range(
                item.start, item.end, item.step, tz=item.tz, max_windows=settings.max_windows
            )
            windows = Windows(span=span)
        plan = ForecastPlan.of(stored, windows, item)
    except Exception as exc:  # every failure is this item's record, never the batch's
        return _Item(head, error=error_from_exception(exc))
    return _Item(head, plan=plan)


def _line(record: dict[str, Any]) -> str:
    return json.dumps(record, separators=(",", ":")) + "\n"


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
async def batch(
    body: BatchRequest, registry: RegistryDep, settings: SettingsDep, work: WorkDep
) -> NDJSONResponse:
    """Each item names a series and either explicit ``windows`` or ``start``/``end``/``step``.

    The answer streams one record per item: ``{"index", "id", "series", "ok", "result"}`` or, for
    an item that cannot be answered, ``{"index", "id", "series", "ok": false, "error"}`` with the
    usual error body (its ``field`` is relative to the item). Items left when the deadline passes
    get the ``deadline_exceeded`` error. A batch whose valid items together exceed the work budget
    is refused (422 ``over_budget``) before any item is answered.
    """
    deadline = work.deadline()
    raw_items = _check_envelope(body.items, settings.max_batch_items)
    served = registry.snapshot()

    def plan_all() -> list[_Item]:
        return [_plan(i, raw, served, registry, settings) for i, raw in enumerate(raw_items)]

    items = await asyncio.to_thread(plan_all)
    work.admit(sum(item.plan.cells for item in items if item.plan is not None), field="items")

    async def lines() -> AsyncIterator[str]:
        late: ApiError | None = None
        for item in items:
            error = late or item.error
            if error is None and item.plan is not None:
                try:
                    doc = await answer(
                        work, item.plan, horizon_days=settings.max_horizon_days, deadline=deadline
                    )
                except ApiError as exc:
                    error = exc
                    late = exc if exc.code == "deadline_exceeded" else None
                except Exception as exc:  # this item's record, never the batch's
                    error = error_from_exception(exc)
                else:
                    result = doc.model_dump(mode="json", exclude_unset=True)
                    yield _line({**item.head, "ok": True, "result": result})
                    continue
            assert error is not None
            yield _line({**item.head, "ok": False, "error": error.body()})

    return NDJSONResponse(lines())

"""Capacity for one series: staffing per interval, and the intraday update of a forecast.

Both answers are built by :mod:`service.queries.capacity`, the same code as ``ratecast staff`` and
``ratecast update``, so the CLI and the API give the same numbers. Staffing answers carry the
caution of :data:`models.capacity.staffing.STAFFING_CAUTION`. Both honour ``Accept: text/csv``.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from typing import Any

from models.capacity.staffing import STAFFING_CAUTION, ServiceTarget
from service.api.deps import SeriesCall, SeriesCallDep, series_router
from service.api.errors import ApiError, field_errors
from service.api.forecasting import (
    Windows,
    check_tz,
    checked,
    compute,
    forecast_until,
    read_range,
    window_index,
)
from service.api.media import csv_response, table_route
from service.api.schemas import (
    INSTANT_ALLOWED,
    IntradayRequest,
    IntradayResponse,
    StaffingRequest,
    StaffingResponse,
)
from service.api.work import Job
from service.queries.capacity import (
    PLAN_STEPS,
    staffing_csv,
    staffing_document,
    update_csv,
    update_document,
    update_range,
)
from service.queries.forecast import CAUTION

__all__ = ["router"]

router = series_router("capacity")


async def _answer(
    call: SeriesCall,
    work: Callable[[Job], Any],
    *,
    cells: int,
    field: str,
    value: Any = None,
    allowed: str,
    csv: tuple[Callable[[Mapping[str, Any]], str], str, str],
) -> Any:
    """Admit the work to the budget, compute it, and render it as the client asked.

    ``csv`` is the CSV renderer, the caution for its header and the file name.
    """
    call.work.admit(cells, field=field)
    doc = await compute(
        call.work,
        work,
        cells=cells,
        deadline=call.deadline,
        field=field,
        value=value,
        allowed=allowed,
    )
    if call.csv:
        render, caution, name = csv
        return csv_response(
            render(doc.model_dump(exclude_unset=True)), call.stored, caution=caution, name=name
        )
    return doc


@table_route(router.post, "/staffing", "Agents per interval for a service level", StaffingResponse)
async def staffing(body: StaffingRequest, call: SeriesCallDep) -> Any:
    """Per interval: agents for the predictive mean (plug-in), agents meeting the target with
    probability ``meet_probability`` over the predictive arrival count (assured), and for each the
    expected service level and the probability of missing the target; day totals in agent-hours.

    Figures are advisory: see ``caution`` in the answer (the ``X-Caution`` header in CSV).
    """
    settings, stored = call.settings, call.stored
    span = read_range(
        body.start,
        body.end,
        body.step,
        tz=body.tz,
        max_windows=settings.max_windows,
        steps_minutes=PLAN_STEPS,
    )
    if body.agents is not None and len(body.agents) not in (1, span.count()):
        raise ApiError(
            422,
            "invalid_input",
            f"{len(body.agents)} agent counts for {span.count()} intervals",
            field="agents",
            value=body.agents,
            allowed=f"one number, or one per interval ({span.count()})",
        )
    target = ServiceTarget(
        handle_time=body.handle_time_seconds,
        answer_within=body.answer_within_seconds,
        share=body.share,
        patience=body.patience_seconds,
    )
    windows = Windows(span=span)

    def plan(job: Job) -> Any:
        starts, ends = windows.cut()
        doc = staffing_document(
            stored,
            starts,
            ends,
            target=target,
            meet_probability=body.meet_probability,
            shrinkage=body.shrinkage,
            min_agents=body.min_agents,
            agents=body.agents,
            horizon_days=settings.max_horizon_days,
            checkpoint=job.check,
        )
        return StaffingResponse.model_validate(doc)

    calendar = stored.posterior.calendar
    until = forecast_until(stored, settings.max_horizon_days)
    return await _answer(
        call,
        plan,
        cells=windows.cells(stored),
        field="end",
        value=body.end,
        allowed=f"a plan from {calendar.first_day} to {until} ({calendar.tz})",
        csv=(staffing_csv, STAFFING_CAUTION, "staffing"),
    )


@table_route(
    router.post, "/intraday", "Update today's forecast from today's counts", IntradayResponse
)
async def intraday(body: IntradayRequest, call: SeriesCallDep) -> Any:
    """Re-forecast windows of today and later days from the counts observed so far today.

    Each posterior draw is weighted by how well it explains today's counts and today's latent
    level is drawn from its exact conditional, so a busy morning raises the afternoon. As with
    ``ratecast update``, ``start`` defaults to the end of the observations, ``end`` to the next
    local midnight and ``step`` to one model bin.
    """
    settings, stored = call.settings, call.stored
    check_tz(body.tz)
    o_starts, o_ends = window_index(
        body.observed, tz=body.tz, max_windows=settings.max_windows, field="observed"
    )
    calendar = stored.posterior.calendar
    with field_errors("start", body.start, allowed=INSTANT_ALLOWED):
        span = update_range(
            body.start,
            body.end,
            body.step,
            observed_ends=o_ends,
            tz=body.tz,
            zone=calendar.tz,
            bin_minutes=calendar.bin_minutes,
        )
    windows = Windows(span=checked(span, max_windows=settings.max_windows))
    counts = [w.count for w in body.observed]

    def update(job: Job) -> Any:
        starts, ends = windows.cut()
        doc = update_document(
            stored,
            o_starts,
            o_ends,
            counts,
            starts,
            ends,
            levels=body.levels,
            quantiles=body.quantiles,
            seed=body.seed,
            horizon_days=settings.max_horizon_days,
            checkpoint=job.check,
        )
        return IntradayResponse.model_validate(doc)

    # The forecast windows are integrated twice: updated, and as they were before the update.
    cells = Windows(o_starts, o_ends).cells(stored) + 2 * windows.cells(stored)
    return await _answer(
        call,
        update,
        cells=cells,
        field="observed",
        allowed=(
            "observed windows within one local day after the history, not overlapping; "
            "forecast windows from that day on"
        ),
        csv=(update_csv, CAUTION, "intraday"),
    )

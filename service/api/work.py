"""Where answers are computed: a cost estimate first, then a bounded pool off the event loop.

Every forecast, band, batch item, staffing plan and intraday update is *estimated* before any
work, in bin-draws: for each window, the model bins it touches (``ceil(length / bin) + 1``), summed
over windows and multiplied by the posterior's draws. That is the size of the arrays the window
integrals fill, which is what the time and memory of an answer grow with. A request (a whole
batch counted together) estimated above ``RATECAST_WORK_BUDGET`` is refused with 422 before
anything is computed.

Allowed work runs in :class:`WorkPool`: ``RATECAST_WORK_THREADS`` threads with at most
``RATECAST_WORK_QUEUE`` requests waiting (beyond that: 503 ``busy``), so the event loop stays free
for health probes and small calls. Each request has a deadline (``RATECAST_DEADLINE_SECONDS``):
past it the client gets 503 ``deadline_exceeded`` and its work is abandoned. A running job cannot
be stopped in the middle of a window integral (numpy does not stop), so each job carries a
:class:`Job` flag it checks at its checkpoints (when it starts, between the phases of a plan);
a batch stops between items when its client disconnects or its deadline passes. Tiny jobs
(:data:`INLINE_CELLS`) run inline, where a thread hop would cost more than the work.
"""

from __future__ import annotations

import asyncio
import math
import threading
from collections.abc import Callable
from concurrent.futures import ThreadPoolExecutor
from typing import TypeVar

import numpy as np
import pandas as pd

from service.api.errors import ApiError

__all__ = ["INLINE_CELLS", "Abandoned", "Job", "WorkPool", "window_cells"]

T = TypeVar("T")

#: Jobs estimated at most this many bin-draws run inline on the event loop (well under a
#: millisecond of numpy work: a few one-bin windows at 2,000 draws).
INLINE_CELLS = 20_000
_RETRY_AFTER = "5"


class Abandoned(Exception):
    """Raised at a checkpoint of a job whose request is gone (deadline passed, client left)."""


class Job:
    """The cancellation flag of one job, checked by the job at its checkpoints."""

    def __init__(self) -> None:
        self._cancelled = threading.Event()

    def cancel(self) -> None:
        """Ask the job to stop at its next checkpoint."""
        self._cancelled.set()

    @property
    def cancelled(self) -> bool:
        """Whether :meth:`cancel` was called."""
        return self._cancelled.is_set()

    def check(self) -> None:
        """A checkpoint: raise :class:`Abandoned` if the job was cancelled."""
        if self._cancelled.is_set():
            raise Abandoned


def window_cells(
    starts: pd.DatetimeIndex, ends: pd.DatetimeIndex, *, bin_minutes: int, draws: int
) -> int:
    """Estimated bin-draws of answering windows ``[starts[i], ends[i])`` (0 for empty ones)."""
    if len(starts) == 0:
        return 0
    span = (ends.as_unit("ns").asi8 - starts.as_unit("ns").asi8).astype(np.float64)
    bins = np.where(span > 0, np.ceil(span / (bin_minutes * 60e9)) + 1.0, 0.0)
    return int(bins.sum()) * draws


def range_cells(
    start: pd.Timestamp,
    end: pd.Timestamp,
    step: pd.Timedelta | None,
    *,
    bin_minutes: int,
    draws: int,
) -> int:
    """:func:`window_cells` of ``[start, end)`` cut by ``step``, without cutting it."""
    if end <= start:
        return 0
    width = pd.Timedelta(minutes=bin_minutes)
    span = end - start
    if step is None or step >= span:
        return (math.ceil(span / width) + 1) * draws
    full = math.ceil(span / step) - 1
    last = span - full * step
    bins = full * (math.ceil(step / width) + 1) + math.ceil(last / width) + 1
    return bins * draws


class WorkPool:
    """A bounded thread pool for answers, with the work budget, deadlines and counters.

    Parameters
    ----------
    threads
        Threads computing answers at once.
    queue
        Jobs that may wait for a thread; a request arriving when all are taken gets 503.
    budget
        Most bin-draws one request may ask for.
    deadline_seconds
        Longest a request may wait for its answer.
    """

    def __init__(self, *, threads: int, queue: int, budget: int, deadline_seconds: float) -> None:
        self.threads = threads
        self.queue = queue
        self.budget = budget
        self.deadline_seconds = deadline_seconds
        self._executor: ThreadPoolExecutor | None = None  # made on first use, again after shutdown
        self._lock = threading.Lock()
        self.pending = 0  # submitted and not finished: running or waiting
        self.running = 0
        self.started = 0  # jobs begun, inline or in a thread
        self.started_cells = 0  # their estimated bin-draws
        self.refused: dict[str, int] = {"budget": 0, "busy": 0}
        self.abandoned: dict[str, int] = {"deadline": 0, "disconnect": 0}

    def deadline(self) -> float:
        """The event-loop time by which a request starting now must be answered."""
        return asyncio.get_running_loop().time() + self.deadline_seconds

    def admit(self, cells: int, *, field: str = "windows") -> None:
        """Refuse (422 ``over_budget``) a request estimated above the budget, before any work."""
        if cells <= self.budget:
            return
        with self._lock:
            self.refused["budget"] += 1
        raise ApiError(
            422,
            "over_budget",
            f"this request needs about {cells:,} bin-draws of work (model bins its windows "
            f"touch x posterior draws); the budget is {self.budget:,} per request",
            field=field,
            value=cells,
            allowed=f"at most {self.budget:,} bin-draws per request, a batch counted whole "
            "(RATECAST_WORK_BUDGET): shorten the windows, fewer windows or items, or split it",
        )

    async def run(self, work: Callable[[Job], T], *, cells: int, deadline: float) -> T:
        """Run ``work(job)``: inline if tiny, else in the pool, abandoned past ``deadline``.

        Raises
        ------
        ApiError
            503 ``busy`` when all threads and queue places are taken; 503
            ``deadline_exceeded`` when ``deadline`` (event-loop time) passes first.
        """
        job = Job()
        if cells <= INLINE_CELLS:
            return self._call(work, job, cells)
        with self._lock:
            if self.pending >= self.threads + self.queue:
                self.refused["busy"] += 1
                raise ApiError(
                    503,
                    "busy",
                    f"all {self.threads} work threads and {self.queue} queue places are taken",
                    allowed="try again after Retry-After seconds",
                    headers={"Retry-After": _RETRY_AFTER},
                )
            self.pending += 1
            if self._executor is None:
                self._executor = ThreadPoolExecutor(
                    max_workers=self.threads, thread_name_prefix="ratecast-work"
                )
            executor = self._executor
        future = executor.submit(self._call, work, job, cells)
        future.add_done_callback(self._finished)
        loop = asyncio.get_running_loop()
        try:
            return await asyncio.wait_for(
                asyncio.wrap_future(future), timeout=max(0.0, deadline - loop.time())
            )
        except TimeoutError:
            job.cancel()
            with self._lock:
                self.abandoned["deadline"] += 1
            raise ApiError(
                503,
                "deadline_exceeded",
                f"the answer took longer than the {self.deadline_seconds:g} s deadline; its "
                "work was abandoned",
                allowed="a smaller request (fewer or shorter windows), or later",
                headers={"Retry-After": _RETRY_AFTER},
            ) from None
        except asyncio.CancelledError:  # the client went away
            job.cancel()
            with self._lock:
                self.abandoned["disconnect"] += 1
            raise

    def _call(self, work: Callable[[Job], T], job: Job, cells: int) -> T:
        with self._lock:
            self.running += 1
            self.started += 1
            self.started_cells += cells
        try:
            job.check()
            return work(job)
        finally:
            with self._lock:
                self.running -= 1

    def _finished(self, _future: object) -> None:
        with self._lock:
            self.pending -= 1

    def shutdown(self) -> None:
        """Drop waiting jobs and let the threads go; a running job finishes in the background."""
        with self._lock:
            executor, self._executor = self._executor, None
        if executor is not None:
            executor.shutdown(wait=False, cancel_futures=True)

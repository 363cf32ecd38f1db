"""Run a fit plan on a Dask cluster: one task per entry, results as they finish.

By default a :class:`distributed.LocalCluster` of worker processes sized to the machine (one
thread each: a fit keeps a core busy) starts and stops with the run; ``scheduler`` connects to a
running cluster instead, whose workers must have ratecast installed and reach the store and the
input files at the same paths. A task whose worker dies is run again on another worker by the
scheduler (up to its ``allowed-failures``); a task that raises is retried once. Publishing is
atomic in the store, so a worker killed mid-fit leaves no half-written version.
"""

from __future__ import annotations

import logging
import os
import time
import uuid
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

from service.plans.schema import Plan
from service.plans.tasks import fit_entry

__all__ = ["PlanReport", "run_plan"]

STATUSES = ("published", "unchanged", "refused", "failed")


@dataclass
class PlanReport:
    """What a run did, one record per entry (in the plan's order)."""

    records: list[dict[str, Any]] = field(default_factory=list)
    workers: int = 0
    seconds: float = 0.0

    def counts(self) -> dict[str, int]:
        """Entries per status."""
        return {s: sum(r["status"] == s for r in self.records) for s in STATUSES}

    @property
    def all_published(self) -> bool:
        """True when every entry is published or unchanged."""
        return all(r["status"] in ("published", "unchanged") for r in self.records)

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form."""
        return {
            "counts": self.counts(),
            "workers": self.workers,
            "seconds": round(self.seconds, 1),
            "entries": self.records,
        }


def run_plan(
    plan: Plan,
    *,
    store_root: str,
    cache_root: str,
    scheduler: str | None = None,
    workers: int | None = None,
    on_result: Callable[[dict[str, Any], int, int], None] | None = None,
) -> PlanReport:
    """Fit every entry of ``plan`` on a Dask cluster and publish to ``store_root``.

    Parameters
    ----------
    plan
        A validated plan (:func:`~service.plans.schema.load_plan`).
    store_root
        Store every worker can reach: a shared folder or a URL (``s3://bucket/prefix``), as
        :func:`models.storage.open_store` takes it.
    cache_root
        Folder under which each worker keeps its own compile caches.
    scheduler
        Address of a running scheduler (``tcp://host:8786``); default: a local cluster.
    workers
        Worker processes of the local cluster (default: the machine's cores).
    on_result
        Called with each finished record, how many are done and the total.
    """
    from distributed import Client, LocalCluster, as_completed

    started = time.perf_counter()
    cluster = None
    if scheduler is None:
        cluster = LocalCluster(
            n_workers=workers or os.cpu_count() or 1,
            threads_per_worker=1,
            processes=True,
            dashboard_address=None,
            silence_logs=logging.ERROR,
        )
        client = Client(cluster)
    else:
        client = Client(scheduler, timeout="30s")
    report = PlanReport(workers=len(client.scheduler_info()["workers"]))
    run_id = uuid.uuid4().hex[:8]
    try:
        futures = {
            client.submit(
                fit_entry,
                entry,
                store_root,
                cache_root,
                key=f"ratecast-fit-{entry.name}-{run_id}",
                pure=False,
                retries=1,
            ): entry
            for entry in plan.entries
        }
        by_name: dict[str, dict[str, Any]] = {}
        for done, future in enumerate(as_completed(futures), start=1):
            entry = futures[future]
            try:
                record = future.result()
            except Exception as exc:  # the task raised twice, or its workers kept dying
                record = {
                    "entry": entry.name,
                    "group": entry.group,
                    "status": "failed",
                    "error": f"{type(exc).__name__}: {str(exc).splitlines()[0] if str(exc) else ''}",
                }
            by_name[entry.name] = record
            if on_result is not None:
                on_result(record, done, len(futures))
        report.records = [by_name[e.name] for e in plan.entries]
    finally:
        client.close()
        if cluster is not None:
            cluster.close()
    report.seconds = time.perf_counter() - started
    return report

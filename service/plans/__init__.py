"""Fit plans: many series refitted in one run, on a Dask cluster.

:func:`load_plan` reads and validates a plan file (:mod:`.schema` documents its fields with an
example); :func:`run_plan` fits every entry on a local cluster or a running scheduler
(:mod:`.runner`); :func:`~service.plans.tasks.fit_entry` is what each worker runs.
"""

from __future__ import annotations

from service.plans.runner import PlanReport, run_plan
from service.plans.schema import Plan, PlanEntry, PlanError, load_plan, parse_plan

__all__ = ["Plan", "PlanEntry", "PlanError", "PlanReport", "load_plan", "parse_plan", "run_plan"]

"""Capacity: queueing formulas and staffing under forecast uncertainty.

:mod:`.queueing` holds the formulas (Erlang B, Erlang C, Erlang A, service level, occupancy,
square-root staffing), each written once, with the package's limits (:data:`MAX_LOAD`,
:data:`MAX_AGENTS`, :data:`MAX_QUEUE_STATES`); :mod:`.staffing` applies them to predictive count
distributions per interval (agents for the mean, agents that meet the target with a chosen
probability, expected service level), with :mod:`.counts` giving each interval's count
distribution. Staffing figures are advisory.
"""

from __future__ import annotations

from models.capacity.queueing import (
    MAX_AGENTS,
    MAX_LOAD,
    MAX_QUEUE_STATES,
    erlang_a,
    erlang_b,
    erlang_c,
    service_level,
)
from models.capacity.staffing import ServiceTarget, StaffingPlan, staff_intervals

__all__ = [
    "MAX_AGENTS",
    "MAX_LOAD",
    "MAX_QUEUE_STATES",
    "ServiceTarget",
    "StaffingPlan",
    "erlang_a",
    "erlang_b",
    "erlang_c",
    "service_level",
    "staff_intervals",
]

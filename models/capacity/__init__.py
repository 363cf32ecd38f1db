"""Capacity: queueing formulas and staffing under forecast uncertainty.

:mod:`.queueing` holds the formulas (Erlang B, Erlang C, Erlang A, service level, occupancy,
square-root staffing), each written once; :mod:`.staffing` applies them to predictive count
distributions per interval (agents for the mean, agents that meet the target with a chosen
probability, expected service level). Staffing figures are advisory.
"""

from __future__ import annotations

from models.capacity.queueing import erlang_a, erlang_b, erlang_c, service_level
from models.capacity.staffing import ServiceTarget, StaffingPlan, staff_intervals

__all__ = [
    "ServiceTarget",
    "StaffingPlan",
    "erlang_a",
    "erlang_b",
    "erlang_c",
    "service_level",
    "staff_intervals",
]

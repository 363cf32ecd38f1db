"""History and the model description: what is fitted, with no PyMC import.

:func:`bin_events` / :func:`bin_counts` turn arrivals into counts per local-time bin with the
exposure each bin was observed for; :class:`ModelSpec` describes the terms and priors;
:func:`make_model_data` lays a history out in model coordinates (named dims ``dow``, ``slot``,
``day``, ``bin``).
"""

from __future__ import annotations

from models.ratemodel.binning import (
    BinnedSeries,
    OpeningHours,
    bin_counts,
    bin_events,
    bin_grid,
    read_table,
)
from models.ratemodel.design import JointData, ModelData, make_model_data
from models.ratemodel.spec import HolidayCalendar, ModelSpec, Priors

__all__ = [
    "BinnedSeries",
    "HolidayCalendar",
    "JointData",
    "ModelData",
    "ModelSpec",
    "OpeningHours",
    "Priors",
    "bin_counts",
    "bin_events",
    "bin_grid",
    "make_model_data",
    "read_table",
]

"""The query path: from a stored posterior to predictive count distributions (numpy/scipy only).

:func:`forecast` answers windows with exact Poisson-mixture summaries over the posterior draws
(:mod:`.mixture`); :func:`expected_counts` gives the per-draw window integrals behind them.
:func:`update_forecast` conditions today's forecast on today's counts so far, and
:func:`simulate_arrivals` draws arrival times. Nothing here imports PyMC.
"""

from __future__ import annotations

from models.prediction.intraday import IntradayUpdate, update_forecast
from models.prediction.mixture import MixtureSummary, mixture_cdf, mixture_quantile, summarise
from models.prediction.posterior import CompactPosterior
from models.prediction.simulate import SimulatedArrivals, simulate_arrivals
from models.prediction.windows import Forecast, expected_counts, forecast

__all__ = [
    "CompactPosterior",
    "Forecast",
    "IntradayUpdate",
    "MixtureSummary",
    "SimulatedArrivals",
    "expected_counts",
    "forecast",
    "mixture_cdf",
    "mixture_quantile",
    "simulate_arrivals",
    "summarise",
    "update_forecast",
]

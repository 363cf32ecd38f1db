"""ratecast's modelling library: learn an arrival rate from history and forecast counts.

The packages, in the order data flows through them:

``models.ratemodel``
    History and the model description: binning arrivals into local-time bins with exposure
    (:mod:`~models.ratemodel.binning`), the frozen model description
    (:mod:`~models.ratemodel.spec`), design matrices and basis functions. No PyMC.
``models.fitting``
    The only PyMC and ArviZ users: graph building, NUTS sampling, the diagnostics gate, joint
    fits across series, and fit-and-publish. Settings live in :mod:`~models.fitting.options`.
``models.store``
    Versioned, atomic storage of compact posteriors (a file store and an in-memory twin);
    :mod:`~models.urlstore` keeps the same versions on S3, and :func:`models.storage.open_store`
    opens either from a location string.
``models.prediction``
    The query path (numpy, scipy, pandas only): the compact posterior, window integrals, exact
    Poisson-mixture summaries, the intraday update and arrival simulation.
``models.evaluation``
    Scoring rules, baselines, rolling-origin backtests and their reports.
``models.capacity``
    Queueing formulas (Erlang B, C and A) and staffing under forecast uncertainty.

Errors are in :mod:`models.exceptions`. This package never imports ``service`` or any HTTP
framework.
"""

from __future__ import annotations

__all__ = ["__version__"]

__version__ = "0.1.0"

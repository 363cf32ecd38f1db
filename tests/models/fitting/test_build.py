"""Pieces of the PyMC graph checked on their own against general-purpose references."""

from __future__ import annotations

import numpy as np
import pytensor
import pytensor.tensor as pt
import pytest
from scipy import signal

from models.fitting.build import _ar1_from_innovations


@pytest.mark.parametrize("n_days", [1, 5, 32, 33, 100, 364])
def test_blocked_ar1_path_matches_scipy_lfilter(n_days: int) -> None:
    # Reference: scipy.signal.lfilter([1], [1, -rho], x) runs the AR(1) recursion
    # z[k] = rho z[k-1] + x[k]; the first innovation carries the stationary scale 1/sqrt(1-rho^2).
    innovation, rho, sd = pt.vector("innovation"), pt.scalar("rho"), pt.scalar("sd")
    path = pytensor.function(
        [innovation, rho, sd], _ar1_from_innovations(innovation, rho, sd, n_days), mode="NUMBA"
    )
    x = np.random.default_rng(n_days).standard_normal(n_days)
    for r in (0.05, 0.73, 0.995):
        shocks = x.copy()
        shocks[0] /= np.sqrt(1.0 - r**2)
        expected = 0.2 * signal.lfilter([1.0], [1.0, -r], shocks)
        np.testing.assert_allclose(path(x, r, 0.2), expected, rtol=1e-9, atol=1e-12)


def _hourly(rate: float, days: int = 28):  # type: ignore[no-untyped-def]
    import datetime as dt

    from models.ratemodel.binning import BinnedSeries, bin_grid
    from models.ratemodel.design import make_model_data
    from models.ratemodel.spec import ModelSpec

    first = dt.date(2026, 2, 2)
    grid = bin_grid(first, first + dt.timedelta(days=days), tz="UTC", bin_minutes=60)
    counts = np.random.default_rng(1).poisson(rate, len(grid))
    binned = BinnedSeries(
        grid, counts, np.ones(len(grid)), "UTC", 60, first, first + dt.timedelta(days=days)
    )
    spec = ModelSpec(observation="negbin")
    return make_model_data(binned, spec), spec


def test_parameterisation_follows_the_data_and_can_be_forced() -> None:
    # Constant-rate Poisson counts, 600 arrivals per weekly cell: no interaction and no scatter
    # beyond Poisson, so both blocks stay non-centred however busy the series (the centred
    # interaction funnelled on such data: docs/fit-gate.md); forcing still works.
    from models.fitting.build import build_model

    data, spec = _hourly(150.0)
    names = {v.name for v in build_model(data, spec).free_RVs}
    assert "interaction_raw" in names and "overdispersion_slot_raw" in names
    forced = {v.name for v in build_model(data, spec.with_(centred_interaction=True)).free_RVs}
    assert "interaction" in forced and "overdispersion_slot" in forced

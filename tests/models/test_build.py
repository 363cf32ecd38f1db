"""Pieces of the PyMC graph checked on their own against general-purpose references."""

from __future__ import annotations

import numpy as np
import pytensor
import pytensor.tensor as pt
import pytest
from scipy import signal

from models.build import _ar1_from_innovations


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

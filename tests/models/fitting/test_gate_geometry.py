"""The parameterisation is chosen from the data: centred only where the data measure a block's
members more tightly than its spread (checked against simulations with known effects)."""

from __future__ import annotations

import datetime as dt

import numpy as np

from models.fitting.geometry import choose_geometry, excess_scatter, interaction_signal
from models.ratemodel.binning import BinnedSeries, bin_grid, local_features
from models.ratemodel.design import make_model_data
from models.ratemodel.spec import ModelSpec

TZ = "UTC"


def _history(
    *,
    level: float,
    interaction_sd: float,
    k: float | np.ndarray | None,
    weeks: int = 8,
    seed: int = 1,
):  # type: ignore[no-untyped-def]
    rng = np.random.default_rng(seed)
    first = dt.date(2026, 2, 2)
    end = first + dt.timedelta(weeks=weeks)
    grid = bin_grid(first, end, tz=TZ, bin_minutes=60)
    dow, slot, _, _ = local_features(grid, tz=TZ, bin_minutes=60)
    cell = rng.normal(0.0, interaction_sd, size=(7, 24))
    cell -= cell.mean(axis=0, keepdims=True) + cell.mean(axis=1, keepdims=True) - cell.mean()
    mean = level * np.exp(0.8 * np.sin(2 * np.pi * slot / 24) + cell[dow, slot])
    if k is not None:
        size = np.broadcast_to(np.asarray(k, dtype=float), (24,))[slot]
        mean = mean * rng.gamma(size, 1.0 / size)
    counts = rng.poisson(mean)
    binned = BinnedSeries(grid, counts, np.ones(len(grid)), TZ, 60, first, end)
    spec = ModelSpec(observation="negbin", bin_minutes=60)
    return make_model_data(binned, spec), spec, float(np.std(cell))


def test_busy_additive_poisson_counts_stay_non_centred() -> None:
    data, spec, _ = _history(level=300.0, interaction_sd=0.0, k=None)
    geometry = choose_geometry(data, spec)
    assert not geometry.centred_interaction
    assert not geometry.centred_dispersion
    assert geometry.interaction_sd < 0.02
    # Poisson counts: variance equals the mean (excess about 0).
    assert abs(geometry.excess) < 0.3


#: Dispersions that differ by slot as at a night-life street: noisy at night, steady by day.
BY_SLOT = np.where((np.arange(24) < 6) | (np.arange(24) >= 22), 3.0, 60.0)


def test_a_strong_interaction_and_slot_dispersions_are_centred() -> None:
    data, spec, truth = _history(level=100.0, interaction_sd=0.3, k=BY_SLOT)
    geometry = choose_geometry(data, spec)
    assert geometry.centred_interaction and geometry.centred_dispersion
    # The moment estimate recovers the simulated interaction's spread within 20%.
    signal, _ = interaction_signal(data, 24)
    assert abs(signal - truth) < 0.2 * truth


def test_excess_scatter_is_mu_over_k_for_negative_binomial_counts() -> None:
    # Var = mu + mu^2/k for a gamma-Poisson count (e.g. Hilbe, Negative Binomial Regression,
    # 2nd ed. 2011, eq. 5.8, from memory), so (var - mean) / mean = mu / k: at mu near 100 and
    # k = 20, about 5 (the sine shape spreads mu, so the median cell sits near level).
    data, _, _ = _history(level=100.0, interaction_sd=0.0, k=20.0, weeks=26)
    assert 3.5 < excess_scatter(data, 24) < 6.5


def test_one_dispersion_for_every_slot_stays_non_centred() -> None:
    # Busy counts with a single k: the slot deviations are truly zero and a centred form would
    # funnel as their spread shrinks (measured on the battery's busy series, docs/fit-gate.md).
    data, spec, _ = _history(level=300.0, interaction_sd=0.0, k=50.0)
    geometry = choose_geometry(data, spec)
    assert not geometry.centred_dispersion
    assert geometry.dispersion_spread < geometry.dispersion_se * 2


def test_forcing_overrides_the_data() -> None:
    data, spec, _ = _history(level=300.0, interaction_sd=0.0, k=None)
    forced = choose_geometry(data, spec.with_(centred_interaction=True))
    assert forced.centred_interaction and forced.centred_dispersion

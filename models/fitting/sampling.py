"""Sample the posterior with NUTS on CPU (PyMC or nutpie), then run the diagnostics gate.

Settings come from :class:`~models.fitting.options.FitOptions`, the one place their defaults are
written.
"""

from __future__ import annotations

import os
import time
from dataclasses import dataclass, field, replace
from typing import Any

import arviz as az
import numpy as np
import pymc as pm

from models.exceptions import InputError
from models.fitting.build import build_model
from models.fitting.gate import Diagnostics, check_diagnostics, unobserved_cells
from models.fitting.options import Backend, FitOptions, Sampler
from models.ratemodel.binning import OpeningHours
from models.ratemodel.design import ModelData
from models.ratemodel.spec import ModelSpec

__all__ = ["FitResult", "fit_model", "sample_model"]


@dataclass(frozen=True)
class FitResult:
    """A fitted model: its inference data and diagnostics."""

    idata: az.InferenceData
    diagnostics: Diagnostics
    spec: ModelSpec
    data: ModelData
    seed: int
    sampler: str = "pymc"
    timings: dict[str, float] = field(default_factory=dict)

    def compact(self, *, opening: OpeningHours | None = None, max_draws: int | None = 2000) -> Any:
        """The fit as a :class:`~models.prediction.posterior.CompactPosterior` (what is stored and
        forecast from), seeded with the fit's own seed."""
        from models.fitting.compact import compact_from_fit

        return compact_from_fit(
            self.idata["posterior"],
            calendar=self.data.calendar,
            spec=self.spec,
            n_days=self.data.n_days,
            opening=opening,
            seed=self.seed,
            max_draws=max_draws,
        )


def fit_model(
    data: ModelData,
    spec: ModelSpec,
    *,
    options: FitOptions | None = None,
) -> FitResult:
    """Fit ``spec`` to ``data`` with NUTS and run the diagnostics gate.

    Parameters
    ----------
    data, spec
        History in model coordinates and the model description.
    options
        Sampling settings (default: :class:`FitOptions` as it stands); the same seed and data
        give the same draws.
    """
    options = options or FitOptions()
    started = time.perf_counter()
    model = build_model(data, spec)
    build_seconds = time.perf_counter() - started
    idata, timings = sample_model(model, **options.sampling())
    timings["build_seconds"] = build_seconds
    diagnostics = check_diagnostics(
        idata, thresholds=options.thresholds, unobserved=unobserved_cells(data)
    )
    diagnostics = replace(diagnostics, sampling_seconds=timings["sampling_seconds"])
    return FitResult(
        idata=idata,
        diagnostics=diagnostics,
        spec=spec,
        data=data,
        seed=options.seed,
        sampler=options.sampler,
        timings=timings,
    )


def sample_model(
    model: Any,
    *,
    draws: int,
    tune: int,
    chains: int,
    seed: int,
    sampler: Sampler,
    backend: Backend,
    target_accept: float,
    progressbar: bool,
    low_rank: bool = False,
    cores: int | None = None,
) -> tuple[az.InferenceData, dict[str, float]]:
    """Run NUTS on a built PyMC model; returns the inference data (warm-up dropped) and timings."""
    for name, value, low in (("draws", draws, 10), ("tune", tune, 0), ("chains", chains, 1)):
        if not isinstance(value, int) or value < low:
            raise InputError(f"{name}={value!r} must be an integer >= {low}")
    if sampler not in ("pymc", "nutpie"):
        raise InputError(f"sampler {sampler!r} is not one of 'pymc', 'nutpie'")
    if backend not in ("numba", "c"):
        raise InputError(f"backend {backend!r} is not one of 'numba', 'c'")
    cores = cores or min(chains, os.cpu_count() or 1)
    started = time.perf_counter()
    with model:
        if sampler == "nutpie":
            idata = _sample_nutpie(
                model,
                draws=draws,
                tune=tune,
                chains=chains,
                seed=seed,
                progressbar=progressbar,
                target_accept=target_accept,
                low_rank=low_rank,
                cores=cores,
            )
        else:
            idata = pm.sample(
                draws=draws,
                tune=tune,
                chains=chains,
                cores=cores,
                random_seed=seed,
                target_accept=target_accept,
                progressbar=progressbar,
                compute_convergence_checks=False,
                compile_kwargs={"mode": "NUMBA"} if backend == "numba" else None,
                discard_tuned_samples=False,
            )
    timings = {
        "sampling_seconds": time.perf_counter() - started,
        "leapfrog_steps": float(_leapfrog_steps(idata)),
    }
    for group in ("warmup_posterior", "warmup_sample_stats"):
        if group in idata.groups():
            del idata[group]
    return idata, timings


def _leapfrog_steps(idata: az.InferenceData) -> int:
    """Gradient evaluations of the whole run, warm-up included (for the cost floor in benchmarks)."""
    total = 0
    for group in ("warmup_sample_stats", "sample_stats"):
        if group in idata.groups() and "n_steps" in idata[group]:
            total += int(np.asarray(idata[group]["n_steps"]).sum())
    return total


def _sample_nutpie(
    model: Any,
    *,
    draws: int,
    tune: int,
    chains: int,
    seed: int,
    progressbar: bool,
    target_accept: float,
    low_rank: bool,
    cores: int,
) -> az.InferenceData:
    try:
        import nutpie
    except ImportError as exc:
        raise InputError(
            "sampler 'nutpie' is not installed; pip install 'ratecast[nutpie]' or use 'pymc'"
        ) from exc
    compiled = nutpie.compile_pymc_model(model)
    return nutpie.sample(
        compiled,
        draws=draws,
        tune=tune,
        chains=chains,
        cores=cores,  # threads; a plan worker asks for 1
        seed=seed,
        progress_bar=progressbar,
        target_accept=target_accept,
        low_rank_modified_mass_matrix=low_rank,
        save_warmup=True,  # warm-up stats give the leapfrog count; the groups are dropped after
    )

"""Sample the posterior with NUTS on CPU and decide whether the fit is good enough to publish."""

from __future__ import annotations

import time
from dataclasses import dataclass, field
from typing import Any, Literal

import arviz as az
import numpy as np
import xarray as xr

from models.design import ModelData
from models.exceptions import InputError
from models.spec import ModelSpec

__all__ = [
    "Diagnostics",
    "FitResult",
    "GateThresholds",
    "check_diagnostics",
    "fit_model",
    "unobserved_cells",
]

Sampler = Literal["pymc", "nutpie"]
Backend = Literal["numba", "c"]


@dataclass(frozen=True)
class GateThresholds:
    """What a fit must reach to be published (defaults: common practice, no source)."""

    max_r_hat: float = 1.01
    min_ess_bulk: float = 400.0
    max_divergences: int = 0


@dataclass(frozen=True)
class Diagnostics:
    """Convergence summary of a fit."""

    max_r_hat: float
    min_ess_bulk: float
    divergences: int
    draws: int
    chains: int
    problems: tuple[str, ...] = ()
    sampling_seconds: float = 0.0

    @property
    def ok(self) -> bool:
        """True when every gate check passed."""
        return not self.problems

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form."""
        return {
            "ok": self.ok,
            "max_r_hat": self.max_r_hat,
            "min_ess_bulk": self.min_ess_bulk,
            "divergences": self.divergences,
            "draws": self.draws,
            "chains": self.chains,
            "problems": list(self.problems),
            "sampling_seconds": round(self.sampling_seconds, 2),
        }


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


def unobserved_cells(data: ModelData) -> np.ndarray:
    """``(dow, slot)`` mask of the weekly cells with no observed exposure in the history (closed
    or missing every week)."""
    exposure = np.zeros((7, len(data.coords["slot"])))
    np.add.at(exposure, (data.features.dow, data.features.slot), data.exposure_hours)
    return np.asarray(exposure <= 0)


def check_diagnostics(
    idata: az.InferenceData,
    *,
    thresholds: GateThresholds | None = None,
    var_names: list[str] | None = None,
    unobserved: np.ndarray | None = None,
) -> Diagnostics:
    """Check r_hat, bulk ESS and divergences against ``thresholds``.

    Problems name the worst parameters and their values, e.g.
    ``"r_hat 1.043 > 1.01 for dow_effect[Sat]"``. ``unobserved`` (a ``(dow, slot)`` mask, see
    :func:`unobserved_cells`) leaves out the entries no data inform: slot effects of slots never
    observed and interaction cells never observed. Their draws are the prior's (they forecast
    only hours the opening hours close, or hours never seen), and a slowly mixing prior is no
    reason to refuse a fit.
    """
    thresholds = thresholds or GateThresholds()
    posterior = idata["posterior"]
    # Deterministics are functions of the sampled variables: checking those is enough. Which
    # names are deterministic depends on the parameterisation.
    derived = {"week_log_rate", "dispersion", "within_day"}
    if "baseline_rate" in posterior:
        derived.add("baseline")
    if "interaction_raw" in posterior:
        derived.add("interaction")
    if "latent_innovation" in posterior:
        derived.add("latent")
    names = var_names or [str(v) for v in posterior.data_vars if v not in derived]
    chains = int(posterior.sizes["chain"])
    draws = int(posterior.sizes["draw"])
    checked = posterior[names]
    if unobserved is not None and unobserved.any():
        checked = checked.copy()
        for name in names:
            dims = checked[name].dims[2:]
            if dims == ("slot",) and name.startswith(("slot_effect", "overdispersion_slot")):
                mask = xr.DataArray(unobserved.all(axis=0), dims=("slot",))
            elif dims == ("dow", "slot"):
                mask = xr.DataArray(unobserved, dims=("dow", "slot"))
            else:
                continue
            checked[name] = checked[name].where(~mask)
    summary = az.summary(checked, kind="diagnostics")
    r_hat = summary["r_hat"].astype(float)
    ess = summary["ess_bulk"].astype(float)
    divergences = 0
    if "sample_stats" in idata and "diverging" in idata["sample_stats"]:
        divergences = int(np.asarray(idata["sample_stats"]["diverging"]).sum())
    problems: list[str] = []
    max_r_hat = float(np.nanmax(r_hat)) if chains > 1 else float("nan")
    if chains > 1:
        for name, value in r_hat[r_hat > thresholds.max_r_hat].sort_values().tail(5).items():
            problems.append(f"r_hat {value:.3f} > {thresholds.max_r_hat} for {name}")
    min_ess = float(np.nanmin(ess))
    for name, value in ess[ess < thresholds.min_ess_bulk].sort_values().head(5).items():
        problems.append(f"bulk ESS {value:.0f} < {thresholds.min_ess_bulk:.0f} for {name}")
    if divergences > thresholds.max_divergences:
        problems.append(
            f"{divergences} divergent transitions > {thresholds.max_divergences} allowed"
        )
    return Diagnostics(
        max_r_hat=max_r_hat,
        min_ess_bulk=min_ess,
        divergences=divergences,
        draws=draws,
        chains=chains,
        problems=tuple(problems),
    )


def fit_model(
    data: ModelData,
    spec: ModelSpec,
    *,
    draws: int = 1000,
    tune: int = 1000,
    chains: int = 4,
    cores: int | None = None,
    seed: int = 20261202,
    sampler: Sampler = "pymc",
    backend: Backend = "numba",
    target_accept: float = 0.9,
    progressbar: bool = True,
    thresholds: GateThresholds | None = None,
) -> FitResult:
    """Fit ``spec`` to ``data`` with NUTS and run the diagnostics gate.

    Parameters
    ----------
    data, spec
        History in model coordinates and the model description.
    draws, tune, chains
        Posterior draws and warm-up steps per chain; number of chains.
    cores
        Parallel chains (default: ``min(chains, os.cpu_count())``).
    seed
        Seeds the sampler; the same seed and data give the same draws.
    sampler
        ``"pymc"`` (default) or ``"nutpie"`` (if installed).
    backend
        How PyMC's sampler evaluates the model: ``"numba"`` (default; measured about 3x faster
        per gradient here, as pip-installed PyTensor finds no BLAS for its C code) or ``"c"``.
    """
    from models.build import build_model  # keeps PyMC out of the query path's imports

    started = time.perf_counter()
    model = build_model(data, spec)
    build_seconds = time.perf_counter() - started
    idata, timings = sample_model(
        model,
        draws=draws,
        tune=tune,
        chains=chains,
        cores=cores,
        seed=seed,
        sampler=sampler,
        backend=backend,
        target_accept=target_accept,
        progressbar=progressbar,
    )
    timings["build_seconds"] = build_seconds
    diagnostics = check_diagnostics(idata, thresholds=thresholds, unobserved=unobserved_cells(data))
    diagnostics = Diagnostics(
        **{**diagnostics.__dict__, "sampling_seconds": timings["sampling_seconds"]}
    )
    return FitResult(
        idata=idata,
        diagnostics=diagnostics,
        spec=spec,
        data=data,
        seed=seed,
        sampler=sampler,
        timings=timings,
    )


def sample_model(
    model: Any,
    *,
    draws: int,
    tune: int,
    chains: int,
    seed: int,
    cores: int | None = None,
    sampler: Sampler = "pymc",
    backend: Backend = "numba",
    target_accept: float = 0.9,
    progressbar: bool = True,
) -> tuple[az.InferenceData, dict[str, float]]:
    """Run NUTS on a built PyMC model; returns the inference data (warm-up dropped) and timings."""
    import os

    import pymc as pm

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
        seed=seed,
        progress_bar=progressbar,
        target_accept=target_accept,
        save_warmup=True,  # warm-up stats give the leapfrog count; the groups are dropped after
    )

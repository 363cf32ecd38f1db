"""Settings of a fit: sampler options and the diagnostics gate's thresholds, with their defaults.

This module imports no PyMC, so the CLI, backtests and plans can build settings without loading
the sampler. Every default is written here and nowhere else.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from typing import Any, Literal

__all__ = ["Backend", "FitOptions", "GateThresholds", "Sampler"]


@dataclass(frozen=True)
class GateThresholds:
    """What a fit must reach to be published (defaults: common practice, no source)."""

    max_r_hat: float = 1.01
    min_ess_bulk: float = 400.0
    max_divergences: int = 0


Sampler = Literal["pymc", "nutpie"]
Backend = Literal["numba", "c"]


@dataclass(frozen=True)
class FitOptions:
    """Sampling settings and their defaults (the only place the defaults are written).

    Parameters
    ----------
    draws, tune, chains
        Posterior draws and warm-up steps per chain; number of chains.
    seed
        Seeds the sampler, the stored draws' thinning and the forecast noise.
    sampler
        ``"pymc"`` or ``"nutpie"`` (if installed).
    backend
        How PyMC's sampler evaluates the model: ``"numba"`` (measured about 3x faster per
        gradient here, as pip-installed PyTensor finds no BLAS for its C code) or ``"c"``.
    target_accept
        NUTS target acceptance rate. 0.95 by default: on the fit-gate battery it passed 13 of 14
        series at the first attempt (the daily chicago-2y on bulk ESS 341), where 0.9 passed 10
        of the same 14, at about the same sampling time (docs/fit-gate.md, 4 December).
    low_rank
        nutpie only: adapt a low-rank modified mass matrix (captures a few strongly correlated
        directions) instead of a diagonal one.
    max_stored_draws
        Draws kept in the compact posterior (thinned evenly across chains).
    keep_full_posterior
        Also store the full inference data beside the compact draws.
    retry
        When a fit fails the diagnostics gate, fit once more with stronger settings before
        refusing it (:func:`models.fitting.escalation.stronger_options`).
    cores
        Chains sampled in parallel processes (default ``min(chains, os.cpu_count())``; 1 runs
        them one after another in this process, as plan workers do).
    """

    draws: int = 1000
    tune: int = 1000
    chains: int = 4
    seed: int = 20261202
    sampler: Sampler = "pymc"
    backend: Backend = "numba"
    target_accept: float = 0.95
    low_rank: bool = False
    progressbar: bool = True
    max_stored_draws: int = 2000
    thresholds: GateThresholds = field(default_factory=GateThresholds)
    keep_full_posterior: bool = True
    retry: bool = True
    cores: int | None = None

    def sampling(self) -> dict[str, Any]:
        """The options :func:`sample_model` takes, as keyword arguments."""
        return {
            "draws": self.draws,
            "tune": self.tune,
            "chains": self.chains,
            "seed": self.seed,
            "sampler": self.sampler,
            "backend": self.backend,
            "target_accept": self.target_accept,
            "low_rank": self.low_rank,
            "progressbar": self.progressbar,
            "cores": self.cores,
        }

    def sampler_settings(self) -> dict[str, Any]:
        """The settings a fit's record names: sampler, draws, tune, chains, target acceptance."""
        return {
            "sampler": self.sampler,
            "draws": self.draws,
            "tune": self.tune,
            "chains": self.chains,
            "target_accept": self.target_accept,
        }

    def with_changes(self, **changes: Any) -> FitOptions:
        """A copy with some settings changed."""
        return replace(self, **changes)

"""The diagnostics gate: is a fit converged enough to publish?

The gate checks r_hat, bulk ESS and divergent transitions on the sampled variables and names the
worst parameters when it fails. Thresholds are common practice, no source.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import arviz as az
import numpy as np
import pandas as pd
import xarray as xr

from models.fitting.options import GateThresholds
from models.ratemodel.design import ModelData

__all__ = [
    "Diagnostics",
    "GateThresholds",
    "check_diagnostics",
    "divergence_locations",
    "unobserved_cells",
]


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
    divergent_at: tuple[str, ...] = ()

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
            "divergent_at": list(self.divergent_at),
        }


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
    observed, day-of-week effects of weekdays never observed and interaction cells never
    observed. Their draws are the prior's (they forecast
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
    # Effects sampled on their observed entries only (``{name}_open``) are scattered into
    # deterministics with zeros where nothing was observed.
    derived |= {str(v)[: -len("_open")] for v in posterior.data_vars if str(v).endswith("_open")}
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
            elif dims == ("dow",) and name.startswith("dow_effect"):
                # A weekday closed all day (e.g. Sunday) is informed by the prior only.
                mask = xr.DataArray(unobserved.all(axis=1), dims=("dow",))
            elif dims == ("dow", "slot"):
                mask = xr.DataArray(unobserved, dims=("dow", "slot"))
            elif dims == ("open_dow", "open_slot"):
                # Cells inside the observed days and slots that were still never observed
                # (e.g. Saturday mornings of a desk that opens later at weekends).
                rows, cols = ~unobserved.all(axis=1), ~unobserved.all(axis=0)
                mask = xr.DataArray(unobserved[np.ix_(rows, cols)], dims=dims)
            else:
                continue
            checked[name] = checked[name].where(~mask)
    summary = az.summary(checked, kind="diagnostics")
    r_hat = pd.Series(np.asarray(summary["r_hat"], dtype=float), index=summary.index.astype(str))
    ess = pd.Series(np.asarray(summary["ess_bulk"], dtype=float), index=summary.index.astype(str))
    divergences = 0
    if "sample_stats" in idata and "diverging" in idata["sample_stats"]:
        divergences = int(np.asarray(idata["sample_stats"]["diverging"]).sum())
    problems: list[str] = []
    max_r_hat = float(np.nanmax(r_hat)) if chains > 1 else float("nan")
    if chains > 1:
        for label, value in r_hat[r_hat > thresholds.max_r_hat].sort_values().tail(5).items():
            problems.append(f"r_hat {value:.3f} > {thresholds.max_r_hat} for {label}")
    min_ess = float(np.nanmin(ess))
    for label, value in ess[ess < thresholds.min_ess_bulk].sort_values().head(5).items():
        problems.append(f"bulk ESS {value:.0f} < {thresholds.min_ess_bulk:.0f} for {label}")
    divergent_at: tuple[str, ...] = ()
    if divergences > thresholds.max_divergences:
        divergent_at = tuple(divergence_locations(idata))
        where = (
            f" (divergent draws sit apart on {', '.join(n.split(':')[0] for n in divergent_at[:3])})"
            if divergent_at
            else ""
        )
        problems.append(
            f"{divergences} divergent transitions > {thresholds.max_divergences} allowed{where}"
        )
    return Diagnostics(
        max_r_hat=max_r_hat,
        min_ess_bulk=min_ess,
        divergences=divergences,
        draws=draws,
        chains=chains,
        problems=tuple(problems),
        divergent_at=divergent_at,
    )


#: Deterministic or per-bin variables left out when locating divergences.
_NOT_LOCATED = {"week_log_rate", "dispersion", "latent", "interaction", "within_day"}


def divergence_locations(idata: az.InferenceData, top: int = 4) -> list[str]:
    """The sampled parameters on which the divergent draws sit furthest from the others.

    For each scalar (or entry of a variable with at most 200 entries) the mean over divergent
    draws is compared with the mean over the other draws, in sds of the others; positive
    variables are compared on the log scale (where funnels open). Returns up to ``top`` lines
    ``"log interaction_sd: -4.1 vs -2.3 (z -2.2)"``, largest ``|z|`` first; empty without
    divergences. A funnel shows as divergent draws at small scales (negative z on a log sd).
    """
    if "sample_stats" not in idata or "diverging" not in idata["sample_stats"]:
        return []
    diverging = np.asarray(idata["sample_stats"]["diverging"]).astype(bool)
    if not diverging.any() or diverging.all():
        return []
    found: list[tuple[float, str]] = []
    for name, values in idata["posterior"].data_vars.items():
        if name in _NOT_LOCATED:
            continue
        array = np.asarray(values, dtype=float)
        flat = array.reshape(array.shape[0], array.shape[1], -1)
        if flat.shape[2] > 200:
            continue
        for j in range(flat.shape[2]):
            label = str(name) if flat.shape[2] == 1 else f"{name}[{j}]"
            x = flat[:, :, j]
            if np.all(x > 0):
                x, label = np.log(x), f"log {label}"
            rest = x[~diverging]
            sd = float(rest.std()) or 1.0
            z = (float(x[diverging].mean()) - float(rest.mean())) / sd
            found.append(
                (abs(z), f"{label}: {x[diverging].mean():.3g} vs {rest.mean():.3g} (z {z:+.1f})")
            )
    found.sort(key=lambda item: -item[0])
    return [text for _, text in found[:top]]

"""Calibration measurements behind the negative binomial option (numbers for docs/calibration.md).

Part 1, ``--part prediction``: how to predict with a negative binomial observation. Option (a),
used by :mod:`models.prediction.windows`: each bin's rate gets Gamma(k, k) noise drawn per posterior draw,
so every window's count stays a Poisson mixture over draws. Option (b): per draw, a negative
binomial law for the whole window with the moment-matched dispersion
``r = m**2 / sum(mu_b**2 / k_b)``. Both are compared with the exact law (per draw, the
convolution of the bins' negative binomial pmfs) on a one-bin window and on a daily total of 24
hourly bins, for sup |F - F_exact|, the 95% interval and the time taken.

Part 2, ``--part variants``: model variants on Auckland pedestrian counts (45 Queen Street),
compared by rolling-origin backtest and by PSIS-LOO (ArviZ) of each origin's fit. Results are kept
under ``.calibration/`` (resumable).

Run: ``.venv/bin/python bench/calibration.py --part prediction`` (seconds) and
``--part variants`` (about an hour on 2 cores).
"""

from __future__ import annotations

import argparse
import dataclasses
import datetime as dt
import json
import os
import sys
import time
from pathlib import Path
from typing import Any

os.environ.setdefault("PYTENSOR_FLAGS", f"compiledir={Path.cwd() / '.cache' / 'pytensor'}")

import numpy as np
from scipy import stats

sys.path.insert(0, str(Path(__file__).resolve().parent))

from evidence import NZ, auckland

from models.evaluation.backtest import (
    BacktestConfig,
    FittedModel,
    NutsFitter,
    run_backtest,
    summarise_records,
)
from models.fitting.options import FitOptions
from models.prediction.mixture import mixture_cdf, summarise
from models.ratemodel.binning import BinnedSeries
from models.ratemodel.spec import ModelSpec

# --------------------------------------------------------------------------- part 1


def exact_window_cdf(mu: np.ndarray, k: np.ndarray, top: int) -> np.ndarray:
    """CDF on 0..top of the sum of independent NB(mean mu_b, size k_b), by direct convolution."""
    pmf = np.zeros(top + 1)
    pmf[0] = 1.0
    grid = np.arange(top + 1)
    for m, size in zip(mu, k, strict=True):
        part = stats.nbinom.pmf(grid, size, size / (size + m))
        pmf = np.convolve(pmf, part)[: top + 1]
    return np.cumsum(pmf)


def prediction_choice(draws: int = 1000, seed: int = 7) -> dict[str, Any]:
    """Compare the options against the exact law for a degenerate posterior (one rate per bin).

    (a) iid: independent Gamma(k, k) noise per draw and bin; (a) stratified: the scheme
    :mod:`models.prediction.windows` uses (gamma quantiles at ``(perm + v) / D``); (b) moment-matched NB.
    """
    from scipy import special

    hours = np.arange(24)
    mu = 40.0 * (0.1 + np.exp(-0.5 * ((hours - 13) / 3.5) ** 2))  # counts per hour, 4..44
    k = np.where((hours < 6) | (hours >= 22), 3.0, 25.0)  # noisier nights, as measured
    out: dict[str, Any] = {"draws": draws}
    for label, bins in (("one bin (13:00)", [13]), ("daily total (24 bins)", list(range(24)))):
        m, size = mu[bins], k[bins]
        top = int(m.sum() * 3 + 200)
        grid = np.arange(top + 1)
        exact = exact_window_cdf(m, size, top)
        rng = np.random.default_rng(seed)
        row: dict[str, Any] = {
            "interval95_exact": [int(np.searchsorted(exact, q)) for q in (0.025, 0.975)]
        }
        noise = {
            "a_iid": rng.gamma(size, 1.0 / size, size=(draws, len(bins))),
            "a_stratified": special.gammaincinv(
                size,
                (
                    np.stack([rng.permutation(draws) for _ in bins], axis=1)
                    + rng.random((draws, len(bins)))
                )
                / draws,
            )
            / size,
        }
        for name, g in noise.items():
            lam = (m[None, :] * g).sum(axis=1)[:, None]
            cdf = np.array([mixture_cdf(lam, int(x))[0] for x in grid])
            lo, hi = summarise(lam, levels=(0.95,)).intervals[0.95]
            row[f"sup_cdf_error_{name}"] = float(np.max(np.abs(cdf - exact)))
            row[f"interval95_{name}"] = [int(lo[0]), int(hi[0])]
        mean = m.sum()
        r = mean**2 / np.sum(m**2 / size)
        row["sup_cdf_error_b_moment_matched"] = float(
            np.max(np.abs(stats.nbinom.cdf(grid, r, r / (r + mean)) - exact))
        )
        row["interval95_b_moment_matched"] = [
            int(v) for v in stats.nbinom.ppf([0.025, 0.975], r, r / (r + mean))
        ]
        out[label] = row
    out["query_seconds"] = query_cost(draws)
    return out


def query_cost(draws: int) -> dict[str, float]:
    """Seconds for expected_counts over one week of hourly windows, Poisson and NB posteriors."""
    import pandas as pd

    from models.prediction.posterior import CompactPosterior
    from models.prediction.windows import expected_counts
    from models.ratemodel.design import Calendar

    spec = ModelSpec(trend=False, latent_daily=False)
    first = dt.date(2026, 1, 5)
    base = CompactPosterior(
        week_log_rate=np.full((draws, 7, 24), np.log(20.0)),
        trend=np.zeros(draws),
        holiday_effect=np.zeros(draws),
        latent=np.zeros((draws, 28)),
        latent_rho=np.zeros(draws),
        latent_sd=np.zeros(draws),
        calendar=Calendar("UTC", 60, first, first),
        spec=spec,
        opening=None,
        seed=1,
    )
    nb = dataclasses.replace(
        base, spec=spec.with_(observation="negbin"), dispersion=np.full((draws, 24), 8.0)
    )
    starts = pd.date_range("2026-02-02", periods=168, freq="1h", tz="UTC")
    ends = starts + pd.Timedelta(hours=1)
    out = {}
    for name, posterior in (("poisson", base), ("negbin", nb)):
        expected_counts(posterior, starts, ends)  # warm the cached draws
        started = time.perf_counter()
        expected_counts(posterior, starts, ends)
        out[name] = time.perf_counter() - started
    return out


# --------------------------------------------------------------------------- part 2

VARIANTS: dict[str, ModelSpec] = {
    "poisson": ModelSpec(trend=False, holidays=NZ, latent_daily=False),
    "poisson+latent": ModelSpec(trend=False, holidays=NZ),
    "negbin+latent": ModelSpec(
        observation="negbin", dispersion_by_slot=False, trend=False, holidays=NZ
    ),
    "negbin-by-hour+latent": ModelSpec(observation="negbin", trend=False, holidays=NZ),
    "negbin-by-hour": ModelSpec(observation="negbin", trend=False, holidays=NZ, latent_daily=False),
    "negbin-by-hour+latent+shape": ModelSpec(
        observation="negbin", trend=False, holidays=NZ, within_day=3
    ),
}
#: The recorded run used the C backend here: numba raised ZeroDivisionError on this variant
#: before models/fitting/build.py clamped the AR(1) coefficient inside (1e-6, 1 - 1e-6); since then the
#: first origins sample with numba too (2 x 400 draws: no error, 0 divergences).
BACKENDS = {"poisson+latent": "c"}
ORIGINS = tuple(dt.date(2024, 3, 4) + dt.timedelta(days=21 * i) for i in range(4))


@dataclasses.dataclass(frozen=True)
class LooFitter:
    """A NUTS fitter that also records the fit's PSIS-LOO, pointwise, in its diagnostics."""

    inner: NutsFitter

    def __call__(self, history: BinnedSeries, *, seed: int) -> FittedModel:
        import arviz as az
        import pymc as pm

        from models.fitting.build import build_model
        from models.fitting.sampling import fit_model
        from models.ratemodel.design import make_model_data

        spec = self.inner.spec
        data = make_model_data(history, spec)
        options = self.inner.options.with_changes(seed=seed, progressbar=False)
        fit = fit_model(data, spec, options=options)
        # log_likelihood needs the graph again; models.fitting.build is where graphs are made.
        pm.compute_log_likelihood(fit.idata, model=build_model(data, spec), progressbar=False)
        loo = az.loo(fit.idata, pointwise=True)
        posterior = fit.compact(max_draws=options.max_stored_draws)
        diagnostics = {
            **fit.diagnostics.to_dict(),
            "elpd_loo": float(loo.elpd_loo),
            "elpd_loo_se": float(loo.se),
            "p_loo": float(loo.p_loo),
            "pareto_k_over_0.7": int(np.sum(np.asarray(loo.pareto_k) > 0.7)),
            "loo_pointwise": np.asarray(loo.loo_i).round(4).tolist(),
        }
        return FittedModel(posterior, diagnostics)

    def describe(self) -> dict[str, Any]:
        return {**self.inner.describe(), "loo": True}


def variants(root: Path, *, draws: int, tune: int) -> dict[str, Any]:
    binned = auckland("45 Queen Street", dt.date(2023, 12, 1), dt.date(2024, 6, 1))
    config = BacktestConfig(origins=ORIGINS, history_days=56)
    out: dict[str, Any] = {}
    pointwise: dict[str, list[np.ndarray]] = {}
    for name, spec in VARIANTS.items():
        backend = BACKENDS.get(name, "numba")
        fitter = LooFitter(
            NutsFitter(
                spec,
                options=FitOptions(
                    draws=draws, tune=tune, chains=2, backend=backend, max_stored_draws=1000
                ),
            )
        )
        print(f"variant {name}", file=sys.stderr)
        try:
            records = run_backtest(
                binned, fitter, config, results_dir=root / name, holidays=NZ, progress=True
            )
        except Exception as exc:  # a variant that cannot be sampled is a finding, not a crash
            out[name] = {"failed": f"{type(exc).__name__}: {str(exc).splitlines()[0][:200]}"}
            continue
        metrics = summarise_records(records, lead_bands=config.lead_bands, levels=config.levels)
        fits = [r["diagnostics"] for r in records]
        pointwise[name] = [np.asarray(d["loo_pointwise"]) for d in fits]
        out[name] = {
            "overall": {k: v for k, v in metrics["overall"]["model"].items()},
            "weekday_mean_poisson": metrics["overall"]["weekday_mean_poisson"],
            "elpd_loo": [d["elpd_loo"] for d in fits],
            "elpd_loo_se": [d["elpd_loo_se"] for d in fits],
            "p_loo": [d["p_loo"] for d in fits],
            "pareto_k_over_0.7": [d["pareto_k_over_0.7"] for d in fits],
            "gate_ok": [d["ok"] for d in fits],
            "fit_seconds": [d["fit_seconds"] for d in fits],
        }
    # elpd differences against the best variant, with the se of the pointwise difference (as
    # az.compare computes it: sqrt(n * var(diff_i))), per origin.
    if pointwise:
        for i in range(len(ORIGINS)):
            best = max(pointwise, key=lambda n: float(pointwise[n][i].sum()))
            for name, series in pointwise.items():
                diff = series[i] - pointwise[best][i]
                out[name].setdefault("elpd_diff", []).append(float(diff.sum()))
                out[name].setdefault("elpd_diff_se", []).append(
                    float(np.sqrt(diff.size * diff.var()))
                )
    return out


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--part", choices=("prediction", "variants"), required=True)
    parser.add_argument("--results", default=".calibration")
    parser.add_argument("--draws", type=int, default=400)
    parser.add_argument("--tune", type=int, default=400)
    args = parser.parse_args(argv)
    root = Path(args.results)
    root.mkdir(parents=True, exist_ok=True)
    if args.part == "prediction":
        result = {str(d): prediction_choice(draws=d) for d in (1000, 2000)}
    else:
        result = variants(root, draws=args.draws, tune=args.tune)
    path = root / f"{args.part}.json"
    path.write_text(json.dumps(result, indent=2))
    print(json.dumps(result, indent=2, default=str)[:6000])
    print(f"wrote {path}", file=sys.stderr)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())

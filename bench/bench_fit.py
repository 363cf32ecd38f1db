"""Fit wall time for 26 and 52 weeks of hourly data beside its floor measured in the same run.

floor = (time of one log-density-gradient evaluation) x (total leapfrog steps) / (chains in parallel)
Targets (issue 2): fit <= 2x floor, r_hat <= 1.01, 0 divergences. Compile time is reported apart.
"""

from __future__ import annotations

import os
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
os.environ.setdefault("PYTENSOR_FLAGS", f"compiledir={Path.cwd() / '.cache' / 'pytensor'}")

import numpy as np
from simulated import hourly_history

from models.fitting.build import build_model
from models.fitting.options import FitOptions
from models.fitting.sampling import fit_model
from models.ratemodel.design import make_model_data
from models.ratemodel.spec import ModelSpec


def gradient_seconds(model, repeats: int = 2000) -> tuple[float, float]:  # type: ignore[no-untyped-def]
    from pymc.blocking import DictToArrayBijection

    started = time.perf_counter()
    fn = model.logp_dlogp_function(mode="NUMBA", ravel_inputs=True)
    point = model.initial_point()
    x = DictToArrayBijection.map({v.name: point[v.name] for v in fn._grad_vars}).data
    fn.set_extra_values({})
    fn(x)
    compile_seconds = time.perf_counter() - started
    started = time.perf_counter()
    for _ in range(repeats):
        fn(x)
    return (time.perf_counter() - started) / repeats, compile_seconds


def main() -> None:
    chains, cores = 4, min(4, os.cpu_count() or 1)
    print(
        f"{'weeks':>5} {'bins':>6} {'grad us':>8} {'compile s':>9} {'steps':>8} {'floor s':>8} "
        f"{'fit s':>7} {'fit/floor':>9} {'r_hat':>6} {'ess':>6} {'div':>4}"
    )
    for weeks in (26, 52):
        binned = hourly_history(weeks)
        spec = ModelSpec()
        data = make_model_data(binned, spec)
        grad, compile_seconds = gradient_seconds(build_model(data, spec))
        started = time.perf_counter()
        result = fit_model(data, spec, options=FitOptions(chains=chains, seed=7, progressbar=False))
        wall = time.perf_counter() - started
        steps = result.timings["leapfrog_steps"]
        floor = grad * steps / min(chains, cores)
        d = result.diagnostics
        print(
            f"{weeks:>5} {len(binned.count):>6} {grad * 1e6:>8.0f} {compile_seconds:>9.1f} "
            f"{steps:>8.0f} {floor:>8.1f} {wall:>7.1f} {wall / floor:>9.2f} {d.max_r_hat:>6.3f} "
            f"{d.min_ess_bulk:>6.0f} {d.divergences:>4}",
            flush=True,
        )
        print(
            f"      sampling alone {result.timings['sampling_seconds']:.1f} s; "
            f"{steps / (chains * 2000):.1f} leapfrog steps per iteration; gate "
            f"{'passed' if d.ok else 'failed: ' + '; '.join(d.problems[:3])}",
            flush=True,
        )
        del result
        np.random.default_rng(0)


if __name__ == "__main__":
    main()

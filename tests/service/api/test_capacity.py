"""The capacity routes: same numbers as the CLI documents, the caution, and error bodies."""

from __future__ import annotations

import csv
import io
import json
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pandas as pd
import pytest
from fastapi.testclient import TestClient

from models.capacity.staffing import STAFFING_CAUTION, ServiceTarget
from models.store import FileStore
from service.main import create_app
from service.queries.capacity import staffing_document, update_document
from tests.service.api.support import PLAN, TZ, hump_table, publish, settings

OBSERVED: dict[str, Any] = {
    "observed": [{"start": "2026-03-03T08:00", "end": "2026-03-03T10:00", "count": 300}],
    "start": "2026-03-03T10:00",
    "end": "2026-03-03T12:00",
    "step": "1h",
    "tz": TZ,
    "seed": 9,
}


@pytest.fixture(scope="module")
def store_path(tmp_path_factory: pytest.TempPathFactory) -> Path:
    root = tmp_path_factory.mktemp("store")
    publish(FileStore(root), "desk-a", hump_table(10), latent_rho=0.5, latent_sd=0.2)
    return root


@pytest.fixture(scope="module")
def client(store_path: Path) -> Iterator[TestClient]:
    app = create_app(settings(store_path, max_windows=20, max_horizon_days=60))
    with TestClient(app) as test_client:
        yield test_client


def local(*texts: str) -> pd.DatetimeIndex:
    return pd.DatetimeIndex([pd.Timestamp(t, tz=TZ) for t in texts]).tz_convert("UTC")


class TestStaffing:
    def test_answer_equals_the_cli_document(self, client, store_path) -> None:
        response = client.post(
            "/v1/series/desk-a/staffing", json={**PLAN, "shrinkage": 0.25, "agents": [20]}
        )
        assert response.status_code == 200, response.text
        body = response.json()
        starts = local(
            "2026-03-03T08:00", "2026-03-03T08:30", "2026-03-03T09:00", "2026-03-03T09:30"
        )
        doc = staffing_document(
            FileStore(store_path).load("desk-a"),
            starts,
            starts + pd.Timedelta(minutes=30),
            target=ServiceTarget(handle_time=240, answer_within=20, share=0.8),
            meet_probability=0.9,
            shrinkage=0.25,
            agents=[20],
        )
        assert body == json.loads(json.dumps(doc))
        assert body["caution"] == STAFFING_CAUTION

    def test_agents_below_the_load_name_the_field(self, client) -> None:
        response = client.post("/v1/series/desk-a/staffing", json={**PLAN, "agents": [1]})
        assert response.status_code == 422
        body = response.json()
        assert body["field"] == "agents"
        assert "agents[0] = 1" in body["message"]

    @pytest.mark.parametrize(
        ("change", "field"),
        [
            ({"share": 1.0}, "share"),
            ({"handle_time_seconds": 0}, "handle_time_seconds"),
            ({"step": "45min"}, "step"),
            ({"shrinkage": 1}, "shrinkage"),
            ({"agents": [3, 4, 5]}, "agents"),
        ],
    )
    def test_bad_fields_give_422_naming_them(self, client, change, field) -> None:
        response = client.post("/v1/series/desk-a/staffing", json={**PLAN, **change})
        assert response.status_code == 422
        assert response.json()["field"] == field

    def test_unknown_series_is_404(self, client) -> None:
        assert client.post("/v1/series/nope/staffing", json=PLAN).status_code == 404


class TestIntraday:
    def test_answer_equals_the_cli_document(self, client, store_path) -> None:
        response = client.post("/v1/series/desk-a/intraday", json=OBSERVED)
        assert response.status_code == 200, response.text
        starts = local("2026-03-03T10:00", "2026-03-03T11:00")
        doc = update_document(
            FileStore(store_path).load("desk-a"),
            local("2026-03-03T08:00"),
            local("2026-03-03T10:00"),
            [300],
            starts,
            starts + pd.Timedelta(hours=1),
            seed=9,
        )
        assert response.json() == json.loads(json.dumps(doc))
        assert all(w["mean"] > w["before"]["mean"] for w in doc["windows"])

    def test_observations_inside_the_history_are_refused(self, client) -> None:
        body = {**OBSERVED, "observed": [{**OBSERVED["observed"][0], "start": "2026-03-01T08:00",
                                          "end": "2026-03-01T10:00"}]}  # fmt: skip
        response = client.post("/v1/series/desk-a/intraday", json=body)
        assert response.status_code == 422
        assert response.json()["field"] == "observed"
        assert "inside the fitted history" in response.json()["message"]

    def test_unparseable_observed_time_names_its_field(self, client) -> None:
        body = {**OBSERVED, "tz": None}
        response = client.post("/v1/series/desk-a/intraday", json=body)
        assert response.status_code == 422
        assert response.json()["field"] == "observed[0].start"


def csv_rows(response: Any) -> list[dict[str, str]]:
    """Rows of a plain CSV answer: a header line and data lines, nothing else."""
    assert response.status_code == 200, response.text
    assert response.headers["content-type"].startswith("text/csv")
    assert not any(line.startswith("#") for line in response.text.splitlines())
    return list(csv.DictReader(io.StringIO(response.text)))


class TestCsv:
    def test_staffing_csv_has_the_json_values_under_the_json_names(self, client) -> None:
        body = {**PLAN, "agents": [20]}
        as_json = client.post("/v1/series/desk-a/staffing", json=body).json()
        response = client.post(
            "/v1/series/desk-a/staffing", json=body, headers={"Accept": "text/csv"}
        )
        rows = csv_rows(response)
        assert response.headers["x-caution"] == STAFFING_CAUTION
        assert len(rows) == len(as_json["intervals"]) == 4
        for row, interval in zip(rows, as_json["intervals"], strict=True):
            assert row["start"] == interval["start"]
            assert int(row["quantile_arrivals"]) == interval["quantile_arrivals"]
            for policy in ("plug_in", "assured", "given"):
                for name, number in interval[policy].items():
                    assert float(row[f"{policy}_{name}"]) == pytest.approx(number, abs=1e-6)

    def test_intraday_csv_has_before_and_after(self, client) -> None:
        as_json = client.post("/v1/series/desk-a/intraday", json=OBSERVED).json()
        response = client.post(
            "/v1/series/desk-a/intraday", json=OBSERVED, headers={"Accept": "text/csv"}
        )
        rows = csv_rows(response)
        assert [float(r["before_mean"]) for r in rows] == [
            round(w["before"]["mean"], 3) for w in as_json["windows"]
        ]
        assert [float(r["mean"]) for r in rows] == [round(w["mean"], 3) for w in as_json["windows"]]

    def test_neither_json_nor_csv_is_406(self, client) -> None:
        response = client.post(
            "/v1/series/desk-a/staffing", json=PLAN, headers={"Accept": "application/xml"}
        )
        assert response.status_code == 406


class TestIntradayDefaults:
    def test_start_end_and_step_default_as_in_the_cli(self, client) -> None:
        """Default: from the end of the observations to the next local midnight, by one bin."""
        explicit = client.post("/v1/series/desk-a/intraday", json=OBSERVED | {"step": None,
                               "start": "2026-03-03T10:00", "end": "2026-03-04T00:00"}).json()  # fmt: skip
        body = {k: v for k, v in OBSERVED.items() if k not in ("start", "end", "step")}
        implied = client.post("/v1/series/desk-a/intraday", json=body)
        assert implied.status_code == 200, implied.text
        assert implied.json() == explicit
        assert len(explicit["windows"]) == 14  # 10:00 to midnight in hours

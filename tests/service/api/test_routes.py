"""Every route through a TestClient: answers, and the error bodies of 401/403/404/406/413/422."""

from __future__ import annotations

import csv
import io
import json
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pytest
from fastapi.testclient import TestClient
from scipy import stats

from models.store import FileStore
from service.api.work import INLINE_CELLS
from service.main import create_app
from tests.service.api.support import ADMIN, READER, TZ, hump_table, publish, settings

DIAGNOSTICS = {
    "ok": True,
    "max_r_hat": 1.004,
    "min_ess_bulk": 812.0,
    "divergences": 0,
    "draws": 500,
    "chains": 2,
    "problems": [],
    "sampling_seconds": 3.2,
}
ONE_HOUR = {"start": "2026-03-03T09:00", "end": "2026-03-03T10:00"}


@pytest.fixture(scope="module")
def store_path(tmp_path_factory: pytest.TempPathFactory) -> Path:
    root = tmp_path_factory.mktemp("store")
    store = FileStore(root)
    publish(store, "desk-a", hump_table(), manifest={"diagnostics": DIAGNOSTICS})
    publish(store, "desk-b", hump_table(0.5), latent_rho=0.5, latent_sd=0.2)
    return root


@pytest.fixture(scope="module")
def client(store_path: Path) -> Iterator[TestClient]:
    app = create_app(
        settings(
            store_path, admin_token=ADMIN, max_windows=30, max_horizon_days=60,
            max_batch_items=5, max_body_bytes=4096,
        )
    )  # fmt: skip
    with TestClient(app) as test_client:
        yield test_client


def forecast(client: TestClient, body: dict[str, Any], series: str = "desk-a") -> Any:
    return client.post(f"/v1/series/{series}/forecast", json=body)


def assert_error(response: Any, status: int, *, field: str | None, code: str | None = None) -> dict:
    """The documented error shape, with the expected status and field."""
    assert response.status_code == status, response.text
    body = response.json()
    assert set(body) == {"status", "code", "message", "field", "value", "allowed", "problems"}
    assert body["status"] == status
    assert body["field"] == field
    assert body["message"]
    if code is not None:
        assert body["code"] == code
    return body


class TestHealth:
    def test_live_always_answers(self, client: TestClient) -> None:
        assert client.get("/v1/health/live").json() == {"status": "alive"}

    def test_ready_when_store_readable_and_series_loaded(self, client: TestClient) -> None:
        body = client.get("/v1/health/ready").json()
        assert body["ready"] and body["store_readable"] and body["series_loaded"] == 2
        assert body["refused"] == []

    def test_not_ready_on_an_empty_store(self, tmp_path: Path) -> None:
        with TestClient(create_app(settings(tmp_path))) as empty:
            response = empty.get("/v1/health/ready")
        assert response.status_code == 503
        assert response.json()["series_loaded"] == 0
        assert response.json()["ready"] is False


class TestSeriesCatalogue:
    def test_lists_every_series_with_version_history_and_diagnostics(
        self, client: TestClient
    ) -> None:
        body = client.get("/v1/series").json()
        assert body["count"] == 2
        first = body["series"][0]
        assert first["series"] == "desk-a"
        assert first["model_version"] == "v0001"
        assert first["tz"] == TZ
        assert first["history"] == {"first_day": "2026-02-02", "end_day": "2026-03-02", "days": 28}
        assert first["forecast_until"] == "2026-05-01"  # 60 days after the history
        assert first["diagnostics"]["max_r_hat"] == 1.004
        assert body["series"][1]["diagnostics"] is None  # its manifest has none

    def test_detail_adds_versions_and_spec(self, client: TestClient) -> None:
        body = client.get("/v1/series/desk-a").json()
        assert body["versions"] == ["v0001"]
        assert body["spec"]["bin_minutes"] == 60
        assert body["loaded_at"]

    def test_unknown_series_is_404_naming_it(self, client: TestClient) -> None:
        body = assert_error(client.get("/v1/series/desk-z"), 404, field="series")
        assert body["value"] == "desk-z"
        assert "desk-a" in body["message"]

    def test_invalid_series_name_is_422(self, client: TestClient) -> None:
        body = assert_error(client.get("/v1/series/Desk%20A"), 422, field="series")
        assert "lowercase" in body["message"]


class TestForecast:
    def test_answers_each_window_and_their_total(self, client: TestClient) -> None:
        """Every draw of desk-a has the same hourly rates: each window, and the total of the
        two, is Poisson with the rate integrated over it (reference: scipy.stats.poisson)."""
        body = forecast(
            client,
            {
                "windows": [ONE_HOUR, {"start": "2026-03-03T10:00", "end": "2026-03-03T11:30"}],
                "tz": TZ,
                "quantiles": [0.1, 0.5, 0.9],
                "at_least": [0, 5],
                "total": True,
            },
        ).json()
        assert body["series"] == "desk-a" and body["model_version"] == "v0001"
        assert [w["start"] for w in body["windows"]] == [
            "2026-03-03T09:00:00-06:00",
            "2026-03-03T10:00:00-06:00",
        ]
        tuesday = hump_table()[1]  # 2026-03-03 is a Tuesday; rows run Monday..Sunday
        means = [tuesday[9], tuesday[10] + 0.5 * tuesday[11]]  # 09-10; 10-11 and half of 11-12
        for row, mu in [*zip(body["windows"], means, strict=True), (body["total"], sum(means))]:
            poisson = stats.poisson(mu)
            # float32 storage of the log rates: about 1e-7 relative.
            assert row["mean"] == pytest.approx(mu, rel=1e-6)
            assert row["sd"] == pytest.approx(np.sqrt(mu), rel=1e-6)
            assert row["p_zero"] == pytest.approx(poisson.pmf(0), rel=1e-5)
            assert row["quantiles"] == {f"{q:g}": int(poisson.ppf(q)) for q in (0.1, 0.5, 0.9)}
            assert row["intervals"] == {
                f"{level:g}": [int(poisson.ppf((1 - level) / 2)), int(poisson.ppf((1 + level) / 2))]
                for level in (0.8, 0.95)
            }
            assert row["at_least"]["0"] == 1.0
            assert row["at_least"]["5"] == pytest.approx(poisson.sf(4), rel=1e-5)
        assert "probabilistic" in body["caution"]

    def test_csv_when_asked_with_the_total_as_the_last_row(self, client: TestClient) -> None:
        body = {"windows": [ONE_HOUR, {"start": "2026-03-03T10:00", "end": "2026-03-03T11:00"}],
                "tz": TZ, "total": True}  # fmt: skip
        as_json = forecast(client, body).json()
        response = client.post(
            "/v1/series/desk-a/forecast", json=body, headers={"Accept": "text/csv"}
        )
        assert response.headers["content-type"].startswith("text/csv")
        assert "probabilistic" in response.headers["x-caution"]
        rows = list(csv.DictReader(io.StringIO(response.text)))
        assert [r["row"] for r in rows] == ["window", "window", "total"]
        means = [w["mean"] for w in as_json["windows"]] + [as_json["total"]["mean"]]
        assert [float(r["mean"]) for r in rows] == [round(m, 3) for m in means]

    def test_offset_and_local_time_with_zone_agree(self, client: TestClient) -> None:
        local = forecast(client, {"windows": [ONE_HOUR], "tz": TZ}).json()
        offset = forecast(
            client,
            {"windows": [{"start": "2026-03-03T15:00Z", "end": "2026-03-03T16:00+00:00"}]},
        ).json()
        assert local["windows"] == offset["windows"]

    def test_naive_time_without_zone_is_422_naming_the_field(self, client: TestClient) -> None:
        body = assert_error(
            forecast(client, {"windows": [ONE_HOUR]}), 422, field="windows[0].start"
        )
        assert body["value"] == ONE_HOUR["start"]
        assert "no UTC offset" in body["message"]
        assert "tz" in body["allowed"]

    def test_a_time_read_before_is_read_again_in_its_own_zone_and_place(
        self, client: TestClient
    ) -> None:
        # Times parsed from text are remembered per (text, zone): the same text in another zone
        # is another instant, and refused without a zone it names where it stands this time.
        chicago = forecast(client, {"windows": [ONE_HOUR], "tz": TZ}).json()["windows"][0]
        new_york = forecast(client, {"windows": [ONE_HOUR], "tz": "America/New_York"}).json()
        # New York keeps Eastern time, one hour ahead of Chicago's Central time, all year
        # (IANA tz database zones; common practice, no source).
        assert chicago["start"] == "2026-03-03T09:00:00-06:00"
        assert new_york["windows"][0]["start"] == "2026-03-03T08:00:00-06:00"
        again = {"start": "2026-03-03T08:00-06:00", "end": ONE_HOUR["start"]}
        body = assert_error(forecast(client, {"windows": [again]}), 422, field="windows[0].end")
        assert body["value"] == ONE_HOUR["start"]

    def test_unknown_zone_is_422(self, client: TestClient) -> None:
        body = assert_error(
            forecast(client, {"windows": [ONE_HOUR], "tz": "Mars/Olympus"}), 422, field="tz"
        )
        assert body["value"] == "Mars/Olympus"

    def test_end_not_after_start_names_the_window(self, client: TestClient) -> None:
        backwards = {"start": "2026-03-03T10:00", "end": "2026-03-03T10:00"}
        body = assert_error(
            forecast(client, {"windows": [ONE_HOUR, backwards], "tz": TZ}), 422, field="windows[1]"
        )
        assert body["value"] == backwards

    def test_beyond_the_horizon_is_422_with_the_limit(self, client: TestClient) -> None:
        late = {"start": "2026-06-01T09:00", "end": "2026-06-01T10:00"}
        body = assert_error(
            forecast(client, {"windows": [late], "tz": TZ}), 422, field="windows[0]"
        )
        assert "horizon of 60 days" in body["message"]
        assert "2026-05-01" in body["allowed"]

    def test_before_the_history_is_422(self, client: TestClient) -> None:
        early = {"start": "2026-01-05T09:00", "end": "2026-01-05T10:00"}
        body = assert_error(
            forecast(client, {"windows": [early], "tz": TZ}), 422, field="windows[0]"
        )
        assert "before the history begins" in body["message"]

    def test_year_outside_the_representable_range_is_422(self, client: TestClient) -> None:
        ancient = {"start": "0001-01-01T00:00Z", "end": "0001-01-02T00:00Z"}
        assert_error(forecast(client, {"windows": [ancient]}), 422, field="windows[0].start")

    def test_too_many_windows_is_422_with_the_limit(self, client: TestClient) -> None:
        body = assert_error(
            forecast(client, {"windows": [ONE_HOUR] * 31, "tz": TZ}),
            422,
            field="windows",
            code="too_many_windows",
        )
        assert body["value"] == 31 and "at most 30" in body["allowed"]

    def test_total_over_overlapping_windows_is_422(self, client: TestClient) -> None:
        assert_error(
            forecast(client, {"windows": [ONE_HOUR, ONE_HOUR], "tz": TZ, "total": True}),
            422,
            field="windows",
        )

    def test_level_outside_0_1_is_422(self, client: TestClient) -> None:
        body = assert_error(
            forecast(client, {"windows": [ONE_HOUR], "tz": TZ, "levels": [0.8, 1.5]}),
            422,
            field="levels[1]",
        )
        assert body["value"] == 1.5 and "less than 1" in body["allowed"]

    def test_unknown_field_is_refused(self, client: TestClient) -> None:
        body = assert_error(
            forecast(client, {"windows": [ONE_HOUR], "tz": TZ, "level": [0.9]}), 422, field="level"
        )
        assert body["allowed"] == "only the documented fields"

    def test_not_a_date_time_is_422(self, client: TestClient) -> None:
        bad = {"start": "next tuesday", "end": "2026-03-03T10:00"}
        body = assert_error(
            forecast(client, {"windows": [bad], "tz": TZ}), 422, field="windows[0].start"
        )
        assert body["value"] == "next tuesday"

    def test_malformed_json_is_a_body_error_not_a_field(self, client: TestClient) -> None:
        response = client.post(
            "/v1/series/desk-a/forecast",
            content=b'{"windows": [',
            headers={"Content-Type": "application/json"},
        )
        body = assert_error(response, 422, field="body", code="invalid_body")
        assert body["problems"][0]["field"] == "body"
        assert "not valid JSON" in body["message"] and "character 13" in body["message"]

    def test_unknown_series_is_404(self, client: TestClient) -> None:
        assert_error(
            forecast(client, {"windows": [ONE_HOUR], "tz": TZ}, "desk-z"), 404, field="series"
        )

    def test_declared_body_over_the_limit_is_413(self, client: TestClient) -> None:
        payload = json.dumps({"windows": [ONE_HOUR] * 100, "tz": TZ}).encode()
        assert len(payload) > 4096
        body = assert_error(
            client.post(
                "/v1/series/desk-a/forecast",
                content=payload,
                headers={"Content-Type": "application/json"},
            ),
            413,
            field="body",
            code="body_too_large",
        )
        assert body["value"] == len(payload)

    def test_streamed_body_over_the_limit_is_413(self, client: TestClient) -> None:
        def chunks() -> Iterator[bytes]:  # no Content-Length: sent chunked
            yield b'{"windows": ['
            for _ in range(200):
                yield json.dumps(ONE_HOUR).encode() + b","

        assert_error(
            client.post(
                "/v1/series/desk-a/forecast",
                content=chunks(),
                headers={"Content-Type": "application/json"},
            ),
            413,
            field="body",
        )


class TestBands:
    def query(self, **extra: Any) -> dict[str, Any]:
        return {"start": "2026-03-03", "end": "2026-03-04", "step": "1h", "tz": TZ, **extra}

    def test_a_day_in_hours_gives_24_windows(self, client: TestClient) -> None:
        body = client.get("/v1/series/desk-a/bands", params=self.query()).json()
        assert len(body["windows"]) == 24
        assert body["windows"][0]["start"] == "2026-03-03T00:00:00-06:00"

    def test_the_spring_forward_day_has_23_hours(self, client: TestClient) -> None:
        # Chicago moves its clocks forward on 2026-03-08 (common practice, no source).
        body = client.get(
            "/v1/series/desk-a/bands", params=self.query(start="2026-03-08", end="2026-03-09")
        ).json()
        assert len(body["windows"]) == 23
        assert body["windows"][-1]["end"] == "2026-03-09T00:00:00-05:00"

    def test_csv_when_asked_matches_the_json(self, client: TestClient) -> None:
        params = self.query(quantiles=[0.5], at_least=[3])
        as_json = client.get("/v1/series/desk-a/bands", params=params).json()
        response = client.get(
            "/v1/series/desk-a/bands", params=params, headers={"Accept": "text/csv"}
        )
        assert response.headers["content-type"].startswith("text/csv")
        assert response.headers["x-model-version"] == "v0001"
        rows = list(csv.DictReader(io.StringIO(response.text)))
        assert len(rows) == 24
        for row, window in zip(rows, as_json["windows"], strict=True):
            assert row["start"] == window["start"]
            assert float(row["mean"]) == round(window["mean"], 3)
            assert int(row["q_0.5"]) == window["quantiles"]["0.5"]
            assert int(row["lo_0.95"]) == window["intervals"]["0.95"][0]
            assert float(row["p_at_least_3"]) == round(window["at_least"]["3"], 4)

    def test_total_over_the_range_and_its_csv_row(self, client: TestClient) -> None:
        params = self.query(step="6h", total="true")
        as_json = client.get("/v1/series/desk-a/bands", params=params).json()
        # Expectation is linear: the total's mean is the sum of the windows' means.
        assert as_json["total"]["mean"] == pytest.approx(
            sum(w["mean"] for w in as_json["windows"]), rel=1e-9
        )
        response = client.get(
            "/v1/series/desk-a/bands", params=params, headers={"Accept": "text/csv"}
        )
        rows = list(csv.DictReader(io.StringIO(response.text)))
        assert [r["row"] for r in rows] == ["window"] * 4 + ["total"]
        assert float(rows[-1]["mean"]) == round(as_json["total"]["mean"], 3)
        assert (rows[-1]["start"], rows[-1]["end"]) == (rows[0]["start"], rows[-2]["end"])

    def test_without_total_the_json_has_no_total_key(self, client: TestClient) -> None:
        body = client.get("/v1/series/desk-a/bands", params=self.query(step="6h")).json()
        assert "total" not in body and "at_least" not in body["windows"][0]

    def test_accept_q_values_are_honoured(self, client: TestClient) -> None:
        response = client.get(
            "/v1/series/desk-a/bands",
            params=self.query(),
            headers={"Accept": "text/csv;q=0.4, application/json"},
        )
        assert response.headers["content-type"] == "application/json"

    def test_unacceptable_media_type_is_406(self, client: TestClient) -> None:
        response = client.get(
            "/v1/series/desk-a/bands", params=self.query(), headers={"Accept": "application/xml"}
        )
        body = assert_error(response, 406, field="Accept", code="not_acceptable")
        assert "text/csv" in body["allowed"]

    def test_a_step_giving_too_many_windows_is_refused_before_cutting(
        self, client: TestClient
    ) -> None:
        body = assert_error(
            client.get("/v1/series/desk-a/bands", params=self.query(step="1min")),
            422,
            field="step",
            code="too_many_windows",
        )
        assert body["value"] == 1440

    def test_malformed_step_is_422(self, client: TestClient) -> None:
        assert_error(
            client.get("/v1/series/desk-a/bands", params=self.query(step="-1h")), 422, field="step"
        )

    def test_end_before_start_is_422(self, client: TestClient) -> None:
        assert_error(
            client.get("/v1/series/desk-a/bands", params=self.query(end="2026-03-02")),
            422,
            field="end",
        )

    def test_missing_start_is_422(self, client: TestClient) -> None:
        params = self.query()
        del params["start"]
        body = assert_error(
            client.get("/v1/series/desk-a/bands", params=params), 422, field="start"
        )
        assert "required" in body["allowed"]


class TestLongRanges:
    def test_400_days_at_one_day(self, tmp_path: Path) -> None:
        """400 windows of 24 hours. Each mean is the hourly rates summed over the hours the
        window covers (a hand integral). A step is a fixed length: after Chicago's clocks move
        forward on 2026-03-08 (common practice, no source) the windows start at 01:00."""
        publish(FileStore(tmp_path), "desk-a", hump_table(), draws=20)
        params = {"start": "2026-03-02", "end": "2027-04-06", "step": "1d", "tz": TZ}
        with TestClient(create_app(settings(tmp_path))) as long_client:
            body = long_client.get("/v1/series/desk-a/bands", params=params).json()
        windows = body["windows"]
        assert len(windows) == 400
        rates = hump_table()  # rows Monday..Sunday, columns local hours
        for window in windows[:6]:  # Monday 2026-03-02 to Saturday 2026-03-07
            weekday = pd.Timestamp(window["start"]).weekday()
            assert window["mean"] == pytest.approx(rates[weekday].sum(), rel=1e-6)
        spring = windows[6]
        assert (spring["start"], spring["end"]) == (
            "2026-03-08T00:00:00-06:00",
            "2026-03-09T01:00:00-05:00",
        )
        # Sunday without its 02:00 hour (it does not exist), then Monday 00:00-01:00.
        expected = rates[6].sum() - rates[6][2] + rates[0][0]
        assert spring["mean"] == pytest.approx(expected, rel=1e-6)
        assert windows[7]["start"] == "2026-03-09T01:00:00-05:00"


class TestBatch:
    def records(self, response: Any) -> list[dict[str, Any]]:
        assert response.status_code == 200, response.text
        assert response.headers["content-type"] == "application/x-ndjson"
        return [json.loads(line) for line in response.text.splitlines()]

    def test_bad_items_become_error_records_and_the_rest_is_answered(
        self, client: TestClient
    ) -> None:
        items = [
            {"id": "a", "series": "desk-a", "start": "2026-03-03", "end": "2026-03-04", "tz": TZ,
             "step": "6h"},
            {"id": "missing", "series": "desk-z", "windows": [ONE_HOUR], "tz": TZ},
            {"id": "naive", "series": "desk-b", "windows": [ONE_HOUR]},
            "not an object",
            {"id": "b", "series": "desk-b", "windows": [ONE_HOUR], "tz": TZ, "total": True},
        ]  # fmt: skip
        records = self.records(client.post("/v1/batch", json={"items": items}))
        assert [r["index"] for r in records] == [0, 1, 2, 3, 4]
        assert [r["ok"] for r in records] == [True, False, False, False, True]
        assert len(records[0]["result"]["windows"]) == 4
        assert records[1]["error"]["status"] == 404 and records[1]["error"]["field"] == "series"
        assert records[2]["error"]["field"] == "windows[0].start"
        assert records[3]["error"]["field"] == "item"
        assert records[4]["id"] == "b" and "total" in records[4]["result"]

    def test_an_item_answers_as_the_forecast_route_does(self, client: TestClient) -> None:
        body = {"windows": [ONE_HOUR], "tz": TZ, "quantiles": [0.5], "at_least": [4]}
        single = forecast(client, body, "desk-b").json()
        [record] = self.records(
            client.post("/v1/batch", json={"items": [{"series": "desk-b", **body}]})
        )
        assert record["result"] == single

    def test_windows_and_range_together_are_refused_for_that_item(self, client: TestClient) -> None:
        item = {
            "series": "desk-a",
            "windows": [ONE_HOUR],
            "start": "2026-03-03",
            "end": "2026-03-04",
        }
        [record] = self.records(client.post("/v1/batch", json={"items": [item]}))
        assert record["error"]["status"] == 422
        assert "either windows or start/end/step" in record["error"]["message"]

    def test_too_many_items_fails_the_request(self, client: TestClient) -> None:
        items = [{"series": "desk-a", "windows": [ONE_HOUR], "tz": TZ}] * 6
        body = assert_error(
            client.post("/v1/batch", json={"items": items}),
            422,
            field="items",
            code="too_many_items",
        )
        assert body["value"] == 6

    @pytest.mark.parametrize("items", [[], {"series": "desk-a"}, "x"])
    def test_items_must_be_a_non_empty_list(self, client: TestClient, items: Any) -> None:
        assert_error(client.post("/v1/batch", json={"items": items}), 422, field="items")


class TestAdmin:
    def test_reload_without_token_is_401_with_challenge(self, client: TestClient) -> None:
        response = client.post("/v1/admin/reload")
        assert_error(response, 401, field="Authorization", code="unauthorized")
        assert response.headers["www-authenticate"] == "Bearer"

    def test_reload_with_wrong_token_is_403_and_the_token_is_not_echoed(
        self, client: TestClient
    ) -> None:
        response = client.post("/v1/admin/reload", headers={"Authorization": "Bearer guess-1234"})
        assert_error(response, 403, field="Authorization", code="forbidden")
        assert "guess-1234" not in response.text

    def test_reload_with_the_token_loads_a_new_version(self, tmp_path: Path) -> None:
        store = FileStore(tmp_path)
        publish(store, "desk-a", hump_table())
        with TestClient(create_app(settings(tmp_path, admin_token=ADMIN))) as admin:
            publish(store, "desk-a", hump_table(2.0))
            stale = forecast(admin, {"windows": [ONE_HOUR], "tz": TZ}).json()
            response = admin.post("/v1/admin/reload", headers={"Authorization": f"Bearer {ADMIN}"})
            fresh = forecast(admin, {"windows": [ONE_HOUR], "tz": TZ}).json()
        assert response.status_code == 200
        assert response.json()["loaded"] == [
            {"series": "desk-a", "version": "v0002", "previous": "v0001"}
        ]
        assert (stale["model_version"], fresh["model_version"]) == ("v0001", "v0002")
        assert fresh["windows"][0]["mean"] == pytest.approx(2 * stale["windows"][0]["mean"])

    def test_admin_calls_are_off_without_an_admin_token(self, tmp_path: Path) -> None:
        with TestClient(create_app(settings(tmp_path))) as plain:
            response = plain.post("/v1/admin/reload", headers={"Authorization": "Bearer x"})
        assert_error(response, 403, field="Authorization", code="admin_disabled")


@pytest.fixture(scope="module")
def guarded(store_path: Path) -> Iterator[TestClient]:
    app = create_app(settings(store_path, admin_token=ADMIN, read_token=READER))
    with TestClient(app) as test_client:
        yield test_client


class TestReadToken:
    def test_read_calls_need_the_token(self, guarded: TestClient) -> None:
        assert_error(guarded.get("/v1/series"), 401, field="Authorization")
        assert_error(guarded.get("/v1/metrics"), 401, field="Authorization")
        bad = {"Authorization": "Bearer nope"}
        assert_error(guarded.get("/v1/series", headers=bad), 403, field="Authorization")

    @pytest.mark.parametrize("token", [READER, ADMIN])
    def test_read_or_admin_token_opens_read_calls(self, guarded: TestClient, token: str) -> None:
        assert (
            guarded.get("/v1/series", headers={"Authorization": f"Bearer {token}"}).status_code
            == 200
        )

    def test_the_read_token_does_not_open_admin_calls(self, guarded: TestClient) -> None:
        response = guarded.post("/v1/admin/reload", headers={"Authorization": f"Bearer {READER}"})
        assert response.status_code == 403

    def test_health_needs_no_token(self, guarded: TestClient) -> None:
        assert guarded.get("/v1/health/ready").status_code == 200


class TestCors:
    def test_off_by_default(self, client: TestClient) -> None:
        response = client.get("/v1/health/live", headers={"Origin": "https://example.org"})
        assert "access-control-allow-origin" not in response.headers

    def test_on_for_configured_origins_only(self, store_path: Path) -> None:
        app = create_app(settings(store_path, cors_origins=["https://plots.example.org"]))
        with TestClient(app) as test_client:
            allowed = test_client.get(
                "/v1/health/live", headers={"Origin": "https://plots.example.org"}
            )
            other = test_client.get("/v1/health/live", headers={"Origin": "https://evil.example"})
        assert allowed.headers["access-control-allow-origin"] == "https://plots.example.org"
        assert "access-control-allow-origin" not in other.headers


class TestDocs:
    def test_docs_page_and_schema_with_examples(self, client: TestClient) -> None:
        assert client.get("/docs").status_code == 200
        schema = client.get("/openapi.json").json()
        assert schema["components"]["schemas"]["ForecastRequest"]["examples"]
        assert "/v1/series/{series}/forecast" in schema["paths"]

    def test_unknown_path_has_the_error_shape(self, client: TestClient) -> None:
        assert_error(client.get("/v2/anything"), 404, field=None, code="not_found")

    def test_wrong_method_has_the_error_shape(self, client: TestClient) -> None:
        assert_error(client.delete("/v1/series"), 405, field=None, code="method_not_allowed")


class TestAtomicReload:
    def test_requests_during_reloads_each_see_one_whole_version(self, tmp_path: Path) -> None:
        """Odd versions have the base rate and even ones twice it: a mix would show in the mean."""
        import asyncio

        import httpx

        store = FileStore(tmp_path)
        # 60 windows of 20 minutes touch 2 hourly bins each: with this many draws the estimate
        # is above INLINE_CELLS, so the answer is computed in a work thread while reloads run
        # in another.
        draws = INLINE_CELLS // (60 * 2) + 1
        publish(store, "desk-a", hump_table(1.0), draws=draws)
        app = create_app(settings(tmp_path, admin_token=ADMIN))
        windows = (
            [
                {"start": f"2026-03-03T{h:02d}:00", "end": f"2026-03-03T{h:02d}:20"}
                for h in range(20)
            ]
            + [
                {"start": f"2026-03-04T{h:02d}:00", "end": f"2026-03-04T{h:02d}:20"}
                for h in range(20)
            ]
            + [
                {"start": f"2026-03-05T{h:02d}:00", "end": f"2026-03-05T{h:02d}:20"}
                for h in range(20)
            ]
        )
        body = {"windows": windows, "tz": TZ, "total": True}

        async def scenario() -> list[dict[str, Any]]:
            answers: list[dict[str, Any]] = []
            transport = httpx.ASGITransport(app=app)
            async with (
                app.router.lifespan_context(app),
                httpx.AsyncClient(transport=transport, base_url="http://t") as http,
            ):
                reloads_done = asyncio.Event()

                async def ask() -> None:
                    # Keep asking until every reload is in, then once more: the answers then span
                    # the first and the last version however the two tasks are scheduled.
                    asked = 0
                    while asked < 6 or not reloads_done.is_set():
                        reply = await http.post("/v1/series/desk-a/forecast", json=body)
                        answers.append(reply.json())
                        asked += 1
                    reply = await http.post("/v1/series/desk-a/forecast", json=body)
                    answers.append(reply.json())

                async def republish() -> None:
                    for scale in (2.0, 1.0, 2.0, 1.0):
                        await asyncio.to_thread(
                            publish, store, "desk-a", hump_table(scale), draws=draws
                        )
                        await http.post(
                            "/v1/admin/reload", headers={"Authorization": f"Bearer {ADMIN}"}
                        )
                    reloads_done.set()

                await asyncio.gather(ask(), ask(), republish())
            return answers

        answers = asyncio.run(scenario())
        base = None
        seen = set()
        for answer in answers:
            number = int(answer["model_version"][1:])
            seen.add(number)
            mean = answer["total"]["mean"] / (2.0 if number % 2 == 0 else 1.0)
            base = base or mean
            # float32 storage of log(2 x rate) rounds: 1e-6; a mix would be off by tens of percent.
            assert mean == pytest.approx(base, rel=1e-6), answer["model_version"]
        assert len(answers) >= 14 and 5 in seen and len(seen) >= 2

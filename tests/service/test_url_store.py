"""The CLI and the API on a store at an s3:// URL (moto's server): the same answers as from a
folder, reloads that see new versions, and bad locations refused in one line. (The polling
watcher on S3: tests/service/api/test_registry.py.)"""

from __future__ import annotations

import json
from pathlib import Path

import fsspec
import pytest
from fastapi.testclient import TestClient

from models.storage import open_store
from models.store import FileStore
from service.cli import main
from service.main import create_app
from tests.service.api.support import ADMIN, TZ, hump_table, publish, settings

WINDOW = {"windows": [{"start": "2026-03-03T09:00", "end": "2026-03-03T10:30"}], "tz": TZ}
ADMIN_HEADERS = {"Authorization": f"Bearer {ADMIN}"}
FORECAST = ["forecast", "--series", "desk-a", "--start", "2026-03-03T09:00", "--end",
            "2026-03-03T12:00", "--format", "json"]  # fmt: skip


def cli(capsys: pytest.CaptureFixture[str], *argv: str) -> tuple[int, str, str]:
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


class TestCli:
    def test_forecast_from_s3_equals_the_forecast_from_a_folder(
        self, capsys: pytest.CaptureFixture[str], s3_url: str, tmp_path: Path
    ) -> None:
        # The same seeded posterior in both stores: the answers must agree to the digit.
        publish(open_store(s3_url), "desk-a", hump_table(), draws=30, seed=11)
        publish(FileStore(tmp_path), "desk-a", hump_table(), draws=30, seed=11)
        code, from_s3, err = cli(capsys, *FORECAST, "--store", s3_url)
        assert code == 0, err
        code, from_folder, _ = cli(capsys, *FORECAST, "--store", str(tmp_path))
        assert json.loads(from_s3) == json.loads(from_folder)
        assert json.loads(from_s3)["model_version"] == "v0001"

    def test_series_lists_from_s3_and_environment_names_the_store(
        self, capsys: pytest.CaptureFixture[str], s3_url: str, monkeypatch: pytest.MonkeyPatch
    ) -> None:
        from service.config import get_settings

        code, out, _ = cli(capsys, "series", "--store", s3_url)
        assert (code, out) == (0, f"no series published in {s3_url}\n")
        publish(open_store(s3_url), "desk-a", hump_table(), draws=10)
        monkeypatch.setenv("RATECAST_STORE", s3_url)
        get_settings.cache_clear()
        try:
            code, out, _ = cli(capsys, "series")
        finally:
            get_settings.cache_clear()
        assert code == 0 and out.startswith("desk-a  v0001  history 2026-02-02")

    def test_a_missing_bucket_is_one_line_and_exit_5(
        self, capsys: pytest.CaptureFixture[str], s3_endpoint: str
    ) -> None:
        code, _, err = cli(capsys, "series", "--store", "s3://no-such-bucket/store")
        assert code == 5
        assert err == (
            "ratecast series: error: store s3://no-such-bucket/store: bucket 'no-such-bucket' "
            "does not exist; create it, or point --store / RATECAST_STORE at the store\n"
        )

    def test_fit_plan_refuses_a_bad_store_before_starting_workers(
        self, capsys: pytest.CaptureFixture[str], tmp_path: Path
    ) -> None:
        (tmp_path / "a.csv").write_text("start,count\n2026-01-05T00:00,1\n")
        plan = tmp_path / "plan.toml"
        plan.write_text('[defaults]\nzone = "UTC"\n[[series]]\nname = "a"\ncounts = "a.csv"\n')
        code, _, err = cli(capsys, "fit-plan", str(plan), "--store", "gs://bucket/store")
        assert code == 2
        assert err.startswith("ratecast fit-plan: error: store 'gs://bucket/store': protocol")
        assert err.count("\n") == 1


class TestApi:
    def test_the_app_serves_an_s3_store_and_an_admin_reload_sees_a_new_version(
        self, s3_url: str
    ) -> None:
        store = open_store(s3_url)
        publish(store, "desk-a", hump_table(), draws=30)
        with TestClient(create_app(settings(s3_url, admin_token=ADMIN))) as client:
            assert [s["series"] for s in client.get("/v1/series").json()["series"]] == ["desk-a"]
            first = client.post("/v1/series/desk-a/forecast", json=WINDOW).json()
            assert first["model_version"] == "v0001"
            publish(store, "desk-a", hump_table(2.0), draws=30)
            reload = client.post("/v1/admin/reload", headers=ADMIN_HEADERS).json()
            assert reload["loaded"] == [
                {"series": "desk-a", "version": "v0002", "previous": "v0001"}
            ]
            second = client.post("/v1/series/desk-a/forecast", json=WINDOW).json()
            assert second["model_version"] == "v0002"
            assert second["windows"][0]["mean"] == pytest.approx(2 * first["windows"][0]["mean"])

            # v0003 damaged in the bucket after publishing: refused, v0002 keeps serving.
            publish(store, "desk-a", hump_table(5.0), draws=30)
            fs, root = fsspec.core.url_to_fs(f"{s3_url}/desk-a/versions/v0003/draws.npz")
            payload = bytearray(fs.cat_file(root))
            payload[len(payload) // 2] ^= 0xFF
            fs.pipe_file(root, bytes(payload))
            reload = client.post("/v1/admin/reload", headers=ADMIN_HEADERS).json()
            assert [(r["series"], r["version"]) for r in reload["refused"]] == [("desk-a", "v0003")]
            assert "ratecast-test" not in json.dumps(reload)  # no bucket name in a response
            assert client.post("/v1/series/desk-a/forecast", json=WINDOW).json() == second

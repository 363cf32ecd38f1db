"""A version published with --force although its fit failed the gate says so in every answer:
the JSON field, the CSV column and HTTP header, the table's warning, the catalogue; a pipeline can
refuse it (exit 6). The flag is the manifest's (fit.degraded, or fit.forced before it existed).
"""

from __future__ import annotations

import csv
import io
import json
from collections.abc import Iterator
from pathlib import Path

import pytest
from fastapi.testclient import TestClient

from models.store import FileStore
from service.cli import main
from service.main import create_app
from tests.service.api.support import TZ, flip_byte, hump_table, publish, settings

PROBLEMS = ["r_hat 1.043 > 1.01 for dow_effect[Sat]", "3 divergent transitions > 0 allowed"]
WINDOW = {"windows": [{"start": "2026-03-03T09:00", "end": "2026-03-03T10:30"}], "tz": TZ}


@pytest.fixture(scope="module")
def root(tmp_path_factory: pytest.TempPathFactory) -> Path:
    folder = tmp_path_factory.mktemp("degraded") / "store"
    store = FileStore(folder)
    publish(store, "sound", hump_table(), manifest={"fit": {"forced": False}})
    publish(
        store, "shaky", hump_table(), manifest={"fit": {"degraded": True, "problems": PROBLEMS}}
    )
    publish(store, "legacy", hump_table(), manifest={"fit": {"forced": True}})  # older manifests
    return folder


@pytest.fixture(scope="module")
def client(root: Path) -> Iterator[TestClient]:
    with TestClient(create_app(settings(root))) as test_client:
        yield test_client


def test_the_store_reads_the_flag_from_new_and_older_manifests(root: Path) -> None:
    store = FileStore(root)
    assert [store.load(n).degraded for n in ("sound", "shaky", "legacy")] == [False, True, True]
    assert store.load("shaky").degraded_problems == PROBLEMS


@pytest.mark.parametrize(("series", "flag"), [("sound", False), ("shaky", True), ("legacy", True)])
def test_api_json_csv_headers_and_catalogue_carry_the_flag(
    client: TestClient, series: str, flag: bool
) -> None:
    answer = client.post(f"/v1/series/{series}/forecast", json=WINDOW)
    assert answer.status_code == 200
    assert answer.json()["degraded"] is flag
    assert answer.headers["x-model-degraded"] == str(flag).lower()
    as_csv = client.post(
        f"/v1/series/{series}/forecast", json=WINDOW, headers={"Accept": "text/csv"}
    )
    assert as_csv.headers["x-model-degraded"] == str(flag).lower()
    assert {row["degraded"] for row in csv.DictReader(io.StringIO(as_csv.text))} == {str(flag)}
    bands = client.get(
        f"/v1/series/{series}/bands",
        params={"start": "2026-03-03T08:00", "end": "2026-03-03T12:00", "step": "1h", "tz": TZ},
    )
    assert (
        bands.json()["degraded"] is flag and bands.headers["x-model-degraded"] == str(flag).lower()
    )
    catalogue = {s["series"]: s for s in client.get("/v1/series").json()["series"]}
    assert catalogue[series]["degraded"] is flag


def cli(capsys: pytest.CaptureFixture[str], root: Path, *args: str) -> tuple[int, str, str]:
    code = main([*args, "--store", str(root)])
    out, err = capsys.readouterr()
    return code, out, err


FORECAST = ("forecast", "--start", "2026-03-03T09:00", "--end", "2026-03-03T10:30")


def test_cli_table_warns_and_json_and_csv_carry_the_flag(capsys, root: Path) -> None:
    code, out, _ = cli(capsys, root, *FORECAST, "--series", "shaky")
    assert code == 0 and out.startswith("WARNING: shaky v0001 is DEGRADED")
    code, out, _ = cli(capsys, root, *FORECAST, "--series", "sound")
    assert code == 0 and "DEGRADED" not in out
    code, out, _ = cli(capsys, root, *FORECAST, "--series", "shaky", "--format", "json")
    assert json.loads(out)["degraded"] is True
    code, out, _ = cli(capsys, root, *FORECAST, "--series", "shaky", "--format", "csv")
    assert {row["degraded"] for row in csv.DictReader(io.StringIO(out))} == {"True"}


def test_a_pipeline_can_refuse_a_degraded_version(capsys, root: Path) -> None:
    code, out, err = cli(capsys, root, *FORECAST, "--series", "shaky", "--refuse-degraded")
    assert code == 6 and out == ""
    (line,) = err.strip().splitlines()
    assert "shaky v0001 is degraded" in line and PROBLEMS[0] in line
    code, _, _ = cli(capsys, root, *FORECAST, "--series", "sound", "--refuse-degraded")
    assert code == 0
    staff = (
        "staff", "--series", "shaky", "--start", "2026-03-03T09:00", "--end", "2026-03-03T10:00",
        "--handle-time", "240", "--answer-within", "60", "--target", "0.8", "--refuse-degraded",
    )  # fmt: skip
    assert cli(capsys, root, *staff)[0] == 6


def test_series_lists_every_series_with_the_flag_and_a_damaged_one_beside_them(
    capsys, tmp_path: Path
) -> None:
    store = FileStore(tmp_path / "store")
    publish(store, "sound", hump_table())
    publish(store, "shaky", hump_table(), manifest={"fit": {"degraded": True}})
    publish(store, "broken", hump_table())
    flip_byte(store.root / "broken" / "versions" / "v0001" / "draws.npz")
    code, out, _ = cli(capsys, store.root, "series")
    lines = {line.split()[0]: line for line in out.strip().splitlines()}
    assert set(lines) == {"sound", "shaky", "broken"}
    assert "DEGRADED" in lines["shaky"] and "DEGRADED" not in lines["sound"]
    assert "DAMAGED" in lines["broken"] and "checksum" in lines["broken"]
    assert code == 5  # a damaged series is a store problem, reported after the listing

"""The page's routes in-process: the document, its assets, the day-window CSV, the read token."""

from __future__ import annotations

import csv
import fnmatch
import io
import re
import tomllib
from collections.abc import Iterator
from importlib.resources import files
from pathlib import Path

import pytest
from fastapi.testclient import TestClient

from service.main import create_app
from service.page.router import ASSETS, PAGE_PATH
from service.queries.forecast import forecast_csv
from tests.service.api.support import settings
from tests.service.page.support import READER, TZ, publish_page_store

STATIC = files("service.page") / "static"
ROOT = Path(__file__).resolve().parents[3]
AUTH = {"Authorization": f"Bearer {READER}"}
DAYS = [  # Sunday 2026-03-08 is 23 hours long in Chicago
    {"start": "2026-03-07", "end": "2026-03-08"},
    {"start": "2026-03-08", "end": "2026-03-09"},
    {"start": "2026-03-09", "end": "2026-03-10"},
]


@pytest.fixture(scope="module")
def client(tmp_path_factory: pytest.TempPathFactory) -> Iterator[TestClient]:
    root = tmp_path_factory.mktemp("store")
    publish_page_store(root, draws=20)
    with TestClient(create_app(settings(root, read_token=READER))) as test_client:
        yield test_client


def test_page_and_assets_are_served_without_a_token_but_data_needs_it(client) -> None:
    page = client.get(PAGE_PATH)
    assert page.status_code == 200
    assert page.headers["content-type"].startswith("text/html")
    assert "default-src 'none'" in page.headers["content-security-policy"]
    for name, media in ASSETS.items():
        answer = client.get(f"{PAGE_PATH}/assets/{name}")
        assert answer.status_code == 200, name
        assert answer.headers["content-type"] == media
        assert answer.content == (STATIC / name).read_bytes()
    assert client.get("/v1/series").status_code == 401
    assert client.get("/v1/series", headers=AUTH).status_code == 200


def test_everything_the_page_loads_is_one_of_its_own_assets() -> None:
    """No CDN, nothing from another origin: every reference resolves to a served asset."""
    html = (STATIC / "index.html").read_text()
    linked = re.findall(r'(?:src|href)="([^"#]+)"', html)
    assert sorted(linked) == ["data:,", *sorted(f"page/assets/{name}" for name in ASSETS)]
    for name in ASSETS:
        text = (STATIC / name).read_text()
        for imported in re.findall(r'from "\./([^"]+)"', text):
            assert imported in ASSETS, f"{name} imports {imported}, which is not served"
        # The one URL allowed is the SVG namespace name (an identifier, never fetched).
        urls = set(re.findall(r"https?://[^\s\"')]+", text)) - {"http://www.w3.org/2000/svg"}
        assert not urls, f"{name} names {urls}"
    assert {p.name for p in STATIC.iterdir()} == {*ASSETS, "index.html"}


def test_static_files_ship_with_the_package() -> None:
    """Every static file matches a pattern of the package data in pyproject.toml."""
    config = tomllib.loads((ROOT / "pyproject.toml").read_text())
    patterns = config["tool"]["setuptools"]["package-data"]["service.page"]
    for path in STATIC.iterdir():
        relative = f"static/{path.name}"
        assert any(fnmatch.fnmatch(relative, p) for p in patterns), relative


def test_unknown_asset_is_a_one_line_404_naming_what_exists(client) -> None:
    answer = client.get(f"{PAGE_PATH}/assets/evil.js")
    assert answer.status_code == 404
    body = answer.json()
    assert body["code"] == "not_found" and body["value"] == "evil.js"
    assert body["allowed"] == ", ".join(sorted(ASSETS))
    assert client.get(f"{PAGE_PATH}/assets/..%2Fapi%2Fdeps.py").status_code == 404


def test_day_csv_the_page_downloads_is_the_api_forecast_as_csv(client) -> None:
    # The page's "Table as CSV" for day windows posts the forecast body with Accept: text/csv.
    body = {"windows": DAYS, "tz": TZ, "levels": [0.8, 0.95], "quantiles": [0.5], "at_least": [50]}
    url = "/v1/series/desk-a/forecast"
    csv_headers = {**AUTH, "Accept": "text/csv"}
    answer = client.post(url, json=body, headers=csv_headers)
    assert answer.status_code == 200 and answer.headers["content-type"].startswith("text/csv")
    doc = client.post(url, json=body, headers=AUTH).json()
    assert answer.text == forecast_csv(doc)
    rows = list(csv.DictReader(io.StringIO(answer.text)))
    # Local midnight to local midnight: 24, 23 (clocks forward) and 24 hours.
    assert [(r["start"], r["end"]) for r in rows] == [
        ("2026-03-07T00:00:00-06:00", "2026-03-08T00:00:00-06:00"),
        ("2026-03-08T00:00:00-06:00", "2026-03-09T00:00:00-05:00"),
        ("2026-03-09T00:00:00-05:00", "2026-03-10T00:00:00-05:00"),
    ]
    assert float(rows[1]["mean"]) == 0.0  # Sunday: closed all day

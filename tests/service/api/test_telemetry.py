"""Prometheus exposition: well-formed text, counts per route template, served and refused versions.

Format rules checked here are those of the Prometheus "Exposition formats" page, text format 0.0.4
(HELP/TYPE lines, ``name{label="value"} number``, cumulative ``_bucket`` series ending in
``le="+Inf"`` equal to ``_count``) [from memory].
"""

from __future__ import annotations

from collections.abc import Iterator
from pathlib import Path

import pytest
from fastapi.testclient import TestClient

from models.store import FileStore
from service.api.registry import Registry
from service.api.telemetry import LATENCY_BUCKETS, Metrics
from service.main import create_app
from tests.service.api.support import (
    ADMIN,
    TZ,
    flip_byte,
    hump_table,
    parse,
    publish,
    settings,
    value,
)


@pytest.fixture
def store_path(tmp_path: Path) -> Path:
    store = FileStore(tmp_path)
    publish(store, "desk-a", hump_table(), draws=5)
    publish(store, "desk-b", hump_table(), draws=5)
    return tmp_path


@pytest.fixture
def client(store_path: Path) -> Iterator[TestClient]:
    with TestClient(create_app(settings(store_path, admin_token=ADMIN))) as test_client:
        yield test_client


def test_requests_are_counted_per_route_template(client: TestClient) -> None:
    window = {"windows": [{"start": "2026-03-03T09:00", "end": "2026-03-03T10:00"}], "tz": TZ}
    for series in ("desk-a", "desk-b", "desk-a"):
        assert client.post(f"/v1/series/{series}/forecast", json=window).status_code == 200
    client.post("/v1/series/desk-a/forecast", json={"windows": []})
    client.get("/no/such/path")
    samples = parse(client.get("/v1/metrics").text)
    route = "/v1/series/{series}/forecast"
    total = "ratecast_http_requests_total"
    assert value(samples, total, method="POST", route=route, status="200") == 3
    assert value(samples, total, method="POST", route=route, status="422") == 1
    assert value(samples, total, method="GET", route="unmatched", status="404") == 1
    assert not any("desk-a" in lab.get("route", "") for _, lab, _ in samples)


def test_latency_histogram_is_cumulative_and_ends_at_count(client: TestClient) -> None:
    for _ in range(4):
        client.get("/v1/health/live")
    samples = parse(client.get("/v1/metrics").text)
    labels = {"method": "GET", "route": "/v1/health/live"}
    name = "ratecast_http_request_duration_seconds"
    buckets = [
        v for n, lab, v in samples if n == f"{name}_bucket" and lab["route"] == labels["route"]
    ]
    assert len(buckets) == len(LATENCY_BUCKETS) + 1
    assert buckets == sorted(buckets)
    assert buckets[-1] == value(samples, f"{name}_count", **labels) == 4
    assert 0 < value(samples, f"{name}_sum", **labels) < 4 * LATENCY_BUCKETS[-1]


def test_served_and_refused_versions_are_exposed(client: TestClient, store_path: Path) -> None:
    store = FileStore(store_path)
    publish(store, "desk-a", hump_table(2.0), draws=5)
    publish(store, "desk-b", hump_table(2.0), draws=5)
    flip_byte(store_path / "desk-b" / "versions" / "v0002" / "draws.npz")
    client.post("/v1/admin/reload", headers={"Authorization": f"Bearer {ADMIN}"})
    samples = parse(client.get("/v1/metrics").text)
    assert value(samples, "ratecast_series_loaded") == 2
    assert value(samples, "ratecast_series_version", series="desk-a") == 2
    assert value(samples, "ratecast_series_version", series="desk-b") == 1
    assert value(samples, "ratecast_series_refused", series="desk-b", version="v0002") == 1
    assert value(samples, "ratecast_store_readable") == 1


def test_label_values_are_escaped() -> None:
    from service.api.telemetry import render
    from service.api.work import WorkPool

    metrics = Metrics()
    metrics.observe("GET", 'odd"route\\with\nbreak', 200, 0.01)
    pool = WorkPool(threads=1, queue=0, budget=1, deadline_seconds=1.0)
    text = render(metrics, Registry(FileStore("/nonexistent-store-for-test")), pool)
    samples = parse(text)
    routes = {lab["route"] for _, lab, _ in samples if "route" in lab}
    assert routes == {'odd\\"route\\\\with\\nbreak'}

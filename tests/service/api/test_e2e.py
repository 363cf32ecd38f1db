"""A real ``ratecast serve`` process over HTTP: serve, reload a new version, refuse a damaged one."""

from __future__ import annotations

import json
import os
import socket
import subprocess
import sys
import time
from collections.abc import Iterator
from pathlib import Path

import httpx
import pytest

from models.store import FileStore
from service.queries.forecast import forecast_document, range_windows
from tests.service.api.support import ADMIN, TZ, flip_byte, hump_table, publish

pytestmark = pytest.mark.e2e

WINDOW = {"windows": [{"start": "2026-03-03T09:00", "end": "2026-03-03T10:30"}], "tz": TZ}
ADMIN_HEADERS = {"Authorization": f"Bearer {ADMIN}"}


def free_port() -> int:
    with socket.socket() as probe:
        probe.bind(("127.0.0.1", 0))
        return int(probe.getsockname()[1])


def ratecast_command() -> list[str]:
    script = Path(sys.executable).with_name("ratecast")
    return [str(script)] if script.exists() else [sys.executable, "-m", "service.cli"]


def wait_until_ready(base: str, process: subprocess.Popen[bytes], log: Path) -> None:
    deadline = time.monotonic() + 60
    while time.monotonic() < deadline:
        if process.poll() is not None:
            pytest.fail(f"server exited with {process.returncode}:\n{log.read_text()}")
        try:
            if httpx.get(f"{base}/v1/health/ready", timeout=1).status_code == 200:
                return
        except httpx.TransportError:
            pass
        time.sleep(0.1)
    pytest.fail(f"server not ready within 60 s:\n{log.read_text()}")


@pytest.fixture
def served(tmp_path: Path) -> Iterator[tuple[str, FileStore]]:
    store = FileStore(tmp_path / "store")
    publish(store, "desk-a", hump_table(), draws=30)
    port = free_port()
    log = tmp_path / "server.log"
    env = {**os.environ, "RATECAST_ADMIN_TOKEN": ADMIN, "RATECAST_WATCH_SECONDS": "0"}
    env.pop("RATECAST_READ_TOKEN", None)
    with log.open("wb") as sink:
        process = subprocess.Popen(
            [*ratecast_command(), "serve", "--host", "127.0.0.1", "--port", str(port),
             "--store", str(store.root), "--workers", "1", "--log-level", "info"],
            stdout=sink, stderr=subprocess.STDOUT, env=env,
        )  # fmt: skip
    base = f"http://127.0.0.1:{port}"
    try:
        wait_until_ready(base, process, log)
        yield base, store
    finally:
        process.terminate()
        try:
            process.wait(timeout=15)
        except subprocess.TimeoutExpired:
            process.kill()
            process.wait(timeout=5)
    assert ADMIN not in log.read_text(), "a token was written to the log"


def test_serve_reload_and_refuse_a_damaged_version(served: tuple[str, FileStore]) -> None:
    base, store = served
    with httpx.Client(base_url=base, timeout=10) as http:
        first = http.post("/v1/series/desk-a/forecast", json=WINDOW)
        assert first.status_code == 200
        starts, ends = range_windows("2026-03-03T09:00", "2026-03-03T10:30", step=None, tz=TZ)
        expected = forecast_document(store.load("desk-a"), starts, ends, levels=(0.8, 0.95))
        assert first.json() == json.loads(json.dumps(expected))

        # A nightly fit publishes v0002; an admin call makes the server serve it.
        publish(store, "desk-a", hump_table(2.0), draws=30)
        reload = http.post("/v1/admin/reload", headers=ADMIN_HEADERS).json()
        assert reload["loaded"] == [{"series": "desk-a", "version": "v0002", "previous": "v0001"}]
        second = http.post("/v1/series/desk-a/forecast", json=WINDOW).json()
        assert second["model_version"] == "v0002"
        assert second["windows"][0]["mean"] == pytest.approx(2 * first.json()["windows"][0]["mean"])

        # v0003 is damaged on disk after publishing: refused, v0002 keeps serving.
        publish(store, "desk-a", hump_table(5.0), draws=30)
        flip_byte(store.root / "desk-a" / "versions" / "v0003" / "draws.npz")
        reload = http.post("/v1/admin/reload", headers=ADMIN_HEADERS).json()
        assert reload["loaded"] == []
        assert [(r["series"], r["version"]) for r in reload["refused"]] == [("desk-a", "v0003")]
        third = http.post("/v1/series/desk-a/forecast", json=WINDOW).json()
        assert third == second

        health = http.get("/v1/health/ready")
        assert health.status_code == 200
        [refusal] = health.json()["refused"]
        assert refusal["version"] == "v0003" and "checksum" in refusal["reason"]
        assert (
            'ratecast_series_refused{series="desk-a",version="v0003"} 1'
            in http.get("/v1/metrics").text
        )

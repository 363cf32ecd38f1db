"""Versioned posterior store: atomic publish, corruption refusal, in-memory twin."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from models.exceptions import CorruptArtefact, InputError, SeriesNotFound
from models.store import FileStore, MemoryStore
from tests.conftest import synthetic_posterior


@pytest.fixture
def posterior(weekly_table):  # type: ignore[no-untyped-def]
    return synthetic_posterior(weekly_table, draws=5)


@pytest.fixture(params=["file", "memory"])
def store(request, tmp_path):  # type: ignore[no-untyped-def]
    return FileStore(tmp_path / "store") if request.param == "file" else MemoryStore()


class TestBothStores:
    def test_publish_then_load_round_trips(self, store, posterior) -> None:
        stored = store.publish("desk-a", posterior, manifest={"note": "x"})
        assert stored.version == "v0001"
        loaded = store.load("desk-a")
        np.testing.assert_array_equal(loaded.posterior.week_log_rate, posterior.week_log_rate)
        assert loaded.posterior.calendar == posterior.calendar
        assert loaded.manifest["note"] == "x"

    def test_versions_accumulate_and_current_is_newest(self, store, posterior) -> None:
        for _ in range(3):
            store.publish("desk-a", posterior, manifest={})
        assert store.versions("desk-a") == ["v0001", "v0002", "v0003"]
        assert store.current_version("desk-a") == "v0003"
        assert store.load("desk-a", "v0002").version == "v0002"

    def test_unknown_series_lists_the_known_ones(self, store, posterior) -> None:
        store.publish("desk-a", posterior, manifest={})
        with pytest.raises(SeriesNotFound, match=r"'desk-b'.*desk-a"):
            store.load("desk-b")

    @pytest.mark.parametrize("name", ["../etc", "Desk", "", "a/b", "x" * 65])
    def test_bad_series_names_are_refused(self, store, posterior, name) -> None:
        with pytest.raises(InputError, match="series name"):
            store.publish(name, posterior, manifest={})


class TestFileStore:
    def test_crash_between_write_and_rename_keeps_the_old_version(
        self, tmp_path: Path, posterior, monkeypatch
    ) -> None:
        store = FileStore(tmp_path)
        store.publish("desk-a", posterior, manifest={"n": 1})

        def crash(self, staging, target):  # type: ignore[no-untyped-def]
            raise KeyboardInterrupt("power cut")

        monkeypatch.setattr(FileStore, "_commit", crash)
        with pytest.raises(KeyboardInterrupt):
            store.publish("desk-a", posterior, manifest={"n": 2})
        monkeypatch.undo()
        assert store.versions("desk-a") == ["v0001"]
        assert store.load("desk-a").manifest["n"] == 1
        # The next publish works and takes the next number.
        assert store.publish("desk-a", posterior, manifest={"n": 3}).version == "v0002"

    def test_leftover_staging_folder_is_invisible(self, tmp_path: Path, posterior) -> None:
        store = FileStore(tmp_path)
        store.publish("desk-a", posterior, manifest={})
        (tmp_path / "desk-a" / ".publishing-abc").mkdir()
        (tmp_path / "desk-a" / "versions" / ".half").mkdir()
        assert store.versions("desk-a") == ["v0001"]
        assert store.series() == ["desk-a"]

    def test_damaged_draws_are_refused(self, tmp_path: Path, posterior) -> None:
        store = FileStore(tmp_path)
        store.publish("desk-a", posterior, manifest={})
        path = tmp_path / "desk-a" / "versions" / "v0001" / "draws.npz"
        payload = bytearray(path.read_bytes())
        payload[len(payload) // 2] ^= 0xFF
        path.write_bytes(bytes(payload))
        with pytest.raises(CorruptArtefact, match="checksum"):
            store.load("desk-a")

    def test_manifest_of_another_format_is_refused(self, tmp_path: Path, posterior) -> None:
        store = FileStore(tmp_path)
        store.publish("desk-a", posterior, manifest={})
        path = tmp_path / "desk-a" / "versions" / "v0001" / "manifest.json"
        manifest = json.loads(path.read_text())
        manifest["format"] = "something-else/9"
        path.write_text(json.dumps(manifest))
        with pytest.raises(CorruptArtefact, match="format"):
            store.load("desk-a")

    def test_manifest_records_checksums_and_packages(self, tmp_path: Path, posterior) -> None:
        stored = FileStore(tmp_path).publish("desk-a", posterior, manifest={})
        assert set(stored.manifest["files"]) == {"draws.npz"}
        assert len(stored.manifest["files"]["draws.npz"]["sha256"]) == 64
        assert stored.manifest["calendar"]["tz"] == "America/Chicago"

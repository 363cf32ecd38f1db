"""Versioned posterior store: atomic publish, corruption refusal, in-memory twin."""

from __future__ import annotations

import concurrent.futures
import hashlib
import json
from pathlib import Path

import numpy as np
import pytest

from models.exceptions import CorruptArtefact, InputError, SeriesNotFound, StoreError
from models.store import UNSEALED_FORMAT, FileStore, MemoryStore
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
        (path.parent / "SEAL").unlink()  # with the seal in place, the edit is refused first
        with pytest.raises(CorruptArtefact, match="format"):
            store.load("desk-a")

    def test_manifest_records_checksums_and_packages(self, tmp_path: Path, posterior) -> None:
        stored = FileStore(tmp_path).publish("desk-a", posterior, manifest={})
        assert set(stored.manifest["files"]) == {"draws.npz"}
        assert len(stored.manifest["files"]["draws.npz"]["sha256"]) == 64
        assert stored.manifest["calendar"]["tz"] == "America/Chicago"


def _version_dir(root: Path, version: str = "v0001") -> Path:
    return root / "desk-a" / "versions" / version


class TestSeal:
    def test_every_file_of_a_version_is_sealed(self, tmp_path: Path, posterior) -> None:
        FileStore(tmp_path).publish("desk-a", posterior, manifest={})
        seal = json.loads((_version_dir(tmp_path) / "SEAL").read_text())
        assert set(seal["files"]) == {"draws.npz", "manifest.json"}
        # Independent check of the digest: SHA-256 (FIPS 180-4, via hashlib) of "name sha\n" lines.
        lines = "".join(f"{n} {s}\n" for n, s in sorted(seal["files"].items()))
        assert seal["digest"] == hashlib.sha256(lines.encode()).hexdigest()
        manifest_bytes = (_version_dir(tmp_path) / "manifest.json").read_bytes()
        assert seal["files"]["manifest.json"] == hashlib.sha256(manifest_bytes).hexdigest()

    def test_an_edited_manifest_is_refused(self, tmp_path: Path, posterior) -> None:
        store = FileStore(tmp_path)
        store.publish("desk-a", posterior, manifest={})
        path = _version_dir(tmp_path) / "manifest.json"
        manifest = json.loads(path.read_text())
        manifest["opening_hours"] = "Mon-Sun 00:00-24:00"
        path.write_text(json.dumps(manifest, indent=2))
        with pytest.raises(CorruptArtefact, match=r"manifest.json checksum .* seal"):
            store.load("desk-a")

    def test_an_added_or_removed_file_is_refused(self, tmp_path: Path, posterior) -> None:
        store = FileStore(tmp_path)
        store.publish("desk-a", posterior, manifest={})
        extra = _version_dir(tmp_path) / "notes.txt"
        extra.write_text("hello")
        with pytest.raises(CorruptArtefact, match=r"notes\.txt is not part of the sealed version"):
            store.load("desk-a")
        extra.unlink()
        (_version_dir(tmp_path) / "draws.npz").unlink()
        with pytest.raises(CorruptArtefact, match=r"draws\.npz is listed in the seal but missing"):
            store.load("desk-a")

    def test_a_current_format_version_without_its_seal_is_refused(
        self, tmp_path: Path, posterior
    ) -> None:
        store = FileStore(tmp_path)
        store.publish("desk-a", posterior, manifest={})
        (_version_dir(tmp_path) / "SEAL").unlink()
        with pytest.raises(CorruptArtefact, match="must have a SEAL"):
            store.load("desk-a")

    def test_versions_from_before_seals_still_load_unsealed(
        self, tmp_path: Path, posterior
    ) -> None:
        store = FileStore(tmp_path)
        store.publish("desk-a", posterior, manifest={})
        folder = _version_dir(tmp_path)
        (folder / "SEAL").unlink()
        manifest = json.loads((folder / "manifest.json").read_text())
        manifest["format"] = UNSEALED_FORMAT
        (folder / "manifest.json").write_text(json.dumps(manifest))
        loaded = store.load("desk-a")
        assert loaded.sealed is False
        np.testing.assert_array_equal(loaded.posterior.week_log_rate, posterior.week_log_rate)


class TestStoreRoot:
    def test_a_missing_root_is_an_error_naming_the_folder(self, tmp_path: Path) -> None:
        store = FileStore(tmp_path / "not-mounted")
        with pytest.raises(StoreError, match=r"not-mounted does not exist"):
            store.series()
        with pytest.raises(StoreError, match="does not exist"):
            store.load("desk-a")

    def test_a_file_in_place_of_the_root_is_an_error(self, tmp_path: Path) -> None:
        (tmp_path / "store").write_text("")
        with pytest.raises(StoreError, match="is not a folder"):
            FileStore(tmp_path / "store").series()

    def test_an_empty_root_is_an_empty_store(self, tmp_path: Path) -> None:
        assert FileStore(tmp_path).series() == []


class TestCrashLeftovers:
    def test_the_next_publish_removes_staging_and_current_temporaries(
        self, tmp_path: Path, posterior
    ) -> None:
        store = FileStore(tmp_path)
        store.publish("desk-a", posterior, manifest={})
        series_dir = tmp_path / "desk-a"
        (series_dir / ".publishing-fresh").mkdir()  # young: the old one-hour rule kept these
        (series_dir / ".publishing-fresh" / "draws.npz").write_bytes(b"half")
        (series_dir / ".CURRENT.k2j3").write_text("v0009\n")
        store.publish("desk-a", posterior, manifest={})
        assert sorted(p.name for p in series_dir.iterdir()) == [
            ".publish.lock",
            "CURRENT",
            "versions",
        ]

    def test_a_version_that_never_became_current_is_named_by_the_next(
        self, tmp_path: Path, posterior, monkeypatch
    ) -> None:
        store = FileStore(tmp_path)
        store.publish("desk-a", posterior, manifest={})

        def stop_before_current(self, series_dir, version):  # type: ignore[no-untyped-def]
            raise KeyboardInterrupt("stopped after the rename")

        monkeypatch.setattr(FileStore, "_set_current", stop_before_current)
        with pytest.raises(KeyboardInterrupt):
            store.publish("desk-a", posterior, manifest={})
        monkeypatch.undo()
        assert store.current_version("desk-a") == "v0001"
        third = store.publish("desk-a", posterior, manifest={})
        assert third.version == "v0003"
        assert third.manifest["skipped_versions"] == ["v0002"]
        assert store.versions("desk-a") == ["v0001", "v0002", "v0003"]

    def test_concurrent_publishers_never_collide(self, tmp_path: Path, posterior) -> None:
        def publish_five(worker: int) -> list[str]:
            store = FileStore(tmp_path)
            return [
                store.publish("desk-a", posterior, manifest={"worker": worker, "n": n}).version
                for n in range(5)
            ]

        with concurrent.futures.ThreadPoolExecutor(4) as pool:
            published = [v for vs in pool.map(publish_five, range(4)) for v in vs]
        store = FileStore(tmp_path)
        assert sorted(published) == [f"v{n:04d}" for n in range(1, 21)]
        assert store.versions("desk-a") == sorted(published)
        for version in published:
            store.load("desk-a", version)  # every one complete and sealed
        assert store.current_version("desk-a") == "v0020"

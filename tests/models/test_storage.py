"""open_store: where a location string leads, its refusals, and the store protocol on every form.

The protocol tests run on the same store behind two locations: an ``s3://`` URL on a real S3 API
(moto's server, ``tests/conftest.py::s3_endpoint``) and a ``file://`` URL (the file store).
"""

from __future__ import annotations

import concurrent.futures
import threading
from pathlib import Path

import fsspec
import numpy as np
import pytest

import models.storage
from models.exceptions import CorruptArtefact, InputError, SeriesNotFound, StoreError
from models.storage import local_folder, open_store
from models.store import FileStore
from models.urlstore import UrlStore
from tests.conftest import synthetic_posterior


@pytest.fixture
def posterior(weekly_table):  # type: ignore[no-untyped-def]
    return synthetic_posterior(weekly_table, draws=5)


@pytest.fixture(params=["s3", "file"])
def location(request, tmp_path: Path) -> str:  # type: ignore[no-untyped-def]
    if request.param == "s3":
        return str(request.getfixturevalue("s3_url"))
    (tmp_path / "store").mkdir()
    return f"file://{tmp_path / 'store'}"


def stored_object(location: str, series: str, version: str, name: str) -> str:
    """The URL of one file of a version: both stores lay versions out alike."""
    return f"{location}/{series}/versions/{version}/{name}"


def flip_middle_byte(url: str) -> None:
    fs, path = fsspec.core.url_to_fs(url)
    payload = bytearray(fs.cat_file(path))
    payload[len(payload) // 2] ^= 0xFF
    fs.pipe_file(path, bytes(payload))


class TestDispatch:
    def test_a_plain_path_is_the_file_store(self) -> None:
        store = open_store("some/store")
        assert isinstance(store, FileStore) and store.root == Path("some/store")

    def test_a_file_url_is_the_file_store_at_its_path(self, tmp_path: Path) -> None:
        store = open_store(f"file://{tmp_path}/shared%20store")
        assert isinstance(store, FileStore) and store.root == tmp_path / "shared store"

    def test_an_s3_url_is_the_url_store(self, s3_url: str) -> None:
        store = open_store(s3_url + "/")
        assert isinstance(store, UrlStore) and store.location == s3_url
        assert store.series() == []  # an empty prefix of an existing bucket is an empty store

    def test_local_folder_names_only_local_locations(self) -> None:
        assert local_folder("file:///srv/store") == Path("/srv/store")
        assert local_folder("s3://bucket/store") is None


class TestRefusals:
    @pytest.mark.parametrize(
        ("location", "fragment"),
        [
            ("gs://bucket/store", "protocol 'gs://' is not supported"),
            ("memory://store", "protocol 'memory://' is not supported"),
            ("nosuch://x", "protocol 'nosuch://' is not supported"),
            ("file://otherhost/store", "is not a local file URL"),
            ("", "is empty"),
        ],
    )
    def test_a_bad_location_is_one_line_naming_it_and_what_is_allowed(
        self, location: str, fragment: str
    ) -> None:
        with pytest.raises(InputError) as caught:
            open_store(location)
        message = str(caught.value)
        assert fragment in message and repr(location) in message
        assert "s3://BUCKET/PREFIX" in message and "\n" not in message

    def test_a_missing_optional_package_is_named_with_its_install_line(
        self, monkeypatch: pytest.MonkeyPatch
    ) -> None:
        def not_installed(name: str) -> str:
            raise models.storage.PackageNotFoundError(name)

        monkeypatch.setattr(models.storage, "version", not_installed)
        with pytest.raises(StoreError) as caught:
            open_store("s3://bucket/store")
        assert str(caught.value) == (
            "store 's3://bucket/store' needs the optional package s3fs, which is not installed; "
            "install it with pip install 'ratecast[s3]'"
        )

    def test_a_too_old_package_is_refused(self, monkeypatch: pytest.MonkeyPatch) -> None:
        monkeypatch.setattr(models.storage, "version", lambda name: "2024.12.0")
        with pytest.raises(StoreError, match=r"needs s3fs 2025\.7\.0 or newer \(installed: 2024"):
            open_store("s3://bucket/store")

    def test_the_url_store_itself_refuses_a_racing_back_end(self) -> None:
        # fsspec's memory file system checks, then writes: two publishers could both "create".
        with pytest.raises(StoreError, match="cannot create objects exclusively"):
            UrlStore("memory://store")


class TestProtocolOnEveryForm:
    def test_publish_then_load_round_trips(self, location: str, posterior) -> None:
        store = open_store(location)
        stored = store.publish("desk-a", posterior, manifest={"note": "x"})
        assert stored.version == "v0001"
        loaded = open_store(location).load("desk-a")
        np.testing.assert_array_equal(loaded.posterior.week_log_rate, posterior.week_log_rate)
        assert loaded.posterior.calendar == posterior.calendar
        assert loaded.manifest["note"] == "x" and loaded.sealed
        assert set(loaded.manifest["files"]) == {"draws.npz"}

    def test_versions_accumulate_and_current_is_newest(self, location: str, posterior) -> None:
        store = open_store(location)
        for n in range(3):
            store.publish("desk-a", posterior, manifest={"n": n})
        store.publish("desk-b", posterior, manifest={})
        assert store.series() == ["desk-a", "desk-b"]
        assert store.versions("desk-a") == ["v0001", "v0002", "v0003"]
        assert store.current_version("desk-a") == "v0003"
        assert store.load("desk-a", "v0002").manifest["n"] == 1

    def test_unknown_series_and_version_are_named(self, location: str, posterior) -> None:
        store = open_store(location)
        assert store.series() == []
        store.publish("desk-a", posterior, manifest={})
        with pytest.raises(SeriesNotFound, match=r"'desk-b'.*desk-a"):
            store.load("desk-b")
        with pytest.raises(SeriesNotFound, match=r"no version 'v0009'; versions: v0001"):
            store.load("desk-a", "v0009")

    @pytest.mark.parametrize("name", ["../etc", "Desk", "a/b"])
    def test_bad_series_names_are_refused(self, location: str, posterior, name: str) -> None:
        with pytest.raises(InputError, match="series name"):
            open_store(location).publish(name, posterior, manifest={})

    def test_damaged_draws_are_refused_on_load(self, location: str, posterior) -> None:
        store = open_store(location)
        store.publish("desk-a", posterior, manifest={})
        flip_middle_byte(stored_object(location, "desk-a", "v0001", "draws.npz"))
        with pytest.raises(CorruptArtefact, match=r"desk-a v0001: draws\.npz checksum .* seal"):
            store.load("desk-a")

    def test_an_edited_manifest_is_refused_on_load(self, location: str, posterior) -> None:
        store = open_store(location)
        store.publish("desk-a", posterior, manifest={"opening_hours": "Mon 09:00-17:00"})
        url = stored_object(location, "desk-a", "v0001", "manifest.json")
        fs, path = fsspec.core.url_to_fs(url)
        edited = fs.cat_file(path).replace(b"Mon 09:00-17:00", b"Mon 00:00-24:00")
        fs.pipe_file(path, edited)
        with pytest.raises(CorruptArtefact, match=r"manifest\.json checksum .* seal"):
            store.load("desk-a")

    def test_two_concurrent_publishers_get_distinct_complete_versions(
        self, location: str, posterior
    ) -> None:
        start = threading.Barrier(2)

        def publish_three(worker: int) -> list[str]:
            store = open_store(location)
            start.wait(timeout=60)
            return [
                store.publish("desk-a", posterior, manifest={"worker": worker, "n": n}).version
                for n in range(3)
            ]

        with concurrent.futures.ThreadPoolExecutor(2) as pool:
            published = [v for vs in pool.map(publish_three, range(2)) for v in vs]
        store = open_store(location)
        assert sorted(published) == [f"v{n:04d}" for n in range(1, 7)]
        assert store.versions("desk-a") == sorted(published)
        writers = {
            (m["worker"], m["n"]) for m in (store.load("desk-a", v).manifest for v in published)
        }
        assert writers == {(w, n) for w in range(2) for n in range(3)}  # none lost or overwritten
        assert store.current_version("desk-a") == "v0006"

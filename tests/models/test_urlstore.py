"""The S3 store on a real S3 API (moto's server): exclusive claims, the seal written last,
CURRENT forward only, and publishers racing for one series in threads and in processes."""

from __future__ import annotations

import concurrent.futures
import json
import multiprocessing
import threading
from typing import Any

import fsspec
import numpy as np
import pytest

from models.exceptions import CorruptArtefact, SeriesNotFound, StoreError
from models.urlstore import UrlStore
from tests.conftest import synthetic_posterior


@pytest.fixture
def posterior(weekly_table):  # type: ignore[no-untyped-def]
    return synthetic_posterior(weekly_table, draws=5)


def objects(url: str) -> list[str]:
    """Every object under ``url``, relative to it, as S3 lists them."""
    fs, root = fsspec.core.url_to_fs(url)
    fs.invalidate_cache()
    return sorted(str(p)[len(root) + 1 :] for p in fs.find(root))


def test_the_back_end_refuses_a_second_exclusive_create(s3_url: str) -> None:
    # What the claim rests on: moto answers 412 to If-None-Match: * on an existing key, and
    # s3fs raises FileExistsError for it. If either stopped doing so, claims would race.
    fs, root = fsspec.core.url_to_fs(s3_url)
    fs.pipe_file(f"{root}/claim", b"first", mode="create")
    with pytest.raises(FileExistsError):
        fs.pipe_file(f"{root}/claim", b"second", mode="create")
    assert fs.cat_file(f"{root}/claim") == b"first"


def test_a_publish_writes_the_documented_objects(s3_url: str, posterior) -> None:
    stored = UrlStore(s3_url).publish("desk-a", posterior, manifest={})
    assert stored.version == "v0001"
    assert objects(s3_url) == [
        "desk-a/claims/v0001",
        "desk-a/current/v0001",
        "desk-a/versions/v0001/SEAL",
        "desk-a/versions/v0001/draws.npz",
        "desk-a/versions/v0001/manifest.json",
    ]
    fs, root = fsspec.core.url_to_fs(s3_url)
    seal = json.loads(fs.cat_file(f"{root}/desk-a/versions/v0001/SEAL"))
    assert set(seal["files"]) == {"draws.npz", "manifest.json"}
    claim = json.loads(fs.cat_file(f"{root}/desk-a/claims/v0001"))
    assert set(claim) == {"host", "pid", "claimed_at"}


class TestCrashMidPublish:
    def test_a_version_stopped_before_its_seal_is_invisible_and_skipped(
        self, s3_url: str, posterior, monkeypatch: pytest.MonkeyPatch
    ) -> None:
        store = UrlStore(s3_url)
        store.publish("desk-a", posterior, manifest={"n": 1})

        def power_cut(self, series, version, files):  # type: ignore[no-untyped-def]
            raise KeyboardInterrupt("power cut before the seal")

        monkeypatch.setattr(UrlStore, "_seal", power_cut)
        with pytest.raises(KeyboardInterrupt):
            store.publish("desk-a", posterior, manifest={"n": 2})
        monkeypatch.undo()
        # Its files are there, but without a seal no reader sees the version.
        assert "desk-a/versions/v0002/draws.npz" in objects(s3_url)
        assert store.versions("desk-a") == ["v0001"]
        assert store.current_version("desk-a") == "v0001"
        assert store.load("desk-a").manifest["n"] == 1
        with pytest.raises(SeriesNotFound, match="no version 'v0002'"):
            store.load("desk-a", "v0002")
        # The next publisher takes the next number and names the skipped one.
        third = store.publish("desk-a", posterior, manifest={"n": 3})
        assert third.version == "v0003"
        assert third.manifest["skipped_versions"] == ["v0002"]
        assert store.versions("desk-a") == ["v0001", "v0003"]
        assert store.load("desk-a").manifest["n"] == 3

    def test_a_first_version_without_its_seal_is_no_series(self, s3_url: str) -> None:
        fs, root = fsspec.core.url_to_fs(s3_url)
        fs.pipe_file(f"{root}/desk-a/claims/v0001", b"{}")
        fs.pipe_file(f"{root}/desk-a/versions/v0001/draws.npz", b"half")
        store = UrlStore(s3_url)
        assert store.series() == []
        with pytest.raises(SeriesNotFound, match="none published yet"):
            store.current_version("desk-a")

    def test_a_marker_is_only_made_after_the_seal(
        self, s3_url: str, posterior, monkeypatch: pytest.MonkeyPatch
    ) -> None:
        store = UrlStore(s3_url)
        store.publish("desk-a", posterior, manifest={})

        def stop_after_seal(self, series, version):  # type: ignore[no-untyped-def]
            raise KeyboardInterrupt("stopped after the seal")

        monkeypatch.setattr(UrlStore, "_advance_current", stop_after_seal)
        with pytest.raises(KeyboardInterrupt):
            store.publish("desk-a", posterior, manifest={})
        monkeypatch.undo()
        # Complete but never current: listed and loadable, CURRENT unmoved, named by the next.
        assert store.versions("desk-a") == ["v0001", "v0002"]
        assert store.current_version("desk-a") == "v0001"
        assert store.load("desk-a", "v0002").sealed
        assert store.publish("desk-a", posterior, manifest={}).manifest["skipped_versions"] == [
            "v0002"
        ]


class TestCurrentOnlyMovesForward:
    def test_a_slower_publisher_finishing_later_leaves_the_newer_version_current(
        self, s3_url: str, posterior, monkeypatch: pytest.MonkeyPatch
    ) -> None:
        UrlStore(s3_url).publish("desk-a", posterior, manifest={"who": "first"})
        fast_done = threading.Event()
        real_seal = UrlStore._seal

        def slow_seal(self, series, version, files):  # type: ignore[no-untyped-def]
            if threading.current_thread().name == "slow":
                assert fast_done.wait(timeout=60), "the fast publisher never finished"
            real_seal(self, series, version, files)

        monkeypatch.setattr(UrlStore, "_seal", slow_seal)
        results: dict[str, Any] = {}

        def publish(who: str) -> None:
            results[who] = UrlStore(s3_url).publish("desk-a", posterior, manifest={"who": who})

        slow = threading.Thread(target=publish, args=("slow",), name="slow")
        slow.start()
        while "desk-a/claims/v0002" not in objects(s3_url):  # the slow one holds v0002
            assert slow.is_alive()
            threading.Event().wait(0.05)
        publish("fast")
        fast_done.set()
        slow.join(timeout=60)
        assert (results["slow"].version, results["fast"].version) == ("v0002", "v0003")
        assert results["fast"].manifest["skipped_versions"] == ["v0002"]
        store = UrlStore(s3_url)
        assert store.current_version("desk-a") == "v0003"
        assert store.load("desk-a").manifest["who"] == "fast"
        assert store.load("desk-a", "v0002").manifest["who"] == "slow"  # kept, complete
        assert store.versions("desk-a") == ["v0001", "v0002", "v0003"]
        markers = [o for o in objects(s3_url) if o.startswith("desk-a/current/")]
        assert markers == ["desk-a/current/v0001", "desk-a/current/v0003"]


class TestRacingPublishers:
    def test_two_publishers_that_saw_the_same_number_both_publish(
        self, s3_url: str, posterior, monkeypatch: pytest.MonkeyPatch
    ) -> None:
        # Both list the claims before either claims: both try v0001; the exclusive create lets
        # one have it and sends the other to v0002.
        listed = threading.Barrier(2)
        real_numbers = UrlStore._numbers
        waited: set[str] = set()

        def numbers_then_wait(self, series, kind):  # type: ignore[no-untyped-def]
            found = real_numbers(self, series, kind)
            name = threading.current_thread().name
            if kind == "versions" and name not in waited:
                waited.add(name)
                listed.wait(timeout=60)
            return found

        monkeypatch.setattr(UrlStore, "_numbers", numbers_then_wait)

        def publish(worker: int) -> str:
            stored = UrlStore(s3_url).publish("desk-a", posterior, manifest={"worker": worker})
            return stored.version

        with concurrent.futures.ThreadPoolExecutor(2) as pool:
            versions = sorted(pool.map(publish, range(2)))
        monkeypatch.undo()
        assert versions == ["v0001", "v0002"]
        store = UrlStore(s3_url)
        workers = {store.load("desk-a", v).manifest["worker"] for v in versions}
        assert workers == {0, 1}
        assert store.current_version("desk-a") == "v0002"

    def test_publishers_in_separate_processes_never_collide(self, s3_url: str) -> None:
        context = multiprocessing.get_context("spawn")
        with concurrent.futures.ProcessPoolExecutor(2, mp_context=context) as pool:
            published = [
                v for vs in pool.map(_publish_in_process, [s3_url] * 2, range(2)) for v in vs
            ]
        assert sorted(published) == [f"v{n:04d}" for n in range(1, 7)]
        store = UrlStore(s3_url)
        assert store.versions("desk-a") == sorted(published)
        assert {store.load("desk-a", v).manifest["process"] for v in published} == {0, 1}
        assert store.current_version("desk-a") == "v0006"


def _publish_in_process(url: str, process: int) -> list[str]:
    """Publish three versions of ``desk-a`` (run in a spawned process; the AWS_* environment
    variables of the test session point it at the same moto server)."""
    table = np.full((7, 24), 4.0)
    store = UrlStore(url)
    return [
        store.publish(
            "desk-a", synthetic_posterior(table, draws=3), manifest={"process": process, "n": n}
        ).version
        for n in range(3)
    ]


class TestDamage:
    def test_an_object_added_to_a_sealed_version_is_refused(self, s3_url: str, posterior) -> None:
        store = UrlStore(s3_url)
        store.publish("desk-a", posterior, manifest={})
        fs, root = fsspec.core.url_to_fs(s3_url)
        fs.pipe_file(f"{root}/desk-a/versions/v0001/notes.txt", b"hello")
        with pytest.raises(CorruptArtefact, match=r"notes\.txt is not part of the sealed version"):
            store.load("desk-a")

    def test_an_edited_seal_is_refused(self, s3_url: str, posterior) -> None:
        store = UrlStore(s3_url)
        store.publish("desk-a", posterior, manifest={})
        fs, root = fsspec.core.url_to_fs(s3_url)
        path = f"{root}/desk-a/versions/v0001/SEAL"
        seal = json.loads(fs.cat_file(path))
        seal["files"]["draws.npz"] = "0" * 64
        fs.pipe_file(path, json.dumps(seal).encode())
        with pytest.raises(CorruptArtefact, match="SEAL does not add up"):
            store.load("desk-a")

    def test_a_missing_bucket_is_a_store_error_naming_it(self, s3_endpoint: str) -> None:
        with pytest.raises(StoreError, match=r"bucket 'no-such-bucket' does not exist"):
            UrlStore("s3://no-such-bucket/store").series()

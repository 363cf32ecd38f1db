"""The registry of served versions: reload, atomic swap, refusal of damaged versions, watching."""

from __future__ import annotations

import asyncio
import logging
import shutil
from pathlib import Path
from typing import Any

import pytest

from models.exceptions import InputError, SeriesNotFound
from models.storage import open_store
from models.store import FileStore, MemoryStore
from service.api.registry import Registry, watch
from tests.service.api.support import flip_byte, hump_table, publish


@pytest.fixture
def store(tmp_path: Path) -> FileStore:
    store = FileStore(tmp_path / "store")
    publish(store, "desk-a", hump_table(), draws=5)
    publish(store, "desk-b", hump_table(0.5), draws=5)
    return store


def damage(store: FileStore, series: str, version: str) -> None:
    flip_byte(store.root / series / "versions" / version / "draws.npz")


class TestReload:
    def test_first_reload_loads_every_series(self, store: FileStore) -> None:
        registry = Registry(store)
        report = registry.reload()
        assert sorted(item.series for item in report.loaded) == ["desk-a", "desk-b"]
        assert registry.get("desk-a").version == "v0001"

    def test_a_new_version_is_swapped_in_and_a_grabbed_one_stays_whole(
        self, store: FileStore
    ) -> None:
        registry = Registry(store)
        registry.reload()
        grabbed = registry.get("desk-a")
        publish(store, "desk-a", hump_table(3.0), draws=5)
        report = registry.reload()
        assert [(i.series, i.version, i.previous) for i in report.loaded] == [
            ("desk-a", "v0002", "v0001")
        ]
        assert report.unchanged == 1
        assert registry.get("desk-a").version == "v0002"
        # The request that grabbed v0001 keeps answering from all of v0001.
        assert grabbed.version == grabbed.manifest["version"] == "v0001"

    def test_an_unchanged_store_keeps_the_same_objects(self, store: FileStore) -> None:
        registry = Registry(store)
        registry.reload()
        before = registry.get("desk-b")
        registry.reload()
        assert registry.get("desk-b") is before

    def test_a_series_removed_from_the_store_stops_being_served(self, store: FileStore) -> None:
        registry = Registry(store)
        registry.reload()
        shutil.rmtree(store.root / "desk-b")
        assert registry.reload().removed == ["desk-b"]
        with pytest.raises(SeriesNotFound):
            registry.get("desk-b")

    def test_an_unreadable_store_keeps_what_is_served(
        self, store: FileStore, tmp_path: Path
    ) -> None:
        registry = Registry(store)
        registry.reload()
        moved = tmp_path / "elsewhere"
        store.root.rename(moved)
        store.root.write_text("not a folder")
        report = registry.reload()
        assert report.store_error is not None and registry.store_error is not None
        assert registry.check_store() is not None
        assert registry.get("desk-a").version == "v0001"


class TestRefusal:
    def test_a_damaged_new_version_is_refused_and_the_old_keeps_serving(
        self, store: FileStore, caplog: pytest.LogCaptureFixture
    ) -> None:
        registry = Registry(store)
        registry.reload()
        publish(store, "desk-a", hump_table(3.0), draws=5)
        damage(store, "desk-a", "v0002")
        with caplog.at_level(logging.WARNING, logger="ratecast.registry"):
            report = registry.reload()
        assert registry.get("desk-a").version == "v0001"
        [refusal] = report.refused
        assert (refusal.series, refusal.version) == ("desk-a", "v0002")
        assert "checksum" in refusal.reason
        assert registry.refusals == [refusal]
        assert "refused desk-a v0002" in caplog.text

    def test_the_watcher_logs_a_refusal_once(
        self, store: FileStore, caplog: pytest.LogCaptureFixture
    ) -> None:
        registry = Registry(store)
        registry.reload()
        publish(store, "desk-a", hump_table(3.0), draws=5)
        damage(store, "desk-a", "v0002")
        with caplog.at_level(logging.WARNING, logger="ratecast.registry"):
            for _ in range(3):
                registry.reload(retry_refused=False)
        assert caplog.text.count("refused desk-a v0002") == 1
        assert len(registry.refusals) == 1

    def test_a_good_newer_version_clears_the_refusal(self, store: FileStore) -> None:
        registry = Registry(store)
        registry.reload()
        publish(store, "desk-a", hump_table(3.0), draws=5)
        damage(store, "desk-a", "v0002")
        registry.reload()
        publish(store, "desk-a", hump_table(4.0), draws=5)
        registry.reload(retry_refused=False)
        assert registry.get("desk-a").version == "v0003"
        assert registry.refusals == []

    def test_a_fresh_process_serves_the_newest_version_that_loads(self, store: FileStore) -> None:
        publish(store, "desk-a", hump_table(3.0), draws=5)
        publish(store, "desk-a", hump_table(4.0), draws=5)
        damage(store, "desk-a", "v0003")
        registry = Registry(store)
        report = registry.reload()
        assert registry.get("desk-a").version == "v0002"
        assert [(r.series, r.version) for r in report.refused] == [("desk-a", "v0003")]


class TestGet:
    def test_unknown_series_lists_some_served_ones(self) -> None:
        store = MemoryStore()
        for i in range(25):
            publish(store, f"s{i:02d}", hump_table(), draws=2)  # type: ignore[arg-type]
        registry = Registry(store)
        registry.reload()
        with pytest.raises(SeriesNotFound, match=r"s00, s01.*25 in all"):
            registry.get("nope")

    def test_invalid_name_is_an_input_error(self) -> None:
        registry = Registry(MemoryStore())
        with pytest.raises(InputError, match="series name"):
            registry.get("../etc")


@pytest.fixture(params=["folder", "s3"])
def watched_store(request: pytest.FixtureRequest, tmp_path: Path) -> Any:
    """A store holding desk-a and desk-b v0001, in a folder or at an s3:// URL (moto)."""
    if request.param == "folder":
        return request.getfixturevalue("store")
    store = open_store(str(request.getfixturevalue("s3_url")))
    publish(store, "desk-a", hump_table(), draws=5)
    publish(store, "desk-b", hump_table(0.5), draws=5)
    return store


class TestWatch:
    def test_polling_picks_up_a_new_version(self, watched_store: Any) -> None:
        store = watched_store
        registry = Registry(store)
        registry.reload()
        assert registry.get("desk-b").version == "v0001"

        async def scenario() -> str:
            task = asyncio.create_task(watch(registry, 0.02))
            try:
                await asyncio.to_thread(publish, store, "desk-b", hump_table(2.0), draws=5)
                for _ in range(250):
                    if registry.get("desk-b").version == "v0002":
                        break
                    await asyncio.sleep(0.02)
                return registry.get("desk-b").version
            finally:
                task.cancel()

        assert asyncio.run(scenario()) == "v0002"

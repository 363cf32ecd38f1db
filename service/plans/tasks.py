"""What a worker does with one plan entry: fit it (or see that it is unchanged) and publish.

:func:`fit_entry` is sent to Dask workers by reference (its module is imported on the worker), and
imports PyMC only after pointing PyTensor's and Numba's caches at the worker's own folder: a
compile directory is not safe to share between concurrent processes, and a per-worker folder
named after the worker's slot stays warm across its restarts, so each worker compiles a model
structure once. A worker runs its chains one after another (``cores=1``): the cluster's
parallelism is one fit per worker.
"""

from __future__ import annotations

import hashlib
import json
import logging
import os
import sys
import time
import warnings
from pathlib import Path
from typing import Any

from models.exceptions import FitRejected, RatecastError, SeriesNotFound
from service.plans.schema import Member, PlanEntry

__all__ = ["entry_key", "fit_entry"]


def fit_entry(entry: PlanEntry, store_root: str, cache_root: str | None = None) -> dict[str, Any]:
    """Fit and publish one entry; returns a JSON-ready record with ``status`` one of
    ``published``, ``unchanged``, ``refused`` (by the diagnostics gate) or ``failed``.

    ``store_root`` is the store's location (a folder or a URL, as
    :func:`models.storage.open_store` takes it): a plain string, so the task pickles and each
    worker opens the store itself.
    """
    _point_caches(cache_root)
    from models.storage import open_store

    started = time.perf_counter()
    record: dict[str, Any] = {"entry": entry.name, "group": entry.group, "worker": _worker_name()}
    try:
        store = open_store(store_root)
        key = entry_key(entry)
        current = _current_versions(store, entry, key)
        if current is not None:
            return {**record, "status": "unchanged", "versions": current, "seconds": 0.0}
        if entry.group:
            versions, diagnostics, timings = _fit_group(entry, store, key)
        else:
            versions, diagnostics, timings = _fit_single(entry, store, key)
    except FitRejected as exc:
        return {
            **record,
            "status": "refused",
            "reason": str(exc).splitlines()[0],
            "problems": list(getattr(exc, "problems", [])),
            "seconds": round(time.perf_counter() - started, 2),
        }
    except RatecastError as exc:
        return {
            **record,
            "status": "failed",
            "error": f"{type(exc).__name__}: {exc}",
            "seconds": round(time.perf_counter() - started, 2),
        }
    return {
        **record,
        "status": "published",
        "versions": versions,
        "diagnostics": diagnostics,
        "timings": timings,
        "seconds": round(time.perf_counter() - started, 2),
    }


def entry_key(entry: PlanEntry) -> str:
    """SHA-256 over an entry's settings and the bytes of its input files: equal keys mean the
    same fit would be made again."""
    digest = hashlib.sha256(json.dumps(entry.settings(), sort_keys=True).encode())
    for member in entry.members:
        digest.update(member.name.encode())
        digest.update(_file_digest(member.path).encode())
    return digest.hexdigest()


def _file_digest(path: str) -> str:
    import fsspec

    digest = hashlib.sha256()
    # fsspec opens local paths and URLs (s3://, gs://, http://...) alike.
    with fsspec.open(path, "rb") as handle:
        for block in iter(lambda: handle.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()


def _current_versions(store: Any, entry: PlanEntry, key: str) -> dict[str, str] | None:
    """The current version of every member if each was published from this same key."""
    versions = {}
    for member in entry.members:
        try:
            stored = store.load(member.name)  # the current version, verified against its seal
        except (SeriesNotFound, OSError, ValueError, RatecastError):
            return None
        version, manifest = stored.version, stored.manifest
        if manifest.get("data", {}).get("plan_key") != key:
            return None
        versions[member.name] = version
    return versions


def _history(entry: PlanEntry, member: Member, opening: Any) -> Any:
    from models.prediction.windows import parse_instant
    from service.history import read_history_file

    until = parse_instant(entry.until, tz=entry.zone).to_pydatetime() if entry.until else None
    return read_history_file(
        member.path,
        kind=member.kind,
        tz=entry.zone,
        bin=entry.bin,
        time_column=member.time_column,
        opening=opening,
        until=until,
    )


def _spec(entry: PlanEntry, bin_minutes: int) -> Any:
    from models.ratemodel.spec import ModelSpec
    from service.defaults import resolved_choices
    from service.history import holiday_calendar

    model = entry.model
    latent = model.get("latent", True)
    # The plan's model table keeps the four choices by their spec names ("auto" when unset).
    choices = ("observation", "unusual_days", "latent_by_weekday", "holiday_effects")
    return ModelSpec(
        bin_minutes=bin_minutes,
        trend=model.get("trend", True),
        latent_daily=latent,
        holidays=holiday_calendar(entry.holidays, ",".join(entry.special_days) or None),
        annual_harmonics=model.get("annual", 0),
        within_day=model.get("within_day", 0),
        **resolved_choices(
            bin_minutes=bin_minutes,
            latent=latent,
            joint=entry.group,
            **{name: model[name] for name in choices if name in model},
        ),
    )


def _fit_single(
    entry: PlanEntry, store: Any, key: str
) -> tuple[dict[str, str], dict[str, Any], dict[str, float]]:
    from models.fitting.publish import fit_and_publish
    from models.ratemodel.binning import OpeningHours

    (member,) = entry.members
    opening = OpeningHours.parse(entry.opening) if entry.opening else None
    binned = _history(entry, member, opening)
    outcome = fit_and_publish(
        binned,
        _spec(entry, binned.bin_minutes),
        store=store,
        series=member.name,
        opening=opening,
        options=entry.fit_options().with_changes(cores=1),
        source={"file": Path(member.path).name, "plan_key": key},
    )
    assert outcome.version is not None
    return (
        {member.name: outcome.version.version},
        outcome.fit.diagnostics.to_dict(),
        dict(outcome.fit.timings),
    )


def _fit_group(
    entry: PlanEntry, store: Any, key: str
) -> tuple[dict[str, str], dict[str, Any], dict[str, float]]:
    from models.fitting.joint import fit_joint, make_joint_data, publish_joint
    from models.ratemodel.binning import OpeningHours

    opening = OpeningHours.parse(entry.opening) if entry.opening else None
    histories = {m.name: _history(entry, m, opening) for m in entry.members}
    spec = _spec(entry, min(h.bin_minutes for h in histories.values()))
    fit = fit_joint(
        make_joint_data(histories, spec),
        spec,
        options=entry.fit_options().with_changes(cores=1),
    )
    published = publish_joint(
        fit,
        store,
        openings=dict.fromkeys(histories, opening),
        source={"plan_key": key},
    )
    return (
        {name: v.version for name, v in published.items()},
        fit.diagnostics.to_dict(),
        dict(fit.timings),
    )


def _worker_name() -> str:
    try:
        from distributed import get_worker

        return str(get_worker().name)
    except (ImportError, ValueError):
        return "local"


def _point_caches(cache_root: str | None) -> None:
    """Give this process its own PyTensor and Numba caches, before PyTensor is first imported."""
    if cache_root is None or "pytensor" in sys.modules:
        return
    folder = Path(cache_root) / f"worker-{_worker_name()}"
    folder.mkdir(parents=True, exist_ok=True)
    os.environ["PYTENSOR_FLAGS"] = f"compiledir={folder / 'pytensor'}"
    os.environ["NUMBA_CACHE_DIR"] = str(folder / "numba")
    # A worker's output is the run's progress lines; the sampler's own chatter and the library
    # notices (no BLAS for PyTensor's C code, ArviZ's refactor notice) only bury them.
    for name in ("pymc", "pytensor", "numba"):
        logging.getLogger(name).setLevel(logging.ERROR)
    warnings.filterwarnings("ignore", message=".*ArviZ is undergoing a major refactor.*")
    warnings.filterwarnings("ignore", message=".*Using NumPy C-API based implementation for BLAS.*")

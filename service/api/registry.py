"""The versions the API serves, one per series, reloaded from the store without a restart.

A request takes one :class:`~models.store.StoredVersion` reference up front (:meth:`Registry.get`)
and answers from it alone, so it sees the old version or the new one, never a mix. A reload builds
a new mapping beside the old one and swaps the reference in a single assignment.

A version that fails to load (checksum mismatch, unreadable files) is *refused*: the version already
served keeps serving, the refusal is logged once and listed in health and metrics. When no version
of a series is held yet (a fresh process), the newest older version that loads is served instead,
so every worker of a deployment agrees on what a refused series answers with.

Refusal reasons and store errors are written for clients: no file-system paths (the log keeps
the full text).
"""

from __future__ import annotations

import asyncio
import datetime as dt
import logging
import threading
from collections.abc import Mapping
from dataclasses import dataclass, field
from types import MappingProxyType

from models.exceptions import RatecastError, SeriesNotFound
from models.store import PosteriorStore, StoredVersion, check_series_name
from service.api.redact import public_text

__all__ = ["LoadedVersion", "Refusal", "Registry", "ReloadReport", "watch"]

logger = logging.getLogger("ratecast.registry")

_LISTED_IN_404 = 20  # names listed when a series is unknown; the catalogue has them all


def _now() -> str:
    return dt.datetime.now(dt.UTC).isoformat(timespec="seconds")


@dataclass(frozen=True)
class Refusal:
    """A version the service would not load; the previous one (if any) keeps serving.

    ``reason`` is short and names no server path; ``at`` is when (UTC, ISO 8601).
    """

    series: str
    version: str | None
    reason: str
    at: str


@dataclass(frozen=True)
class LoadedVersion:
    """A series whose served version changed in a reload."""

    series: str
    version: str
    previous: str | None


@dataclass(frozen=True)
class ReloadReport:
    """What a reload changed (the body of ``POST /v1/admin/reload``)."""

    loaded: list[LoadedVersion] = field(default_factory=list)
    unchanged: int = 0
    removed: list[str] = field(default_factory=list)
    refused: list[Refusal] = field(default_factory=list)
    store_error: str | None = None


class Registry:
    """Holds the served version of every series of a store.

    Parameters
    ----------
    store
        Where versions are published (a :class:`~models.store.FileStore` in production).
    """

    def __init__(self, store: PosteriorStore) -> None:
        self.store = store
        self._served: Mapping[str, StoredVersion] = MappingProxyType({})
        self._loaded_at: Mapping[str, str] = MappingProxyType({})
        # Replaced, never mutated, so readers on the event loop never see it change under them.
        self._refused: Mapping[str, Refusal] = MappingProxyType({})
        self._lock = threading.Lock()  # one reload at a time (watcher and admin call)
        self.last_reload: str | None = None
        self.store_error: str | None = None
        self.reloads = 0

    # ------------------------------------------------------------------ reading (request path)
    def get(self, series: str) -> StoredVersion:
        """The version served for ``series``; grab it once per request.

        Raises
        ------
        InputError
            If ``series`` is not a valid series name.
        SeriesNotFound
            If no version of ``series`` is loaded.
        """
        served = self._served.get(series)
        if served is not None:
            return served
        check_series_name(series)
        names = sorted(self._served)
        listing = ", ".join(names[:_LISTED_IN_404]) or "none loaded"
        if len(names) > _LISTED_IN_404:
            listing += f", ... ({len(names)} in all; GET /v1/series lists them)"
        raise SeriesNotFound(f"no published series {series!r}; served series: {listing}")

    def snapshot(self) -> Mapping[str, StoredVersion]:
        """Every served version, as one consistent read-only mapping."""
        return self._served

    def loaded_at(self, series: str) -> str | None:
        """When the served version of ``series`` was loaded (UTC, ISO 8601)."""
        return self._loaded_at.get(series)

    @property
    def refusals(self) -> list[Refusal]:
        """Versions currently refused, one per series at most."""
        return sorted(self._refused.values(), key=lambda r: r.series)

    def check_store(self) -> str | None:
        """``None`` if the store can be listed now, else why not (in a few words, no path)."""
        try:
            self.store.series()
        except (OSError, RatecastError) as exc:
            logger.error("store cannot be listed: %s", exc)
            return _store_problem(exc)
        return None

    # ------------------------------------------------------------------ reloading
    def reload(self, *, retry_refused: bool = True) -> ReloadReport:
        """Load every series' current version that is not served yet; swap them in at once.

        Parameters
        ----------
        retry_refused
            Try again versions refused before. The periodic watcher passes ``False`` so a
            damaged version is logged once, not on every poll.
        """
        with self._lock:
            report = self._reload(retry_refused=retry_refused)
            self.last_reload = _now()
            self.reloads += 1
        for item in report.loaded:
            logger.info(
                "serving %s %s (was %s)", item.series, item.version, item.previous or "none"
            )
        for name in report.removed:
            logger.info("series %s is no longer in the store; stopped serving it", name)
        return report

    def _reload(self, *, retry_refused: bool) -> ReloadReport:
        try:
            names = self.store.series()
        except (OSError, RatecastError) as exc:
            self.store_error = _store_problem(exc)
            logger.error("reload: %s (%s); keeping what is served", self.store_error, exc)
            return ReloadReport(store_error=self.store_error)
        self.store_error = None
        old = self._served
        served: dict[str, StoredVersion] = {}
        refused = dict(self._refused)
        loaded_at = dict(self._loaded_at)
        report = ReloadReport(removed=sorted(set(old) - set(names)))
        unchanged = 0
        for name in names:
            held = old.get(name)
            try:
                version = self.store.current_version(name)
            except SeriesNotFound:
                continue  # removed between listing and reading
            except (OSError, RatecastError) as exc:
                self._refuse(name, None, exc, report, refused)
                if held is not None:
                    served[name] = held
                continue
            if held is not None and held.version == version:
                served[name] = held
                refused.pop(name, None)
                unchanged += 1
                continue
            previous = refused.get(name)
            if not retry_refused and previous is not None and previous.version == version:
                if held is not None:
                    served[name] = held
                continue
            fresh = self._load(name, version, report, refused)
            if fresh is None:
                fresh = held or self._newest_loadable(name, below=version)
            if fresh is None:
                continue
            served[name] = fresh
            if held is None or fresh.version != held.version:
                loaded_at[name] = _now()
                report.loaded.append(
                    LoadedVersion(name, fresh.version, held.version if held else None)
                )
        # The swap: one assignment each, so a reader sees the old mapping or the new one.
        self._served = MappingProxyType(served)
        self._loaded_at = MappingProxyType({k: v for k, v in loaded_at.items() if k in served})
        for name in report.removed:
            refused.pop(name, None)
        self._refused = MappingProxyType(refused)
        return ReloadReport(
            loaded=report.loaded,
            unchanged=unchanged,
            removed=report.removed,
            refused=report.refused,
        )

    def _load(
        self, name: str, version: str, report: ReloadReport, refused: dict[str, Refusal]
    ) -> StoredVersion | None:
        try:
            stored = self.store.load(name, version)
        except Exception as exc:  # any failure to load is a refusal; serving goes on
            self._refuse(name, version, exc, report, refused)
            return None
        refused.pop(name, None)
        return stored

    def _newest_loadable(self, name: str, *, below: str) -> StoredVersion | None:
        """Newest version older than ``below`` that loads (for a process that holds none)."""
        try:
            older = [v for v in self.store.versions(name) if int(v[1:]) < int(below[1:])]
        except (OSError, RatecastError):
            return None
        for version in reversed(older):
            try:
                stored = self.store.load(name, version)
            except Exception:  # an older damaged version is skipped like the newer one
                continue
            logger.warning("serving %s %s: the newer %s was refused", name, version, below)
            return stored
        return None

    def _refuse(
        self,
        name: str,
        version: str | None,
        exc: BaseException,
        report: ReloadReport,
        refused: dict[str, Refusal],
    ) -> None:
        refusal = Refusal(name, version, public_text(str(exc)) or type(exc).__name__, _now())
        refused[name] = refusal
        report.refused.append(refusal)
        logger.warning(
            "refused %s %s: %s: %s; the previous version keeps serving",
            name,
            version or "(current)",
            type(exc).__name__,
            exc,
        )


def _store_problem(exc: BaseException) -> str:
    """Why the store cannot be listed, for clients: the kind of failure, not its details."""
    if isinstance(exc, FileNotFoundError):
        return "the store folder is missing"
    if isinstance(exc, PermissionError):
        return "the store folder cannot be read (permission denied)"
    return "the store cannot be listed (details in the server log)"


async def watch(registry: Registry, every: float) -> None:
    """Poll the store every ``every`` seconds and load new versions (run as a background task)."""
    while True:
        await asyncio.sleep(every)
        try:
            await asyncio.to_thread(registry.reload, retry_refused=False)
        except Exception:  # the watcher must outlive any one failed poll
            logger.exception("store poll failed; trying again in %s s", every)

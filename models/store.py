"""Versioned posterior store: a file store for real use and an in-memory one for fast tests.

File layout, one folder per series::

    <root>/<series>/versions/v0003/manifest.json   what, when, from which data, diagnostics, checksums
    <root>/<series>/versions/v0003/draws.npz       compact draws prediction needs
    <root>/<series>/versions/v0003/posterior.nc    full ArviZ data, for diagnostics only
    <root>/<series>/versions/v0003/SEAL            one checksum over every file above
    <root>/<series>/CURRENT                        name of the version served by default
    <root>/<series>/.publish.lock                  held while a version of the series is published

A version is written into a hidden temporary folder, flushed to disk, then renamed into place in one
step, and only then does ``CURRENT`` move (itself written to a temporary file and renamed). A reader
therefore sees the old version or the new one, never half of one. Publishers of one series take
turns on its lock file, so whatever hidden temporary a publisher finds while holding the lock was
left by a crash, and it removes it. A complete version that a crash kept from becoming current is
kept, and the next version's manifest names it under ``skipped_versions``.

The seal makes a version tamper-evident: it lists the SHA-256 of every file of the version, the
manifest included, and a digest over that list. Loading verifies every file against it, so an
edited manifest (say, its opening hours) or a damaged draws file is refused, and the server keeps
serving the version it had. It guards against accidents and careless edits, not against someone
who rewrites the seal as well. Versions written before seals existed (format
``ratecast-posterior/1``) load with the draws checksum alone and report ``sealed=False``.
"""

from __future__ import annotations

import contextlib
import datetime as dt
import fcntl
import json
import os
import re
import shutil
import tempfile
from collections.abc import Iterator
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Protocol

from models.exceptions import CorruptArtefact, InputError, SeriesNotFound, StoreError
from models.files import atomic_write, fsync_path, sha256_of, write_synced
from models.fitting.verdict import fit_problems, is_degraded
from models.prediction.posterior import CompactPosterior
from models.sealing import FORMAT, SEAL, UNSEALED_FORMAT, decode_version, seal, verify_seal

__all__ = [
    "FORMAT",
    "SEAL",
    "UNSEALED_FORMAT",
    "FileStore",
    "MemoryStore",
    "PosteriorStore",
    "StoredVersion",
    "build_manifest",
    "check_series_name",
    "package_versions",
    "unknown_series",
]

_SERIES = re.compile(r"^[a-z0-9][a-z0-9._-]{0,63}$")
_VERSION = re.compile(r"^v(\d{4,})$")


def check_series_name(name: str) -> str:
    """Return ``name`` if it is a valid series name, else raise :class:`InputError`.

    Examples
    --------
    >>> check_series_name("ferry-desk")
    'ferry-desk'
    """
    if not isinstance(name, str) or not _SERIES.match(name):
        raise InputError(
            f"series name {name!r} is not allowed: use 1-64 lowercase letters, digits, '.', '_' "
            "or '-', starting with a letter or digit"
        )
    return name


def package_versions() -> dict[str, str]:
    """Versions of the packages that shape a fit, for the manifest."""
    from importlib.metadata import PackageNotFoundError, version

    out = {}
    for name in ("ratecast", "pymc", "pytensor", "arviz", "numpy", "scipy", "pandas"):
        try:
            out[name] = version(name)
        except PackageNotFoundError:
            out[name] = "not installed"
    return out


@dataclass(frozen=True)
class StoredVersion:
    """One published version: its manifest and its compact draws."""

    series: str
    version: str
    manifest: dict[str, Any]
    posterior: CompactPosterior = field(repr=False)
    sealed: bool = True

    @property
    def degraded(self) -> bool:
        """True when the version was published with ``--force`` although its fit failed the
        diagnostics gate: its forecasts come from chains that did not converge
        (:func:`models.fitting.verdict.is_degraded`)."""
        return is_degraded(self.manifest)

    @property
    def degraded_problems(self) -> list[str]:
        """What the gate found wrong with a degraded version (empty otherwise)."""
        return fit_problems(self.manifest)


class PosteriorStore(Protocol):
    """What the CLI and the API need from a store."""

    def publish(
        self,
        series: str,
        posterior: CompactPosterior,
        *,
        manifest: dict[str, Any],
        idata: Any | None = None,
    ) -> StoredVersion:
        """Store a new version and make it current."""
        ...

    def series(self) -> list[str]:
        """Names of all series with a current version."""
        ...

    def versions(self, series: str) -> list[str]:
        """All complete versions of ``series``, oldest first."""
        ...

    def current_version(self, series: str) -> str:
        """Name of the version served by default."""
        ...

    def load(self, series: str, version: str | None = None) -> StoredVersion:
        """Load a version (default: current), verifying it."""
        ...


def build_manifest(
    series: str, version: str, posterior: CompactPosterior, extra: dict[str, Any]
) -> dict[str, Any]:
    """The manifest of a new version: format, names, time, packages, the draws' description
    and the publisher's ``extra`` (the store adds ``files`` and, where due, ``skipped_versions``)."""
    return {
        "format": FORMAT,
        "series": series,
        "version": version,
        "created_at": dt.datetime.now(dt.UTC).isoformat(timespec="seconds"),
        "packages": package_versions(),
        **posterior.meta(),
        **extra,
    }


class MemoryStore:
    """A store that keeps versions in memory: same behaviour as :class:`FileStore`, no disk."""

    def __init__(self) -> None:
        self._versions: dict[str, list[StoredVersion]] = {}

    def publish(
        self,
        series: str,
        posterior: CompactPosterior,
        *,
        manifest: dict[str, Any],
        idata: Any | None = None,
    ) -> StoredVersion:
        check_series_name(series)
        existing = self._versions.setdefault(series, [])
        version = f"v{len(existing) + 1:04d}"
        stored = StoredVersion(
            series, version, build_manifest(series, version, posterior, manifest), posterior
        )
        existing.append(stored)
        return stored

    def series(self) -> list[str]:
        return sorted(self._versions)

    def versions(self, series: str) -> list[str]:
        return [v.version for v in self._require(series)]

    def current_version(self, series: str) -> str:
        return self._require(series)[-1].version

    def load(self, series: str, version: str | None = None) -> StoredVersion:
        stored = self._require(series)
        if version is None:
            return stored[-1]
        for item in stored:
            if item.version == version:
                return item
        raise SeriesNotFound(
            f"series {series!r} has no version {version!r}; versions: {', '.join(self.versions(series))}"
        )

    def _require(self, series: str) -> list[StoredVersion]:
        check_series_name(series)
        if series not in self._versions:
            raise SeriesNotFound(unknown_series(series, self.series()))
        return self._versions[series]


def unknown_series(series: str, known: list[str]) -> str:
    """The message for a series the store does not hold, listing those it does."""
    listing = ", ".join(known) if known else "none published yet"
    return f"no published series {series!r}; published series: {listing}"


class FileStore:
    """Posterior store on a local (or mounted) file system. See the module docstring."""

    def __init__(self, root: str | os.PathLike[str]) -> None:
        self.root = Path(root)

    @property
    def location(self) -> str:
        """The store's folder, for messages."""
        return str(self.root)

    # -------------------------------------------------------------- writing
    def publish(
        self,
        series: str,
        posterior: CompactPosterior,
        *,
        manifest: dict[str, Any],
        idata: Any | None = None,
    ) -> StoredVersion:
        """Write a new version atomically, seal it, then point ``CURRENT`` at it."""
        check_series_name(series)
        series_dir = self.root / series
        versions_dir = series_dir / "versions"
        try:
            versions_dir.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise StoreError(f"cannot create store folder {versions_dir}: {exc}") from exc
        with self._publishing(series_dir):
            self._remove_leftovers(series_dir)
            staging = Path(tempfile.mkdtemp(prefix=".publishing-", dir=series_dir))
            try:
                write_synced(staging / "draws.npz", posterior.to_bytes())
                if idata is not None:
                    idata.to_netcdf(str(staging / "posterior.nc"))
                    fsync_path(staging / "posterior.nc")
                checksums = {
                    path.name: {"sha256": sha256_of(path), "bytes": path.stat().st_size}
                    for path in sorted(staging.iterdir())
                }
                version = self._next_version(series)
                body = build_manifest(series, version, posterior, manifest)
                body["files"] = checksums
                skipped = self._never_current(series)
                if skipped:
                    body["skipped_versions"] = skipped
                write_synced(staging / "manifest.json", json.dumps(body, indent=2).encode())
                write_synced(staging / SEAL, seal(_file_digests(staging)))
                try:
                    self._commit(staging, versions_dir / version)
                except OSError as exc:
                    raise StoreError(f"cannot move version {version} into place: {exc}") from exc
                fsync_path(versions_dir)
                self._set_current(series_dir, version)
            finally:
                if staging.exists():
                    shutil.rmtree(staging, ignore_errors=True)
        return StoredVersion(series, version, body, posterior)

    @contextlib.contextmanager
    def _publishing(self, series_dir: Path) -> Iterator[None]:
        """Hold the series' publish lock (publishers of one series take turns; readers never
        wait). The lock is released by the kernel if the process dies."""
        try:
            handle = (series_dir / ".publish.lock").open("a")
        except OSError as exc:
            raise StoreError(f"cannot open the publish lock of {series_dir.name!r}: {exc}") from exc
        with handle:
            fcntl.flock(handle.fileno(), fcntl.LOCK_EX)
            try:
                yield
            finally:
                fcntl.flock(handle.fileno(), fcntl.LOCK_UN)

    def _commit(self, staging: Path, target: Path) -> None:
        # os.rename of a folder onto a non-existent name is atomic on POSIX file systems.
        if target.exists():
            raise FileExistsError(target)
        staging.rename(target)

    def _set_current(self, series_dir: Path, version: str) -> None:
        atomic_write(series_dir / "CURRENT", (version + "\n").encode())

    def _next_version(self, series: str) -> str:
        numbers = [
            int(m.group(1)) for v in self._all_version_names(series) if (m := _VERSION.match(v))
        ]
        return f"v{max(numbers, default=0) + 1:04d}"

    def _never_current(self, series: str) -> list[str]:
        """Complete versions newer than the current one: a publisher stopped before moving
        ``CURRENT``. They are kept; the next manifest names them."""
        try:
            current = int(self.current_version(series)[1:])
        except (SeriesNotFound, StoreError):
            current = 0
        return [v for v in self._all_version_names(series) if int(v[1:]) > current]

    def _remove_leftovers(self, series_dir: Path) -> None:
        """Remove what crashed publishers left: staging folders and ``CURRENT`` temporaries.
        Called with the publish lock held, so no live publisher owns any of them."""
        for leftover in series_dir.glob(".publishing-*"):
            shutil.rmtree(leftover, ignore_errors=True)
        for leftover in series_dir.glob(".CURRENT.*"):
            leftover.unlink(missing_ok=True)

    # -------------------------------------------------------------- reading
    def series(self) -> list[str]:
        """Names of all series with a current version.

        Raises
        ------
        StoreError
            If the store folder does not exist or cannot be read: a missing root is not an empty
            store (an unmounted volume must not look like "nothing published").
        """
        if not self.root.is_dir():
            what = "is not a folder" if self.root.exists() else "does not exist"
            raise StoreError(
                f"store folder {self.root} {what}; publish a series with 'ratecast fit' or "
                "point --store / RATECAST_STORE at the store"
            )
        try:
            entries = list(self.root.iterdir())
        except OSError as exc:
            raise StoreError(f"store folder {self.root} cannot be read: {exc}") from exc
        return sorted(p.name for p in entries if p.is_dir() and (p / "CURRENT").exists())

    def _all_version_names(self, series: str) -> list[str]:
        versions_dir = self.root / series / "versions"
        if not versions_dir.exists():
            return []
        names = [p.name for p in versions_dir.iterdir() if _VERSION.match(p.name)]
        return sorted(names, key=lambda v: int(v[1:]))

    def versions(self, series: str) -> list[str]:
        self._require(series)
        return self._all_version_names(series)

    def current_version(self, series: str) -> str:
        self._require(series)
        try:
            name = (self.root / series / "CURRENT").read_text().strip()
        except OSError as exc:
            raise StoreError(f"cannot read the current version of {series!r}: {exc}") from exc
        if not _VERSION.match(name):
            raise CorruptArtefact(f"CURRENT of series {series!r} names {name!r}, not a version")
        return name

    def load(self, series: str, version: str | None = None) -> StoredVersion:
        """Load and verify a version against its seal; any mismatch raises
        :class:`CorruptArtefact`."""
        version = version or self.current_version(series)
        folder = self.root / series / "versions" / version
        if not _VERSION.match(version) or not folder.is_dir():
            raise SeriesNotFound(
                f"series {series!r} has no version {version!r}; versions: "
                f"{', '.join(self.versions(series)) or 'none'}"
            )
        label = f"{series} {version}"
        sealed = (folder / SEAL).exists()
        if sealed:
            try:
                payload, files = (folder / SEAL).read_bytes(), _file_digests(folder)
            except OSError as exc:
                raise CorruptArtefact(
                    f"{label}: a file of the version cannot be read: {exc}"
                ) from exc
            verify_seal(payload, files, label)
        manifest_bytes = _read(folder / "manifest.json", label)
        manifest, posterior = decode_version(
            label, manifest_bytes, _read(folder / "draws.npz", label), sealed=sealed
        )
        return StoredVersion(series, version, manifest, posterior, sealed=sealed)

    def posterior_path(self, series: str, version: str | None = None) -> Path:
        """Path of the full ArviZ data of a version (may not exist for slim publishes)."""
        version = version or self.current_version(series)
        return self.root / series / "versions" / version / "posterior.nc"

    def _require(self, series: str) -> None:
        check_series_name(series)
        if not (self.root / series / "CURRENT").exists():
            raise SeriesNotFound(unknown_series(series, self.series()))


def _file_digests(folder: Path) -> dict[str, str]:
    """SHA-256 of every file of a version folder but its seal."""
    return {
        path.name: sha256_of(path)
        for path in sorted(folder.iterdir())
        if path.is_file() and path.name != SEAL
    }


def _read(path: Path, label: str) -> bytes:
    try:
        return path.read_bytes()
    except OSError as exc:
        raise CorruptArtefact(f"{label}: {path.name} unreadable: {exc}") from exc

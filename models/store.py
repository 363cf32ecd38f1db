"""Versioned posterior store: a file store for real use and an in-memory one for fast tests.

File layout, one folder per series::

    <root>/<series>/versions/v0003/manifest.json   what, when, from which data, diagnostics, checksums
    <root>/<series>/versions/v0003/draws.npz       compact draws prediction needs
    <root>/<series>/versions/v0003/posterior.nc    full ArviZ data, for diagnostics only
    <root>/<series>/CURRENT                        name of the version served by default

A version is written into a hidden temporary folder, flushed to disk, then renamed into place in one
step, and only then does ``CURRENT`` move (itself written to a temporary file and renamed). A reader
therefore sees the old version or the new one, never half of one; a crash leaves at most a hidden
temporary folder that readers ignore and the next publish removes.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import json
import os
import re
import shutil
import tempfile
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Protocol

from models.exceptions import CorruptArtefact, InputError, SeriesNotFound, StoreError
from models.prediction.posterior import CompactPosterior

__all__ = [
    "FORMAT",
    "FileStore",
    "MemoryStore",
    "PosteriorStore",
    "StoredVersion",
    "check_series_name",
    "package_versions",
]

#: Format tag written into every manifest.
FORMAT = "ratecast-posterior/1"
_SERIES = re.compile(r"^[a-z0-9][a-z0-9._-]{0,63}$")
_VERSION = re.compile(r"^v(\d{4,})$")
_STALE_SECONDS = 3600


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


def _build_manifest(
    series: str, version: str, posterior: CompactPosterior, extra: dict[str, Any]
) -> dict[str, Any]:
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
            series, version, _build_manifest(series, version, posterior, manifest), posterior
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
            raise SeriesNotFound(_unknown_series(series, self.series()))
        return self._versions[series]


def _unknown_series(series: str, known: list[str]) -> str:
    listing = ", ".join(known) if known else "none published yet"
    return f"no published series {series!r}; published series: {listing}"


class FileStore:
    """Posterior store on a local (or mounted) file system. See the module docstring."""

    def __init__(self, root: str | os.PathLike[str]) -> None:
        self.root = Path(root)

    # -------------------------------------------------------------- writing
    def publish(
        self,
        series: str,
        posterior: CompactPosterior,
        *,
        manifest: dict[str, Any],
        idata: Any | None = None,
    ) -> StoredVersion:
        """Write a new version atomically, then point ``CURRENT`` at it."""
        check_series_name(series)
        series_dir = self.root / series
        versions_dir = series_dir / "versions"
        try:
            versions_dir.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise StoreError(f"cannot create store folder {versions_dir}: {exc}") from exc
        self._remove_stale_temporaries(series_dir)
        staging = Path(tempfile.mkdtemp(prefix=".publishing-", dir=series_dir))
        try:
            files = {"draws.npz": posterior.to_bytes()}
            for name, payload in files.items():
                _write_synced(staging / name, payload)
            if idata is not None:
                idata.to_netcdf(str(staging / "posterior.nc"))
                _fsync_path(staging / "posterior.nc")
            checksums = {
                path.name: {"sha256": _sha256(path), "bytes": path.stat().st_size}
                for path in sorted(staging.iterdir())
            }
            for _attempt in range(20):
                version = self._next_version(series)
                body = _build_manifest(series, version, posterior, manifest)
                body["files"] = checksums
                _write_synced(staging / "manifest.json", json.dumps(body, indent=2).encode())
                try:
                    self._commit(staging, versions_dir / version)
                    break
                except FileExistsError:
                    continue  # a concurrent publisher took this number; take the next
                except OSError as exc:
                    if (versions_dir / version).exists():
                        continue
                    raise StoreError(f"cannot move version into place: {exc}") from exc
            else:
                raise StoreError(f"could not allocate a version number for {series!r}")
            _fsync_path(versions_dir)
            self._set_current(series_dir, version)
        finally:
            if staging.exists():
                shutil.rmtree(staging, ignore_errors=True)
        return StoredVersion(series, version, body, posterior)

    def _commit(self, staging: Path, target: Path) -> None:
        # os.rename of a folder onto a non-existent name is atomic on POSIX file systems.
        if target.exists():
            raise FileExistsError(target)
        staging.rename(target)

    def _set_current(self, series_dir: Path, version: str) -> None:
        _atomic_write(series_dir / "CURRENT", (version + "\n").encode())

    def _next_version(self, series: str) -> str:
        numbers = [
            int(m.group(1)) for v in self._all_version_names(series) if (m := _VERSION.match(v))
        ]
        return f"v{max(numbers, default=0) + 1:04d}"

    def _remove_stale_temporaries(self, series_dir: Path) -> None:
        now = time.time()
        for leftover in series_dir.glob(".publishing-*"):
            if now - leftover.stat().st_mtime > _STALE_SECONDS:
                shutil.rmtree(leftover, ignore_errors=True)

    # -------------------------------------------------------------- reading
    def series(self) -> list[str]:
        if not self.root.exists():
            return []
        return sorted(
            p.name for p in self.root.iterdir() if p.is_dir() and (p / "CURRENT").exists()
        )

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
        """Load and verify a version; a checksum mismatch raises :class:`CorruptArtefact`."""
        version = version or self.current_version(series)
        folder = self.root / series / "versions" / version
        if not _VERSION.match(version) or not folder.is_dir():
            raise SeriesNotFound(
                f"series {series!r} has no version {version!r}; versions: "
                f"{', '.join(self.versions(series)) or 'none'}"
            )
        try:
            manifest = json.loads((folder / "manifest.json").read_text())
        except (OSError, ValueError) as exc:
            raise CorruptArtefact(f"{series} {version}: manifest.json unreadable: {exc}") from exc
        if manifest.get("format") != FORMAT:
            raise CorruptArtefact(
                f"{series} {version}: format {manifest.get('format')!r}, expected {FORMAT!r}"
            )
        entry = manifest.get("files", {}).get("draws.npz")
        if entry is None:
            raise CorruptArtefact(f"{series} {version}: manifest lists no draws.npz")
        try:
            payload = (folder / "draws.npz").read_bytes()
        except OSError as exc:
            raise CorruptArtefact(f"{series} {version}: draws.npz unreadable: {exc}") from exc
        digest = hashlib.sha256(payload).hexdigest()
        if digest != entry["sha256"]:
            raise CorruptArtefact(
                f"{series} {version}: draws.npz checksum {digest[:12]}... does not match the "
                f"manifest's {entry['sha256'][:12]}...; the file was changed or damaged"
            )
        try:
            posterior = CompactPosterior.from_bytes(payload, manifest)
        except (KeyError, TypeError, ValueError) as exc:
            raise CorruptArtefact(
                f"{series} {version}: manifest does not describe the draws: {exc}"
            ) from exc
        return StoredVersion(series, version, manifest, posterior)

    def posterior_path(self, series: str, version: str | None = None) -> Path:
        """Path of the full ArviZ data of a version (may not exist for slim publishes)."""
        version = version or self.current_version(series)
        return self.root / series / "versions" / version / "posterior.nc"

    def _require(self, series: str) -> None:
        check_series_name(series)
        if not (self.root / series / "CURRENT").exists():
            raise SeriesNotFound(_unknown_series(series, self.series()))


def _sha256(path: Path) -> str:
    digest = hashlib.sha256()
    with path.open("rb") as handle:
        for block in iter(lambda: handle.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()


def _write_synced(path: Path, payload: bytes) -> None:
    with path.open("wb") as handle:
        handle.write(payload)
        handle.flush()
        os.fsync(handle.fileno())


def _fsync_path(path: Path) -> None:
    flags = os.O_RDONLY | (os.O_DIRECTORY if path.is_dir() else 0)
    fd = os.open(path, flags)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


def _atomic_write(path: Path, payload: bytes) -> None:
    fd, temporary = tempfile.mkstemp(prefix=f".{path.name}.", dir=path.parent)
    try:
        with os.fdopen(fd, "wb") as handle:
            handle.write(payload)
            handle.flush()
            os.fsync(handle.fileno())
        Path(temporary).replace(path)
    except BaseException:
        Path(temporary).unlink(missing_ok=True)
        raise

"""Posterior store on an object store (S3 and compatible), reached through fsspec by URL.

An object store has neither rename nor locks, so a version is never moved into place: it is
written where it will stay, and made visible by the last object written. Layout, one prefix per
series under the store's URL::

    <url>/<series>/claims/v0003                  who claimed number 3 and when (created exclusively)
    <url>/<series>/versions/v0003/draws.npz      compact draws prediction needs
    <url>/<series>/versions/v0003/posterior.nc   full ArviZ data, for diagnostics only
    <url>/<series>/versions/v0003/manifest.json  what, when, from which data, checksums
    <url>/<series>/versions/v0003/SEAL           written last: the version exists from here on
    <url>/<series>/current/v0003                 v0003 became current (created exclusively)

Publishing a version:

1. **Claim** the next number by creating ``claims/vNNNN`` only if it does not exist (S3's
   ``If-None-Match: *``); a publisher that loses the race to another takes the next number.
   Two publishers of one series therefore never write the same version.
2. Write the version's files, then its ``SEAL`` (the same seal as
   :class:`~models.store.FileStore`'s, :mod:`models.sealing`) **last**. A version without a seal
   is invisible: not listed, not loadable. A publisher that dies before sealing leaves a claimed,
   unsealed number that no one reuses; the next publisher names it in its manifest's
   ``skipped_versions``.
3. Create the marker ``current/vNNNN``, unless a newer version is current already. The current
   version is the **highest** marker, so ``CURRENT`` only moves forward: a slower publisher that
   finishes after a newer version became current leaves it current (its own version is kept,
   complete and loadable, as ``skipped_versions`` of the newer one says).

Loading verifies the seal and the checksums of every file, as the file store does. Listings are
read afresh each time (fsspec's listing cache is dropped first), so a polling server sees new
versions.
"""

from __future__ import annotations

import contextlib
import datetime as dt
import hashlib
import json
import os
import re
import socket
import tempfile
from collections.abc import Iterator
from pathlib import Path
from typing import Any

from models.exceptions import CorruptArtefact, RatecastError, SeriesNotFound, StoreError
from models.prediction.posterior import CompactPosterior
from models.sealing import SEAL, decode_version, file_entry, seal, verify_seal
from models.store import StoredVersion, build_manifest, check_series_name, unknown_series

__all__ = ["EXCLUSIVE_PROTOCOLS", "UrlStore"]

#: Protocols whose fsspec back end creates an object only if it does not exist, atomically on
#: the server (S3's conditional write). Others (fsspec's generic create checks, then writes) race.
EXCLUSIVE_PROTOCOLS = ("s3", "s3a")
_VERSION = re.compile(r"^v(\d{4,})$")
#: Numbers a publisher tries past the highest it saw before giving up (each loss is another
#: publisher's win, so this many at once would be needed to exhaust it).
_CLAIM_TRIES = 1000


class UrlStore:
    """Posterior store at an fsspec URL such as ``s3://bucket/prefix``. See the module docstring.

    Parameters
    ----------
    url
        Where the store is; its protocol must be one of :data:`EXCLUSIVE_PROTOCOLS`.
    storage_options
        Passed to the fsspec file system (credentials and endpoint otherwise come from the
        usual ``AWS_*`` environment variables and files).
    """

    def __init__(self, url: str, **storage_options: Any) -> None:
        import fsspec

        protocol = url.split("://", 1)[0] if "://" in url else ""
        if protocol not in EXCLUSIVE_PROTOCOLS:
            raise StoreError(
                f"store URL {url!r}: protocol {protocol or '(none)'!r} cannot create objects "
                f"exclusively; allowed: {', '.join(p + '://' for p in EXCLUSIVE_PROTOCOLS)}"
            )
        self.url = url.rstrip("/")
        self.fs, root = fsspec.core.url_to_fs(self.url, **storage_options)
        self._root = root.rstrip("/")

    @property
    def location(self) -> str:
        """The store's URL, for messages."""
        return self.url

    # -------------------------------------------------------------- writing
    def publish(
        self,
        series: str,
        posterior: CompactPosterior,
        *,
        manifest: dict[str, Any],
        idata: Any | None = None,
    ) -> StoredVersion:
        """Claim a number, write the version, seal it last, then move ``CURRENT`` forward."""
        check_series_name(series)
        files = {"draws.npz": posterior.to_bytes()}
        if idata is not None:
            files["posterior.nc"] = _netcdf_bytes(idata)
        version = self._claim(series)
        body = build_manifest(series, version, posterior, manifest)
        body["files"] = {name: file_entry(payload) for name, payload in sorted(files.items())}
        skipped = self._never_current(series, below=version)
        if skipped:
            body["skipped_versions"] = skipped
        files["manifest.json"] = json.dumps(body, indent=2).encode()
        folder = self._path(series, "versions", version)
        with self._backend(f"write version {version} of {series!r}"):
            for name, payload in files.items():
                self.fs.pipe_file(f"{folder}/{name}", payload)
        self._seal(series, version, files)
        self._advance_current(series, version)
        return StoredVersion(series, version, body, posterior)

    def _claim(self, series: str) -> str:
        """Create ``claims/vNNNN`` for the lowest number above every one seen; on losing the
        race for a number, try the next."""
        seen = self._numbers(series, "claims") + self._numbers(series, "versions")
        number = max(seen, default=0) + 1
        claim = json.dumps(
            {
                "host": socket.gethostname(),
                "pid": os.getpid(),
                "claimed_at": dt.datetime.now(dt.UTC).isoformat(timespec="seconds"),
            }
        ).encode()
        for _ in range(_CLAIM_TRIES):
            version = f"v{number:04d}"
            try:
                with self._backend(f"claim version {version} of {series!r}"):
                    self.fs.pipe_file(self._path(series, "claims", version), claim, mode="create")
            except FileExistsError:
                number += 1
                continue
            return version
        raise StoreError(
            f"store {self.url}: no version number of {series!r} could be claimed in "
            f"{_CLAIM_TRIES} tries; other publishers took every one"
        )

    def _seal(self, series: str, version: str, files: dict[str, bytes]) -> None:
        """Write the seal, the version's last object (exclusively: a version is sealed once)."""
        digests = {name: hashlib.sha256(payload).hexdigest() for name, payload in files.items()}
        with self._backend(f"seal version {version} of {series!r}"):
            self.fs.pipe_file(
                self._path(series, "versions", version, SEAL), seal(digests), mode="create"
            )

    def _advance_current(self, series: str, version: str) -> None:
        """Mark ``version`` current unless a newer one already is (CURRENT never moves back)."""
        if int(version[1:]) <= max(self._numbers(series, "current"), default=0):
            return
        try:
            with self._backend(f"make {version} of {series!r} current"):
                self.fs.pipe_file(self._path(series, "current", version), b"", mode="create")
        except FileExistsError:  # only this publisher holds the claim; nothing else writes it
            pass

    def _never_current(self, series: str, *, below: str) -> list[str]:
        """Claimed numbers between the current version and ``below``: versions still being
        written, left unsealed by a crash, or sealed but overtaken. Kept; the manifest names them."""
        current = max(self._numbers(series, "current"), default=0)
        return [
            f"v{n:04d}"
            for n in sorted(self._numbers(series, "claims"))
            if current < n < int(below[1:])
        ]

    # -------------------------------------------------------------- reading
    def series(self) -> list[str]:
        """Names of all series with a current version.

        Raises
        ------
        StoreError
            If the bucket does not exist or cannot be listed.
        """
        with self._backend("list the store"):
            bucket = self._root.split("/", 1)[0]
            if not self.fs.exists(bucket):
                raise StoreError(
                    f"store {self.url}: bucket {bucket!r} does not exist; create it, or point "
                    "--store / RATECAST_STORE at the store"
                )
        names = [n for n in self._names(self._root) if _is_series_name(n)]
        return sorted(n for n in names if self._numbers(n, "current"))

    def versions(self, series: str) -> list[str]:
        """Every sealed version of ``series``, oldest first (unsealed ones are invisible)."""
        self._require(series)
        return self._sealed(series)

    def current_version(self, series: str) -> str:
        """The newest version marked current."""
        self._require(series)
        return f"v{max(self._numbers(series, 'current')):04d}"

    def load(self, series: str, version: str | None = None) -> StoredVersion:
        """Load and verify a version against its seal; any mismatch raises
        :class:`~models.exceptions.CorruptArtefact`."""
        version = version or self.current_version(series)
        label = f"{series} {version}"
        folder = self._path(series, "versions", version)
        names = self._names(folder) if _VERSION.match(version) else []
        if SEAL not in names:
            raise SeriesNotFound(
                f"series {series!r} has no version {version!r}; versions: "
                f"{', '.join(self.versions(series)) or 'none'}"
            )
        contents = {name: self._read(f"{folder}/{name}", label) for name in names}
        sealed = contents.pop(SEAL)
        verify_seal(sealed, {n: hashlib.sha256(b).hexdigest() for n, b in contents.items()}, label)
        manifest, posterior = decode_version(
            label, contents["manifest.json"], contents["draws.npz"], sealed=True
        )
        return StoredVersion(series, version, manifest, posterior, sealed=True)

    # -------------------------------------------------------------- helpers
    def _require(self, series: str) -> None:
        check_series_name(series)
        if not self._numbers(series, "current"):
            raise SeriesNotFound(unknown_series(series, self.series()))

    def _path(self, series: str, *parts: str) -> str:
        return "/".join([self._root, series, *parts])

    def _names(self, prefix: str) -> list[str]:
        """Last names of what is directly under ``prefix`` (none if nothing is), read afresh."""
        with self._backend(f"list {prefix.removeprefix(self._root).lstrip('/') or 'the store'}"):
            self.fs.invalidate_cache(prefix)
            try:
                listed = self.fs.ls(prefix, detail=False)
            except FileNotFoundError:
                return []
        return [str(p).rstrip("/").rsplit("/", 1)[-1] for p in listed]

    def _numbers(self, series: str, kind: str) -> list[int]:
        return [
            int(m.group(1))
            for n in self._names(self._path(series, kind))
            if (m := _VERSION.match(n))
        ]

    def _sealed(self, series: str) -> list[str]:
        """Versions whose seal exists, from one recursive listing of the series' versions."""
        prefix = self._path(series, "versions")
        with self._backend(f"list the versions of {series!r}"):
            self.fs.invalidate_cache(prefix)
            try:
                found = self.fs.find(prefix)
            except FileNotFoundError:
                found = []
        names = {
            parts[-2]
            for path in found
            if len(parts := str(path).split("/")) >= 2
            and parts[-1] == SEAL
            and _VERSION.match(parts[-2])
        }
        return sorted(names, key=lambda v: int(v[1:]))

    def _read(self, path: str, label: str) -> bytes:
        name = path.rsplit("/", 1)[-1]
        try:
            with self._backend(f"read {name} of {label}"):
                return bytes(self.fs.cat_file(path))
        except FileNotFoundError as exc:
            raise CorruptArtefact(f"{label}: {name} is listed but cannot be read: {exc}") from exc

    @contextlib.contextmanager
    def _backend(self, what: str) -> Iterator[None]:
        """Turn a back-end failure (network, permissions, throttling) into one
        :class:`~models.exceptions.StoreError` naming the store and what was being done.
        ``FileExistsError`` and ``FileNotFoundError`` pass through: callers act on them."""
        try:
            yield
        except (RatecastError, FileExistsError, FileNotFoundError):
            raise
        except Exception as exc:
            first = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
            raise StoreError(f"store {self.url}: cannot {what}: {first}") from exc


def _is_series_name(name: str) -> bool:
    """Whether ``name`` is a valid series name (a listing may hold other objects)."""
    try:
        check_series_name(name)
    except ValueError:
        return False
    return True


def _netcdf_bytes(idata: Any) -> bytes:
    """The ArviZ data as netCDF bytes (written through a local temporary file)."""
    with tempfile.TemporaryDirectory(prefix="ratecast-nc-") as folder:
        path = Path(folder) / "posterior.nc"
        idata.to_netcdf(str(path))
        return path.read_bytes()

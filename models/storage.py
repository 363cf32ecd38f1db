"""One way to open a store from where it is: a folder, a ``file://`` URL or an object-store URL.

``open_store("store")`` and ``open_store("file:///srv/ratecast/store")`` give a
:class:`~models.store.FileStore` (the embedded default; a shared or mounted file system works
through it too); ``open_store("s3://bucket/prefix")`` gives a :class:`~models.urlstore.UrlStore`.
A location is a plain string, so it travels to other processes (fit-plan workers, server
workers) as it is and each opens the store itself.
"""

from __future__ import annotations

import re
from importlib.metadata import PackageNotFoundError, version
from pathlib import Path
from urllib.parse import unquote, urlsplit

from models.exceptions import InputError, StoreError
from models.store import FileStore, PosteriorStore
from models.urlstore import EXCLUSIVE_PROTOCOLS, UrlStore

__all__ = ["ALLOWED", "local_folder", "open_store"]

#: What a store location may be, for messages.
ALLOWED = "a folder path, a file:// URL or an s3://BUCKET/PREFIX URL"
_SCHEME = re.compile(r"^([A-Za-z][A-Za-z0-9+.-]*)://")
#: The fsspec back end each object-store protocol needs, and the oldest version accepted: s3fs
#: 2025.7.0 has the fix that sends If-None-Match for small objects (its exclusive create).
_BACKENDS = {"s3": ("s3fs", "2025.7.0"), "s3a": ("s3fs", "2025.7.0")}


def local_folder(location: str) -> Path | None:
    """The folder a plain path or ``file://`` URL names; ``None`` for any other URL.

    Examples
    --------
    >>> local_folder("file:///srv/ratecast/store")
    PosixPath('/srv/ratecast/store')
    >>> local_folder("store")
    PosixPath('store')
    >>> local_folder("s3://bucket/store") is None
    True
    """
    scheme = _SCHEME.match(location)
    if scheme is None:
        return Path(location)
    if scheme.group(1).lower() != "file":
        return None
    parts = urlsplit(location)
    if parts.netloc not in ("", "localhost") or not parts.path:
        raise InputError(
            f"store {location!r} is not a local file URL; use file:///ABSOLUTE/PATH (three "
            f"slashes) or give {ALLOWED}"
        )
    return Path(unquote(parts.path))


def open_store(location: str) -> PosteriorStore:
    """The store at ``location`` (see the module docstring).

    Raises
    ------
    InputError
        If ``location`` is empty or names a protocol ratecast cannot publish to safely.
    StoreError
        If the protocol needs an optional package that is not installed (or is too old).
    """
    if not isinstance(location, str) or not location.strip():
        raise InputError(f"store {location!r} is empty; give {ALLOWED}")
    folder = local_folder(location)
    if folder is not None:
        return FileStore(folder)
    scheme = _SCHEME.match(location)
    assert scheme is not None  # local_folder returned None, so there is a scheme
    protocol = scheme.group(1).lower()
    if protocol not in EXCLUSIVE_PROTOCOLS:
        raise InputError(
            f"store {location!r}: protocol {protocol + '://'!r} is not supported (ratecast "
            f"publishes only where an object can be created exclusively); give {ALLOWED}"
        )
    package, lowest = _BACKENDS[protocol]
    _require_package(package, lowest, location)
    return UrlStore(location)


def _require_package(package: str, lowest: str, location: str) -> None:
    try:
        found = version(package)
    except PackageNotFoundError:
        raise StoreError(
            f"store {location!r} needs the optional package {package}, which is not installed; "
            f"install it with pip install 'ratecast[s3]'"
        ) from None
    if _release(found) < _release(lowest):
        raise StoreError(
            f"store {location!r} needs {package} {lowest} or newer (installed: {found}); "
            f"upgrade it with pip install 'ratecast[s3]'"
        )


def _release(text: str) -> tuple[int, ...]:
    """The leading numbers of a version string: ``"2025.7.0"`` -> ``(2025, 7, 0)``."""
    numbers = []
    for part in text.split("."):
        digits = re.match(r"\d+", part)
        if digits is None:
            break
        numbers.append(int(digits.group()))
    return tuple(numbers)

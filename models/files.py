"""Writing files so that a reader sees the old content or the new, never half of either.

A file is written beside its target under a hidden temporary name, flushed to disk, then renamed
onto the target in one step (``os.replace`` is atomic on POSIX file systems). A crash leaves at
most the hidden temporary file, which readers ignore.
"""

from __future__ import annotations

import contextlib
import hashlib
import os
import tempfile
from collections.abc import Iterator
from pathlib import Path

__all__ = ["atomic_path", "atomic_write", "fsync_path", "sha256_of", "write_synced"]


@contextlib.contextmanager
def atomic_path(target: str | os.PathLike[str]) -> Iterator[Path]:
    """Yield a temporary path beside ``target``; on a clean exit it is synced and renamed onto
    ``target``, on an error it is removed and ``target`` is untouched.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> folder = pathlib.Path(tempfile.mkdtemp())
    >>> with atomic_path(folder / "table.csv") as temporary:
    ...     _ = temporary.write_text("a,b\\n1,2\\n")
    >>> (folder / "table.csv").read_text()
    'a,b\\n1,2\\n'
    >>> sorted(p.name for p in folder.iterdir())
    ['table.csv']
    """
    target = Path(target)
    target.parent.mkdir(parents=True, exist_ok=True)
    handle, name = tempfile.mkstemp(prefix=f".{target.name}.", dir=target.parent)
    os.close(handle)
    temporary = Path(name)
    try:
        yield temporary
        fsync_path(temporary)
        temporary.replace(target)
    except BaseException:
        temporary.unlink(missing_ok=True)
        raise


def atomic_write(target: str | os.PathLike[str], payload: bytes) -> None:
    """Replace ``target`` with ``payload`` atomically (see :func:`atomic_path`)."""
    with atomic_path(target) as temporary:
        temporary.write_bytes(payload)


def write_synced(path: Path, payload: bytes) -> None:
    """Write ``payload`` to ``path`` and flush it to disk (for files inside a staging folder)."""
    with path.open("wb") as handle:
        handle.write(payload)
        handle.flush()
        os.fsync(handle.fileno())


def fsync_path(path: Path) -> None:
    """Flush a file's or a folder's entry to disk."""
    flags = os.O_RDONLY | (os.O_DIRECTORY if path.is_dir() else 0)
    fd = os.open(path, flags)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


def sha256_of(path: Path) -> str:
    """Hex SHA-256 of a file, read in 1 MiB blocks."""
    digest = hashlib.sha256()
    with path.open("rb") as handle:
        for block in iter(lambda: handle.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()

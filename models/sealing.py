"""Seals and checksums of a stored version, shared by every store backend.

A version is a handful of files (``draws.npz``, ``manifest.json``, optionally ``posterior.nc``)
and a ``SEAL`` that lists the SHA-256 of each and one digest over that list. Where the files live
(a folder, an object store) is the backend's business: this module works on names and bytes only,
so a version reads and verifies the same whichever store holds it.
"""

from __future__ import annotations

import hashlib
import json
from collections.abc import Mapping
from typing import Any

from models.exceptions import CorruptArtefact
from models.prediction.posterior import CompactPosterior

__all__ = [
    "FORMAT",
    "SEAL",
    "UNSEALED_FORMAT",
    "decode_version",
    "file_entry",
    "seal",
    "verify_seal",
]

#: Format tag written into every manifest.
FORMAT = "ratecast-posterior/2"
#: Manifests of this format have no seal; they still load (draws checksum only).
UNSEALED_FORMAT = "ratecast-posterior/1"
#: Name of the seal file of a version.
SEAL = "SEAL"
_SEAL_FORMAT = "ratecast-seal/1"


def file_entry(payload: bytes) -> dict[str, Any]:
    """The manifest's record of one file: its SHA-256 and size.

    Examples
    --------
    >>> file_entry(b"abc")["bytes"]
    3
    """
    return {"sha256": hashlib.sha256(payload).hexdigest(), "bytes": len(payload)}


def _digest(files: Mapping[str, str]) -> str:
    text = "".join(f"{name} {sha}\n" for name, sha in sorted(files.items()))
    return hashlib.sha256(text.encode()).hexdigest()


def seal(files: Mapping[str, str]) -> bytes:
    """The seal of a version whose files (every one but the seal) have these SHA-256 digests."""
    listed = dict(sorted(files.items()))
    body = {"format": _SEAL_FORMAT, "files": listed, "digest": _digest(listed)}
    return json.dumps(body, indent=2).encode()


def verify_seal(payload: bytes, actual: Mapping[str, str], label: str) -> None:
    """Check a seal against the SHA-256 of the files a version holds now.

    Parameters
    ----------
    payload
        The bytes of the ``SEAL`` file.
    actual
        Name to SHA-256 of every file of the version but the seal, as read now.
    label
        ``"series version"``, to start every message with.

    Raises
    ------
    CorruptArtefact
        If the seal is unreadable or does not add up, or a file is missing, extra or changed.
    """
    try:
        body = json.loads(payload)
        listed = dict(body["files"])
        digest = str(body["digest"])
    except (ValueError, KeyError, TypeError) as exc:
        raise CorruptArtefact(f"{label}: SEAL unreadable: {exc}") from exc
    if _digest(listed) != digest:
        raise CorruptArtefact(f"{label}: SEAL does not add up; it was changed or damaged")
    for name in sorted(set(listed) | set(actual)):
        if name not in actual:
            raise CorruptArtefact(f"{label}: {name} is listed in the seal but missing")
        if name not in listed:
            raise CorruptArtefact(f"{label}: {name} is not part of the sealed version")
        if actual[name] != listed[name]:
            raise CorruptArtefact(
                f"{label}: {name} checksum {actual[name][:12]}... does not match the seal's "
                f"{listed[name][:12]}...; the file was changed or damaged"
            )


def decode_version(
    label: str, manifest: bytes, draws: bytes, *, sealed: bool
) -> tuple[dict[str, Any], CompactPosterior]:
    """The manifest and the compact draws of a version whose seal (if any) was verified.

    The manifest's format must be the current one for a sealed version and the old one for an
    unsealed version, and the draws must match the manifest's checksum.

    Raises
    ------
    CorruptArtefact
        On any mismatch; the message starts with ``label``.
    """
    try:
        body = json.loads(manifest)
    except ValueError as exc:
        raise CorruptArtefact(f"{label}: manifest.json unreadable: {exc}") from exc
    expected = FORMAT if sealed else UNSEALED_FORMAT
    if not isinstance(body, dict) or body.get("format") != expected:
        found = body.get("format") if isinstance(body, dict) else None
        raise CorruptArtefact(
            f"{label}: format {found!r}, expected {expected!r}"
            + ("" if sealed else " (a version of the current format must have a SEAL)")
        )
    entry = body.get("files", {}).get("draws.npz")
    if entry is None:
        raise CorruptArtefact(f"{label}: manifest lists no draws.npz")
    digest = hashlib.sha256(draws).hexdigest()
    if digest != entry["sha256"]:
        raise CorruptArtefact(
            f"{label}: draws.npz checksum {digest[:12]}... does not match the "
            f"manifest's {entry['sha256'][:12]}...; the file was changed or damaged"
        )
    try:
        posterior = CompactPosterior.from_bytes(draws, body)
    except (KeyError, TypeError, ValueError) as exc:
        raise CorruptArtefact(f"{label}: manifest does not describe the draws: {exc}") from exc
    return body, posterior

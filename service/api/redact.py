"""What must not leave the server: file-system paths in messages, tokens in query strings.

:func:`public_text` shortens a message for a response body (paths become their last name).
Tokens travel only in the ``Authorization`` header: :func:`credential_in_query` spots one in a
query string (``service.api.limits`` refuses such a request) and :class:`AccessLogRedactor`
keeps it out of uvicorn's access log even so.
"""

from __future__ import annotations

import logging
import re
from urllib.parse import parse_qsl

__all__ = ["CREDENTIAL_PARAMS", "AccessLogRedactor", "credential_in_query", "public_text"]

_PATH = re.compile(
    r"(?:[A-Za-z][A-Za-z0-9+.-]*://|[A-Za-z]:\\|[/\\])?(?:[^\s'\"/\\]+[/\\])+[^\s'\"/\\]*"
)
_MAX_PUBLIC = 300

#: Query parameters that look like a credential; such a request is refused, its value unlogged.
CREDENTIAL_PARAMS = frozenset(
    {"token", "access_token", "bearer", "auth", "authorization", "api_key", "apikey", "key",
     "password", "secret"}
)  # fmt: skip


def _shorten(match: re.Match[str]) -> str:
    text = match.group(0)
    absolute = (
        text.startswith(("/", "\\"))
        or re.match(r"[A-Za-z]:\\|[A-Za-z][A-Za-z0-9+.-]*://", text) is not None
    )
    if not absolute and len(re.findall(r"[/\\]", text)) < 2:
        return text  # "a/b": a ratio or a pair, not a path
    name = re.split(r"[/\\]", text.rstrip("/\\"))[-1]
    return name or "(folder)"


def public_text(text: str) -> str:
    """``text`` fit for a client: every file-system path and store URL replaced by its last
    name, cut short.

    Examples
    --------
    >>> public_text("desk-a v0003: draws.npz unreadable: [Errno 2] No such file: "
    ...             "'/srv/ratecast/store/desk-a/versions/v0003/draws.npz'")
    "desk-a v0003: draws.npz unreadable: [Errno 2] No such file: 'draws.npz'"
    >>> public_text("store s3://bucket/ratecast: cannot list 'desk-a'")
    "store ratecast: cannot list 'desk-a'"
    """
    short = _PATH.sub(_shorten, text)
    return short if len(short) <= _MAX_PUBLIC else short[:_MAX_PUBLIC] + "..."


def credential_in_query(query: str) -> str | None:
    """The first query parameter whose name looks like a credential, if any."""
    for name, _ in parse_qsl(query, keep_blank_values=True):
        if name.lower() in CREDENTIAL_PARAMS:
            return name
    return None


class AccessLogRedactor(logging.Filter):
    """Drop the query string from access log records whose query carries a credential."""

    def filter(self, record: logging.LogRecord) -> bool:
        if isinstance(record.args, tuple) and record.args:
            record.args = tuple(_redact(a) if isinstance(a, str) else a for a in record.args)
        return True


def _redact(text: str) -> str:
    path, mark, query = text.partition("?")
    if mark and credential_in_query(query) is not None:
        return f"{path}?(query redacted: it held a credential)"
    return text

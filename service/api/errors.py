"""The one place where errors become HTTP responses.

Every error body has the same shape (:class:`service.api.schemas.ErrorResponse`)::

    {"status": 422, "code": "invalid_input", "message": "...", "field": "windows[0].start",
     "value": "2026-03-09T09:00", "allowed": "...", "problems": [...]}

Mapping of the library's errors (``models.exceptions``)::

    InputError (TimestampError, WindowError, ...)   422 invalid_input
    LimitError                                      422 over_limit
    SeriesNotFound                                  404 series_not_found
    CorruptArtefact                                 503 corrupt_artefact    (paths left out)
    StoreError                                      503 store_unavailable   (details logged only)
    FitRejected                                     409 fit_rejected
    any other RatecastError / Exception             500 internal_error      (details logged only)

Routes and dependencies raise :class:`ApiError` for what only the HTTP edge knows (tokens, body
size, media types, configured limits), and wrap calls into ``models`` in :func:`field_errors` so
an ``InputError`` names the request field it came from. Where an error is comes from its
structured fields (``window``, ``field``, ``value``, ``allowed``), never from its wording.
"""

from __future__ import annotations

import logging
import math
from collections.abc import Iterator, Mapping, Sequence
from contextlib import contextmanager
from typing import Any

from fastapi import FastAPI, Request
from fastapi.exceptions import RequestValidationError
from fastapi.responses import JSONResponse
from starlette.exceptions import HTTPException as StarletteHTTPException

from models.exceptions import (
    CorruptArtefact,
    FitRejected,
    InputError,
    LimitError,
    RatecastError,
    SeriesNotFound,
    StoreError,
)
from service.api.redact import public_text
from service.api.schemas.common import INSTANT_ALLOWED, INSTANT_PATTERN, STEP_PATTERN
from service.queries.windows import STEP_ALLOWED

__all__ = [
    "ApiError",
    "error_from_exception",
    "field_errors",
    "install_error_handlers",
    "problems_from_validation",
    "validation_error",
]

logger = logging.getLogger("ratecast.api")

_MAX_ECHO = 200  # characters of a bad value echoed back; long bodies are cut, never reflected whole
_MAX_ITEMS = 10
_MAX_DEPTH = 3
#: What a pattern of the schema means, for people (instead of the regular expression).
_PATTERN_ALLOWED = {INSTANT_PATTERN: INSTANT_ALLOWED, STEP_PATTERN: STEP_ALLOWED}


class ApiError(Exception):
    """An error the HTTP edge raises itself, with its status and the field it concerns.

    Parameters
    ----------
    status
        HTTP status code.
    code
        Short machine-readable name, e.g. ``"too_many_windows"``.
    message
        One sentence for people, naming the bad value and what is allowed.
    field, value, allowed
        The request field, the value received (never a token), and what would be accepted.
    headers
        Extra response headers (``WWW-Authenticate``, ``Retry-After``...).
    """

    def __init__(
        self,
        status: int,
        code: str,
        message: str,
        *,
        field: str | None = None,
        value: Any = None,
        allowed: str | None = None,
        headers: Mapping[str, str] | None = None,
        problems: Sequence[dict[str, Any]] = (),
    ) -> None:
        super().__init__(message)
        self.status = status
        self.code = code
        self.message = message
        self.field = field
        self.value = value
        self.allowed = allowed
        self.headers = dict(headers or {})
        self.problems = list(problems)

    def body(self) -> dict[str, Any]:
        """The JSON error body (:class:`service.api.schemas.ErrorResponse`)."""
        return {
            "status": self.status,
            "code": self.code,
            "message": self.message,
            "field": self.field,
            "value": _echo(self.value),
            "allowed": self.allowed,
            "problems": list(self.problems),
        }


def _echo(value: Any, depth: int = 0) -> Any:
    """A bad value made safe to send back: JSON-ready, short, finite, shallow."""
    if value is None or isinstance(value, bool | int):
        return value if not isinstance(value, int) or abs(value) < 2**53 else str(value)[:40]
    if isinstance(value, float):
        return value if math.isfinite(value) else str(value)
    if isinstance(value, str):
        return value if len(value) <= _MAX_ECHO else value[:_MAX_ECHO] + "..."
    if depth >= _MAX_DEPTH:
        return f"({type(value).__name__})"
    if isinstance(value, Mapping) and len(value) <= _MAX_ITEMS:
        return {str(k)[:_MAX_ECHO]: _echo(v, depth + 1) for k, v in value.items()}
    if isinstance(value, list | tuple) and len(value) <= _MAX_ITEMS:
        return [_echo(v, depth + 1) for v in value]
    size = f" of {len(value)} items" if hasattr(value, "__len__") else ""
    return f"({type(value).__name__}{size})"


@contextmanager
def field_errors(
    field: str,
    value: Any,
    *,
    allowed: str | None = None,
    windows: Sequence[Any] | None = None,
) -> Iterator[None]:
    """Turn an :class:`InputError` (422) or :class:`SeriesNotFound` (404) into an :class:`ApiError`.

    The library's message already names the bad value and what is allowed; this adds where in the
    request it was, from the error's structured fields: an error about window ``i`` (its
    ``window``) names ``windows[i]`` and that window when the request's ``windows`` are given; an
    error naming its ``field`` names that field and its value; otherwise ``field`` and ``value``
    here. The error's own ``allowed`` wins over ``allowed`` here, which is the fallback.
    """
    try:
        yield
    except SeriesNotFound as exc:
        raise ApiError(
            404,
            "series_not_found",
            str(exc),
            field=field,
            value=value,
            allowed="a served series (GET /v1/series lists them)",
        ) from exc
    except InputError as exc:
        where, shown = field, value
        if exc.window is not None and windows is not None and 0 <= exc.window < len(windows):
            where, shown = f"windows[{exc.window}]", windows[exc.window]
        elif exc.field is not None:
            where, shown = exc.field, exc.value
        code = "over_limit" if isinstance(exc, LimitError) else "invalid_input"
        raise ApiError(
            422, code, str(exc), field=where, value=shown, allowed=exc.allowed or allowed
        ) from exc


def _location(loc: Sequence[Any], root: str = "body") -> str:
    """``("body", "windows", 0, "start")`` -> ``"windows[0].start"``."""
    parts = list(loc)
    if parts and parts[0] in ("body", "query", "path", "header"):
        parts = parts[1:]
    text = ""
    for part in parts:
        if isinstance(part, int):
            text += f"[{part}]"
        else:
            text += ("." if text else "") + str(part)
    return text or (str(loc[0]) if loc else root)


def problems_from_validation(
    errors: Sequence[Mapping[str, Any]], *, root: str = "body"
) -> list[dict[str, Any]]:
    """One problem per pydantic error: field, value received, message, what is allowed.

    ``root`` names the field of an error about the whole object (an empty location). A body
    that is not JSON at all is a problem of the field ``body`` (pydantic locates it at the
    character where decoding failed, which is no field).
    """
    problems = []
    for err in errors:
        kind = str(err.get("type", ""))
        message = str(err.get("msg", "invalid value"))
        allowed = message.removeprefix("Input should be ").removeprefix("Value error, ")
        where = _location(err.get("loc", ()), root)
        if kind == "json_invalid":
            loc = list(err.get("loc", ()))
            at = f" at character {loc[-1]}" if loc and isinstance(loc[-1], int) else ""
            reason = (err.get("ctx") or {}).get("error", "cannot be decoded")
            where, value, allowed = "body", None, "a JSON document"
            message = f"the request body is not valid JSON: {reason}{at}"
        elif kind == "string_pattern_mismatch":
            value = err.get("input")
            allowed = _PATTERN_ALLOWED.get(str((err.get("ctx") or {}).get("pattern")), allowed)
            message = f"{_echo(value)!r} does not have the allowed form: {allowed}"
        elif kind == "missing":
            value, allowed = None, "a value (the field is required)"
        elif kind == "extra_forbidden":
            value, allowed = err.get("input"), "only the documented fields"
        else:
            value = err.get("input")
        problems.append(
            {"field": where, "value": _echo(value), "message": message, "allowed": allowed}
        )
    return problems


def validation_error(errors: Sequence[Mapping[str, Any]], *, root: str = "body") -> ApiError:
    """The 422 for pydantic validation errors: the first problem in front, all of them listed."""
    problems = problems_from_validation(errors, root=root)
    if not problems:
        return ApiError(422, "invalid_input", "the request is invalid")
    first = problems[0]
    more = f" (and {len(problems) - 1} more)" if len(problems) > 1 else ""
    code = (
        "invalid_body" if first["field"] == "body" and first["value"] is None else "invalid_input"
    )
    message = (
        first["message"] if code == "invalid_body" else f"{first['field']}: {first['message']}"
    )
    return ApiError(
        422,
        code,
        message + more,
        field=first["field"],
        value=first["value"],
        allowed=first["allowed"],
        problems=problems,
    )


def error_from_exception(exc: BaseException) -> ApiError:
    """Map any exception onto the :class:`ApiError` the client will see."""
    if isinstance(exc, ApiError):
        return exc
    if isinstance(exc, InputError):
        code = "over_limit" if isinstance(exc, LimitError) else "invalid_input"
        return ApiError(422, code, str(exc), field=exc.field, value=exc.value, allowed=exc.allowed)
    if isinstance(exc, SeriesNotFound):
        return ApiError(404, "series_not_found", str(exc), field="series")
    if isinstance(exc, CorruptArtefact):
        logger.error("corrupt artefact: %s", exc)
        return ApiError(
            503, "corrupt_artefact", public_text(str(exc)), headers={"Retry-After": "30"}
        )
    if isinstance(exc, StoreError):
        # Store messages may carry file-system paths: they go to the log, not to clients.
        logger.error("store error: %s", exc)
        return ApiError(
            503,
            "store_unavailable",
            "the posterior store cannot be read just now; the failure is logged",
            headers={"Retry-After": "30"},
        )
    if isinstance(exc, FitRejected):
        return ApiError(409, "fit_rejected", str(exc))
    if isinstance(exc, RatecastError):
        logger.error("unmapped ratecast error: %s", exc)
    else:
        logger.error("unexpected error", exc_info=exc)
    return ApiError(500, "internal_error", "the server failed to answer; the failure is logged")


def _response(error: ApiError) -> JSONResponse:
    return JSONResponse(error.body(), status_code=error.status, headers=error.headers or None)


async def _handle_any(request: Request, exc: Exception) -> JSONResponse:
    return _response(error_from_exception(exc))


async def _handle_validation(request: Request, exc: Exception) -> JSONResponse:
    assert isinstance(exc, RequestValidationError)
    return _response(validation_error(exc.errors()))


async def _handle_http(request: Request, exc: Exception) -> JSONResponse:
    assert isinstance(exc, StarletteHTTPException)
    carried = getattr(exc, "error", None)  # e.g. the body limit's 413, raised mid-parse
    if isinstance(carried, ApiError):
        return _response(carried)
    if exc.status_code == 400:
        # FastAPI's only 400 here: a body that is not decodable JSON (e.g. not UTF-8). Reported
        # like every other invalid input.
        return _response(
            ApiError(
                422,
                "invalid_body",
                f"the request body cannot be read as JSON: {exc.detail}",
                field="body",
                allowed="a UTF-8 encoded JSON document",
            )
        )
    codes = {404: "not_found", 405: "method_not_allowed"}
    message = str(exc.detail)
    allowed = None
    if exc.status_code == 404:
        message = f"no route {request.url.path}"
        allowed = "the paths listed at /docs"
    elif exc.status_code == 405:
        allowed = (exc.headers or {}).get("Allow") or (exc.headers or {}).get("allow")
    return _response(
        ApiError(
            exc.status_code,
            codes.get(exc.status_code, "http_error"),
            message,
            allowed=allowed,
            headers=exc.headers,
        )
    )


def install_error_handlers(app: FastAPI) -> None:
    """Register the handlers that render every error in the documented shape."""
    app.add_exception_handler(ApiError, _handle_any)
    app.add_exception_handler(RatecastError, _handle_any)
    app.add_exception_handler(RequestValidationError, _handle_validation)
    app.add_exception_handler(StarletteHTTPException, _handle_http)
    app.add_exception_handler(Exception, _handle_any)

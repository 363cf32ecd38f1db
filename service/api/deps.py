"""Dependencies shared by the routes, as ``Annotated`` aliases.

Each reads what the app was created with (``app.state``): settings, registry, metrics and the
work pool; :class:`SeriesCall` gathers what a route about one series starts from. Tokens come
only from the ``Authorization`` header, are compared in constant time and never echoed, logged
or put into an error body.
"""

from __future__ import annotations

import hmac
from collections.abc import Awaitable, Callable
from dataclasses import dataclass
from typing import Annotated, Any

from fastapi import APIRouter, Depends, Header, Request, Response
from fastapi.security import HTTPAuthorizationCredentials, HTTPBearer
from pydantic import SecretStr

from models.store import StoredVersion
from service.api.errors import ApiError
from service.api.forecasting import served_version
from service.api.media import version_headers, wants_csv
from service.api.registry import Registry
from service.api.schemas import error_responses
from service.api.telemetry import Metrics
from service.api.work import WorkPool
from service.config import Settings

__all__ = [
    "AdminAccess",
    "MetricsDep",
    "ReadAccess",
    "RegistryDep",
    "SeriesCall",
    "SeriesCallDep",
    "SettingsDep",
    "WorkDep",
    "require_admin",
    "require_read",
    "series_router",
]

_bearer = HTTPBearer(auto_error=False, description="Authorization: Bearer <token>")
Credentials = Annotated[HTTPAuthorizationCredentials | None, Depends(_bearer)]


# The dependencies are ``async def`` although they do not await: FastAPI runs a plain ``def``
# dependency in a worker thread, which costs more than the whole lookup.


def _app_state(name: str) -> Callable[[Request], Awaitable[Any]]:
    """A dependency returning ``request.app.state.<name>`` (what the app was created with)."""

    async def get(request: Request) -> Any:
        return getattr(request.app.state, name)

    get.__name__ = f"app_{name}"
    return get


@dataclass(frozen=True)
class SeriesCall:
    """What every route about one series starts from, taken once at the start of the call.

    ``stored`` is the version served now (the whole answer comes from it), ``csv`` whether the
    client asked for CSV (``Accept``), ``deadline`` the event-loop time by which it must be
    answered; ``settings`` and ``work`` are the app's.
    """

    stored: StoredVersion
    csv: bool
    deadline: float
    settings: Settings
    work: WorkPool


async def series_call(
    series: str,
    request: Request,
    response: Response,
    accept: Annotated[str | None, Header()] = None,
) -> SeriesCall:
    """The :class:`SeriesCall` of a request (406 or 404/422 on a bad Accept or series).

    Every answer about the series carries the version it comes from in ``X-Model-Version`` and
    whether that version is degraded (published although its fit failed the diagnostics gate)
    in ``X-Model-Degraded``, JSON and CSV alike (:func:`~service.api.media.version_headers`).
    """
    state = request.app.state
    work: WorkPool = state.work
    deadline = work.deadline()
    csv = wants_csv(accept)
    stored = served_version(state.registry, series)
    response.headers.update(version_headers(stored))
    return SeriesCall(stored, csv, deadline, state.settings, work)


def _configured(token: SecretStr | None) -> SecretStr | None:
    # An empty variable (RATECAST_ADMIN_TOKEN=) means "not set", never "the empty token".
    return token if token is not None and token.get_secret_value() else None


def _matches(given: str, expected: SecretStr | None) -> bool:
    if expected is None:
        return False
    return hmac.compare_digest(given.encode(), expected.get_secret_value().encode())


def _missing(kind: str) -> ApiError:
    return _token_error(401, "unauthorized", f"this call needs a bearer token ({kind})", kind)


def _wrong(kind: str) -> ApiError:
    return _token_error(403, "forbidden", f"the bearer token is not a valid {kind} token", kind)


def _token_error(status: int, code: str, message: str, kind: str) -> ApiError:
    return ApiError(
        status,
        code,
        message,
        field="Authorization",
        value="(not shown)" if status == 403 else None,
        allowed=f"Authorization: Bearer <{kind} token>",
        headers={"WWW-Authenticate": "Bearer"} if status == 401 else None,
    )


async def require_read(request: Request, credentials: Credentials) -> None:
    """Let the call through if no read token is configured, or the read or admin token is given."""
    settings: Settings = request.app.state.settings
    read_token = _configured(settings.read_token)
    if read_token is None:
        return
    if credentials is None:
        raise _missing("read")
    token = credentials.credentials
    # Evaluate both so the time taken does not say which one matched.
    read_ok = _matches(token, read_token)
    admin_ok = _matches(token, _configured(settings.admin_token))
    if not (read_ok or admin_ok):
        raise _wrong("read")


async def require_admin(request: Request, credentials: Credentials) -> None:
    """Let the call through only with the admin token; admin calls are off when none is set."""
    admin_token = _configured(request.app.state.settings.admin_token)
    if admin_token is None:
        raise ApiError(
            403,
            "admin_disabled",
            "admin calls are disabled because no admin token is configured",
            field="Authorization",
            allowed="set RATECAST_ADMIN_TOKEN on the server",
        )
    if credentials is None:
        raise _missing("admin")
    if not _matches(credentials.credentials, admin_token):
        raise _wrong("admin")


SettingsDep = Annotated[Settings, Depends(_app_state("settings"))]
RegistryDep = Annotated[Registry, Depends(_app_state("registry"))]
MetricsDep = Annotated[Metrics, Depends(_app_state("metrics"))]
WorkDep = Annotated[WorkPool, Depends(_app_state("work"))]
SeriesCallDep = Annotated[SeriesCall, Depends(series_call)]
ReadAccess = Depends(require_read)
AdminAccess = Depends(require_admin)


def series_router(tag: str) -> APIRouter:
    """A router for calls about one series (``/v1/series/{series}/...``), read token checked."""
    return APIRouter(
        prefix="/v1/series/{series}",
        tags=[tag],
        dependencies=[ReadAccess],
        responses=error_responses(401, 403, 404, 406, 413, 422, 503),
    )

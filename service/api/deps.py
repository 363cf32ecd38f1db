"""Dependencies shared by the routes, as ``Annotated`` aliases.

Tokens are compared in constant time and never echoed, logged or put into an error body.
"""

from __future__ import annotations

import hmac
from typing import Annotated

from fastapi import Depends, Request
from fastapi.security import HTTPAuthorizationCredentials, HTTPBearer
from pydantic import SecretStr

from service.api.errors import ApiError
from service.api.registry import Registry
from service.api.telemetry import Metrics
from service.config import Settings

__all__ = [
    "AdminAccess",
    "MetricsDep",
    "ReadAccess",
    "RegistryDep",
    "SettingsDep",
    "require_admin",
    "require_read",
]

_bearer = HTTPBearer(auto_error=False, description="Authorization: Bearer <token>")
Credentials = Annotated[HTTPAuthorizationCredentials | None, Depends(_bearer)]


# The dependencies are ``async def`` although they do not await: FastAPI runs a plain ``def``
# dependency in a worker thread, which costs more than the whole lookup.


async def get_settings(request: Request) -> Settings:
    """The settings the app was created with."""
    settings: Settings = request.app.state.settings
    return settings


async def get_registry(request: Request) -> Registry:
    """The registry of served versions."""
    registry: Registry = request.app.state.registry
    return registry


async def get_metrics(request: Request) -> Metrics:
    """The process's request metrics."""
    metrics: Metrics = request.app.state.metrics
    return metrics


def _configured(token: SecretStr | None) -> SecretStr | None:
    # An empty variable (RATECAST_ADMIN_TOKEN=) means "not set", never "the empty token".
    return token if token is not None and token.get_secret_value() else None


def _matches(given: str, expected: SecretStr | None) -> bool:
    if expected is None:
        return False
    return hmac.compare_digest(given.encode(), expected.get_secret_value().encode())


def _missing(kind: str) -> ApiError:
    return ApiError(
        401,
        "unauthorized",
        f"this call needs a bearer token ({kind})",
        field="Authorization",
        allowed=f"Authorization: Bearer <{kind} token>",
        headers={"WWW-Authenticate": "Bearer"},
    )


def _wrong(kind: str) -> ApiError:
    return ApiError(
        403,
        "forbidden",
        f"the bearer token is not a valid {kind} token",
        field="Authorization",
        value="(not shown)",
        allowed=f"Authorization: Bearer <{kind} token>",
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


SettingsDep = Annotated[Settings, Depends(get_settings)]
RegistryDep = Annotated[Registry, Depends(get_registry)]
MetricsDep = Annotated[Metrics, Depends(get_metrics)]
ReadAccess = Depends(require_read)
AdminAccess = Depends(require_admin)

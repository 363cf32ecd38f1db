"""Gates every request passes before a route sees it: the body size limit, no token in the URL.

A declared ``Content-Length`` above the limit is refused at once; a body sent without one (chunked)
is counted as it arrives and refused the moment it passes the limit, so a client cannot make the
server buffer more than ``max_bytes``. A query string carrying a credential-like parameter is
refused before routing, so its value is never echoed in a validation error.
"""

from __future__ import annotations

from typing import Any

from starlette.exceptions import HTTPException
from starlette.responses import JSONResponse

from service.api.errors import ApiError
from service.api.redact import credential_in_query
from service.api.telemetry import ASGIApp, Message, Receive, Scope, Send

__all__ = ["BodyLimitMiddleware", "BodyTooLarge", "QueryTokenMiddleware"]


class BodyTooLarge(HTTPException):
    """Raised from ``receive`` when the streamed body passes the limit.

    An ``HTTPException`` so that FastAPI's body parsing lets it through unchanged instead of
    reporting a generic parse failure.
    """

    def __init__(self, limit: int, seen: int) -> None:
        super().__init__(413)
        self.error = _too_large(limit, seen, declared=False)


def _too_large(limit: int, seen: int, *, declared: bool) -> ApiError:
    how = "declares" if declared else "sent at least"
    return ApiError(
        413,
        "body_too_large",
        f"the request body {how} {seen} bytes; at most {limit} bytes are accepted",
        field="body",
        value=seen,
        allowed=f"at most {limit} bytes (split the request, e.g. a batch into several)",
    )


class BodyLimitMiddleware:
    """ASGI middleware refusing request bodies larger than ``max_bytes`` with 413."""

    def __init__(self, app: ASGIApp, *, max_bytes: int) -> None:
        self.app = app
        self.max_bytes = max_bytes

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return
        declared = _content_length(scope)
        if declared is not None and declared > self.max_bytes:
            await _send_error(_too_large(self.max_bytes, declared, declared=True), scope, send)
            return
        seen = 0
        started = False

        async def counting_receive() -> Message:
            nonlocal seen
            message = await receive()
            if message["type"] == "http.request":
                seen += len(message.get("body", b""))
                if seen > self.max_bytes:
                    raise BodyTooLarge(self.max_bytes, seen)
            return message

        async def tracking_send(message: Message) -> None:
            nonlocal started
            if message["type"] == "http.response.start":
                started = True
            await send(message)

        try:
            await self.app(scope, counting_receive, tracking_send)
        except BodyTooLarge as exc:
            if started:
                raise
            await _send_error(exc.error, scope, send)


def _content_length(scope: Scope) -> int | None:
    for name, value in scope.get("headers", ()):
        if name == b"content-length":
            try:
                return int(value)
            except ValueError:
                return None  # the server rejects a malformed length before we see it
    return None


async def _send_error(error: ApiError, scope: Scope, send: Send) -> None:
    response = JSONResponse(error.body(), status_code=error.status, headers={"Connection": "close"})
    await response(scope, _no_body, send)


async def _no_body() -> Any:
    return {"type": "http.disconnect"}


class QueryTokenMiddleware:
    """Refuse (422) a request whose query string carries a credential-like parameter.

    The value is neither echoed nor logged by the service; :class:`AccessLogRedactor` removes it
    from the server's access log line.
    """

    def __init__(self, app: ASGIApp) -> None:
        self.app = app

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] == "http":
            name = credential_in_query(scope.get("query_string", b"").decode("latin-1"))
            if name is not None:
                error = ApiError(
                    422,
                    "token_in_query",
                    f"query parameter {name!r} looks like a credential; tokens are accepted "
                    "only in the Authorization header",
                    field=name,
                    value="(not shown)",
                    allowed="Authorization: Bearer <token>, and no credential in the URL",
                )
                await JSONResponse(error.body(), status_code=422)(scope, receive, send)
                return
        await self.app(scope, receive, send)

"""The ASGI application: wiring only (settings, registry, work pool, middleware, handlers, routers).

``uvicorn service.main:app`` serves it; ``ratecast serve`` does the same with options. Importing
this module reads the settings but does not touch the store: versions are loaded in the lifespan,
before the server accepts connections.
"""

from __future__ import annotations

import asyncio
import contextlib
import logging
from collections.abc import AsyncIterator
from typing import Any

from fastapi import FastAPI
from fastapi.middleware.cors import CORSMiddleware

from models import __version__
from models.storage import open_store
from models.store import PosteriorStore
from service.api.errors import install_error_handlers
from service.api.limits import BodyLimitMiddleware, QueryTokenMiddleware
from service.api.redact import AccessLogRedactor
from service.api.registry import Registry, watch
from service.api.routes import ROUTERS
from service.api.schemas import BatchRequest, ErrorResponse, ForecastRequest, StaffingRequest
from service.api.telemetry import Metrics, MetricsMiddleware
from service.api.work import WorkPool
from service.config import Settings, get_settings
from service.page import router as page_router
from service.queries.forecast import CAUTION

__all__ = ["app", "create_app"]

_DESCRIPTION = f"""
Predictive arrival counts for any time window, from the posteriors that `ratecast fit` publishes.

Every error has one body shape: `status`, `code`, `message`, and the `field`, `value` and
`allowed` values it concerns. Tokens go in the `Authorization: Bearer` header only; a request
with a credential in its query string is refused.

Each request's work is estimated before any is done (bin-draws: model bins its windows touch x
posterior draws); a request or a whole batch over the work budget is refused with 422
`over_budget`, heavy work runs in a bounded pool, and a request past its deadline gets 503.

**Caution.** {CAUTION}
"""


@contextlib.asynccontextmanager
async def _lifespan(app: FastAPI) -> AsyncIterator[None]:
    registry: Registry = app.state.registry
    settings: Settings = app.state.settings
    await asyncio.to_thread(registry.reload)
    watcher = None
    if settings.watch_seconds > 0:
        watcher = asyncio.create_task(watch(registry, settings.watch_seconds))
    try:
        yield
    finally:
        if watcher is not None:
            watcher.cancel()
            with contextlib.suppress(asyncio.CancelledError):
                await watcher
        app.state.work.shutdown()


def _openapi_with_limits(app: FastAPI, settings: Settings) -> Any:
    """The OpenAPI document, stating the configured list limits the routes enforce."""

    def openapi() -> dict[str, Any]:
        if app.openapi_schema is None:
            schema = FastAPI.openapi(app)
            components = schema.setdefault("components", {}).setdefault("schemas", {})
            # Referenced by every route's error responses (spelt out as JSON, see schemas.errors).
            error_schema = ErrorResponse.model_json_schema(
                ref_template="#/components/schemas/{model}"
            )
            components.update(error_schema.pop("$defs", {}))
            components.setdefault("ErrorResponse", error_schema)
            limits = {
                (ForecastRequest.__name__, "windows"): settings.max_windows,
                (BatchRequest.__name__, "items"): settings.max_batch_items,
                (StaffingRequest.__name__, "agents"): settings.max_windows,
            }
            for (model, field), most in limits.items():
                prop = components.get(model, {}).get("properties", {}).get(field)
                if prop is not None:
                    for option in prop.get("anyOf", [prop]):
                        if option.get("type") == "array":
                            option["maxItems"] = most
            app.openapi_schema = schema
        return app.openapi_schema

    return openapi


def create_app(settings: Settings | None = None, *, store: PosteriorStore | None = None) -> FastAPI:
    """Build the application.

    Parameters
    ----------
    settings
        Configuration; default: :func:`service.config.get_settings` (``RATECAST_*`` variables).
    store
        Posterior store to serve; default: the store at ``settings.store`` (a folder or a URL,
        :func:`models.storage.open_store`). Tests pass a :class:`~models.store.MemoryStore`.
    """
    settings = settings or get_settings()
    app = FastAPI(
        title="ratecast",
        version=__version__,
        summary="Bayesian arrival-rate forecasts over HTTP",
        description=_DESCRIPTION,
        lifespan=_lifespan,
    )
    app.state.settings = settings
    app.state.registry = Registry(store if store is not None else open_store(settings.store))
    app.state.metrics = Metrics()
    app.state.work = WorkPool(
        threads=settings.work_threads,
        queue=settings.work_queue,
        budget=settings.work_budget,
        deadline_seconds=settings.deadline_seconds,
    )
    install_error_handlers(app)
    for router in ROUTERS:
        app.include_router(router)
    app.include_router(page_router)
    app.openapi = _openapi_with_limits(app, settings)  # type: ignore[method-assign]
    # Added inside out: metrics sees every response, including the body limit's 413.
    app.add_middleware(BodyLimitMiddleware, max_bytes=settings.max_body_bytes)
    app.add_middleware(QueryTokenMiddleware)
    if settings.cors_origins:
        app.add_middleware(
            CORSMiddleware,
            allow_origins=settings.cors_origins,
            allow_methods=["GET", "POST"],
            allow_headers=["Authorization", "Content-Type", "Accept"],
            expose_headers=["X-Caution", "X-Model-Version"],
        )
    app.add_middleware(MetricsMiddleware, metrics=app.state.metrics)
    access_log = logging.getLogger("uvicorn.access")
    if not any(isinstance(f, AccessLogRedactor) for f in access_log.filters):
        access_log.addFilter(AccessLogRedactor())
    return app


app = create_app()

"""The ASGI application: wiring only (settings, registry, middleware, error handlers, routers).

``uvicorn service.main:app`` serves it; ``ratecast serve`` does the same with options. Importing
this module reads the settings but does not touch the store: versions are loaded in the lifespan,
before the server accepts connections.
"""

from __future__ import annotations

import asyncio
import contextlib
from collections.abc import AsyncIterator

from fastapi import FastAPI
from fastapi.middleware.cors import CORSMiddleware

from models import __version__
from models.store import FileStore, PosteriorStore
from service.api.errors import install_error_handlers
from service.api.limits import BodyLimitMiddleware
from service.api.registry import Registry, watch
from service.api.routes import ROUTERS
from service.api.routes.capacity import router as capacity_router
from service.api.telemetry import Metrics, MetricsMiddleware
from service.config import Settings, get_settings
from service.page import router as page_router
from service.queries.forecast import CAUTION

__all__ = ["app", "create_app"]

_DESCRIPTION = f"""
Predictive arrival counts for any time window, from the posteriors that `ratecast fit` publishes.

Every error has one body shape: `status`, `code`, `message`, and the `field`, `value` and
`allowed` values it concerns.

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


def create_app(settings: Settings | None = None, *, store: PosteriorStore | None = None) -> FastAPI:
    """Build the application.

    Parameters
    ----------
    settings
        Configuration; default: :func:`service.config.get_settings` (``RATECAST_*`` variables).
    store
        Posterior store to serve; default: a :class:`~models.store.FileStore` at
        ``settings.store``. Tests pass a :class:`~models.store.MemoryStore`.
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
    app.state.registry = Registry(store if store is not None else FileStore(settings.store))
    app.state.metrics = Metrics()
    install_error_handlers(app)
    for router in ROUTERS:
        app.include_router(router)
    app.include_router(capacity_router)
    app.include_router(page_router)
    # Added inside out: metrics sees every response, including the body limit's 413.
    app.add_middleware(BodyLimitMiddleware, max_bytes=settings.max_body_bytes)
    if settings.cors_origins:
        app.add_middleware(
            CORSMiddleware,
            allow_origins=settings.cors_origins,
            allow_methods=["GET", "POST"],
            allow_headers=["Authorization", "Content-Type", "Accept"],
        )
    app.add_middleware(MetricsMiddleware, metrics=app.state.metrics)
    return app


app = create_app()

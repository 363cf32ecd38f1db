"""Prometheus text exposition (format 0.0.4), written by hand: no client library needed.

Requests are labelled by route *template* (``/v1/series/{series}/forecast``), never by the raw path,
so the number of series cannot blow up the number of time series; paths that match no route share
the label ``unmatched``. Counters live in one process: with several workers, each worker exposes its
own and Prometheus sums them.
"""

from __future__ import annotations

import time
from collections.abc import Awaitable, Callable, MutableMapping
from typing import Any

from service.api.registry import Registry
from service.api.work import WorkPool

__all__ = ["LATENCY_BUCKETS", "Metrics", "MetricsMiddleware", "render"]

Scope = MutableMapping[str, Any]
Message = MutableMapping[str, Any]
Receive = Callable[[], Awaitable[Message]]
Send = Callable[[Message], Awaitable[None]]
ASGIApp = Callable[[Scope, Receive, Send], Awaitable[None]]

#: Upper bounds (seconds) of the latency histogram buckets.
LATENCY_BUCKETS: tuple[float, ...] = (
    0.001, 0.0025, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1.0, 2.5, 5.0, 10.0,
)  # fmt: skip


class _Histogram:
    __slots__ = ("counts", "n", "total")

    def __init__(self) -> None:
        self.counts = [0] * len(LATENCY_BUCKETS)
        self.total = 0.0
        self.n = 0

    def observe(self, seconds: float) -> None:
        for i, bound in enumerate(LATENCY_BUCKETS):
            if seconds <= bound:
                self.counts[i] += 1
                break
        self.total += seconds
        self.n += 1


class Metrics:
    """Request counts and latency histograms per method and route template."""

    def __init__(self) -> None:
        self.requests: dict[tuple[str, str, str], int] = {}
        self.latency: dict[tuple[str, str], _Histogram] = {}

    def observe(self, method: str, route: str, status: int, seconds: float) -> None:
        """Record one finished request."""
        key = (method, route, str(status))
        self.requests[key] = self.requests.get(key, 0) + 1
        hist = self.latency.get((method, route))
        if hist is None:
            hist = self.latency[(method, route)] = _Histogram()
        hist.observe(seconds)


def _escape(value: str) -> str:
    return value.replace("\\", "\\\\").replace('"', '\\"').replace("\n", "\\n")


def _labels(**labels: str) -> str:
    return "{" + ",".join(f'{k}="{_escape(v)}"' for k, v in labels.items()) + "}"


def _number(value: float) -> str:
    return repr(float(value)) if not float(value).is_integer() else str(int(value))


def render(metrics: Metrics, registry: Registry, work: WorkPool) -> str:
    """The exposition text: HTTP metrics, what the registry serves and refuses, the work pool."""
    out: list[str] = [
        "# HELP ratecast_http_requests_total HTTP requests answered, by method, route and status.",
        "# TYPE ratecast_http_requests_total counter",
    ]
    for (method, route, status), count in sorted(metrics.requests.items()):
        labels = _labels(method=method, route=route, status=status)
        out.append(f"ratecast_http_requests_total{labels} {count}")
    out += [
        "# HELP ratecast_http_request_duration_seconds Time to answer, by method and route.",
        "# TYPE ratecast_http_request_duration_seconds histogram",
    ]
    for (method, route), hist in sorted(metrics.latency.items()):
        cumulative = 0
        for bound, count in zip(LATENCY_BUCKETS, hist.counts, strict=True):
            cumulative += count
            labels = _labels(method=method, route=route, le=_number(bound))
            out.append(f"ratecast_http_request_duration_seconds_bucket{labels} {cumulative}")
        labels = _labels(method=method, route=route, le="+Inf")
        out.append(f"ratecast_http_request_duration_seconds_bucket{labels} {hist.n}")
        labels = _labels(method=method, route=route)
        out.append(f"ratecast_http_request_duration_seconds_sum{labels} {hist.total!r}")
        out.append(f"ratecast_http_request_duration_seconds_count{labels} {hist.n}")
    served = registry.snapshot()
    out += [
        "# HELP ratecast_series_loaded Series currently served.",
        "# TYPE ratecast_series_loaded gauge",
        f"ratecast_series_loaded {len(served)}",
        "# HELP ratecast_series_version Served version number of each series.",
        "# TYPE ratecast_series_version gauge",
    ]
    for name in sorted(served):
        version = served[name].version
        out.append(f"ratecast_series_version{_labels(series=name)} {int(version[1:])}")
    out += [
        "# HELP ratecast_series_refused Versions refused at load (1 per refused version).",
        "# TYPE ratecast_series_refused gauge",
    ]
    for refusal in registry.refusals:
        labels = _labels(series=refusal.series, version=refusal.version or "unknown")
        out.append(f"ratecast_series_refused{labels} 1")
    out += [
        "# HELP ratecast_reloads_total Reloads of the store since the process started.",
        "# TYPE ratecast_reloads_total counter",
        f"ratecast_reloads_total {registry.reloads}",
        "# HELP ratecast_store_readable 1 if the last reload could list the store.",
        "# TYPE ratecast_store_readable gauge",
        f"ratecast_store_readable {0 if registry.store_error else 1}",
    ]
    return "\n".join(out + _work_lines(work)) + "\n"


def _work_lines(work: WorkPool) -> list[str]:
    out = [
        "# HELP ratecast_work_started_total Answers whose computation began (inline or pooled).",
        "# TYPE ratecast_work_started_total counter",
        f"ratecast_work_started_total {work.started}",
        "# HELP ratecast_work_cells_total Estimated bin-draws of the answers begun.",
        "# TYPE ratecast_work_cells_total counter",
        f"ratecast_work_cells_total {work.started_cells}",
        "# HELP ratecast_work_running Answers being computed in the work threads now.",
        "# TYPE ratecast_work_running gauge",
        f"ratecast_work_running {work.running}",
        "# HELP ratecast_work_waiting Answers waiting for a work thread now.",
        "# TYPE ratecast_work_waiting gauge",
        f"ratecast_work_waiting {max(0, work.pending - work.running)}",
        "# HELP ratecast_work_refused_total Requests refused before any work, by reason.",
        "# TYPE ratecast_work_refused_total counter",
    ]
    out += [
        f"ratecast_work_refused_total{_labels(reason=k)} {v}"
        for k, v in sorted(work.refused.items())
    ]
    out += [
        "# HELP ratecast_work_abandoned_total Answers abandoned unfinished, by reason.",
        "# TYPE ratecast_work_abandoned_total counter",
    ]
    out += [
        f"ratecast_work_abandoned_total{_labels(reason=k)} {v}"
        for k, v in sorted(work.abandoned.items())
    ]
    return out


class MetricsMiddleware:
    """ASGI middleware timing every HTTP request until its last byte is sent."""

    def __init__(self, app: ASGIApp, *, metrics: Metrics) -> None:
        self.app = app
        self.metrics = metrics

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return
        began = time.perf_counter()
        status = 500

        async def recording_send(message: Message) -> None:
            nonlocal status
            if message["type"] == "http.response.start":
                status = int(message["status"])
            await send(message)

        try:
            await self.app(scope, receive, recording_send)
        finally:
            # The router writes the matched route into the shared scope.
            route = getattr(scope.get("route"), "path", None) or "unmatched"
            self.metrics.observe(scope["method"], route, status, time.perf_counter() - began)

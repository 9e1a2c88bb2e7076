"""Metrics, access logs, request ids and security headers, around every request.

``observe`` wraps the whole litestar application (not only matched routes), so answers to
unknown paths and errors raised before routing are counted, logged and given the same
headers as any other answer.
"""

from __future__ import annotations

import itertools
import logging
import os
import re
import sys
import time
from collections.abc import Awaitable, Callable, MutableMapping
from typing import Any

import msgspec
from prometheus_client import CollectorRegistry, Counter, Gauge, Histogram
from prometheus_client.core import CounterMetricFamily, GaugeMetricFamily
from prometheus_client.registry import Collector

from service.bases.catalogue import Catalogue

from .security import security_headers

access_log = logging.getLogger("service.access")

REQUEST_ID_HEADER = b"x-request-id"
CALCULATION_HEADER = b"x-calculation-fingerprint"
_REQUEST_ID = re.compile(rb"^[A-Za-z0-9._:\-]{1,128}$")

Scope = MutableMapping[str, Any]
ASGIApp = Callable[[Scope, Callable[[], Awaitable[Any]], Callable[[Any], Awaitable[None]]], Awaitable[None]]


class Metrics:
    """The service's Prometheus metrics, in a registry of its own (one per application)."""

    def __init__(self, catalogue: Catalogue):
        self.registry = CollectorRegistry(auto_describe=True)
        self.requests = Counter(
            "lifetime_http_requests",
            "HTTP requests answered, by route, method and status.",
            ("route", "method", "status"),
            registry=self.registry,
        )
        self.latency = Histogram(
            "lifetime_http_request_duration_seconds",
            "Time to answer HTTP requests, by route, method and status.",
            ("route", "method", "status"),
            buckets=(0.0005, 0.001, 0.0025, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1, 2.5, 5, 10),
            registry=self.registry,
        )
        self.in_progress = Gauge(
            "lifetime_http_requests_in_progress",
            "HTTP requests received and not yet answered.",
            registry=self.registry,
        )
        self.registry.register(_CatalogueCollector(catalogue))


class _CatalogueCollector(Collector):
    def __init__(self, catalogue: Catalogue):
        self.catalogue = catalogue

    def collect(self):
        cache = self.catalogue.cache
        hits = CounterMetricFamily(
            "lifetime_basis_cache_hits",
            "Inline bases answered without compiling (from the cache or a stored basis).",
        )
        hits.add_metric([], cache.hits)
        yield hits
        misses = CounterMetricFamily(
            "lifetime_basis_cache_misses", "Inline bases that had to be compiled."
        )
        misses.add_metric([], cache.misses)
        yield misses
        size = GaugeMetricFamily("lifetime_basis_cache_size", "Compiled inline bases kept.")
        size.add_metric([], len(cache))
        yield size
        size_bytes = GaugeMetricFamily(
            "lifetime_basis_cache_bytes", "Memory taken by the compiled inline bases kept."
        )
        size_bytes.add_metric([], cache.bytes)
        yield size_bytes
        capacity = GaugeMetricFamily(
            "lifetime_basis_cache_capacity", "Most compiled inline bases kept."
        )
        capacity.add_metric([], cache.capacity)
        yield capacity
        stored = GaugeMetricFamily(
            "lifetime_stored_bases", "Stored bases loaded and compiled (always kept)."
        )
        stored.add_metric([], len(self.catalogue.stored()) if self.catalogue.ready else 0)
        yield stored


def request_id_from(headers: list[tuple[bytes, bytes]]) -> str:
    """The client's X-Request-ID if it is short and plain; a new one otherwise."""
    for name, value in headers:
        if name.lower() == REQUEST_ID_HEADER:
            value = value.strip()
            if _REQUEST_ID.match(value):
                return value.decode("ascii")
            break
    return f"{_ID_PREFIX}{next(_ID_COUNTER):016x}"


# A new request id: 64 random bits drawn once per process (so ids of replicas and restarts do
# not collide), then a counter; no system call per request.
_ID_PREFIX = os.urandom(8).hex()
_ID_COUNTER = itertools.count(1)


def observe(app: ASGIApp, metrics: Metrics) -> ASGIApp:
    """Wrap ``app`` with request ids, security headers, metrics and one access-log line."""
    encode = msgspec.json.Encoder().encode
    # the labelled children of the two metrics, found once per (route, method, status)
    children: dict[tuple[str, str, int], tuple[Any, Any]] = {}

    def metric_children(route: str, method: str, status: int) -> tuple[Any, Any]:
        key = (route, method, status)
        found = children.get(key)
        if found is None:
            labels = (route, method, str(status))
            found = (metrics.requests.labels(*labels), metrics.latency.labels(*labels))
            if len(children) < 10_000:  # routes are templates, so this stays small
                children[key] = found
        return found

    async def observed(scope: Scope, receive: Any, send: Any) -> None:
        if scope["type"] != "http":
            await app(scope, receive, send)
            return
        started = time.perf_counter()
        request_id = request_id_from(scope.get("headers", []))
        state = scope.setdefault("state", {})
        state["request_id"] = request_id
        status_holder = [500]

        async def send_with_headers(message: Any) -> None:
            if message["type"] == "http.response.start":
                status = message["status"]
                status_holder[0] = status
                headers = security_headers(
                    list(message.get("headers", [])), status, scope.get("path", "")
                )
                headers.append((REQUEST_ID_HEADER, request_id.encode("ascii")))
                calculation = state.get("calculation_fingerprint")
                if calculation:
                    headers.append((CALCULATION_HEADER, calculation.encode("ascii")))
                message = {**message, "headers": headers}
            await send(message)

        metrics.in_progress.inc()
        try:
            await app(scope, receive, send_with_headers)
        finally:
            metrics.in_progress.dec()
            elapsed = time.perf_counter() - started
            status = status_holder[0]
            route = scope.get("path_template") or "unmatched"
            method = scope.get("method", "")
            count, latency = metric_children(route, method, status)
            count.inc()
            latency.observe(elapsed)
            if access_log.isEnabledFor(logging.INFO):
                record = {
                    "event": "request",
                    "method": method,
                    "path": scope.get("path", ""),
                    "route": route,
                    "status": status,
                    "duration_ms": round(elapsed * 1000.0, 3),
                    "request_id": request_id,
                }
                fingerprint = state.get("basis_fingerprint")
                if fingerprint:
                    record["basis_fingerprint"] = fingerprint
                calculation = state.get("calculation_fingerprint")
                if calculation:
                    record["calculation_fingerprint"] = calculation
                access_log.info(encode(record).decode())

    return observed


class JsonLineFormatter(logging.Formatter):
    """One JSON object per line: time, level, logger and the message (merged when it is JSON)."""

    _encode = staticmethod(msgspec.json.Encoder().encode)

    def format(self, record: logging.LogRecord) -> str:
        line: dict[str, Any] = {
            "time": time.strftime("%Y-%m-%dT%H:%M:%S", time.gmtime(record.created))
            + f".{int(record.msecs):03d}Z",
            "level": record.levelname.lower(),
            "logger": record.name,
        }
        message = record.getMessage()
        if record.name == access_log.name and message.startswith("{"):
            try:
                line.update(msgspec.json.decode(message))
            except msgspec.DecodeError:
                line["message"] = message
        else:
            line["message"] = message
        if record.exc_info:
            line["exception"] = self.formatException(record.exc_info)
        return self._encode(line).decode()


def configure_logging(level: str) -> None:
    """JSON lines on standard error for the service's and the server's loggers."""
    handler = logging.StreamHandler(sys.stderr)
    handler.setFormatter(JsonLineFormatter())
    root = logging.getLogger()
    for existing in list(root.handlers):
        root.removeHandler(existing)
    root.addHandler(handler)
    root.setLevel(level.upper())
    for name in ("uvicorn", "uvicorn.error", "uvicorn.access"):
        logger = logging.getLogger(name)
        logger.handlers.clear()
        logger.propagate = True

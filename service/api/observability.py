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


#: the environment variable that puts the Prometheus client in its multiprocess mode: each
#: worker process writes its figures into files of this folder, and /metrics, whichever
#: worker answers it, reads them all (``python -m service --workers N`` sets it)
MULTIPROCESS_DIR_VARIABLE = "PROMETHEUS_MULTIPROC_DIR"


def is_multiprocess() -> bool:
    return bool(os.environ.get(MULTIPROCESS_DIR_VARIABLE))


class Metrics:
    """The service's Prometheus metrics, in a registry of its own (one per application).

    One process: the basis cache's figures are read from the catalogue when /metrics is
    scraped. Several worker processes (the multiprocess mode, ``is_multiprocess``): every
    figure lives in the workers' files, so /metrics reports the whole service; request counts,
    latencies and cache hits and misses are summed over the workers, requests in progress and
    the cache's size summed over the live workers, and the stored bases are the most any
    worker has loaded. Each worker writes its cache figures when they change (``after_request``).
    """

    def __init__(self, catalogue: Catalogue):
        self.multiprocess = is_multiprocess()
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
            multiprocess_mode="livesum",
        )
        #: what /metrics writes out
        self.exposed = self.registry
        #: called after every request (None: nothing to do)
        self.after_request: Callable[[], None] | None = None
        if self.multiprocess:
            from prometheus_client import multiprocess

            self.exposed = CollectorRegistry()
            multiprocess.MultiProcessCollector(self.exposed)
            self.after_request = _CacheFigures(catalogue, self.registry).write_if_changed
        else:
            self.registry.register(_CatalogueCollector(catalogue))

    def worker_started(self) -> None:
        """Once the stored bases are loaded: a worker's cache figures from the start, so the
        first scrape counts its stored bases too."""
        if self.after_request is not None:
            self.after_request()

    def worker_stopped(self) -> None:
        """A worker's live figures (in progress, cache size) leave the sums when it stops."""
        if self.multiprocess:
            from prometheus_client import multiprocess

            multiprocess.mark_process_dead(os.getpid())


class _CacheFigures:
    """The basis cache's figures as metrics of the multiprocess mode, written by each worker
    when they change: one comparison per request otherwise."""

    def __init__(self, catalogue: Catalogue, registry: CollectorRegistry):
        self.catalogue = catalogue
        self.hits = Counter("lifetime_basis_cache_hits", _HELP["lifetime_basis_cache_hits"], registry=registry)
        self.misses = Counter("lifetime_basis_cache_misses", _HELP["lifetime_basis_cache_misses"], registry=registry)
        self.size = Gauge("lifetime_basis_cache_size", _HELP["lifetime_basis_cache_size"], registry=registry,
                          multiprocess_mode="livesum")
        self.bytes = Gauge("lifetime_basis_cache_bytes", _HELP["lifetime_basis_cache_bytes"], registry=registry,
                           multiprocess_mode="livesum")
        self.capacity = Gauge("lifetime_basis_cache_capacity", _HELP["lifetime_basis_cache_capacity"],
                              registry=registry, multiprocess_mode="livesum")
        self.stored = Gauge("lifetime_stored_bases", _HELP["lifetime_stored_bases"], registry=registry,
                            multiprocess_mode="max")
        self.written: tuple[Any, ...] = ()
        self.counted = (0, 0)

    def write_if_changed(self) -> None:
        catalogue = self.catalogue
        cache = catalogue.cache
        now = (cache.hits, cache.misses, len(cache), cache.bytes, catalogue.ready)
        if now == self.written:
            return
        hits, misses = now[0], now[1]
        self.hits.inc(hits - self.counted[0])
        self.misses.inc(misses - self.counted[1])
        self.counted = (hits, misses)
        self.size.set(now[2])
        self.bytes.set(now[3])
        self.capacity.set(cache.capacity)
        self.stored.set(len(catalogue.stored()) if catalogue.ready else 0)
        self.written = now


_HELP = {
    "lifetime_basis_cache_hits": "Inline bases answered without compiling (from the cache or a stored basis).",
    "lifetime_basis_cache_misses": "Inline bases that had to be compiled.",
    "lifetime_basis_cache_size": "Compiled inline bases kept.",
    "lifetime_basis_cache_bytes": "Memory taken by the compiled inline bases kept.",
    "lifetime_basis_cache_capacity": "Most compiled inline bases kept.",
    "lifetime_stored_bases": "Stored bases loaded and compiled (always kept).",
}


class _CatalogueCollector(Collector):
    def __init__(self, catalogue: Catalogue):
        self.catalogue = catalogue

    def collect(self):
        cache = self.catalogue.cache
        stored = len(self.catalogue.stored()) if self.catalogue.ready else 0
        for name, family, value in (
            ("lifetime_basis_cache_hits", CounterMetricFamily, cache.hits),
            ("lifetime_basis_cache_misses", CounterMetricFamily, cache.misses),
            ("lifetime_basis_cache_size", GaugeMetricFamily, len(cache)),
            ("lifetime_basis_cache_bytes", GaugeMetricFamily, cache.bytes),
            ("lifetime_basis_cache_capacity", GaugeMetricFamily, cache.capacity),
            ("lifetime_stored_bases", GaugeMetricFamily, stored),
        ):
            metric = family(name, _HELP[name])
            metric.add_metric([], value)
            yield metric


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


#: the fields of every access-log record that do not change between requests (where it is
#: written from, the process and thread), taken from one record made the standard way
_ACCESS_TEMPLATE = logging.LogRecord(
    access_log.name, logging.INFO, __file__, 0, "", (), None, "observe"
).__dict__.copy()


def access_record(line: str) -> logging.LogRecord:
    """The access-log record of one request, its message ``line``.

    The same record the logging module makes (every attribute a formatter or handler may
    read), without finding the constant fields again for each request: the standard
    ``LogRecord`` looks up the caller, the thread and the process every time, which made this
    line cost more than the rest of the request's bookkeeping together.
    """
    record = _new_record(logging.LogRecord)
    fields = record.__dict__
    fields.update(_ACCESS_TEMPLATE)
    created = time.time()
    fields["msg"] = line
    fields["created"] = created
    fields["msecs"] = int((created - int(created)) * 1000) + 0.0
    fields["relativeCreated"] = _ACCESS_TEMPLATE["relativeCreated"] + 1000.0 * (
        created - _ACCESS_TEMPLATE["created"]
    )
    return record


_new_record = object.__new__


def observe(app: ASGIApp, metrics: Metrics) -> ASGIApp:
    """Wrap ``app`` with request ids, security headers, metrics and one access-log line.

    Everything that does not change between requests (the encoder, the metrics' labelled
    children for each route, method and status, the bound methods) is found once here, so a
    request pays only for its own values.
    """
    encode = msgspec.json.Encoder().encode
    clock = time.perf_counter
    logs = access_log.isEnabledFor
    handle = access_log.handle
    in_progress = metrics.in_progress
    after_request = metrics.after_request
    # the labelled children of the two metrics, found once per (route, method, status)
    children: dict[tuple[str, str, int], tuple[Any, Any]] = {}

    def metric_children(route: str, method: str, status: int) -> tuple[Any, Any]:
        key = (route, method, status)
        found = children.get(key)
        if found is None:
            labels = (route, method, str(status))
            found = (metrics.requests.labels(*labels).inc,
                     metrics.latency.labels(*labels).observe)
            if len(children) < 10_000:  # routes are templates, so this stays small
                children[key] = found
        return found

    async def observed(scope: Scope, receive: Any, send: Any) -> None:
        if scope["type"] != "http":
            await app(scope, receive, send)
            return
        started = clock()
        request_id = request_id_from(scope.get("headers", ()))
        state = scope.get("state")
        if state is None:
            state = scope["state"] = {}
        state["request_id"] = request_id
        status = 500

        async def send_with_headers(message: Any) -> None:
            nonlocal status
            if message["type"] == "http.response.start":
                status = message["status"]
                headers = security_headers(message.get("headers", ()), status, scope["path"])
                headers.append((REQUEST_ID_HEADER, request_id.encode("ascii")))
                calculation = state.get("calculation_fingerprint")
                if calculation:
                    headers.append((CALCULATION_HEADER, calculation.encode("ascii")))
                message = {**message, "headers": headers}
            await send(message)

        in_progress.inc()
        try:
            await app(scope, receive, send_with_headers)
        finally:
            in_progress.dec()
            elapsed = clock() - started
            route = scope.get("path_template") or "unmatched"
            method = scope.get("method", "")
            count, latency = metric_children(route, method, status)
            count()
            latency(elapsed)
            if after_request is not None:
                after_request()
            if logs(logging.INFO):
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
                handle(access_record(encode(record).decode()))

    return observed


class JsonLineFormatter(logging.Formatter):
    """One JSON object per line: time, level, logger and the message (merged when it is JSON).

    An access-log message is a JSON object the service wrote itself (``observe``): its fields
    follow the time, level and logger as they are, without decoding it again. The time's
    seconds are formatted once per second.
    """

    _encode = staticmethod(msgspec.json.Encoder().encode)

    def __init__(self) -> None:
        super().__init__()
        self._second = -1
        self._second_text = ""

    def _time(self, created: float) -> str:
        second = int(created)
        if second != self._second:
            self._second_text = time.strftime("%Y-%m-%dT%H:%M:%S", time.gmtime(second))
            self._second = second
        return f"{self._second_text}.{int((created - second) * 1000):03d}Z"

    def format(self, record: logging.LogRecord) -> str:
        message = record.getMessage()
        if (
            record.name == access_log.name
            and not record.exc_info
            and message.startswith("{")
            and message.endswith("}")
            and len(message) > 2
        ):
            return (
                f'{{"time":"{self._time(record.created)}",'
                f'"level":"{record.levelname.lower()}","logger":"{record.name}",{message[1:]}'
            )
        line: dict[str, Any] = {
            "time": self._time(record.created),
            "level": record.levelname.lower(),
            "logger": record.name,
        }
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
    """JSON lines on standard error for the service's and the server's loggers.
    """
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

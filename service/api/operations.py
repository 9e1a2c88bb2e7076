"""Operations: GET /health, GET /ready, GET /metrics, and GET /problems/{kind}."""

from __future__ import annotations

from typing import Any

import msgspec
from litestar import Response, get
from litestar.params import FromPath
from prometheus_client import CONTENT_TYPE_LATEST, generate_latest

from service.bases.catalogue import Catalogue

from . import schemas as s
from .calculations import _error_response
from .observability import Metrics
from .problems import PROBLEM_KINDS, Problem

OPERATIONS_TAG = "operations"


class ProblemKind(msgspec.Struct, frozen=True):
    """What an error ``type`` means."""

    type: str
    status: int
    title: str
    explanation: str


def operations_handlers(catalogue: Catalogue, metrics: Metrics) -> list[Any]:
    common: dict[str, Any] = {"sync_to_thread": False, "tags": [OPERATIONS_TAG]}

    @get("/health", operation_id="health", summary="Whether the process runs", **common)
    def health() -> s.HealthResponse:
        """200 while the process runs."""
        return s.HealthResponse(status="ok")

    @get(
        "/ready",
        operation_id="ready",
        summary="Whether every stored basis is loaded and compiled",
        responses={503: _error_response("The stored bases are still loading.")},
        **common,
    )
    def ready() -> s.ReadyResponse:
        """200 once every stored basis is loaded and compiled, 503 before."""
        if not catalogue.ready:
            raise Problem("not-ready", "the service is still loading its stored bases")
        return s.ReadyResponse(status="ready", stored_bases=len(catalogue.stored()))

    @get("/metrics", operation_id="metrics", summary="Prometheus metrics", media_type=CONTENT_TYPE_LATEST, **common)
    def prometheus_metrics() -> Response[bytes]:
        """Request counts and latencies by route and status; basis-cache hits, misses, size.
        With several workers, the figures of the whole service, whichever worker answers."""
        return Response(generate_latest(metrics.exposed), media_type=CONTENT_TYPE_LATEST)

    @get(
        "/problems/{kind:str}",
        operation_id="problemType",
        summary="What an error type means",
        responses={404: _error_response("No such error type.")},
        **common,
    )
    def problem_kind(kind: FromPath[str]) -> ProblemKind:
        """The explanation behind an error answer's `type` (`/problems/<kind>`)."""
        known = PROBLEM_KINDS.get(kind)
        if known is None:
            raise Problem("not-found", f"no error type {kind!r}")
        status, title, explanation = known
        return ProblemKind(type=f"/problems/{kind}", status=status, title=title, explanation=explanation)

    return [health, ready, prometheus_metrics, problem_kind]

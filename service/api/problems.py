"""Errors as problem details (RFC 9457): the one place that picks status codes.

Every error answer is ``application/problem+json`` with ``type``, ``title``, ``status``,
``detail`` and, for bad input, ``errors``: ``[{"field": "$.basis.c", "message": "..."}]``.
``type`` is a relative URI, ``/problems/<kind>``; ``GET /problems/<kind>`` explains it.
"""

from __future__ import annotations

import logging
from typing import Any

import msgspec
from litestar import Request, Response
from litestar.exceptions import HTTPException
from litestar.plugins.problem_details import ProblemDetailsException

from service.bases.catalogue import (
    CatalogueNotReadyError,
    UnknownBasisError,
    UnknownBasisVersionError,
)
from service.bases.validation import field_error, outside_domain
from service.core.errors import DomainError

PROBLEM_MEDIA_TYPE = "application/problem+json"

log = logging.getLogger("service.errors")

#: kind -> (status, title, explanation)
PROBLEM_KINDS: dict[str, tuple[int, str, str]] = {
    "invalid-json": (400, "Body is not JSON", "The request body could not be read as JSON."),
    "invalid-request": (
        400,
        "Request does not fit the schema",
        "A field is missing, has the wrong type, or is not a field of this request. Each "
        "entry of `errors` names one. (A value of the right type outside its documented "
        "bounds is an outside-domain problem, 422.)",
    ),
    "unauthorized": (
        401,
        "Authentication required",
        "This service requires the header Authorization: Bearer <token> on every request but "
        "GET /health and GET /ready.",
    ),
    "not-found": (404, "Not found", "There is nothing at this path."),
    "unknown-basis": (
        404,
        "Unknown stored basis",
        "No stored basis has this id. GET /v1/bases lists them.",
    ),
    "unknown-basis-version": (
        404,
        "Unknown version of a stored basis",
        "None of the versions of this stored basis has this fingerprint. "
        "GET /v1/bases/{id}/versions lists them.",
    ),
    "method-not-allowed": (
        405,
        "Method not allowed",
        "This path does not answer this HTTP method.",
    ),
    "not-acceptable": (
        406,
        "Not acceptable",
        "The Accept header rules out every media type this resource answers with. Each "
        "resource lists its media types in the OpenAPI document.",
    ),
    "invalid-http": (
        400,
        "Not an HTTP request",
        "The server could not read the request as HTTP/1.1 (a malformed request line or "
        "header); it closes the connection after this answer.",
    ),
    "invalid-header": (
        400,
        "Header not valid",
        "A request header does not have the syntax HTTP gives it (RFC 9110); the detail "
        "names the header and what is wrong.",
    ),
    "request-timeout": (
        408,
        "Request not received in time",
        "The request did not arrive in full within the request_timeout setting; the "
        "connection was closed.",
    ),
    "body-too-large": (
        413,
        "Body too large",
        "The request body is larger than the service accepts (the max_body_bytes setting).",
    ),
    "headers-too-large": (
        431,
        "Request headers too large",
        "The request line and headers are larger than the max_header_bytes setting.",
    ),
    "unsupported-media-type": (
        415,
        "Body must be JSON",
        "Calculation requests take a body of Content-Type application/json.",
    ),
    "outside-domain": (
        422,
        "Outside the domain",
        "The request is well formed but impossible: a parameter outside its domain or its "
        "documented bounds, an age at or past the basis's limiting age, a table that does not "
        "close, or more lives or durations than the service takes in one request.",
    ),
    "not-ready": (
        503,
        "Not ready",
        "The service is still loading its stored bases; try again shortly.",
    ),
    "internal-error": (
        500,
        "Internal error",
        "The service failed to answer. The request id in X-Request-ID identifies it in the "
        "service's logs.",
    ),
    "http-error": (400, "Request not accepted", "The request could not be handled."),
}


class Problem(ProblemDetailsException):
    """An error answer of one of the ``PROBLEM_KINDS``."""

    def __init__(
        self,
        kind: str,
        detail: str,
        errors: list[tuple[str, str]] | None = None,
        status: int | None = None,
        headers: dict[str, str] | None = None,
    ):
        default_status, title, _ = PROBLEM_KINDS[kind]
        extra = (
            {"errors": [{"field": f, "message": m} for f, m in errors]} if errors else None
        )
        super().__init__(
            detail=detail,
            status_code=status or default_status,
            headers=headers,
            extra=extra,
            type_=f"/problems/{kind}",
            title=title,
        )


def bad_field(field: str, message: str, detail: str | None = None) -> Problem:
    """A 422 for one field (a JSON path from ``$``)."""
    return Problem("outside-domain", detail or f"{field}: {message}", [(field, message)])


def domain_problem(error: DomainError, prefix: str = "") -> Problem:
    """A core ``DomainError`` as a 422; ``prefix`` places its field (e.g. ``basis``)."""
    field = error.within(prefix).field if prefix else error.field
    path = "$." + field if field and not field.startswith("[") else "$" + field
    return bad_field(path, error.message, error.message)


# ---- msgspec decoding errors -> 400 ----------------------------------------------------------

def from_validation_error(exc: msgspec.ValidationError) -> Problem:
    """400 for a body that does not fit the schema; 422 for a value outside its bounds."""
    text = str(exc)
    field, message = field_error(text)
    kind = "outside-domain" if outside_domain(text) else "invalid-request"
    return Problem(kind, f"{field}: {message}", [(field, message)])


def from_decode_error(exc: msgspec.DecodeError) -> Problem:
    text = str(exc)
    if text == "Input data was truncated":
        text = "the body is empty or ends early"
    return Problem("invalid-json", f"the body is not valid JSON: {text}", [("$", text)])


# ---- rendering and exception handlers -------------------------------------------------------


def problem_body(problem: ProblemDetailsException) -> dict[str, Any]:
    """The problem+json fields of an error."""
    body: dict[str, Any] = {
        "type": problem.type_ or "/problems/http-error",
        "title": problem.title or "Error",
        "status": problem.status_code,
        "detail": problem.detail or problem.title or "",
    }
    extra = problem.extra
    if isinstance(extra, dict) and extra.get("errors"):
        body["errors"] = extra["errors"]
    return body


def render(problem: ProblemDetailsException) -> Response[Any]:
    body = problem_body(problem)
    headers = dict(problem.headers or {})
    headers["Cache-Control"] = "no-store"
    return Response(
        body, status_code=problem.status_code, media_type=PROBLEM_MEDIA_TYPE, headers=headers
    )


def handle_problem(request: Request, exc: ProblemDetailsException) -> Response[Any]:
    return render(exc)


def handle_http_exception(request: Request, exc: HTTPException) -> Response[Any]:
    """Litestar's own HTTP errors (unknown path, wrong method, …) as problems."""
    status = exc.status_code
    headers = dict(exc.headers or {})
    if status == 404:
        problem = Problem("not-found", f"nothing at {request.url.path}", headers=headers)
    elif status == 405:
        problem = Problem(
            "method-not-allowed",
            f"{request.method} is not allowed at {request.url.path}",
            headers=headers,
        )
    elif status == 406:
        problem = Problem("not-acceptable", str(exc.detail), headers=headers)
    elif status == 413:
        problem = Problem("body-too-large", "the request body is too large", headers=headers)
    elif status == 415:
        problem = Problem("unsupported-media-type", str(exc.detail), headers=headers)
    elif status >= 500:
        return handle_unexpected(request, exc)
    else:
        problem = Problem("http-error", str(exc.detail), status=status, headers=headers)
    return render(problem)


def handle_domain_error(request: Request, exc: DomainError) -> Response[Any]:
    return render(domain_problem(exc))


def handle_unknown_basis(request: Request, exc: UnknownBasisError) -> Response[Any]:
    return render(
        Problem(
            "unknown-basis",
            f"no stored basis has the id {exc.basis_id!r}; GET /v1/bases lists them",
            [("$.basis", f"unknown stored basis id {exc.basis_id!r}")]
            if request.method == "POST"
            else None,
        )
    )


def handle_unknown_version(request: Request, exc: UnknownBasisVersionError) -> Response[Any]:
    return render(
        Problem(
            "unknown-basis-version",
            f"no version of the stored basis {exc.basis_id!r} has the fingerprint "
            f"{exc.fingerprint!r}; GET /v1/bases/{exc.basis_id}/versions lists them",
        )
    )


def handle_not_ready(request: Request, exc: CatalogueNotReadyError) -> Response[Any]:
    return render(Problem("not-ready", "the service is still loading its stored bases"))


class ClientDisconnected(Exception):
    """The client went away before sending the whole body: nobody is left to answer."""

    def __init__(self, received: int):
        super().__init__(f"client disconnected after {received} bytes of the body")
        self.received = received


#: the status recorded (in metrics and the access log) for a request whose client left before
#: it was read; no answer is sent, as there is no one to receive it (nginx's convention)
CLIENT_CLOSED_REQUEST = 499


def _log_request(request: Request, level: int, what: str, **extra: Any) -> str:
    """One log line about a request (method, path, request id); the request id."""
    request_id = request.scope.get("state", {}).get("request_id", "")
    log.log(level, "%s %s %s (request id %s)", what, request.method, request.url.path,
            request_id, **extra)
    return request_id


def handle_client_disconnected(request: Request, exc: ClientDisconnected) -> Response[Any]:
    """Not an error of the service: an info line, and a 499 in metrics and the access log."""
    _log_request(request, logging.INFO, f"{exc}: client disconnected during")
    return Response(b"", status_code=CLIENT_CLOSED_REQUEST, media_type="text/plain")


def handle_unexpected(request: Request, exc: Exception) -> Response[Any]:
    """Anything else: a 500 that says nothing of the internals; the log has the details."""
    request_id = _log_request(request, logging.ERROR, "unexpected error answering", exc_info=exc)
    return render(
        Problem(
            "internal-error",
            f"the service failed to answer this request (request id {request_id})",
        )
    )


EXCEPTION_HANDLERS = {
    ProblemDetailsException: handle_problem,
    HTTPException: handle_http_exception,
    DomainError: handle_domain_error,
    UnknownBasisError: handle_unknown_basis,
    UnknownBasisVersionError: handle_unknown_version,
    CatalogueNotReadyError: handle_not_ready,
    ClientDisconnected: handle_client_disconnected,
    Exception: handle_unexpected,
}

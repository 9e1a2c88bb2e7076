"""Security around every request: bearer-token authentication, response headers and CORS.

* Authentication is optional (the ``auth_token`` setting; off by default for local use). When
  it is on, every request must carry ``Authorization: Bearer <token>``; the token is compared
  in constant time (``hmac.compare_digest``). Exempt are ``GET /health`` and ``GET /ready``
  (an orchestrator probes them without credentials, and they tell nothing about the data),
  ``/problems/<kind>`` (the explanations that error answers link to, the 401 answer included)
  and CORS preflight requests (``OPTIONS``, which browsers send without credentials and which
  never reach a handler). ``/metrics`` needs the token: request counts, latencies and cache
  figures describe the traffic of the service's clients, and Prometheus sends a bearer token
  with ``authorization`` in its scrape configuration. The OpenAPI document and its page need
  it too: the contract is published with the project, and a protected service should not
  describe its attack surface to whoever asks.
* Headers: every answer, errors included, carries ``X-Content-Type-Options: nosniff``,
  ``Referrer-Policy: no-referrer``, ``X-Frame-Options: DENY`` and
  ``Cross-Origin-Resource-Policy: same-origin``; JSON and other non-HTML answers carry
  ``Content-Security-Policy: default-src 'none'; frame-ancestors 'none'``; the HTML page of the
  OpenAPI document keeps what it needs to load its scripts. Error answers carry
  ``Cache-Control: no-store``. ``observability.observe`` adds them, so they are on answers that
  never reach litestar (a 401 from here, say).
* CORS is off unless ``cors_origins`` names origins; litestar's CORS support then answers
  preflight requests and adds the allow headers for those origins only.
"""

from __future__ import annotations

import hmac
from collections.abc import Awaitable, Callable, Iterable, MutableMapping
from typing import Any

import msgspec
from litestar import Litestar
from litestar.config.cors import CORSConfig
from litestar.openapi.spec import (
    Components,
    OpenAPIMediaType,
    OpenAPIResponse,
    Reference,
    SecurityScheme,
)

from .problems import PROBLEM_MEDIA_TYPE

Scope = MutableMapping[str, Any]
ASGIApp = Callable[[Scope, Any, Any], Awaitable[None]]

#: paths answered without a token when authentication is on
EXEMPT_PATHS = frozenset({"/health", "/ready"})
EXEMPT_PREFIXES = ("/problems/",)

#: the OpenAPI document's interactive page (HTML that loads scripts and styles)
DOCS_PAGE_PREFIX = "/schema"

JSON_CSP = b"default-src 'none'; frame-ancestors 'none'"
#: the docs page loads everything from the service itself (docs.py), nothing from elsewhere
DOCS_CSP = (
    b"default-src 'none'; script-src 'self' 'unsafe-inline'; style-src 'self' 'unsafe-inline'; "
    b"img-src 'self' data:; connect-src 'self'; frame-ancestors 'none'"
)

_COMMON_HEADERS: tuple[tuple[bytes, bytes], ...] = (
    (b"x-content-type-options", b"nosniff"),
    (b"referrer-policy", b"no-referrer"),
    (b"x-frame-options", b"DENY"),
    (b"cross-origin-resource-policy", b"same-origin"),
)
_SET_BY_US = frozenset(
    name for name, _ in _COMMON_HEADERS
) | {b"content-security-policy"}


#: what every answer gains at its end: the common headers and the JSON answer's policy, or
#: the docs page's
_JSON_TAIL = (*_COMMON_HEADERS, (b"content-security-policy", JSON_CSP))
_DOCS_TAIL = (*_COMMON_HEADERS, (b"content-security-policy", DOCS_CSP))
_NO_STORE = (b"cache-control", b"no-store")


def security_headers(
    headers: Iterable[tuple[bytes, bytes]], status: int, path: str
) -> list[tuple[bytes, bytes]]:
    """``headers`` of an answer with the security headers set (replacing any of the same name).

    Errors get ``Cache-Control: no-store`` in place of any caching header. One pass over the
    answer's headers; what is added is built once, at import.
    """
    out = []
    is_html = False
    error = status >= 400
    for name, value in headers:
        lower = name.lower()
        if lower == b"content-type":
            is_html = value[:9].lower() == b"text/html"
        elif lower in _SET_BY_US or (error and lower == b"cache-control"):
            continue
        out.append((name, value))
    out.extend(_DOCS_TAIL if is_html and path.startswith(DOCS_PAGE_PREFIX) else _JSON_TAIL)
    if error:
        out.append(_NO_STORE)
    return out


def is_exempt(method: str, path: str) -> bool:
    """Whether a request is answered without a token."""
    if method == "OPTIONS":
        return True
    return path in EXEMPT_PATHS or path.startswith(EXEMPT_PREFIXES)


def _bearer_token(headers: list[tuple[bytes, bytes]]) -> bytes | None:
    for name, value in headers:
        if name.lower() == b"authorization":
            scheme, _, credentials = value.strip().partition(b" ")
            if scheme.lower() != b"bearer":
                return None
            return credentials.strip()
    return None


_encode = msgspec.json.Encoder().encode


async def _unauthorized(send: Any, detail: str, error: str) -> None:
    body = _encode(
        {
            "type": "/problems/unauthorized",
            "title": "Authentication required",
            "status": 401,
            "detail": detail,
        }
    )
    challenge = b'Bearer realm="lifetime-service"'
    if error:
        challenge += b', error="' + error.encode("ascii") + b'"'
    await send(
        {
            "type": "http.response.start",
            "status": 401,
            "headers": [
                (b"content-type", PROBLEM_MEDIA_TYPE.encode("ascii")),
                (b"content-length", str(len(body)).encode("ascii")),
                (b"www-authenticate", challenge),
            ],
        }
    )
    await send({"type": "http.response.body", "body": body})


def require_token(app: ASGIApp, token: str | None) -> ASGIApp:
    """``app`` behind bearer-token authentication; ``app`` itself when ``token`` is None."""
    if token is None:
        return app
    expected = token.encode("ascii")

    async def authenticated(scope: Scope, receive: Any, send: Any) -> None:
        if scope["type"] != "http" or is_exempt(scope.get("method", ""), scope.get("path", "")):
            await app(scope, receive, send)
            return
        given = _bearer_token(scope.get("headers", []))
        if given is None:
            await _unauthorized(
                send, "this service requires the header Authorization: Bearer <token>", ""
            )
            return
        # compare_digest takes the same time whatever the position of the first difference
        if not hmac.compare_digest(given, expected):
            await _unauthorized(send, "the bearer token is not valid", "invalid_token")
            return
        await app(scope, receive, send)

    return authenticated


def cors_config(origins: str) -> CORSConfig | None:
    """Litestar's CORS configuration for comma-separated ``origins``; None (off) when empty."""
    allowed = [o.strip() for o in origins.split(",") if o.strip()]
    if not allowed:
        return None
    return CORSConfig(
        allow_origins=allowed,
        allow_methods=["GET", "POST", "OPTIONS"],
        allow_headers=["Authorization", "Content-Type", "Accept", "If-None-Match", "X-Request-ID"],
        expose_headers=[
            "ETag", "X-Request-ID", "X-Basis-Fingerprint", "X-Calculation-Fingerprint",
            "WWW-Authenticate",
        ],
        allow_credentials=False,
        max_age=600,
    )


def document_authentication(app: Litestar) -> None:
    """When a token is required: the bearer scheme, and a 401 answer on each operation that
    needs it, in the application's OpenAPI document."""
    document = app.openapi_schema
    components = document.components or Components()
    schemes = dict(components.security_schemes or {})
    schemes["bearer"] = SecurityScheme(
        type="http", scheme="bearer", description="the service's auth_token setting"
    )
    components.security_schemes = schemes
    document.components = components
    for path, item in (document.paths or {}).items():
        for method in ("get", "post"):
            operation = getattr(item, method, None)
            if operation is None or is_exempt(method.upper(), path):
                continue
            operation.security = [{"bearer": []}]
            responses = dict(operation.responses or {})
            responses["401"] = OpenAPIResponse(
                description="No bearer token, or not the right one (problem+json, with "
                "WWW-Authenticate: Bearer)",
                content={
                    PROBLEM_MEDIA_TYPE: OpenAPIMediaType(
                        schema=Reference(ref="#/components/schemas/ProblemDocument")
                    )
                },
            )
            operation.responses = responses

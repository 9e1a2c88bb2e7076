"""HTTP conventions for every resource: content negotiation, HEAD, and errors as problems.

* **Accept** (RFC 9110, section 12.5.1) is parsed here, not by litestar: a media range is
  ``type/subtype`` (or ``type/*``, ``*/*``) with parameters, and its weight ``q`` is a number
  from 0 to 1 with at most three decimals (section 12.4.2). ``q=0`` means "not acceptable".
  Each type a resource serves takes the weight of the most specific range that matches it
  (``text/csv;charset=utf-8`` over ``text/csv`` over ``text/*`` over ``*/*``); the served type
  of highest weight wins, ties going to the resource's first (its default). A header that is
  not a list of media ranges (``q=inf``, ``q=1e400``, ``q=-1``, ``text``) is a 400 that says
  what is wrong, and a header that rules out every type the resource serves is a 406. A
  request without Accept (or with an empty one) takes the default. Error answers are
  ``application/problem+json`` whatever Accept says, as RFC 9110 allows.
* **Which types a resource serves** comes from its handler: ``opt["produces"]`` when it serves
  several (every calculation: JSON and CSV), else its ``media_type``; ``opt["negotiate"]``
  False leaves a handler out (the docs page's static files). ``negotiate`` runs before
  every handler (a litestar ``before_request`` hook) and leaves the choice in the request's
  state under ``"media_type"``.
* **HEAD** on a resource that answers GET is answered as GET without the body (RFC 9110,
  section 9.3.2): same status and headers, ``Content-Length`` included.
* **Errors**: any error status that would leave the application in another form than
  problem+json (the OpenAPI router's HTML page for an unknown ``/schema/...`` path, say) is
  replaced by the problem of that status; a 405's ``Allow`` gains ``HEAD`` beside ``GET``.
"""

from __future__ import annotations

import re
from collections.abc import Sequence
from typing import Any

import msgspec
from litestar import Request
from litestar._openapi.plugin import handle_schema_path_not_found as _SCHEMA_NOT_FOUND

from .problems import PROBLEM_MEDIA_TYPE, Problem, problem_body

_TOKEN = r"[!#$%&'*+.^_`|~0-9A-Za-z-]+"
_QUOTED = r'"(?:[^"\\]|\\.)*"'
_RANGE = re.compile(rf"^({_TOKEN})/({_TOKEN})$")
_PARAMETER = re.compile(rf"^({_TOKEN})=({_TOKEN}|{_QUOTED})$")
_QVALUE = re.compile(r"^(?:0(?:\.[0-9]{0,3})?|1(?:\.0{0,3})?)$")

MediaRange = tuple[str, str, tuple[tuple[str, str], ...], float]


class AcceptError(ValueError):
    """An Accept header that is not a list of media ranges; the message says why."""


def _split(text: str, separator: str) -> list[str]:
    """``text`` split at ``separator`` outside quoted strings."""
    parts, current, quoted, escaped = [], [], False, False
    for char in text:
        if escaped:
            escaped = False
        elif char == "\\" and quoted:
            escaped = True
        elif char == '"':
            quoted = not quoted
        elif char == separator and not quoted:
            parts.append("".join(current))
            current = []
            continue
        current.append(char)
    parts.append("".join(current))
    return parts


def parse_accept(header: str) -> list[MediaRange]:
    """The media ranges of an Accept header: (type, subtype, parameters, weight), lower-case
    names; raises ``AcceptError``."""
    ranges: list[MediaRange] = []
    for element in _split(header, ","):
        element = element.strip()
        if not element:  # the list syntax allows empty elements
            continue
        pieces = [p.strip() for p in _split(element, ";")]
        match = _RANGE.match(pieces[0])
        if not match:
            raise AcceptError(f"{pieces[0]!r} is not a media range (type/subtype, type/* or */*)")
        kind, subtype = match.group(1).lower(), match.group(2).lower()
        if kind == "*" and subtype != "*":
            raise AcceptError(f"{pieces[0]!r} is not a media range: */{subtype} is not allowed")
        parameters: list[tuple[str, str]] = []
        weight = 1.0
        for piece in pieces[1:]:
            if not piece:  # parameters = *( OWS ";" OWS [ parameter ] ): each one is optional
                continue
            found = _PARAMETER.match(piece)
            if not found:
                raise AcceptError(f"{piece!r} in {element!r} is not a parameter (name=value)")
            name, value = found.group(1).lower(), found.group(2)
            if name == "q":
                if not _QVALUE.match(value):
                    raise AcceptError(
                        f"q={value} in {element!r}: a weight must be a number from 0 to 1 with "
                        "at most three decimals (RFC 9110, section 12.4.2)"
                    )
                weight = float(value)
                break  # what follows the weight is not a media-type parameter
            parameters.append((name, value.strip('"').lower()))
        ranges.append((kind, subtype, tuple(parameters), weight))
    return ranges


def _weight(ranges: list[MediaRange], offered: str) -> float:
    """The weight of one served type: that of the most specific range matching it."""
    media_type, _, rest = offered.partition(";")
    kind, _, subtype = media_type.strip().lower().partition("/")
    served_parameters = {}
    for piece in rest.split(";"):
        name, _, value = piece.partition("=")
        if name.strip():
            served_parameters[name.strip().lower()] = value.strip().lower()
    if kind == "text":
        served_parameters.setdefault("charset", "utf-8")
    best, best_specificity = 0.0, -1
    for r_kind, r_subtype, parameters, weight in ranges:
        if r_kind != "*" and (r_kind != kind or (r_subtype != "*" and r_subtype != subtype)):
            continue
        if any(served_parameters.get(name) != value for name, value in parameters):
            continue
        specificity = (r_kind != "*") * 2 + (r_subtype != "*") + len(parameters) * 4
        if specificity > best_specificity:
            best, best_specificity = weight, specificity
    return best


def choose(header: str | None, offered: Sequence[str]) -> str | None:
    """The served type to answer with (``offered[0]`` without Accept), or None when the
    header rules out every one; raises ``AcceptError``."""
    if header is None or not header.strip():
        return offered[0]
    ranges = parse_accept(header)
    if not ranges:
        return offered[0]
    best, best_weight = None, 0.0
    for candidate in offered:
        weight = _weight(ranges, candidate)
        if weight > best_weight:
            best, best_weight = candidate, weight
    return best


def served_types(handler: Any) -> list[str]:
    """The media types a route handler answers with, its default first."""
    produces = (handler.opt or {}).get("produces")
    if produces:
        return list(produces)
    # a handler that returns a Response of its own has no media type: JSON, as every such
    # handler here answers
    media_type = str(getattr(handler.media_type, "value", handler.media_type) or "application/json")
    if media_type.split(";")[0].endswith("+json"):
        # a +json type is JSON (RFC 6839): a client asking for application/json reads it
        return [media_type, "application/json"]
    return [media_type]


async def negotiate(request: Request[Any, Any, Any]) -> None:
    """Before every handler: pick the answer's media type from Accept (400, 406)."""
    header = ", ".join(
        v.decode("latin-1") for k, v in request.scope["headers"] if k == b"accept"
    ) or None
    handler = request.route_handler
    if (handler.opt or {}).get("negotiate") is False or handler.fn is _SCHEMA_NOT_FOUND:
        return  # a 404 for an unknown /schema/... path is a 404 whatever Accept says
    offered = served_types(request.route_handler)
    try:
        chosen = choose(header, offered)
    except AcceptError as exc:
        raise Problem("invalid-header", f"Accept: {exc}") from None
    if chosen is None:
        raise Problem(
            "not-acceptable",
            f"{request.url.path} answers {' or '.join(t.split(';')[0] for t in offered)}, and "
            f"the Accept header ({header}) rules out every one",
        )
    request.scope["state"]["media_type"] = chosen


def chosen_media_type(request: Request[Any, Any, Any]) -> str:
    """The media type ``negotiate`` chose for this request."""
    return request.scope["state"].get("media_type") or served_types(request.route_handler)[0]


# ---- ASGI wrappers ---------------------------------------------------------------------------

_KIND_BY_STATUS = {404: "not-found", 405: "method-not-allowed", 406: "not-acceptable"}


def head_as_get(app: Any) -> Any:
    """HEAD answered as GET, without the body."""

    async def wrapped(scope: Any, receive: Any, send: Any) -> None:
        if scope["type"] != "http" or scope.get("method") != "HEAD":
            await app(scope, receive, send)
            return

        async def send_without_body(message: Any) -> None:
            if message["type"] == "http.response.body":
                if message.get("more_body", False):
                    return
                message = {"type": "http.response.body", "body": b"", "more_body": False}
            await send(message)

        as_get = {**scope, "method": "GET"}
        try:
            await app(as_get, receive, send_without_body)
        finally:  # the route litestar matched, for the metrics and the access log
            if "path_template" in as_get:
                scope["path_template"] = as_get["path_template"]

    return wrapped


def errors_as_problems(app: Any) -> Any:
    """Every error answer of ``app`` as problem+json (see the module docstring)."""

    async def wrapped(scope: Any, receive: Any, send: Any) -> None:
        if scope["type"] != "http":
            await app(scope, receive, send)
            return
        replaced: list[bool] = [False]

        async def checked_send(message: Any) -> None:
            if message["type"] == "http.response.start":
                status = message["status"]
                headers = list(message.get("headers", []))
                content_type = next(
                    (v for k, v in headers if k.lower() == b"content-type"), b""
                )
                if status >= 400 and not content_type.startswith(PROBLEM_MEDIA_TYPE.encode()):
                    replaced[0] = True
                    await _send_problem(scope, send, status, headers)
                    return
                if status == 405:
                    message = {**message, "headers": _allow_head(headers)}
            elif replaced[0]:
                return  # the body of an answer already replaced
            await send(message)

        await app(scope, receive, checked_send)

    return wrapped


def _allow_head(headers: list[tuple[bytes, bytes]]) -> list[tuple[bytes, bytes]]:
    out = []
    for name, value in headers:
        if name.lower() == b"allow":
            methods = [m.strip() for m in value.split(b",")]
            if b"GET" in methods and b"HEAD" not in methods:
                methods.insert(methods.index(b"GET") + 1, b"HEAD")
            value = b", ".join(methods)
        out.append((name, value))
    return out


async def _send_problem(
    scope: Any, send: Any, status: int, headers: list[tuple[bytes, bytes]]
) -> None:
    path = scope.get("path", "")
    kind = _KIND_BY_STATUS.get(status, "http-error")
    detail = {
        404: f"nothing at {path}",
        405: f"{scope.get('method', '')} is not allowed at {path}",
    }.get(status, f"the request to {path} was not accepted")
    kept = [
        (k, v) for k, v in _allow_head(headers) if k.lower() in (b"allow", b"www-authenticate")
    ]
    body = msgspec.json.encode(problem_body(Problem(kind, detail, status=status)))
    await send(
        {
            "type": "http.response.start",
            "status": status,
            "headers": [
                (b"content-type", PROBLEM_MEDIA_TYPE.encode()),
                (b"content-length", str(len(body)).encode()),
                (b"cache-control", b"no-store"),
                *kept,
            ],
        }
    )
    await send({"type": "http.response.body", "body": body, "more_body": False})

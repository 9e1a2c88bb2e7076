"""Two HTTP rules applied to every answer of the application, as ASGI wrappers.

Hand-written because they cut across litestar's own handlers (the OpenAPI controller answers
an unknown ``/schema/...`` page with a 404 in HTML, and a GET route does not answer HEAD):

* ``head_as_get``: HEAD is answered as GET would be, headers and all, without the body
  (RFC 9110 §9.3.2);
* ``problems_only``: an error answer (status ≥ 400) that is not already
  ``application/problem+json`` is replaced by one, with the same status and headers other
  than the body's.
"""

from __future__ import annotations

from typing import Any

from .protocol import problem_bytes

ASGIApp = Any

_KIND_OF_STATUS = {404: "not-found", 405: "method-not-allowed", 413: "body-too-large",
                   415: "unsupported-media-type", 401: "unauthorized", 503: "not-ready"}
_BODY_HEADERS = (b"content-type", b"content-length", b"content-encoding", b"etag", b"cache-control")


def head_as_get(app: ASGIApp) -> ASGIApp:
    async def wrapped(scope: Any, receive: Any, send: Any) -> None:
        if scope.get("method") != "HEAD":
            await app(scope, receive, send)
            return

        async def send_without_body(message: Any) -> None:
            if message["type"] == "http.response.body":
                if message.get("more_body", False):
                    return
                message = {"type": "http.response.body", "body": b"", "more_body": False}
            await send(message)

        await app({**scope, "method": "GET"}, receive, send_without_body)

    return wrapped


def problems_only(app: ASGIApp) -> ASGIApp:
    async def wrapped(scope: Any, receive: Any, send: Any) -> None:
        replacing = [False]

        async def send_problems(message: Any) -> None:
            if message["type"] == "http.response.start":
                status = int(message["status"])
                headers = list(message.get("headers", []))
                media = next((v for k, v in headers if k.lower() == b"content-type"), b"")
                if status >= 400 and not media.startswith(b"application/problem+json"):
                    replacing[0] = True
                    kind = _KIND_OF_STATUS.get(status, "http-error")
                    path = scope.get("path", "")
                    detail = f"nothing at {path}" if status == 404 else f"status {status} at {path}"
                    body = problem_bytes(kind, detail, status)
                    kept = [(k, v) for k, v in headers if k.lower() not in _BODY_HEADERS]
                    kept += [
                        (b"content-type", b"application/problem+json"),
                        (b"content-length", str(len(body)).encode("ascii")),
                        (b"cache-control", b"no-store"),
                    ]
                    await send({**message, "headers": kept})
                    await send({"type": "http.response.body", "body": body, "more_body": False})
                    return
            elif replacing[0]:
                return  # the replaced answer's own body
            await send(message)

        await app(scope, receive, send_problems)

    return wrapped

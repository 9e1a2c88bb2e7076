"""The HTTP/1.1 connection protocols: uvicorn's httptools and h11 protocols with the service's
limits.

Hand-written because uvicorn lacks two limits a service facing untrusted clients needs, and
answers its own protocol errors as text/plain:

* ``max_header_bytes``: a request head (request line and headers) larger than this is
  answered 431 and the connection closed, while it arrives (the parser keeps at most this
  much, plus the last read);
* ``request_timeout``: a request whose head and body have not all arrived this many seconds
  after it began (or after the connection opened) is answered 408 and the connection closed;
  an application already reading its body sees the client as gone;
* every answer the protocol itself writes (400 ``invalid-http`` for a request it cannot read
  as HTTP/1.1, 408, 431) is ``application/problem+json`` with the security headers every
  other answer carries, so a client reads every error the same way.

The service ships the httptools parser (the ``http`` setting's default; llhttp, in C), which
serves about twice the requests per second of h11 (pure Python) on the same code; h11 stays
available with ``--http h11``. Both protocols share the timer and the answers
(:class:`_Limits`); each tells in its own terms whether a request is partly received
(``_request_state``) and measures its head.

uvicorn builds one protocol object per connection; the limits are class attributes set by
:func:`configure` before the server starts (in each worker process too, from the settings it
reads from the environment). Passing the class as uvicorn's ``http`` implementation also
fixes the implementation whatever optional packages are installed.
"""

from __future__ import annotations

import asyncio
from typing import Any, Literal

import h11
import msgspec
from uvicorn.protocols.http.h11_impl import H11Protocol

from .problems import PROBLEM_KINDS, PROBLEM_MEDIA_TYPE
from .security import security_headers

try:  # the server extra installs httptools; a checkout without it still runs on h11
    import httptools
    from uvicorn.protocols.http.httptools_impl import HttpToolsProtocol
except ImportError:  # pragma: no cover - httptools is a dependency of the server extra
    httptools = None
    HttpToolsProtocol = None

HttpImplementation = Literal["httptools", "h11"]

#: what a connection's current request is, as ``_request_state`` tells it
IDLE, PARTIAL, RECEIVED = "idle", "partial", "received"


def problem_bytes(kind: str, detail: str, status: int | None = None) -> bytes:
    """The problem+json body of one of the ``PROBLEM_KINDS`` (as ``problems.render`` writes)."""
    default_status, title, _ = PROBLEM_KINDS[kind]
    return msgspec.json.encode(
        {
            "type": f"/problems/{kind}",
            "title": title,
            "status": status or default_status,
            "detail": detail,
        }
    )


class _Limits:
    """The limits, the request timer and the protocol's own answers, for either parser.

    A subclass provides ``_request_state()``: ``IDLE`` (no byte of a request yet),
    ``PARTIAL`` (part of a request has arrived) or ``RECEIVED`` (the whole request has
    arrived and the application is answering it).
    """

    #: the largest request head, in bytes (the max_header_bytes setting)
    max_header_bytes = 16_384
    #: seconds a connection may take to deliver one whole request (the request_timeout setting)
    request_timeout = 10.0

    _request_timer: asyncio.TimerHandle | None = None
    loop: Any
    transport: Any
    cycle: Any

    def _request_state(self) -> str:  # pragma: no cover - every protocol below defines it
        raise NotImplementedError

    # ---- the request timer: from the first byte of a request (or the connection) to its end

    def connection_made(self, transport: Any) -> None:
        super().connection_made(transport)  # type: ignore[misc]
        self._start_request_timer()

    def connection_lost(self, exc: Exception | None) -> None:
        self._stop_request_timer()
        super().connection_lost(exc)  # type: ignore[misc]

    def _start_request_timer(self) -> None:
        self._stop_request_timer()
        self._request_timer = self.loop.call_later(self.request_timeout, self._request_timed_out)

    def _stop_request_timer(self) -> None:
        if self._request_timer is not None:
            self._request_timer.cancel()
            self._request_timer = None

    def _request_timed_out(self) -> None:
        self._request_timer = None
        state = self._request_state()
        if self.transport.is_closing() or state == RECEIVED:
            return
        if state == IDLE:
            # nothing of a request yet: an idle connection, closed without an answer
            self.transport.close()
            return
        detail = (
            f"the request did not arrive in full within {self.request_timeout:g} seconds "
            f"(the request_timeout setting)"
        )
        cycle = self.cycle
        if cycle is not None and not cycle.response_complete:
            # the application is waiting for the body: it sees the client as gone
            answered = cycle.response_started
            cycle.disconnected = True
            cycle.message_event.set()
            if answered:
                self.transport.close()
                return
        self._answer_and_close(408, "request-timeout", detail)

    # ---- answers written by the protocol itself

    def _head_too_large(self) -> None:
        detail = (
            f"the request line and headers are larger than {self.max_header_bytes} bytes "
            f"(the max_header_bytes setting)"
        )
        self._answer_and_close(431, "headers-too-large", detail)

    def send_400_response(self, msg: str) -> None:
        detail = f"the request could not be read as HTTP/1.1: {msg.rstrip('.')}"
        self._answer_and_close(400, "invalid-http", detail)

    def _answer_and_close(self, status: int, kind: str, detail: str) -> None:
        self._stop_request_timer()
        if self.transport.is_closing():
            return
        body = problem_bytes(kind, detail, status)
        headers = security_headers(
            [
                (b"content-type", PROBLEM_MEDIA_TYPE.encode("ascii")),
                (b"content-length", str(len(body)).encode("ascii")),
                (b"connection", b"close"),
            ],
            status,
            "",
        )
        head = f"HTTP/1.1 {status} {PROBLEM_KINDS[kind][1]}\r\n".encode("latin-1") + b"".join(
            k + b": " + v + b"\r\n" for k, v in headers
        ) + b"\r\n"
        # written directly: the parser may be mid-request (or in error), and the connection
        # closes after this answer either way
        self.transport.write(head + body)
        self.transport.close()


class ProblemH11Protocol(_Limits, H11Protocol):
    """uvicorn's h11 protocol with a head size limit, a request timeout and problem+json."""

    def _request_state(self) -> str:
        if self.conn.their_state is h11.DONE:
            return RECEIVED
        if self.conn.their_state is h11.IDLE and not self.conn.trailing_data[0]:
            return IDLE
        return PARTIAL

    def data_received(self, data: bytes) -> None:
        if self._request_timer is None and self.conn.their_state is h11.IDLE:
            self._start_request_timer()  # the first bytes of a further request
        self._unset_keepalive_if_required()
        self.conn.receive_data(data)
        if self.conn.their_state is h11.IDLE and self._head_is_too_large():
            self._head_too_large()
            return
        self.handle_events()
        if self.conn.their_state is h11.DONE:
            self._stop_request_timer()

    def _head_is_too_large(self) -> bool:
        """Whether the request head being received (not yet parsed) passes the limit: more
        bytes than the limit have arrived and the head's blank line is not among them."""
        buffered = self.conn.trailing_data[0]
        limit = self.max_header_bytes
        return len(buffered) > limit and b"\r\n\r\n" not in buffered[: limit + 4]


class _HeadTooLarge(Exception):
    """Raised in the parser's callback to stop it at a head larger than the limit."""


if HttpToolsProtocol is not None:

    class ProblemHttpToolsProtocol(_Limits, HttpToolsProtocol):
        """uvicorn's httptools protocol with a head size limit, a request timeout and
        problem+json.

        httptools hands over the request line and each header once complete, and keeps a
        header still arriving to itself, so the head is measured from both ends: the parts
        handed over (exactly, at the end of the head) and, while it arrives, every byte read
        since it began that belongs to no earlier request of the same read (``_accounted``).
        """

        def __init__(self, *args: Any, **kwargs: Any) -> None:
            super().__init__(*args, **kwargs)
            self._receiving = False  # between the first byte of a request and its end
            self._in_head = False  # between the first byte of a request and its blank line
            self._head_bytes = 0  # bytes of the head being received, in earlier reads
            self._head_parts = 0  # bytes of the request line and headers handed over
            self._accounted = 0  # bytes of this read that belong to finished heads and bodies

        def _request_state(self) -> str:
            if self._receiving:
                return PARTIAL
            if self.cycle is not None and not self.cycle.response_complete:
                return RECEIVED
            return IDLE

        def data_received(self, data: bytes) -> None:
            if self._request_timer is None and not self._receiving:
                self._start_request_timer()  # the first bytes of a further request
            self._unset_keepalive_if_required()
            self._accounted = 0
            try:
                self.parser.feed_data(data)
            except httptools.HttpParserCallbackError as exc:
                if isinstance(exc.__context__, _HeadTooLarge):
                    self._head_too_large()
                else:
                    self.send_400_response(str(exc))
                return
            except httptools.HttpParserError as exc:
                self.send_400_response(str(exc) or "Invalid HTTP request received.")
                return
            except httptools.HttpParserUpgrade:
                if self._should_upgrade():
                    self.handle_websocket_upgrade()
                else:
                    self._unsupported_upgrade_warning()
                return
            if self._in_head:
                self._head_bytes += len(data) - self._accounted
                if self._head_bytes > self.max_header_bytes:
                    self._head_too_large()
                    return
            if not self._receiving:
                self._stop_request_timer()

        # ---- the parser's callbacks, measuring the head

        def on_message_begin(self) -> None:
            super().on_message_begin()
            self._receiving = self._in_head = True
            self._head_bytes = 0
            self._head_parts = len(b" HTTP/1.1\r\n\r\n")

        def on_url(self, url: bytes) -> None:
            self._head_parts += len(url)
            super().on_url(url)

        def on_header(self, name: bytes, value: bytes) -> None:
            self._head_parts += len(name) + len(value) + 4  # ": " and the line's end
            super().on_header(name, value)

        def on_headers_complete(self) -> None:
            self._in_head = False
            size = self._head_parts + len(self.parser.get_method())
            if size > self.max_header_bytes:
                raise _HeadTooLarge
            # the part of this head in this read, which the read's remainder does not hold
            self._accounted += max(size - self._head_bytes, 0)
            super().on_headers_complete()

        def on_body(self, body: bytes) -> None:
            self._accounted += len(body)
            super().on_body(body)

        def on_message_complete(self) -> None:
            self._receiving = False
            super().on_message_complete()

else:  # pragma: no cover
    ProblemHttpToolsProtocol = None  # type: ignore[assignment,misc]


def available_implementations() -> tuple[str, ...]:
    """The ``http`` setting's values this installation can serve."""
    return ("httptools", "h11") if ProblemHttpToolsProtocol is not None else ("h11",)


def configure(
    max_header_bytes: int, request_timeout: float, http: HttpImplementation = "httptools"
) -> dict[str, Any]:
    """Set the limits of every connection of this process; the uvicorn options that install
    the protocol ``http`` with them."""
    _Limits.max_header_bytes = int(max_header_bytes)
    _Limits.request_timeout = float(request_timeout)
    if http == "httptools":
        if ProblemHttpToolsProtocol is None:  # pragma: no cover
            raise RuntimeError("httptools is not installed: pip install httptools, or --http h11")
        return {"http": ProblemHttpToolsProtocol}
    return {"http": ProblemH11Protocol, "h11_max_incomplete_event_size": int(max_header_bytes)}

"""The HTTP/1.1 connection protocol: uvicorn's h11 protocol with the service's limits.

Hand-written because uvicorn lacks two limits a service facing untrusted clients needs, and
answers its own protocol errors as text/plain:

* ``max_header_bytes``: a request head (request line and headers) larger than this is
  answered 431 and the connection closed, while it arrives (h11 keeps at most this much);
* ``request_timeout``: a request whose head and body have not all arrived this many seconds
  after it began (or after the connection opened) is answered 408 and the connection closed;
  an application already reading its body sees the client as gone;
* every answer the protocol itself writes (400 ``invalid-http`` for a request it cannot read
  as HTTP/1.1, 408, 431) is ``application/problem+json`` with the security headers every
  other answer carries, so a client reads every error the same way.

uvicorn builds one protocol object per connection; the limits are class attributes set by
:func:`configure` before the server starts (in each worker process too, from the settings it
reads from the environment), and h11 is told the head limit through uvicorn's
``h11_max_incomplete_event_size``. Passing the class as uvicorn's ``http`` implementation
also fixes the implementation whatever optional packages are installed.
"""

from __future__ import annotations

import asyncio
from typing import Any

import h11
import msgspec
from uvicorn.protocols.http.h11_impl import H11Protocol

from .problems import PROBLEM_KINDS, PROBLEM_MEDIA_TYPE
from .security import security_headers


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


class ProblemH11Protocol(H11Protocol):
    """uvicorn's h11 protocol with a head size limit, a request timeout and problem+json."""

    #: the largest request head, in bytes (the max_header_bytes setting)
    max_header_bytes = 16_384
    #: seconds a connection may take to deliver one whole request (the request_timeout setting)
    request_timeout = 10.0

    def __init__(self, *args: Any, **kwargs: Any) -> None:
        super().__init__(*args, **kwargs)
        self._request_timer: asyncio.TimerHandle | None = None

    # ---- the request timer: from the first byte of a request (or the connection) to its end

    def connection_made(self, transport: Any) -> None:  # type: ignore[override]
        super().connection_made(transport)
        self._start_request_timer()

    def _start_request_timer(self) -> None:
        self._stop_request_timer()
        self._request_timer = self.loop.call_later(self.request_timeout, self._request_timed_out)

    def _stop_request_timer(self) -> None:
        if self._request_timer is not None:
            self._request_timer.cancel()
            self._request_timer = None

    def _request_timed_out(self) -> None:
        self._request_timer = None
        if self.transport.is_closing() or self.conn.their_state is h11.DONE:
            return
        if self.conn.their_state is h11.IDLE and not self.conn.trailing_data[0]:
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

    def connection_lost(self, exc: Exception | None) -> None:
        self._stop_request_timer()
        super().connection_lost(exc)

    # ---- reading

    def data_received(self, data: bytes) -> None:
        if self._request_timer is None and self.conn.their_state is h11.IDLE:
            self._start_request_timer()  # the first bytes of a further request
        self._unset_keepalive_if_required()
        self.conn.receive_data(data)
        if self.conn.their_state is h11.IDLE and self._head_too_large():
            detail = (
                f"the request line and headers are larger than {self.max_header_bytes} bytes "
                f"(the max_header_bytes setting)"
            )
            self._answer_and_close(431, "headers-too-large", detail)
            return
        self.handle_events()
        if self.conn.their_state is h11.DONE:
            self._stop_request_timer()

    def _head_too_large(self) -> bool:
        """Whether the request head being received (not yet parsed) passes the limit: more
        bytes than the limit have arrived and the head's blank line is not among them."""
        buffered = self.conn.trailing_data[0]
        limit = self.max_header_bytes
        return len(buffered) > limit and b"\r\n\r\n" not in buffered[: limit + 4]

    # ---- answers written by the protocol itself

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
        # written directly: h11's state may be mid-request (or in error), and the connection
        # closes after this answer either way
        self.transport.write(head + body)
        self.transport.close()


def configure(max_header_bytes: int, request_timeout: float) -> dict[str, Any]:
    """Set the limits of every connection of this process; the uvicorn options that install
    the protocol with them."""
    ProblemH11Protocol.max_header_bytes = int(max_header_bytes)
    ProblemH11Protocol.request_timeout = float(request_timeout)
    return {"http": ProblemH11Protocol, "h11_max_incomplete_event_size": int(max_header_bytes)}

"""The HTTP/1.1 protocol the server runs: uvicorn's h11 protocol, with its own error answers
as problem+json.

uvicorn answers a request it cannot parse (a malformed request line or header, say) before
the application sees it, with a text/plain 400. ``ProblemH11Protocol`` writes that answer
as ``application/problem+json`` of kind ``invalid-http`` instead, with the security headers
every other answer carries, so a client reads every error the same way. The class is passed
to uvicorn as its ``http`` implementation (``python -m service`` does), which also fixes the
implementation whatever optional packages are installed.
"""

from __future__ import annotations

import h11
import msgspec
from uvicorn.protocols.http.h11_impl import H11Protocol

from .problems import PROBLEM_MEDIA_TYPE
from .security import security_headers


def invalid_http_body(message: str) -> bytes:
    return msgspec.json.encode(
        {
            "type": "/problems/invalid-http",
            "title": "Not an HTTP request",
            "status": 400,
            "detail": f"the request could not be read as HTTP/1.1: {message.rstrip('.')}",
        }
    )


class ProblemH11Protocol(H11Protocol):
    """uvicorn's h11 protocol with its protocol-level 400 as problem+json."""

    def send_400_response(self, msg: str) -> None:
        body = invalid_http_body(msg)
        headers = security_headers(
            [
                (b"content-type", PROBLEM_MEDIA_TYPE.encode("ascii")),
                (b"content-length", str(len(body)).encode("ascii")),
                (b"connection", b"close"),
            ],
            400,
            "",
        )
        event = h11.Response(status_code=400, headers=headers, reason=b"Bad Request")
        try:
            self.transport.write(self.conn.send(event))
            self.transport.write(self.conn.send(h11.Data(data=body)))
            self.transport.write(self.conn.send(h11.EndOfMessage()))
        except h11.LocalProtocolError:  # the connection was already answering
            pass
        self.transport.close()

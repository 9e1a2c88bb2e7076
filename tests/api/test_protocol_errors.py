"""Answers uvicorn gives before the application sees a request: problem+json too."""

from __future__ import annotations

import json
import socket

import pytest

from service.launch import LocalService


@pytest.fixture(scope="module", params=["httptools", "h11"])
def service(request, tmp_path_factory):
    log_path = tmp_path_factory.mktemp("protocol") / "service.log"
    with LocalService(log_path=log_path, LIFETIME_HTTP=request.param) as running:
        yield running


def _exchange(port: int, raw: bytes) -> bytes:
    with socket.create_connection(("127.0.0.1", port), timeout=10) as sock:
        sock.sendall(raw)
        chunks = []
        while True:  # the server closes the connection after a protocol error
            chunk = sock.recv(65536)
            if not chunk:
                break
            chunks.append(chunk)
    return b"".join(chunks)


@pytest.mark.parametrize(
    "raw",
    [
        b"NOT HTTP AT ALL\r\n\r\n",
        b"GET /health HTTP/1.1\r\nHost: x\r\nBad Header Line\r\n\r\n",
        b"GET /health HTTP/1.1\r\nHost: x\r\nContent-Length: -5\r\n\r\n",
    ],
)
def test_a_request_that_is_not_http_gets_a_problem(service, raw):
    answer = _exchange(service.port, raw)
    head, _, body = answer.partition(b"\r\n\r\n")
    lines = head.decode("latin-1").split("\r\n")
    assert lines[0].startswith("HTTP/1.1 400")
    headers = {k.lower(): v.strip() for k, _, v in (line.partition(":") for line in lines[1:])}
    assert headers["content-type"] == "application/problem+json"
    assert headers["x-content-type-options"] == "nosniff"
    problem = json.loads(body)
    assert problem["type"] == "/problems/invalid-http" and problem["status"] == 400
    assert problem["detail"].startswith("the request could not be read as HTTP/1.1")


def test_head_over_a_real_socket(service):
    answer = _exchange(service.port, b"HEAD /ready HTTP/1.1\r\nHost: x\r\nConnection: close\r\n\r\n")
    head, _, body = answer.partition(b"\r\n\r\n")
    assert head.startswith(b"HTTP/1.1 200") and body == b""
    assert b"content-length: " in head.lower()

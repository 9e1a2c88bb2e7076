"""Connection-level limits and answers of the real server (python -m service on 127.0.0.1).

What HTTP says is the reference: RFC 9110 §15.5.9 (408 Request Timeout), RFC 6585 §5 (431
Request Header Fields Too Large), RFC 9110 §9.3.2 (HEAD is GET without the body); a client
that leaves before sending its whole request is not an error of the server (nginx's 499,
common practice).
"""

from __future__ import annotations

import json
import socket
import time
from collections.abc import Iterator

import httpx
import pytest

from .server import Server, resident_kib, start_server

REQUEST_TIMEOUT_S = 1.0
MAX_HEADER_BYTES = 8192


@pytest.fixture(scope="module", params=["httptools", "h11"])
def limited(request, tmp_path_factory) -> Iterator[Server]:
    """The server with small limits, on each HTTP parser it can use (httptools ships)."""
    running = start_server(
        tmp_path_factory.mktemp("limits"),
        "--request-timeout", str(REQUEST_TIMEOUT_S),
        "--max-header-bytes", str(MAX_HEADER_BYTES),
        "--http", request.param,
    )
    try:
        yield running
    finally:
        running.stop()


def _connect(server: Server) -> socket.socket:
    host, port = server.base.removeprefix("http://").split(":")
    sock = socket.create_connection((host, int(port)), timeout=10)
    return sock


def _answer(sock: socket.socket) -> tuple[int, dict[str, str], bytes]:
    data = b""
    while b"\r\n\r\n" not in data:
        chunk = sock.recv(65536)
        if not chunk:
            break
        data += chunk
    head, _, body = data.partition(b"\r\n\r\n")
    lines = head.decode("latin-1").split("\r\n")
    headers = dict(line.lower().split(": ", 1) for line in lines[1:] if ": " in line)
    length = int(headers.get("content-length", "0"))
    while len(body) < length:
        chunk = sock.recv(65536)
        if not chunk:
            break
        body += chunk
    return int(lines[0].split()[1]), headers, body


def _is_closed(sock: socket.socket) -> bool:
    """Whether the server closes the connection (after whatever answer it writes) within 5 s."""
    sock.settimeout(5)
    try:
        while sock.recv(65536):
            pass
        return True
    except (ConnectionResetError, BrokenPipeError):
        return True
    except TimeoutError:
        return False


def test_headers_larger_than_the_limit_are_431_problem(limited):
    sock = _connect(limited)
    sock.sendall(b"GET /health HTTP/1.1\r\nHost: x\r\nX-Padding: " + b"a" * (4 * MAX_HEADER_BYTES))
    status, headers, body = _answer(sock)
    assert status == 431
    assert headers["content-type"] == "application/problem+json"
    assert json.loads(body)["type"] == "/problems/headers-too-large"
    assert _is_closed(sock)


def test_headers_larger_than_the_limit_in_one_piece_are_431(limited):
    sock = _connect(limited)
    sock.sendall(b"GET /health HTTP/1.1\r\nHost: x\r\nX-Padding: " + b"a" * MAX_HEADER_BYTES
                 + b"\r\n\r\n")
    status, headers, body = _answer(sock)
    assert status == 431
    assert json.loads(body)["type"] == "/problems/headers-too-large"
    assert _is_closed(sock)


def test_a_head_just_under_the_limit_sent_in_pieces_is_answered(limited):
    sock = _connect(limited)
    head = b"GET /health HTTP/1.1\r\nHost: x\r\nX-Padding: " + b"a" * (MAX_HEADER_BYTES - 200)
    for start in range(0, len(head), 3000):
        sock.sendall(head[start:start + 3000])
        time.sleep(0.05)
    sock.sendall(b"\r\n\r\n")
    status, _, _ = _answer(sock)
    assert status == 200


def test_pipelined_requests_after_a_large_body_are_each_answered(limited):
    """The bytes of a body (larger than the head limit) and of whole earlier requests read
    together with the start of the next head do not count towards that head."""
    sock = _connect(limited)
    body = b'{"basis": "standard-ultimate", "lives": [{"age": 60}]}' + b" " * (3 * MAX_HEADER_BYTES)
    post = (b"POST /v1/expectation HTTP/1.1\r\nHost: x\r\nContent-Type: application/json\r\n"
            b"Content-Length: " + str(len(body)).encode() + b"\r\n\r\n" + body)
    get = b"GET /health HTTP/1.1\r\nHost: x\r\nX-Padding: " + b"a" * (MAX_HEADER_BYTES // 2)
    sock.sendall(post + get)
    time.sleep(0.2)
    sock.sendall(b"\r\n\r\n")
    assert _answer(sock)[0] == 200
    assert _answer(sock)[0] == 200


def test_many_huge_unfinished_heads_do_not_hold_memory(limited):
    before = resident_kib(limited.pid)
    socks = []
    for _ in range(4):
        sock = _connect(limited)
        sock.sendall(b"GET /health HTTP/1.1\r\nHost: x\r\nX-Padding: ")
        try:
            for _ in range(256):  # up to 16 MiB each; the server stops reading after 8 KiB
                sock.sendall(b"a" * 65536)
        except (BrokenPipeError, ConnectionResetError):
            pass
        socks.append(sock)
    grown = resident_kib(limited.pid) - before
    for sock in socks:
        sock.close()
    assert grown < 20 * 1024, f"resident memory grew by {grown} KiB"


@pytest.mark.parametrize(
    "sent",
    [
        b"GET /health HTTP/1.1\r\nHost: x\r\n",  # a head that never ends
        b"POST /v1/survival HTTP/1.1\r\nHost: x\r\nContent-Type: application/json\r\n"
        b"Content-Length: 100\r\n\r\n{\"basis\":",  # a body that never ends
    ],
    ids=["head", "body"],
)
def test_an_unfinished_request_is_408_after_the_timeout(limited, sent):
    sock = _connect(limited)
    started = time.monotonic()
    sock.sendall(sent)
    status, headers, body = _answer(sock)
    waited = time.monotonic() - started
    assert status == 408
    assert headers["content-type"] == "application/problem+json"
    assert json.loads(body)["type"] == "/problems/request-timeout"
    assert REQUEST_TIMEOUT_S * 0.9 <= waited < REQUEST_TIMEOUT_S + 3.0
    assert _is_closed(sock)


def test_twenty_unfinished_requests_are_all_closed(limited):
    socks = [_connect(limited) for _ in range(20)]
    for sock in socks:
        sock.sendall(b"POST /v1/expectation HTTP/1.1\r\nHost: x\r\n")
    time.sleep(REQUEST_TIMEOUT_S + 1.0)
    assert all(_is_closed(sock) for sock in socks)


def test_a_request_sent_slowly_but_in_time_is_answered(limited):
    sock = _connect(limited)
    body = b'{"basis": "standard-ultimate", "lives": [{"age": 60}]}'
    head = (b"POST /v1/expectation HTTP/1.1\r\nHost: x\r\nContent-Type: application/json\r\n"
            b"Content-Length: " + str(len(body)).encode() + b"\r\n\r\n")
    for part in (head, body[:10], body[10:]):
        sock.sendall(part)
        time.sleep(REQUEST_TIMEOUT_S / 4)
    status, _, answer = _answer(sock)
    assert status == 200, answer
    # the connection stays open for the next request, which gets its own time
    time.sleep(REQUEST_TIMEOUT_S * 0.6)
    sock.sendall(head + body)
    status, _, _ = _answer(sock)
    assert status == 200


def test_a_client_leaving_mid_body_is_no_500(limited):
    sock = _connect(limited)
    sock.sendall(b"POST /v1/survival HTTP/1.1\r\nHost: x\r\nContent-Type: application/json\r\n"
                 b"Content-Length: 1000\r\nX-Request-ID: leaving-mid-body\r\n\r\n{\"basis\": ")
    time.sleep(0.3)
    sock.close()
    deadline = time.monotonic() + 10
    lines: list[dict] = []
    while time.monotonic() < deadline:
        lines = [json.loads(line) for line in limited.log().splitlines() if line.startswith("{")]
        if any(line.get("request_id") == "leaving-mid-body" for line in lines):
            break
        time.sleep(0.1)
    mine = [line for line in lines if "leaving-mid-body" in json.dumps(line)]
    access = [line for line in mine if line.get("event") == "request"]
    assert [line["status"] for line in access] == [499], mine
    assert all(line["level"] not in ("error", "critical") for line in mine), mine
    assert not any("Traceback" in json.dumps(line) for line in mine)
    metrics = httpx.get(f"{limited.base}/metrics", timeout=10).text
    assert 'method="POST",route="/v1/survival",status="500"' not in metrics
    assert 'lifetime_http_requests_total{method="POST",route="/v1/survival",status="499"}' in metrics


def test_a_malformed_request_line_is_400_problem(limited):
    sock = _connect(limited)
    sock.sendall(b"NOT HTTP AT ALL\r\n\r\n")
    status, headers, body = _answer(sock)
    assert status == 400
    assert headers["content-type"] == "application/problem+json"
    assert json.loads(body)["status"] == 400


@pytest.mark.parametrize("path", ["/schema/no-such-page", "/no/such/path"])
def test_unknown_paths_are_404_problem(limited, path):
    r = httpx.get(limited.base + path, timeout=10)
    assert r.status_code == 404
    assert r.headers["content-type"] == "application/problem+json"
    assert r.json()["type"] == "/problems/not-found"


@pytest.mark.parametrize("path", ["/health", "/v1/bases", "/v1/bases/standard-ultimate",
                                  "/schema/openapi.json"])
def test_head_answers_as_get_without_the_body(limited, path):
    get = httpx.get(limited.base + path, timeout=10)
    head = httpx.head(limited.base + path, timeout=10)
    assert head.status_code == get.status_code == 200
    assert head.content == b""
    assert head.headers["content-type"] == get.headers["content-type"]
    assert head.headers["content-length"] == str(len(get.content))

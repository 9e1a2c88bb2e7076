"""The request path in-process: the service's ASGI app and the bare litestar app driven
directly (no network, no server), CPU time per request.

Run with ``python -m pytest tests/benchmarks/test_request_path_speed.py -s``. Each app gets
the same POST (a scope, a ``receive`` that returns the body, a ``send`` that drops the
answer), in alternating rounds; the figure is the least CPU time per request over the rounds
(CPU time, so that other processes on a shared machine count less). The service runs with
its defaults: the access log at info (written to /dev/null here), metrics on. It reports;
it never fails on speed.
"""

from __future__ import annotations

import asyncio
import gc
import json
import logging
import os
import time

import pytest

from service.api.app import create_app
from service.api.observability import configure_logging
from service.settings import Settings
from tests.benchmarks import bare_app
from tests.benchmarks.test_load import MANY, ONE, QUOTE, WHOLE

REQUESTS = int(os.environ.get("PATH_REQUESTS", "3000"))
ROUNDS = int(os.environ.get("PATH_ROUNDS", "5"))


def _scope(path: str, length: int) -> dict:
    return {
        "type": "http", "asgi": {"version": "3.0", "spec_version": "2.3"},
        "http_version": "1.1", "server": ("127.0.0.1", 8000), "client": ("127.0.0.1", 50000),
        "scheme": "http", "root_path": "", "method": "POST", "path": path,
        "raw_path": path.encode(), "query_string": b"",
        "headers": [(b"host", b"127.0.0.1:8000"), (b"content-type", b"application/json"),
                    (b"content-length", str(length).encode())],
        "state": {},
    }


async def _drive(app, path: str, body: bytes, requests: int) -> list[int]:
    statuses: list[int] = []

    async def send(message):
        if message["type"] == "http.response.start":
            statuses.append(message["status"])

    def receiver():
        messages = [{"type": "http.request", "body": body, "more_body": False}]

        async def receive():
            return messages.pop() if messages else {"type": "http.disconnect"}

        return receive

    for _ in range(requests):
        await app(_scope(path, len(body)), receiver(), send)
    return statuses


@pytest.mark.benchmark
def test_request_path_in_process():
    configure_logging("info")
    for handler in logging.getLogger().handlers:
        handler.setStream(open(os.devnull, "w"))  # noqa: SIM115 - for the process's life
    service = create_app(Settings())
    service.state["catalogue"].load()
    cases = {
        "bare POST, exact age": (bare_app.app, "/bare", ONE, REQUESTS),
        "expectation, 1 life, exact age 47.63": (service, "/v1/expectation", ONE, REQUESTS),
        "bare POST, whole age": (bare_app.app, "/bare", WHOLE, REQUESTS),
        "expectation, 1 life, whole age 47": (service, "/v1/expectation", WHOLE, REQUESTS),
        "present values, 1 life, 5 benefits": (service, "/v1/present-values", QUOTE,
                                               REQUESTS // 10),
        "expectation, 1000 lives, exact ages": (service, "/v1/expectation", MANY,
                                                REQUESTS // 100),
    }

    async def run() -> dict[str, float]:
        for app, path, body, _ in cases.values():
            assert set(await _drive(app, path, json.dumps(body).encode(), 20)) == {200}
        gc.collect()
        gc.freeze()
        best = {name: float("inf") for name in cases}
        for _ in range(ROUNDS):
            for name, (app, path, body, requests) in cases.items():
                raw = json.dumps(body).encode()
                started = time.process_time()
                await _drive(app, path, raw, requests)
                best[name] = min(best[name], (time.process_time() - started) / requests)
        return best

    best = asyncio.run(run())
    print(f"\nin-process, CPU time per request (least of {ROUNDS} alternating rounds):")
    for name, seconds in best.items():
        print(f"  {name:40s} {seconds * 1e6:9.1f} us")
    one = best["expectation, 1 life, exact age 47.63"]
    print(f"  service extra over bare (exact age):     "
          f"{(one - best['bare POST, exact age']) * 1e6:9.1f} us")
    print(f"  service extra over bare (whole age):     "
          f"{(best['expectation, 1 life, whole age 47'] - best['bare POST, whole age']) * 1e6:9.1f} us")
    print(f"  ratio bare / expectation (exact age):    {best['bare POST, exact age'] / one:9.2f}")
    print(f"  5-benefit quote / 1-life expectation:    "
          f"{best['present values, 1 life, 5 benefits'] / one:9.2f}")
    print(f"  1000 lives / 1 life (exact ages):        "
          f"{best['expectation, 1000 lives, exact ages'] / one:9.2f}")

"""Load benchmark: the service against a bare litestar app, in one run, same server stack.

Run with ``python -m pytest tests/benchmarks/test_load.py -s`` (``LOAD_SECONDS`` per
measurement, default 5; ``LOAD_ROUNDS``, default 3). It starts the servers on 127.0.0.1
(uvicorn on httptools and uvloop, one worker, as ``python -m service`` runs), drives them
with wrk (Debian's package) when it is installed, else with a bounded Python client of its
own, and prints requests per second, p50 and p99 latency and the ratios the project tracks:

* one-life ``/v1/expectation`` on a stored law basis, at an exact age (47.63) and at a whole
  age (47), against the bare POST of the same request and answer shape (target ≥ 0.9), the
  service with its defaults (info access log, metrics);
* a 1,000-life call at exact ages against a one-life call (target ≤ 5 times the cost);
* a one-life five-benefit ``/v1/present-values`` quote against one expectation call (target
  ≤ 1.5 times the cost);
* one worker against two (``--workers 2``);
* granian against uvicorn on the same application, when granian is installed (it is not a
  dependency: it lacks the protocol's 431, 408 and problem+json answers, see README).

Every case is measured in each round, the cases alternating, and the figures are the
medians over the rounds. Where the machine has two cores or more, the servers run on one and
the load generator on another (the output says which), so that the figures do not depend on
the scheduler; two workers get both cores and share one with the load generator.

It measures and reports; it never fails because the machine is slow.
"""

from __future__ import annotations

import asyncio
import importlib.util
import json
import os
import re
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from pathlib import Path

import httpx
import pytest

from service.launch import free_port

ROOT = Path(__file__).resolve().parents[2]
DURATION_S = int(os.environ.get("LOAD_SECONDS", "5"))
ROUNDS = int(os.environ.get("LOAD_ROUNDS", "3"))
CONNECTIONS = 8
#: the Python client's bound on requests per measurement
MAX_REQUESTS = 500_000

EXACT_AGE = 47.63
ONE = {"basis": "standard-ultimate", "lives": [{"age": EXACT_AGE}]}
WHOLE = {"basis": "standard-ultimate", "lives": [{"age": 47}]}
#: 1,000 lives at exact ages from 20.37 to 99.29
MANY = {"basis": "standard-ultimate",
        "lives": [{"age": round(20.37 + 0.079 * k, 2)} for k in range(1000)]}
QUOTE = {
    "basis": "standard-ultimate", "lives": [{"age": EXACT_AGE}], "interest": {"rate": 0.05},
    "benefits": [
        {"type": "life-annuity", "timing": "advance"},
        {"type": "life-annuity", "timing": "advance", "frequency": 12, "term": 20},
        {"type": "life-insurance", "timing": "end-of-year"},
        {"type": "life-insurance", "timing": "moment-of-death", "term": 20},
        {"type": "endowment", "term": 20, "timing": "end-of-year"},
    ],
}


# ---- where things run -------------------------------------------------------------------


def _cores() -> tuple[set[int] | None, set[int] | None, str]:
    """(the servers' cores, the load generator's cores, what the output says)."""
    available = sorted(os.sched_getaffinity(0))
    if len(available) < 2:
        return None, None, f"not pinned: {len(available)} core available"
    server, load = {available[0]}, {available[1]}
    return server, load, f"servers pinned to core {available[0]}, load generator to core {available[1]}"


def _pinned(cores: set[int] | None) -> Callable[[], None] | None:
    return None if cores is None else (lambda: os.sched_setaffinity(0, cores))


@contextmanager
def _server(cmd: list[str], port: int, log: Path, cores: set[int] | None,
            env: dict[str, str] | None = None) -> Iterator[str]:
    environment = {k: v for k, v in os.environ.items() if not k.startswith("LIFETIME_")}
    environment["PYTHONPATH"] = str(ROOT)
    environment.update(env or {})
    with log.open("ab") as out:
        process = subprocess.Popen(cmd, cwd=ROOT, env=environment, stdout=out, stderr=out,
                                   preexec_fn=_pinned(cores))
    base = f"http://127.0.0.1:{port}"
    try:
        for _ in range(300):  # at most about a minute
            if process.poll() is not None:
                raise RuntimeError(f"{cmd} stopped at start-up; see {log}")
            try:
                if httpx.get(f"{base}/health", timeout=1).status_code in (200, 404):
                    break
            except httpx.TransportError:
                time.sleep(0.2)
        else:
            raise RuntimeError(f"{cmd} did not start; see {log}")
        yield base
    finally:
        process.terminate()
        try:
            process.wait(timeout=20)
        except subprocess.TimeoutExpired:
            process.kill()
            process.wait(timeout=10)


def _service(port: int, workers: int = 1) -> list[str]:
    # the service's defaults otherwise: access log at info, metrics on
    return [sys.executable, "-m", "service", "--host", "127.0.0.1", "--port", str(port),
            "--workers", str(workers)]


def _bare(port: int) -> list[str]:
    return [sys.executable, "-m", "uvicorn", "tests.benchmarks.bare_app:app", "--host",
            "127.0.0.1", "--port", str(port), "--log-level", "warning", "--no-access-log",
            "--http", "httptools", "--loop", "uvloop"]


def _granian(port: int) -> list[str]:
    return [sys.executable, "-m", "granian", "--interface", "asgi", "--host", "127.0.0.1",
            "--port", str(port), "--workers", "1", "--loop", "uvloop", "--no-access-log",
            "--factory", "tests.benchmarks.granian_app:create"]


# ---- load generators ----------------------------------------------------------------------


def _wrk(url: str, body: dict, seconds: int, cores: set[int] | None) -> dict:
    script = (
        'wrk.method = "POST"\n'
        f"wrk.body = {json.dumps(json.dumps(body))}\n"
        'wrk.headers["Content-Type"] = "application/json"\n'
    )
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "post.lua"
        path.write_text(script)
        out = subprocess.run(
            ["wrk", "-t1", f"-c{CONNECTIONS}", f"-d{seconds}s", "--latency", "-s", str(path), url],
            capture_output=True, text=True, timeout=seconds + 30, check=True,
            preexec_fn=_pinned(cores),
        ).stdout

    def latency(label: str) -> float:
        m = re.search(rf"^\s*{label}%\s+([\d.]+)(us|ms|s)", out, re.M)
        value, unit = float(m.group(1)), m.group(2)
        return value * {"us": 1e-3, "ms": 1.0, "s": 1e3}[unit]

    rps = float(re.search(r"Requests/sec:\s+([\d.]+)", out).group(1))
    non_2xx = re.search(r"Non-2xx or 3xx responses:\s+(\d+)", out)
    return {"rps": rps, "p50_ms": latency("50"), "p99_ms": latency("99"),
            "errors": int(non_2xx.group(1)) if non_2xx else 0}


async def _one_connection(host: str, port: int, request: bytes, deadline: float,
                          latencies: list[float], errors: list[int]) -> None:
    reader, writer = await asyncio.open_connection(host, port)
    try:
        while time.perf_counter() < deadline and len(latencies) < MAX_REQUESTS:
            started = time.perf_counter()
            writer.write(request)
            head = await reader.readuntil(b"\r\n\r\n")
            length = re.search(rb"(?im)^content-length:\s*(\d+)", head)
            await reader.readexactly(int(length.group(1)) if length else 0)
            latencies.append(time.perf_counter() - started)
            if head[9:12] != b"200":
                errors[0] += 1
    finally:
        writer.close()


def _python_client(url: str, body: dict, seconds: int, cores: set[int] | None) -> dict:
    """Where wrk is not installed: CONNECTIONS keep-alive connections on raw sockets, each
    sending the next request when the last answer is read, for ``seconds`` (and at most
    MAX_REQUESTS requests), on the load generator's core."""
    host, port = url.removeprefix("http://").split("/", 1)[0].split(":")
    path = "/" + url.removeprefix("http://").split("/", 1)[1]
    payload = json.dumps(body).encode()
    request = (f"POST {path} HTTP/1.1\r\nHost: {host}:{port}\r\nContent-Type: application/json"
               f"\r\nContent-Length: {len(payload)}\r\n\r\n").encode() + payload
    latencies: list[float] = []
    errors = [0]
    before = os.sched_getaffinity(0)
    if cores is not None:
        os.sched_setaffinity(0, cores)
    try:
        started = time.perf_counter()

        async def run() -> None:
            deadline = time.perf_counter() + seconds
            await asyncio.gather(*(
                _one_connection(host, int(port), request, deadline, latencies, errors)
                for _ in range(CONNECTIONS)
            ))

        asyncio.run(run())
        took = time.perf_counter() - started
    finally:
        os.sched_setaffinity(0, before)
    latencies.sort()
    return {"rps": len(latencies) / took, "p50_ms": 1e3 * statistics.median(latencies),
            "p99_ms": 1e3 * latencies[int(0.99 * (len(latencies) - 1))], "errors": errors[0]}


def _drive(url: str, body: dict, cores: set[int] | None) -> dict:
    generator = _wrk if shutil.which("wrk") else _python_client
    return generator(url, body, DURATION_S, cores)


def _rounds(cases: dict[str, tuple[str, dict]], cores: set[int] | None) -> dict[str, dict]:
    """Each case once per round, alternating; the medians over the rounds."""
    runs: dict[str, list[dict]] = {name: [] for name in cases}
    for _ in range(ROUNDS):
        for name, (url, body) in cases.items():
            runs[name].append(_drive(url, body, cores))
    return {
        name: {key: statistics.median(r[key] for r in found) for key in found[0]}
        | {"errors": sum(r["errors"] for r in found)}
        for name, found in runs.items()
    }


def _print(results: dict[str, dict]) -> None:
    for name, r in results.items():
        print(f"  {name:46s} {r['rps']:8.0f} req/s  p50 {r['p50_ms']:6.2f} ms  "
              f"p99 {r['p99_ms']:6.2f} ms  non-2xx {r['errors']}")


def _check_answers(base: str) -> None:
    for path, body in (("/v1/expectation", ONE), ("/v1/expectation", MANY),
                       ("/v1/present-values", QUOTE)):
        r = httpx.post(base + path, json=body, timeout=30)
        assert r.status_code == 200, (path, r.text[:500])


@pytest.mark.benchmark
def test_load_against_bare_litestar(tmp_path):
    server_cores, load_cores, placement = _cores()
    tool = "wrk" if shutil.which("wrk") else "the Python client (wrk is not installed)"
    print(f"\nload benchmark: {tool}, {CONNECTIONS} connections, {DURATION_S} s per measurement, "
          f"{ROUNDS} rounds alternating, medians; {placement}")
    service_port, bare_port = free_port(), free_port()
    with _server(_service(service_port), service_port, tmp_path / "service.log",
                 server_cores) as service, \
            _server(_bare(bare_port), bare_port, tmp_path / "bare.log", server_cores) as bare:
        _check_answers(service)
        results = _rounds({
            "bare POST, exact age": (f"{bare}/bare", ONE),
            "expectation, 1 life, exact age 47.63": (f"{service}/v1/expectation", ONE),
            "bare POST, whole age": (f"{bare}/bare", WHOLE),
            "expectation, 1 life, whole age 47": (f"{service}/v1/expectation", WHOLE),
            "expectation, 1000 lives, exact ages": (f"{service}/v1/expectation", MANY),
            "present values, 1 life, 5 benefits": (f"{service}/v1/present-values", QUOTE),
        }, load_cores)
    print("one worker each (uvicorn, httptools, uvloop):")
    _print(results)

    def rps(name: str) -> float:
        return results[name]["rps"]

    exact = rps("expectation, 1 life, exact age 47.63") / rps("bare POST, exact age")
    whole = rps("expectation, 1 life, whole age 47") / rps("bare POST, whole age")
    many = rps("expectation, 1 life, exact age 47.63") / rps("expectation, 1000 lives, exact ages")
    quote = rps("expectation, 1 life, exact age 47.63") / rps("present values, 1 life, 5 benefits")
    print(f"  expectation(1 life, exact age) / bare POST:       {exact:.2f}  (target ≥ 0.9)")
    print(f"  expectation(1 life, whole age) / bare POST:       {whole:.2f}  (target ≥ 0.9)")
    print(f"  cost 1000 lives / cost 1 life (exact ages):       {many:.2f}  (target ≤ 5)")
    print(f"  cost 5-benefit quote / cost 1-life expectation:   {quote:.2f}  (target ≤ 1.5)")
    assert all(r["errors"] == 0 for r in results.values())


def _side_by_side(tmp_path: Path, load_cores: set[int] | None,
                  first: tuple[str, Callable[[int], list[str]], set[int] | None],
                  second: tuple[str, Callable[[int], list[str]], set[int] | None]) -> None:
    """One-life exact-age expectations on two servers, alternating; the second's requests
    per second over the first's."""
    (name_a, cmd_a, cores_a), (name_b, cmd_b, cores_b) = first, second
    port_a, port_b = free_port(), free_port()
    with _server(cmd_a(port_a), port_a, tmp_path / "first.log", cores_a) as a, \
            _server(cmd_b(port_b), port_b, tmp_path / "second.log", cores_b) as b:
        results = _rounds({
            f"expectation, 1 life, exact age, {name_a}": (f"{a}/v1/expectation", ONE),
            f"expectation, 1 life, exact age, {name_b}": (f"{b}/v1/expectation", ONE),
        }, load_cores)
    _print(results)
    ratio = (results[f"expectation, 1 life, exact age, {name_b}"]["rps"]
             / results[f"expectation, 1 life, exact age, {name_a}"]["rps"])
    print(f"  {name_b} / {name_a}: {ratio:.2f}")
    assert all(r["errors"] == 0 for r in results.values())


@pytest.mark.benchmark
def test_load_one_worker_against_two(tmp_path):
    server_cores, load_cores, placement = _cores()
    both = None if server_cores is None else server_cores | (load_cores or set())
    print(f"\nworkers: {placement}; two workers run on both cores, beside the load generator")
    _side_by_side(tmp_path, load_cores, ("1 worker", _service, server_cores),
                  ("2 workers", lambda port: _service(port, workers=2), both))


@pytest.mark.benchmark
@pytest.mark.skipif(importlib.util.find_spec("granian") is None,
                    reason="granian is not installed (pip install granian to compare)")
def test_load_granian_beside_uvicorn(tmp_path):
    server_cores, load_cores, placement = _cores()
    print(f"\nservers: {placement}")
    _side_by_side(tmp_path, load_cores, ("uvicorn", _service, server_cores),
                  ("granian", _granian, server_cores))

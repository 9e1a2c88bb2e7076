"""Load benchmark: the service against a bare litestar app, in one run, same server setup.

Run with ``python -m pytest tests/benchmarks/test_load.py -s``. It starts both servers on
127.0.0.1 (one uvicorn worker each), drives them one after the other with wrk (Debian's
package) when it is installed, else with a bounded Python client, and prints requests per
second, p50 and p99 latency and the ratios the project tracks:

* /v1/expectation (one life, stored basis) against the bare endpoint (target ≥ 0.8);
* a 1,000-life /v1/expectation call against a one-life call (target < 5 times the cost);
* a one-life five-benefit /v1/present-values quote against a one-life expectation call.

It measures and reports; it never fails because the machine is slow.
"""

from __future__ import annotations

import json
import os
import re
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import httpx
import pytest

from service.launch import free_port as _free_port

ROOT = Path(__file__).resolve().parents[2]
DURATION_S = int(os.environ.get("LOAD_SECONDS", "10"))
CONNECTIONS = 8


def _start(cmd: list[str], port: int) -> subprocess.Popen:
    env = {k: v for k, v in os.environ.items() if not k.startswith("LIFETIME_")}
    env["PYTHONPATH"] = str(ROOT)
    env["LIFETIME_LOG_LEVEL"] = "warning"
    process = subprocess.Popen(
        cmd, cwd=ROOT, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL
    )
    for _ in range(150):
        try:
            if httpx.get(f"http://127.0.0.1:{port}/health", timeout=1).status_code in (200, 404):
                return process
        except httpx.TransportError:
            time.sleep(0.2)
    process.kill()
    raise RuntimeError("server did not start")


def _wrk(url: str, body: dict, seconds: int) -> dict:
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
        ).stdout

    def latency(label: str) -> float:
        m = re.search(rf"^\s*{label}%\s+([\d.]+)(us|ms|s)", out, re.M)
        value, unit = float(m.group(1)), m.group(2)
        return value * {"us": 1e-3, "ms": 1.0, "s": 1e3}[unit]

    rps = float(re.search(r"Requests/sec:\s+([\d.]+)", out).group(1))
    non_2xx = re.search(r"Non-2xx or 3xx responses:\s+(\d+)", out)
    return {"rps": rps, "p50_ms": latency("50"), "p99_ms": latency("99"),
            "errors": int(non_2xx.group(1)) if non_2xx else 0}


def _python_client(url: str, body: dict, seconds: int) -> dict:
    """A bounded sequential client: used where wrk is not installed."""
    times = []
    errors = 0
    deadline = time.perf_counter() + seconds
    with httpx.Client() as client:
        while time.perf_counter() < deadline and len(times) < 200_000:
            t0 = time.perf_counter()
            r = client.post(url, json=body)
            times.append(time.perf_counter() - t0)
            errors += r.status_code != 200
    times.sort()
    return {"rps": len(times) / sum(times), "p50_ms": 1e3 * statistics.median(times),
            "p99_ms": 1e3 * times[int(0.99 * (len(times) - 1))], "errors": errors}


def _drive(url: str, body: dict, seconds: int = DURATION_S) -> dict:
    return (_wrk if shutil.which("wrk") else _python_client)(url, body, seconds)


@pytest.mark.benchmark
def test_load_against_bare_litestar():
    service_port, bare_port = _free_port(), _free_port()
    service = _start([sys.executable, "-m", "service", "--host", "127.0.0.1",
                      "--port", str(service_port), "--log-level", "warning"], service_port)
    bare = _start([sys.executable, "-m", "uvicorn", "tests.benchmarks.bare_app:app",
                   "--host", "127.0.0.1", "--port", str(bare_port), "--log-level", "warning",
                   "--no-access-log"], bare_port)
    one = {"basis": "standard-ultimate", "lives": [{"age": 60}]}
    many = {"basis": "standard-ultimate", "lives": [{"age": 20 + (k % 80)} for k in range(1000)]}
    quote = {
        "basis": "standard-ultimate", "lives": [{"age": 60}], "interest": {"rate": 0.05},
        "benefits": [
            {"type": "life-annuity", "timing": "advance"},
            {"type": "life-annuity", "timing": "advance", "frequency": 12, "term": 20},
            {"type": "life-insurance", "timing": "end-of-year"},
            {"type": "life-insurance", "timing": "moment-of-death", "term": 20},
            {"type": "endowment", "term": 20, "timing": "end-of-year"},
        ],
    }
    try:
        results = {
            "bare POST": _drive(f"http://127.0.0.1:{bare_port}/bare", one),
            "expectation, 1 life": _drive(f"http://127.0.0.1:{service_port}/v1/expectation", one),
            "expectation, 1000 lives": _drive(f"http://127.0.0.1:{service_port}/v1/expectation", many),
        }
        pv = httpx.post(f"http://127.0.0.1:{service_port}/v1/present-values", json=quote)
        if pv.status_code == 200:
            results["present values, 1 life, 5 benefits"] = _drive(
                f"http://127.0.0.1:{service_port}/v1/present-values", quote)
    finally:
        for process in (service, bare):
            process.terminate()
            process.wait(timeout=10)
    tool = "wrk" if shutil.which("wrk") else "python client (wrk not installed)"
    print(f"\nload benchmark: {tool}, {CONNECTIONS} connections, {DURATION_S} s each, one worker")
    for name, r in results.items():
        print(f"  {name:38s} {r['rps']:9.0f} req/s  p50 {r['p50_ms']:7.2f} ms  "
              f"p99 {r['p99_ms']:7.2f} ms  non-2xx {r['errors']}")
    base = results["bare POST"]["rps"]
    one_rps = results["expectation, 1 life"]["rps"]
    many_rps = results["expectation, 1000 lives"]["rps"]
    print(f"  ratio expectation(1 life) / bare POST:         {one_rps / base:.2f}  (target ≥ 0.8)")
    print(f"  cost 1000 lives / cost 1 life:                 {one_rps / many_rps:.2f}  (target < 5)")
    if "present values, 1 life, 5 benefits" in results:
        pv_rps = results["present values, 1 life, 5 benefits"]["rps"]
        print(f"  cost 5-benefit quote / cost 1-life expectation: {one_rps / pv_rps:.2f}")
    for r in results.values():
        assert r["errors"] == 0

"""The real server: python -m service, started as a process on 127.0.0.1."""

from __future__ import annotations

import json
import subprocess
import sys
import time
from pathlib import Path

import httpx
import pytest

from service.launch import free_port as _free_port
from service.launch import service_environment as _environment

PROJECT_ROOT = Path(__file__).resolve().parents[2]


@pytest.mark.slow
def test_server_answers_over_http():
    port = _free_port()
    process = subprocess.Popen(
        [sys.executable, "-m", "service", "--host", "127.0.0.1", "--port", str(port)],
        cwd=PROJECT_ROOT,
        env=_environment(),
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
    )
    base = f"http://127.0.0.1:{port}"
    try:
        ready = None
        for _ in range(100):  # at most about 20 seconds
            if process.poll() is not None:
                break
            try:
                ready = httpx.get(f"{base}/ready", timeout=1.0)
                if ready.status_code == 200:
                    break
            except httpx.TransportError:
                pass
            time.sleep(0.2)
        assert ready is not None and ready.status_code == 200, "the server did not become ready"
        r = httpx.post(
            f"{base}/v1/expectation",
            json={"basis": "standard-ultimate", "lives": [{"age": 60}]},
            timeout=10.0,
        )
        assert r.status_code == 200
        result = r.json()["results"][0]
        assert 0 < result["curtate"] < result["complete"] < 60
    finally:
        process.terminate()
        try:
            _, err = process.communicate(timeout=10)
        except subprocess.TimeoutExpired:
            process.kill()
            _, err = process.communicate()
    lines = [json.loads(line) for line in err.decode().splitlines() if line.startswith("{")]
    access = [line for line in lines if line.get("logger") == "service.access"]
    assert any(line["path"] == "/v1/expectation" and line["status"] == 200 for line in access)
    # the shipped server stack: httptools' parser on uvloop's event loop
    started = [line["message"] for line in lines if line.get("logger") == "service"]
    assert any("the httptools parser and the uvloop event loop" in m for m in started), lines


@pytest.mark.slow
def test_bad_stored_basis_stops_the_start(tmp_path):
    (tmp_path / "bad-law.json").write_text(
        json.dumps(
            {
                "id": "bad-law",
                "title": "t",
                "description": "d",
                "source": "s",
                "version": "1",
                "definition": {"type": "gompertz", "B": 0.0001, "c": 0.95},
            }
        )
    )
    result = subprocess.run(
        [sys.executable, "-m", "service", "--port", str(_free_port())],
        cwd=PROJECT_ROOT,
        env=_environment(LIFETIME_BASES_DIR=str(tmp_path)),
        capture_output=True,
        timeout=60,
    )
    assert result.returncode != 0
    message = result.stderr.decode()
    assert "bad-law.json" in message and "$.definition.c" in message


@pytest.mark.slow
def test_bad_setting_stops_the_start():
    result = subprocess.run(
        [sys.executable, "-m", "service", "--port", "not-a-port"],
        cwd=PROJECT_ROOT,
        env=_environment(),
        capture_output=True,
        timeout=60,
    )
    assert result.returncode == 2
    assert "--port" in result.stderr.decode()

"""The Dockerfile, checked without a Docker engine: its start command runs and gets ready.

The image cannot be built here, so these tests read the Dockerfile, check what a security
review expects of it, and run its CMD (with its ENV) as a plain process on 127.0.0.1.
"""

from __future__ import annotations

import json
import os
import re
import subprocess
import sys
import time
from pathlib import Path

import httpx
import pytest

from service.launch import free_port as _free_port

ROOT = Path(__file__).resolve().parents[2]
DOCKERFILE = (ROOT / "Dockerfile").read_text()


def _instruction(name: str) -> list[str]:
    """Every line of one instruction, continuation lines joined."""
    text = re.sub(r"\\\n\s*", " ", DOCKERFILE)
    return [line.split(None, 1)[1] for line in text.splitlines() if line.startswith(name + " ")]


def test_dockerfile_shape():
    assert _instruction("FROM")[0].startswith("python:3.11-slim")
    assert any("--require-hashes" in run and "requirements.lock" in run for run in _instruction("RUN"))
    user = _instruction("USER")
    assert user and user[-1] not in ("root", "0"), "the service must not run as root"
    assert any("/health" in h for h in _instruction("HEALTHCHECK"))
    cmd = json.loads(_instruction("CMD")[-1])
    assert cmd[:3] == ["python", "-m", "service"] and "0.0.0.0" in cmd


def test_the_image_records_its_commit_and_runs_as_the_group_of_the_manifest():
    run = next(r for r in _instruction("RUN") if "--record" in r)
    assert 'python -m service.version --record --commit "$SOURCE_COMMIT"' in run
    assert run.index("--record") < run.index("pip install")  # recorded, then installed
    assert "ARG SOURCE_COMMIT" in DOCKERFILE
    assert "--gid 10001" in run and "--uid 10001" in run
    assert _instruction("USER")[-1] == "10001:10001"


def _container_command(port: int) -> tuple[list[str], dict[str, str]]:
    """The Dockerfile's CMD and ENV, bound to loopback and a free port for the test."""
    cmd = json.loads(_instruction("CMD")[-1])
    cmd = [sys.executable if part == "python" else part for part in cmd]
    cmd[cmd.index("--host") + 1] = "127.0.0.1"  # tests bind to loopback only
    cmd[cmd.index("--port") + 1] = str(port)
    env = {k: v for k, v in os.environ.items() if not k.startswith("LIFETIME_")}
    for line in _instruction("ENV"):
        for key, value in re.findall(r"(\w+)=(\S+)", line):
            env[key] = value
    env["LIFETIME_HOST"] = "127.0.0.1"
    env["PYTHONPATH"] = str(ROOT)
    return cmd, env


def _wait_ready(base: str, process: subprocess.Popen) -> httpx.Response | None:
    ready = None
    for _ in range(150):  # at most about 30 seconds
        if process.poll() is not None:
            return ready
        try:
            ready = httpx.get(f"{base}/ready", timeout=1.0)
            if ready.status_code == 200:
                return ready
        except httpx.TransportError:
            pass
        time.sleep(0.2)
    return ready


def _snapshot(folder: Path) -> dict[str, tuple[int, float]]:
    return {str(p.relative_to(folder)): (p.stat().st_size, p.stat().st_mtime) for p in folder.rglob("*")}


@pytest.mark.slow
def test_start_command_gets_ready_without_writing(tmp_path):
    """The CMD starts the service from a read-only copy of the package, as the image holds
    it, gets ready and answers, and writes nothing into the package, its working directory or
    its home (the container needs no writable file system at run time). Tests may run as
    root, which ignores permission bits, so the check is that nothing there changed."""
    port = _free_port()
    cmd, env = _container_command(port)
    app = tmp_path / "app"
    app.mkdir()
    subprocess.run(["cp", "-r", str(ROOT / "service"), str(app)], check=True)
    # the Dockerfile's build step, as `docker build --build-arg SOURCE_COMMIT=...` runs it
    commit = "0123456789abcdef0123456789abcdef01234567"
    subprocess.run([sys.executable, "-m", "service.version", "--record", "--commit", commit],
                   cwd=app, check=True, capture_output=True, env={**env, "PYTHONPATH": str(app)})
    for path in [app, *app.rglob("*")]:
        path.chmod(0o555 if path.is_dir() else 0o444)
    env.update(PYTHONPATH=str(app), HOME=str(app))
    before = _snapshot(app)
    process = subprocess.Popen(cmd, cwd=app, env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    base = f"http://127.0.0.1:{port}"
    try:
        ready = _wait_ready(base, process)
        assert ready is not None and ready.status_code == 200, "not ready"
        r = httpx.post(
            f"{base}/v1/expectation",
            json={"basis": "standard-ultimate", "lives": [{"age": 60}]},
            timeout=10.0,
        )
        assert r.status_code == 200
        assert r.json()["results"][0]["complete"] > 0
        assert r.json()["service_version"].endswith("+g0123456789ab")  # no git in an image
    finally:
        process.terminate()
        try:
            _, err = process.communicate(timeout=10)
        except subprocess.TimeoutExpired:
            process.kill()
            _, err = process.communicate()
        for path in [app, *app.rglob("*")]:
            path.chmod(0o755 if path.is_dir() else 0o644)
    assert _snapshot(app) == before, "the service wrote into its package or working directory"
    # the image's start command runs on the fast stack the lock file installs
    assert b"the httptools parser and the uvloop event loop" in err, err[-2000:]

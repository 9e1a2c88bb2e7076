"""The client installed on its own: a fresh virtual environment, ``pip install`` of the project
without the server extra, then the client against a started service.

The environment must end up without numpy, scipy, pandas, litestar or uvicorn, the client must
answer the same numbers as the service and refuse a bad request in the service's words, and
``python -m service`` there must say which extra it lacks. pip fetches httpx, msgspec and the
build tools from the package index.
"""

from __future__ import annotations

import json
import shutil
import subprocess
import venv
from pathlib import Path

import httpx
import pytest

from service.launch import CODE_ROOT, LocalService

pytestmark = pytest.mark.slow

SERVER_STACK = {"numpy", "scipy", "pandas", "litestar", "uvicorn", "prometheus-client"}

SCRIPT = r"""
import json, sys
from service.client import LifetimeClient, LifetimeServiceError
out = {"modules": []}
with LifetimeClient(sys.argv[1], timeout=30.0, retries=2) as client:
    answer = client.expectation(basis="thistlemoor-2024-female", lives=[{"age": 65}], term=20)
    out["complete"] = answer.results[0].complete
    out["calculation_fingerprint"] = answer.calculation_fingerprint
    try:
        client.survival(basis="standard-ultimate", lives=[{"age": 60, "sex": "f"}], t=[1])
    except LifetimeServiceError as error:
        out["refused"] = [error.sent, error.title, error.detail, error.errors]
out["modules"] = sorted(m for m in ("numpy", "litestar", "scipy", "pandas") if m in sys.modules)
print(json.dumps(out))
"""


def _copy_project(target: Path) -> Path:
    for name in ("pyproject.toml", "setup.py", "README.md"):
        shutil.copy2(CODE_ROOT / name, target / name)
    shutil.copytree(
        CODE_ROOT / "service", target / "service",
        ignore=shutil.ignore_patterns("__pycache__", "build.json"),
    )
    return target


def test_the_client_installs_and_works_without_the_server_stack(tmp_path):
    (tmp_path / "project").mkdir()
    project = _copy_project(tmp_path / "project")
    environment = tmp_path / "client-venv"
    venv.EnvBuilder(with_pip=True).create(environment)
    python = environment / "bin" / "python"
    installed = subprocess.run(
        [str(python), "-m", "pip", "install", "--quiet", "--disable-pip-version-check", str(project)],
        capture_output=True, text=True, timeout=600,
    )
    assert installed.returncode == 0, installed.stdout[-3000:] + installed.stderr[-3000:]
    listed = subprocess.run(
        [str(python), "-m", "pip", "list", "--format=json", "--disable-pip-version-check"],
        capture_output=True, text=True, timeout=120,
    )
    names = {p["name"].lower() for p in json.loads(listed.stdout)}
    assert {"lifetime-service", "httpx", "msgspec"} <= names
    assert not names & SERVER_STACK, names & SERVER_STACK

    refused_start = subprocess.run(
        [str(python), "-m", "service"], capture_output=True, text=True, timeout=60, cwd=tmp_path
    )
    assert refused_start.returncode == 2
    assert "pip install 'lifetime-service[server]'" in refused_start.stderr

    with LocalService(log_path=tmp_path / "service.log") as service:
        ran = subprocess.run(
            [str(python), "-c", SCRIPT, service.url],
            capture_output=True, text=True, timeout=120, cwd=tmp_path,
        )
        assert ran.returncode == 0, ran.stderr
        got = json.loads(ran.stdout)
        body = {"basis": "thistlemoor-2024-female", "lives": [{"age": 65}], "term": 20}
        direct = httpx.post(f"{service.url}/v1/expectation", json=body, timeout=30).json()
        bad = {"basis": "standard-ultimate", "lives": [{"age": 60, "sex": "f"}], "t": [1]}
        problem = httpx.post(f"{service.url}/v1/survival", json=bad, timeout=30).json()
    assert got["modules"] == []
    assert got["complete"] == direct["results"][0]["complete"]
    assert got["calculation_fingerprint"] == direct["calculation_fingerprint"]
    sent, title, detail, errors = got["refused"]
    assert not sent
    assert (title, detail) == (problem["title"], problem["detail"])
    assert errors == [[e["field"], e["message"]] for e in problem["errors"]]

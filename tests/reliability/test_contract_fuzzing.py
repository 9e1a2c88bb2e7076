"""Contract fuzzing: schemathesis against the real server and the OpenAPI document it serves.

Every operation of the served document, with schemathesis's standard checks: no server
error, every status code and content type documented, response bodies and headers as the
document says, and no answer slower than MAX_RESPONSE_SECONDS. The budget is fixed
(MAX_EXAMPLES cases per operation, one seed) so that the run takes well under a minute or two
on a CI machine; set FUZZ_MAX_EXAMPLES and FUZZ_SEED to fuzz longer or differently.

The coverage phase is not run: it enumerates boundary combinations of the request schema and
does not finish on the recursive basis union (transforms nest bases); the fuzzing phase
generates both valid and invalid requests.
"""

from __future__ import annotations

import os
import re
import subprocess
import sys
from pathlib import Path

import httpx
import pytest

from .server import PROJECT_ROOT

MAX_EXAMPLES = int(os.environ.get("FUZZ_MAX_EXAMPLES", "150"))
SEED = os.environ.get("FUZZ_SEED", "20240601")
MAX_RESPONSE_SECONDS = 10
CHECKS = (
    "not_a_server_error",
    "status_code_conformance",
    "content_type_conformance",
    "response_schema_conformance",
    "response_headers_conformance",
)


def run_schemathesis(base: str, workdir: Path, *extra: str, env: dict[str, str] | None = None):
    ids = [b["id"] for b in httpx.get(f"{base}/v1/bases", headers=dict(extra_headers(extra)), timeout=10).json()["bases"]]
    run_env = dict(os.environ)
    run_env.update(
        SCHEMATHESIS_HOOKS="tests.reliability.fuzz_hooks",
        FUZZ_STORED_IDS=",".join(ids),
        PYTHONPATH=str(PROJECT_ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""),
        NO_COLOR="1",
    )
    run_env.update(env or {})
    command = [
        sys.executable, "-m", "schemathesis.cli", "run", f"{base}/schema/openapi.json",
        "--checks", ",".join(CHECKS),
        "--max-examples", str(MAX_EXAMPLES),
        "--seed", str(SEED),
        "--phases", "examples,fuzzing",
        "--max-response-time", str(MAX_RESPONSE_SECONDS),
        "--request-timeout", str(MAX_RESPONSE_SECONDS * 3),
        "--generation-database", "none",
        "--no-color",
        "--workers", "2",
        *extra,
    ]
    result = subprocess.run(
        command, cwd=workdir, env=run_env, capture_output=True, text=True, timeout=600
    )
    output = result.stdout + result.stderr
    generated = re.search(r"(\d+) generated", output)
    return result.returncode, output, int(generated.group(1)) if generated else 0


def extra_headers(extra: tuple[str, ...]):
    for flag, value in zip(extra, extra[1:]):
        if flag == "-H":
            name, _, text = value.partition(":")
            yield name.strip(), text.strip()


@pytest.mark.slow
def test_every_operation_passes_the_contract_checks(server, tmp_path):
    operations = httpx.get(f"{server.base}/schema/openapi.json", timeout=10).json()["paths"]
    count = sum(len(methods) for methods in operations.values())
    code, output, cases = run_schemathesis(server.base, tmp_path)
    print(f"\nschemathesis: {cases} cases over {count} operations, exit status {code}")
    assert code == 0, output[-20000:]
    assert f"{count} selected / {count} total" in output, output[-4000:]
    assert cases >= count * 10, output[-4000:]
    log = server.log()
    assert '"status":500' not in log
    # the hooks put stored ids in: fuzzing reached the calculations, not only the 404s
    reached = [
        line for line in log.splitlines()
        if '"route":"/v1/' in line and '"status":200' in line and '"method":"POST"' in line
    ]
    print(f"schemathesis: {len(reached)} calculation requests answered 200")
    assert reached, "no fuzzed calculation request was answered 200: fuzzing stopped at 4xx"

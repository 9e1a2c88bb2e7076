"""Every example of the README works: each curl command is replayed against the app through
the test client, and its answer is compared with the output the README shows.

Two fields depend on the build that answers, not on the question: ``service_version`` (the
README shows a clean build of some commit) and ``calculation_fingerprint``, which hashes it.
For those the test checks the shown fingerprint against the README's own statement of the
canonical form, recomputed here with the standard library (not the service's encoder), once
with the shown version and once with this build's."""

from __future__ import annotations

import csv
import io
import json
import re
import shlex
from pathlib import Path

import msgspec
import pytest
from litestar.testing import TestClient

from service.api.app import create_app
from service.api.calculations import REQUEST_TYPES
from service.api.value_schemas import REQUEST_TYPES as PRESENT_VALUE_TYPES
from service.settings import Settings
from service.version import service_version

README = (Path(__file__).resolve().parents[1] / "README.md").read_text()
BLOCK = re.compile(r"```(\w+)\n(.*?)```", re.S)


def _examples():
    """(curl command, language of the shown output, shown output) for each example."""
    blocks = BLOCK.findall(README)
    out = []
    for (lang, text), (next_lang, shown) in zip(blocks, blocks[1:]):
        if lang == "sh" and text.lstrip().startswith("curl") and next_lang in ("json", "csv"):
            out.append((text, next_lang, shown))
    return out


EXAMPLES = _examples()


@pytest.fixture(scope="module")
def client():
    with TestClient(create_app(Settings())) as test_client:
        yield test_client


def _request(command: str):
    words = shlex.split(command.split("|")[0].replace("\\\n", " "))
    url = next(w for w in words if w.startswith("http"))
    path = re.sub(r"^https?://[^/]+", "", url)
    headers, body = {}, None
    for flag, value in zip(words, words[1:]):
        if flag == "-H":
            key, _, val = value.partition(":")
            headers[key.strip()] = val.strip()
        elif flag == "-d":
            body = value
    return path, headers, body


def _close(shown, got):
    if isinstance(shown, dict):
        assert shown.keys() == got.keys()
        for key in shown:
            _close(shown[key], got[key])
    elif isinstance(shown, list):
        assert len(shown) == len(got)
        for a, b in zip(shown, got):
            _close(a, b)
    elif isinstance(shown, float):
        assert got == pytest.approx(shown, rel=1e-12, abs=1e-300)
    else:
        assert shown == got


def test_the_readme_has_examples_for_every_calculation():
    paths = {_request(cmd)[0] for cmd, _, _ in EXAMPLES}
    for path in ("/v1/survival", "/v1/deferred-death", "/v1/expectation", "/v1/moments",
                 "/v1/quantiles", "/v1/life-table"):
        assert path in paths


@pytest.mark.parametrize("command,lang,shown", EXAMPLES, ids=[_request(c)[0] for c, _, _ in EXAMPLES])
def test_readme_example(client, calculation_fingerprint_of, command, lang, shown):
    path, headers, body = _request(command)
    if body is None:
        r = client.get(path, headers=headers)
    else:
        r = client.post(path, content=body.encode(), headers=headers)
    if lang == "json":
        shown_body, got = json.loads(shown), r.json()
        if "calculation_fingerprint" in got:
            _check_build_fields(calculation_fingerprint_of, path, body, shown_body, got)
        elif "service_version" in got:  # GET /: the build, without a calculation
            assert VERSION.match(shown_body.pop("service_version"))
            assert got.pop("service_version") == service_version()
        _close(shown_body, got)
    else:
        shown_rows = list(csv.reader(io.StringIO(shown)))
        got_rows = list(csv.reader(io.StringIO(r.text)))
        assert shown_rows[0] == got_rows[0]
        _close([[float(v) for v in row] for row in shown_rows[1:]],
               [[float(v) for v in row] for row in got_rows[1:]])


VERSION = re.compile(r"^\d+\.\d+\.\d+(\+g[0-9a-f]{12}(\.dirty)?)?$")


def _check_build_fields(fingerprint_of, path: str, body: str, shown: dict, got: dict) -> None:
    """service_version and calculation_fingerprint, shown and answered (then dropped)."""
    assert VERSION.match(shown["service_version"]), shown["service_version"]
    assert got["service_version"] == service_version()
    arguments = _arguments(path, body)
    assert shown["calculation_fingerprint"] == fingerprint_of(
        path, arguments, shown["basis"]["fingerprint"], shown["service_version"]
    )
    assert got["calculation_fingerprint"] == fingerprint_of(
        path, arguments, got["basis"]["fingerprint"], got["service_version"]
    )
    for fields in (shown, got):
        del fields["service_version"], fields["calculation_fingerprint"]


def _arguments(path: str, body: str) -> dict:
    """The request as the canonical form takes it: decoded into its Struct (defaults filled
    in, numbers typed), as builtins, without the basis."""
    request_type = {**REQUEST_TYPES, **PRESENT_VALUE_TYPES}[path]
    arguments = msgspec.to_builtins(msgspec.json.decode(body.encode(), type=request_type))
    del arguments["basis"]
    return arguments

"""The audit trail: calculation fingerprints, service_version, access log."""

from __future__ import annotations

import json
import logging
import re

import msgspec
import pytest

from service.api.calculations import REQUEST_TYPES
from service.version import __version__, checkout_commit, label, recorded_commit, service_version

SURVIVAL = {"basis": "standard-ultimate", "lives": [{"age": 60}], "t": [1, 10]}


def _arguments(path, body):
    arguments = msgspec.to_builtins(msgspec.json.decode(json.dumps(body), type=REQUEST_TYPES[path]))
    del arguments["basis"]
    return arguments


def test_the_fingerprint_is_the_documented_hash(client, calculation_fingerprint_of):
    # recomputed from the README's canonical form with the standard library (tests/conftest.py)
    answer = client.post("/v1/survival", json=SURVIVAL).json()
    assert answer["calculation_fingerprint"] == calculation_fingerprint_of(
        "/v1/survival", _arguments("/v1/survival", SURVIVAL), answer["basis"]["fingerprint"],
        answer["service_version"],
    )


def test_the_same_question_gives_the_same_fingerprint_however_it_is_spelled(client):
    first = client.post("/v1/survival", json=SURVIVAL).json()["calculation_fingerprint"]
    # numbers spelled otherwise, a default written out, the stored basis sent inline
    same = {
        "basis": client.get("/v1/bases/standard-ultimate").json()["definition"],
        "lives": [{"age": 60.0, "duration": 0}], "t": [1.0, 1e1],
    }
    assert client.post("/v1/survival", json=same).json()["calculation_fingerprint"] == first


@pytest.mark.parametrize(
    "change",
    [
        {"t": [1, 10.000001]},
        {"lives": [{"age": 60.5}]},
        {"lives": [{"age": 60}, {"age": 60}]},
        {"basis": "thistlemoor-2024-male"},
    ],
)
def test_any_other_argument_changes_it(client, change):
    first = client.post("/v1/survival", json=SURVIVAL).json()["calculation_fingerprint"]
    other = client.post("/v1/survival", json={**SURVIVAL, **change}).json()
    assert re.fullmatch(r"sha256:[0-9a-f]{64}", other["calculation_fingerprint"])
    assert other["calculation_fingerprint"] != first


def test_the_same_arguments_at_another_endpoint_differ(client):
    body = {"basis": "standard-ultimate", "lives": [{"age": 60}]}
    one = client.post("/v1/expectation", json=body).json()["calculation_fingerprint"]
    term = client.post("/v1/expectation", json={**body, "term": 10}).json()["calculation_fingerprint"]
    moments = client.post("/v1/moments", json={**body, "orders": [1]}).json()
    assert len({one, term, moments["calculation_fingerprint"]}) == 3


def test_every_calculation_answer_and_its_log_line_carry_it(client, caplog):
    with caplog.at_level(logging.INFO, logger="service.access"):
        r = client.post("/v1/life-table", headers={"Accept": "text/csv"},
                        json={"basis": "standard-ultimate", "start_age": 40, "end_age": 41})
    fingerprint = r.headers["x-calculation-fingerprint"]
    lines = [json.loads(rec.getMessage()) for rec in caplog.records if rec.name == "service.access"]
    assert lines[-1]["calculation_fingerprint"] == fingerprint
    as_json = client.post("/v1/life-table",
                          json={"basis": "standard-ultimate", "start_age": 40, "end_age": 41})
    assert as_json.json()["calculation_fingerprint"] == fingerprint  # the format is not in it


def test_service_version_names_the_commit_of_this_checkout():
    found = checkout_commit()
    if found is None:
        pytest.skip("not running from a git checkout, so there is no commit to compare with")
    commit, dirty = recorded_commit() or found  # git rev-parse HEAD, git status
    assert service_version() == f"{__version__}+g{commit[:12]}" + (".dirty" if dirty else "")
    assert re.fullmatch(r"\d+\.\d+\.\d+\+g[0-9a-f]{12}(\.dirty)?", service_version())


def test_a_recorded_build_wins_over_git(tmp_path):
    record = tmp_path / "build.json"
    record.write_text('{"version": "0.1.0", "commit": "0123456789abcdef0123", "dirty": false}')
    assert label("0.1.0", recorded_commit(record)) == "0.1.0+g0123456789ab"
    record.write_text('{"commit": "not hex"}')
    assert recorded_commit(record) is None

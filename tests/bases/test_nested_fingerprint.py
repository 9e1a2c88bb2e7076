"""Fingerprints of bases that name stored bases: the stored definition takes the id's place."""

from __future__ import annotations

import msgspec
import pytest
from litestar.testing import TestClient

from service.api.app import create_app
from service.settings import Settings


@pytest.fixture(scope="module")
def client():
    with TestClient(create_app(Settings())) as test_client:
        yield test_client


def _fingerprint(client, basis):
    r = client.post("/v1/expectation", json={"basis": basis, "lives": [{"age": 60}]})
    assert r.status_code == 200, r.text
    return r.json()["basis"]["fingerprint"], r.json()["results"][0]["complete"]


def test_a_stored_id_and_its_definition_written_out_give_one_fingerprint(client):
    stored = client.get("/v1/bases/standard-ultimate").json()["definition"]
    by_id = {"type": "adjusted", "base": "standard-ultimate", "force_multiplier": 1.2}
    in_full = {**by_id, "base": stored}
    fp_id, e_id = _fingerprint(client, by_id)
    fp_full, e_full = _fingerprint(client, in_full)
    assert fp_id == fp_full
    assert e_id == e_full


def test_the_fingerprint_follows_the_named_basis(client):
    a, _ = _fingerprint(client, {"type": "adjusted", "base": "thistlemoor-2024-male", "q_multiplier": 1.2})
    b, _ = _fingerprint(client, {"type": "adjusted", "base": "thistlemoor-2024-female", "q_multiplier": 1.2})
    assert a != b


def test_members_named_by_id_are_written_out(client):
    male = client.get("/v1/bases/thistlemoor-2024-male").json()["definition"]
    female = client.get("/v1/bases/thistlemoor-2024-female").json()["definition"]
    body = {"type": "joint-life", "members": ["thistlemoor-2024-male", "thistlemoor-2024-female"]}
    full = {"type": "joint-life", "members": [male, female]}
    r1 = client.post("/v1/expectation", json={"basis": body, "lives": [{"ages": [65, 62]}]})
    r2 = client.post("/v1/expectation", json={"basis": full, "lives": [{"ages": [65, 62]}]})
    assert r1.status_code == r2.status_code == 200
    assert r1.json()["basis"]["fingerprint"] == r2.json()["basis"]["fingerprint"]
    assert msgspec.json.decode(r1.content)["results"] == msgspec.json.decode(r2.content)["results"]


def test_an_unknown_named_basis_is_404(client):
    r = client.post(
        "/v1/expectation",
        json={"basis": {"type": "adjusted", "base": "no-such-basis", "force_multiplier": 2}, "lives": [{"age": 60}]},
    )
    assert r.status_code == 404
    assert r.headers["content-type"].startswith("application/problem+json")

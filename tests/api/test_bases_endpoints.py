"""GET /v1/bases, GET /v1/bases/{id} (ETag, 304), GET /v1/laws, and fingerprints."""

from __future__ import annotations

import hashlib
import json

import msgspec

from service.bases.definitions import BASIS_KINDS

SHIPPED = {
    "standard-ultimate",
    "thistlemoor-2024-annuitants",
    "thistlemoor-2024-female",
    "thistlemoor-2024-male",
    "thistlemoor-2024-select",
}


def test_list_of_stored_bases(client):
    r = client.get("/v1/bases")
    assert r.status_code == 200
    bases = r.json()["bases"]
    assert {b["id"] for b in bases} == SHIPPED
    for b in bases:
        assert set(b) == {"id", "title", "type", "source", "fingerprint"}
        assert b["fingerprint"].startswith("sha256:") and len(b["fingerprint"]) == 71
    types = {b["id"]: b["type"] for b in bases}
    assert types["standard-ultimate"] == "makeham"
    assert types["thistlemoor-2024-select"] == "select-table"


def test_invented_bases_say_so(client):
    for b in client.get("/v1/bases").json()["bases"]:
        if b["id"].startswith("thistlemoor"):
            detail = client.get(f"/v1/bases/{b['id']}").json()
            assert "INVENTED" in detail["title"]
            assert "INVENTED" in detail["description"]
            assert "INVENTED" in detail["source"]


def test_one_basis_has_its_full_inline_definition(client):
    r = client.get("/v1/bases/thistlemoor-2024-male")
    assert r.status_code == 200
    detail = r.json()
    definition = detail["definition"]
    assert definition["type"] == "table"
    assert definition["start_age"] == 0 and len(definition["q"]) == 121
    assert definition["q"][-1] == 1.0
    assert "rates_files" not in detail and "rates_files" not in definition


def test_fingerprint_is_sha256_of_canonical_json(client):
    detail = client.get("/v1/bases/standard-ultimate").json()
    canonical = json.dumps(detail["definition"], sort_keys=True, separators=(",", ":"))
    # Python and msgspec agree here: every number has a fraction or exponent that round-trips
    canonical = canonical.replace("2.7e-06", "2.7e-6")
    expected = "sha256:" + hashlib.sha256(canonical.encode()).hexdigest()
    assert detail["fingerprint"] == expected


def test_stored_and_inline_have_the_same_fingerprint(client):
    for basis_id in SHIPPED:
        detail = client.get(f"/v1/bases/{basis_id}").json()
        lives = [{"age": 40}]
        stored = client.post("/v1/expectation", json={"basis": basis_id, "lives": lives}).json()
        inline = client.post(
            "/v1/expectation", json={"basis": detail["definition"], "lives": lives}
        ).json()
        assert inline["basis"] == {"id": None, "fingerprint": detail["fingerprint"]}
        assert stored["basis"] == {"id": basis_id, "fingerprint": detail["fingerprint"]}
        assert inline["results"] == stored["results"]


def test_fingerprint_ignores_spelling_of_numbers_and_key_order(client):
    a = {"type": "gompertz", "B": 0.0001, "c": 1.1}
    b = {"c": 1.10, "B": 1e-4, "type": "gompertz"}
    c = {"type": "gompertz", "B": 0.0001, "c": 1.2}
    fingerprints = []
    for basis in (a, b, c):
        body = msgspec.json.encode({"basis": basis, "lives": [{"age": 40}]})
        r = client.post("/v1/expectation", content=body, headers={"content-type": "application/json"})
        fingerprints.append(r.json()["basis"]["fingerprint"])
    assert fingerprints[0] == fingerprints[1] != fingerprints[2]


def test_etag_and_if_none_match(client):
    r = client.get("/v1/bases/standard-ultimate")
    etag = r.headers["etag"]
    # the ETag covers the whole body (RFC 9110 §8.8.3: it names this representation)
    assert etag == '"sha256:' + hashlib.sha256(r.content).hexdigest() + '"'
    again = client.get("/v1/bases/standard-ultimate", headers={"If-None-Match": etag})
    assert again.status_code == 304
    assert again.content == b""
    assert again.headers["etag"] == etag
    weak = client.get("/v1/bases/standard-ultimate", headers={"If-None-Match": f"W/{etag}, \"x\""})
    assert weak.status_code == 304
    other = client.get("/v1/bases/standard-ultimate", headers={"If-None-Match": '"sha256:00"'})
    assert other.status_code == 200
    other_basis = client.get("/v1/bases/thistlemoor-2024-male", headers={"If-None-Match": etag})
    assert other_basis.status_code == 200


def test_laws_describe_every_inline_type(client):
    r = client.get("/v1/laws")
    assert r.status_code == 200
    laws = {law["type"]: law for law in r.json()["laws"]}
    assert set(laws) == {k.__struct_config__.tag for k in BASIS_KINDS}
    gompertz = laws["gompertz"]
    assert "B c^x" in gompertz["definition"]
    params = {p["name"]: p for p in gompertz["parameters"]}
    assert params["c"]["domain"] == "number > 1"
    assert params["B"]["domain"] == "number > 0"
    assert any("A > −B" in rule for rule in laws["makeham"]["rules"])
    table_params = {p["name"]: p for p in laws["table"]["parameters"]}
    assert "udd" in table_params["fractional_ages"]["domain"]
    for law in laws.values():
        assert law["definition"] and "\n" not in law["definition"]
        for p in law["parameters"]:
            assert p["domain"] and p["description"], (law["type"], p)

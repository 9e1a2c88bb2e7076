"""The OpenAPI document: committed copy in sync, served, and describing the contract."""

from __future__ import annotations

import json
from pathlib import Path

from service.api.app import create_app
from service.api.openapi import document_json

COMMITTED = Path(__file__).resolve().parents[2] / "openapi" / "openapi.json"
REGENERATE = "python -m service.api.openapi > openapi/openapi.json"


def test_committed_document_equals_the_generated_one():
    generated = document_json(create_app())
    assert COMMITTED.read_text(encoding="utf-8") == generated, (
        f"openapi/openapi.json is out of date; regenerate it with: {REGENERATE}"
    )


def test_served_document_equals_the_committed_one(client):
    r = client.get("/schema/openapi.json")
    assert r.status_code == 200
    assert r.json() == json.loads(COMMITTED.read_text(encoding="utf-8"))


def test_document_describes_the_contract():
    doc = json.loads(COMMITTED.read_text(encoding="utf-8"))
    for path in ("/v1/survival", "/v1/deferred-death", "/v1/expectation", "/v1/moments",
                 "/v1/quantiles", "/v1/life-table"):
        post = doc["paths"][path]["post"]
        assert post["requestBody"]["required"] is True
        assert "200" in post["responses"]
        for status in ("400", "404", "413", "415", "422"):
            assert "application/problem+json" in post["responses"][status]["content"]
    for path in ("/v1/bases", "/v1/bases/{basis_id}", "/v1/laws", "/health", "/ready", "/metrics"):
        assert "get" in doc["paths"][path]
    schemas = doc["components"]["schemas"]
    basis = schemas["SurvivalRequest"]["properties"]["basis"]
    union = basis["anyOf"][1]
    assert union["discriminator"]["propertyName"] == "type"
    assert set(union["discriminator"]["mapping"]) >= {"gompertz", "makeham", "table", "select-table"}
    assert schemas["Gompertz"]["properties"]["c"]["exclusiveMinimum"] == 1
    assert "text/csv" in doc["paths"]["/v1/life-table"]["post"]["responses"]["200"]["content"]
    description = doc["info"]["description"]
    assert "not actuarial advice" in description
    assert "responsible actuary" in description


def test_interactive_page_is_served(client):
    r = client.get("/schema/swagger")
    assert r.status_code == 200
    assert "swagger-ui" in r.text and "<title>Lifetime Service</title>" in r.text

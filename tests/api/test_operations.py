"""Health, readiness, metrics, request ids, security headers and access logs."""

from __future__ import annotations

import json
import logging


def test_health(client):
    r = client.get("/health")
    assert r.status_code == 200 and r.json() == {"status": "ok"}


def test_ready_once_loaded(client):
    r = client.get("/ready")
    assert r.status_code == 200
    assert r.json() == {"status": "ready", "stored_bases": 5}


def test_metrics_count_requests_and_cache(client):
    client.post(
        "/v1/expectation",
        json={"basis": {"type": "gompertz", "B": 0.00017, "c": 1.0912}, "lives": [{"age": 50}]},
    )
    client.post(
        "/v1/expectation",
        json={"basis": {"type": "gompertz", "B": 0.00017, "c": 1.0912}, "lives": [{"age": 51}]},
    )
    client.get("/no/such/path")
    r = client.get("/metrics")
    assert r.status_code == 200
    assert r.headers["content-type"].startswith("text/plain")
    text = r.text
    assert 'lifetime_http_requests_total{method="POST",route="/v1/expectation",status="200"}' in text
    assert 'lifetime_http_requests_total{method="GET",route="unmatched",status="404"}' in text
    assert "lifetime_http_request_duration_seconds_bucket{" in text
    values = {
        line.split(" ")[0]: float(line.split(" ")[1])
        for line in text.splitlines()
        if line and not line.startswith("#")
    }
    assert values["lifetime_basis_cache_misses_total"] >= 1
    assert values["lifetime_basis_cache_hits_total"] >= 1
    assert values["lifetime_basis_cache_size"] >= 1
    assert values["lifetime_stored_bases"] == 5


def test_inline_basis_compiled_once(client):
    basis = {"type": "weibull", "k": 0.0000123, "n": 3.1}

    def counts():
        text = client.get("/metrics").text
        lines = dict(l.split(" ") for l in text.splitlines() if l.startswith("lifetime_basis_cache_"))
        return float(lines["lifetime_basis_cache_hits_total"]), float(lines["lifetime_basis_cache_misses_total"])

    hits0, misses0 = counts()
    for age in (30, 31, 32):
        client.post("/v1/expectation", json={"basis": basis, "lives": [{"age": age}]})
    hits1, misses1 = counts()
    assert misses1 - misses0 == 1
    assert hits1 - hits0 == 2


def test_request_id_echoed_or_made(client):
    r = client.get("/health", headers={"X-Request-ID": "abc-123.x"})
    assert r.headers["x-request-id"] == "abc-123.x"
    made = client.get("/health").headers["x-request-id"]
    assert len(made) == 32
    assert client.get("/health").headers["x-request-id"] != made  # a new id for each request
    for bad in ("has space", "x" * 200, "semi;colon"):
        echoed = client.get("/health", headers={"X-Request-ID": bad}).headers["x-request-id"]
        assert echoed != bad and len(echoed) == 32


def test_security_headers(client):
    ok = client.get("/v1/bases")
    assert ok.headers["x-content-type-options"] == "nosniff"
    assert "no-store" not in ok.headers.get("cache-control", "")
    error = client.get("/v1/bases/nothing")
    assert error.headers["x-content-type-options"] == "nosniff"
    assert error.headers["cache-control"] == "no-store"


def test_one_access_log_line_per_request(client, caplog):
    with caplog.at_level(logging.INFO, logger="service.access"):
        r = client.post(
            "/v1/survival",
            json={"basis": "standard-ultimate", "lives": [{"age": 40}], "t": [1]},
            headers={"X-Request-ID": "log-test-1"},
        )
    records = [json.loads(rec.getMessage()) for rec in caplog.records if rec.name == "service.access"]
    assert len(records) == 1
    line = records[0]
    assert line["method"] == "POST" and line["path"] == "/v1/survival"
    assert line["status"] == 200 and line["request_id"] == "log-test-1"
    assert line["basis_fingerprint"] == r.json()["basis"]["fingerprint"]
    assert isinstance(line["duration_ms"], float) and line["duration_ms"] >= 0

"""Every error status, with the exact problem+json body shape."""

from __future__ import annotations

import json

import pytest
from litestar.testing import TestClient

from service.api.app import create_app
from service.settings import Settings

LIFE = [{"age": 60}]


def post_json(client, path, body, **kwargs):
    return client.post(
        path, content=json.dumps(body).encode(), headers={"content-type": "application/json"}, **kwargs
    )


# ---- 400 -------------------------------------------------------------------------------------


def test_body_not_json(client, assert_problem):
    r = client.post("/v1/survival", content=b"{not json", headers={"content-type": "application/json"})
    assert_problem(r, 400, "invalid-json", ["$"])


def test_empty_body(client, assert_problem):
    r = client.post("/v1/survival", content=b"", headers={"content-type": "application/json"})
    body = assert_problem(r, 400, "invalid-json", ["$"])
    assert "empty" in body["errors"][0]["message"]


@pytest.mark.parametrize(
    "literal", [b"NaN", b"Infinity", b"-Infinity", b"1e999"], ids=["nan", "inf", "-inf", "huge"]
)
def test_non_finite_numbers_are_refused(client, literal, assert_problem):
    body = b'{"basis": {"type": "gompertz", "B": 0.0001, "c": ' + literal + b'}, "lives": [{"age": 1}], "t": [1]}'
    r = client.post("/v1/survival", content=body, headers={"content-type": "application/json"})
    assert r.status_code == 400
    assert r.json()["type"] in ("/problems/invalid-json", "/problems/invalid-request")


@pytest.mark.parametrize(
    ("body", "field", "words"),
    [
        ({"basis": {"type": "gompertz", "B": 0.0001, "c": "NaN"}, "lives": LIFE, "t": [1]},
         "$.basis.c", "must be a number, got a string"),
        ({"basis": {"type": "gompertz", "B": 0.0001, "c": 0.9}, "lives": LIFE, "t": [1]},
         "$.basis.c", "greater than 1"),
        ({"basis": {"type": "gompertz", "B": 0.0001, "c": 1.1, "D": 1}, "lives": LIFE, "t": [1]},
         "$.basis.D", "unknown field"),
        ({"basis": {"type": "gompertz", "B": 0.0001}, "lives": LIFE, "t": [1]},
         "$.basis.c", "missing"),
        ({"basis": {"type": "gompertx", "B": 0.0001, "c": 1.1}, "lives": LIFE, "t": [1]},
         "$.basis.type", "makeham"),
        ({"basis": {"B": 0.0001, "c": 1.1}, "lives": LIFE, "t": [1]}, "$.basis.type", "missing"),
        ({"basis": 5, "lives": LIFE, "t": [1]}, "$.basis", "stored basis"),
        ({"basis": "standard-ultimate", "lives": [{"age": 1}, {"age": 2}, {"age": 3}, {"age": -1}], "t": [1]},
         "$.lives[3].age", "at least 0"),
        ({"basis": "standard-ultimate", "lives": [{"age": 1, "sex": "f"}], "t": [1]},
         "$.lives[0].sex", "unknown field"),
        ({"basis": "standard-ultimate", "lives": [], "t": [1]}, "$.lives", "at least 1"),
        ({"basis": "standard-ultimate", "lives": LIFE}, "$.t", "missing"),
        ({"basis": "standard-ultimate", "lives": LIFE, "t": [1, -2]}, "$.t[1]", "at least 0"),
        ({"basis": "standard-ultimate", "lives": LIFE, "t": [1], "extra": 1}, "$.extra", "unknown field"),
        ({"basis": {"type": "table", "start_age": 20.5, "q": [1], "fractional_ages": "udd"},
          "lives": LIFE, "t": [1]}, "$.basis.start_age", "whole number"),
        ({"basis": {"type": "table", "start_age": 20, "q": [1], "fractional_ages": "linear"},
          "lives": LIFE, "t": [1]}, "$.basis.fractional_ages", "udd"),
        ({"basis": {"type": "table", "start_age": 20, "q": [0.1, 1.5], "fractional_ages": "udd"},
          "lives": LIFE, "t": [1]}, "$.basis.q[1]", "at most 1"),
    ],
)
def test_schema_mismatch_names_the_field(client, body, field, words, assert_problem):
    r = post_json(client, "/v1/survival", body)
    # one rule: a value of the right type outside its bounds is 422, a schema mismatch 400
    outside = words.startswith(("greater than", "at least", "at most"))
    status, kind = (422, "outside-domain") if outside else (400, "invalid-request")
    problem = assert_problem(r, status, kind, [field])
    assert words in problem["errors"][0]["message"]


def test_orders_must_be_distinct(client, assert_problem):
    r = post_json(client, "/v1/moments", {"basis": "standard-ultimate", "lives": LIFE, "orders": [1, 2, 1]})
    assert_problem(r, 422, "outside-domain", ["$.orders[2]"])


def test_probabilities_strictly_inside(client, assert_problem):
    r = post_json(client, "/v1/quantiles", {"basis": "standard-ultimate", "lives": LIFE, "probabilities": [0.5, 1]})
    assert_problem(r, 422, "outside-domain", ["$.probabilities[1]"])


def test_term_whole_and_bounded(client, assert_problem):
    r = post_json(client, "/v1/expectation", {"basis": "standard-ultimate", "lives": LIFE, "term": 0})
    assert_problem(r, 422, "outside-domain", ["$.term"])
    r = post_json(client, "/v1/expectation", {"basis": "standard-ultimate", "lives": LIFE, "term": 2.5})
    assert_problem(r, 400, "invalid-request", ["$.term"])


# ---- 404, 405 --------------------------------------------------------------------------------


def test_unknown_stored_basis_in_a_calculation(client, assert_problem):
    r = post_json(client, "/v1/survival", {"basis": "no-such-basis", "lives": LIFE, "t": [1]})
    assert_problem(r, 404, "unknown-basis", ["$.basis"])


def test_unknown_stored_basis_read(client, assert_problem):
    assert_problem(client.get("/v1/bases/no-such-basis"), 404, "unknown-basis")


def test_unknown_path(client, assert_problem):
    assert_problem(client.get("/v2/survival"), 404, "not-found")


def test_wrong_method(client, assert_problem):
    assert_problem(client.get("/v1/survival"), 405, "method-not-allowed")


def test_problem_types_are_explained(client, assert_problem):
    r = client.get("/problems/outside-domain")
    assert r.status_code == 200 and r.json()["status"] == 422


# ---- 413, 415 --------------------------------------------------------------------------------


def test_body_too_large(assert_problem):
    with TestClient(create_app(Settings(max_body_bytes=200))) as small:
        body = {"basis": "standard-ultimate", "lives": [{"age": 30}] * 50, "t": [1]}
        assert_problem(post_json(small, "/v1/survival", body), 413, "body-too-large")
        # without a Content-Length: the body is counted while it is read
        chunks = iter([b'{"basis": "standard-ultimate", "lives": [', b'{"age": 30},' * 40, b'{"age": 1}], "t": [1]}'])
        r = small.post("/v1/survival", content=chunks, headers={"content-type": "application/json"})
        assert_problem(r, 413, "body-too-large")
        # a small body still passes
        ok = post_json(small, "/v1/survival", {"basis": "standard-ultimate", "lives": LIFE, "t": [1]})
        assert ok.status_code == 200


def test_content_length_is_not_trusted(assert_problem):
    with TestClient(create_app(Settings(max_body_bytes=200))) as small:
        body = json.dumps({"basis": "standard-ultimate", "lives": [{"age": 30}] * 50, "t": [1]}).encode()
        chunks = iter([body[:100], body[100:]])
        r = small.post(
            "/v1/survival",
            content=chunks,
            headers={"content-type": "application/json"},
        )
        assert_problem(r, 413, "body-too-large")


@pytest.mark.parametrize(
    "content_type", [None, "text/plain", "application/x-www-form-urlencoded", "application/json; charset=latin-1"]
)
def test_body_not_json_media_type(client, content_type, assert_problem):
    headers = {"content-type": content_type} if content_type else {}
    r = client.post(
        "/v1/survival",
        content=b'{"basis": "standard-ultimate", "lives": [{"age": 60}], "t": [1]}',
        headers=headers,
    )
    assert_problem(r, 415, "unsupported-media-type")


def test_json_with_charset_is_accepted(client, assert_problem):
    r = client.post(
        "/v1/survival",
        content=b'{"basis": "standard-ultimate", "lives": [{"age": 60}], "t": [1]}',
        headers={"content-type": "application/json; charset=utf-8"},
    )
    assert r.status_code == 200


# ---- 422 -------------------------------------------------------------------------------------


def test_parameter_outside_its_domain(client, assert_problem):
    body = {"basis": {"type": "makeham", "A": -0.001, "B": 0.0001, "c": 1.1}, "lives": LIFE, "t": [1]}
    problem = assert_problem(post_json(client, "/v1/survival", body), 422, "outside-domain", ["$.basis.A"])
    assert "-0.001" in problem["errors"][0]["message"]


def test_table_that_does_not_close(client, assert_problem):
    body = {
        "basis": {"type": "table", "start_age": 0, "q": [0.1, 0.2, 0.3], "fractional_ages": "udd"},
        "lives": LIFE,
        "t": [1],
    }
    assert_problem(post_json(client, "/v1/survival", body), 422, "outside-domain", ["$.basis.q"])


def test_select_rows_of_unequal_length(client, assert_problem):
    body = {
        "basis": {
            "type": "select-table",
            "start_age": 20,
            "select": [[0.01, 0.02], [0.01]],
            "ultimate_start_age": 22,
            "ultimate": [0.1, 0.2, 1],
            "fractional_ages": "udd",
        },
        "lives": [{"age": 20}],
        "t": [1],
    }
    assert_problem(post_json(client, "/v1/survival", body), 422, "outside-domain", ["$.basis.select[1]"])


def test_age_at_the_limiting_age(client, assert_problem):
    body = {"basis": "thistlemoor-2024-male", "lives": [{"age": 50}, {"age": 121}], "t": [1]}
    problem = assert_problem(post_json(client, "/v1/survival", body), 422, "outside-domain", ["$.lives[1].age"])
    assert "121" in problem["errors"][0]["message"]


def test_fractional_selection_ages_are_placed_by_the_rule(client, assert_problem):
    """age − duration = 40.25 is not a whole selection age: the default rule (last-birthday)
    selects at 40 and keeps the age, so the life is valued at age 40.5, duration 0.5; the
    nearest-birthday rule selects at 40 and keeps the duration (age 40.25)."""
    body = {"basis": "thistlemoor-2024-select", "lives": [{"age": 40.5, "duration": 0.25}], "t": [1]}
    placed = post_json(client, "/v1/survival", body).json()["results"][0]
    assert (placed["age"], placed["duration"]) == (40.5, 0.5)
    same = {"basis": "thistlemoor-2024-select", "lives": [{"age": 40.5, "duration": 0.5}], "t": [1]}
    assert post_json(client, "/v1/survival", same).json()["results"][0] == placed
    body["selection_age_rule"] = "nearest-birthday"
    nearest = post_json(client, "/v1/survival", body).json()["results"][0]
    assert (nearest["age"], nearest["duration"]) == (40.25, 0.25)
    # a selection age before the table's first one is still outside it
    body = {"basis": "thistlemoor-2024-select", "lives": [{"age": 19.5, "duration": 0.25}], "t": [1]}
    assert_problem(post_json(client, "/v1/survival", body), 422, "outside-domain", ["$.lives[0].duration"])


def test_too_many_lives_and_durations(assert_problem):
    with TestClient(create_app(Settings(max_lives=3, max_durations=4, max_values=10))) as small:
        body = {"basis": "standard-ultimate", "lives": [{"age": 30}] * 4, "t": [1]}
        assert_problem(post_json(small, "/v1/survival", body), 422, "outside-domain", ["$.lives"])
        body = {"basis": "standard-ultimate", "lives": LIFE, "t": [1, 2, 3, 4, 5]}
        assert_problem(post_json(small, "/v1/survival", body), 422, "outside-domain", ["$.t"])
        body = {"basis": "standard-ultimate", "lives": LIFE, "deferral": [1, 2, 3, 4, 5]}
        assert_problem(post_json(small, "/v1/deferred-death", body), 422, "outside-domain", ["$.deferral"])
        body = {"basis": "standard-ultimate", "lives": [{"age": 30}] * 3, "t": [1, 2, 3, 4]}
        assert_problem(post_json(small, "/v1/survival", body), 422, "outside-domain", ["$.t"])
        body = {"basis": "standard-ultimate", "start_age": 20, "end_age": 30}
        assert_problem(post_json(small, "/v1/life-table", body), 422, "outside-domain", ["$.end_age"])


def test_life_table_range_errors_name_the_field(client, assert_problem):
    body = {"basis": "thistlemoor-2024-male", "start_age": 50, "end_age": 40}
    assert_problem(post_json(client, "/v1/life-table", body), 422, "outside-domain", ["$.end_age"])
    body = {"basis": "thistlemoor-2024-male", "start_age": 50, "end_age": 130}
    assert_problem(post_json(client, "/v1/life-table", body), 422, "outside-domain", ["$.end_age"])
    body = {"basis": "thistlemoor-2024-male", "start_age": 125, "end_age": 126}
    assert_problem(post_json(client, "/v1/life-table", body), 422, "outside-domain", ["$.start_age"])


# ---- 500, 503 --------------------------------------------------------------------------------


def test_unexpected_failure_is_a_plain_500(client, monkeypatch, caplog, assert_problem):
    from service.core.lifetime import LifetimeModel

    def broken(self, *args, **kwargs):
        raise RuntimeError("secret internal detail")

    monkeypatch.setattr(LifetimeModel, "survival_summary", broken)
    r = post_json(client, "/v1/survival", {"basis": "standard-ultimate", "lives": LIFE, "t": [1]})
    problem = assert_problem(r, 500, "internal-error")
    assert "secret" not in r.text and "RuntimeError" not in r.text and "Traceback" not in r.text
    assert r.headers["x-request-id"] in problem["detail"]
    assert any("secret internal detail" in (rec.exc_text or str(rec.exc_info)) for rec in caplog.records)


def test_not_ready_before_the_bases_are_loaded(assert_problem):
    app = create_app(Settings())
    client = TestClient(app)  # not entered: start-up has not run
    assert_problem(client.get("/ready"), 503, "not-ready")
    r = post_json(client, "/v1/survival", {"basis": "standard-ultimate", "lives": LIFE, "t": [1]})
    assert_problem(r, 503, "not-ready")
    with client:
        assert client.get("/ready").status_code == 200

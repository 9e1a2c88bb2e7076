"""Transforms through the HTTP API: results, composition and every bad-input path."""

from __future__ import annotations

import math

import pytest

G = {"type": "gompertz", "B": 3e-5, "c": 1.1}


def _post(client, path, body):
    return client.post(path, json=body)


def test_rated_gompertz_equals_gompertz_with_m_b(client):
    rated = {"type": "adjusted", "base": G, "force_multiplier": 2.0}
    same = {"type": "gompertz", "B": 6e-5, "c": 1.1}  # standard result: m μ of Gompertz
    lives = [{"age": 60}, {"age": 75.5}]
    a = _post(client, "/v1/expectation", {"basis": rated, "lives": lives}).json()["results"]
    b = _post(client, "/v1/expectation", {"basis": same, "lives": lives}).json()["results"]
    for ra, rb in zip(a, b):
        assert ra["age"] == rb["age"]
        for key in ("complete", "curtate", "complete_variance", "curtate_variance"):
            assert ra[key] == pytest.approx(rb[key], rel=1e-10)


def test_joint_life_of_rated_members_echoes_ages(client):
    member = {"type": "adjusted", "base": "thistlemoor-2024-female", "q_multiplier": 1.2}
    body = {
        "basis": {"type": "joint-life", "members": ["thistlemoor-2024-male", member]},
        "lives": [{"ages": [65, 62]}],
        "t": [0, 10],
    }
    r = _post(client, "/v1/survival", body)
    assert r.status_code == 200, r.text
    result = r.json()["results"][0]
    assert result["ages"] == [65.0, 62.0] and "age" not in result
    # textbook identity: under independence ₜp_xy = ₜp_x ₜp_y
    px = _post(client, "/v1/survival", {"basis": "thistlemoor-2024-male", "lives": [{"age": 65}], "t": [10]}).json()["results"][0]["survival"][0]
    py = _post(client, "/v1/survival", {"basis": member, "lives": [{"age": 62}], "t": [10]}).json()["results"][0]["survival"][0]
    assert result["survival"][1] == pytest.approx(px * py, rel=1e-13)
    for path, extra in (
        ("/v1/deferred-death", {"deferral": [0, 5]}),
        ("/v1/expectation", {"term": 10}),
        ("/v1/moments", {"orders": [1, 2]}),
        ("/v1/quantiles", {"probabilities": [0.5]}),
    ):
        r = _post(client, path, {"basis": body["basis"], "lives": body["lives"], **extra})
        assert r.status_code == 200, (path, r.text)


def test_improved_and_stored_id_base(client):
    basis = {
        "type": "improved",
        "base": "thistlemoor-2024-male",
        "base_year": 2024,
        "valuation_year": 2024,
        "rates": {"start_age": 0, "values": [0.0]},
    }
    a = _post(client, "/v1/expectation", {"basis": basis, "lives": [{"age": 65.5}]}).json()["results"][0]
    b = _post(client, "/v1/expectation", {"basis": "thistlemoor-2024-male", "lives": [{"age": 65.5}]}).json()["results"][0]
    assert a["complete"] == pytest.approx(b["complete"], rel=1e-13)  # zero rates: the base table
    r = _post(client, "/v1/life-table", {"basis": basis, "start_age": 65, "end_age": 70})
    assert r.status_code == 200 and all(math.isfinite(v) for v in r.json()["results"][0]["q"])


@pytest.mark.parametrize(
    ("basis", "lives", "status", "kind", "field"),
    [
        ({"type": "adjusted", "base": "no-such-basis", "force_multiplier": 2}, [{"age": 60}], 404, "unknown-basis", "$.basis"),
        ({"type": "adjusted", "base": G, "q_multiplier": 2}, [{"age": 60}], 422, "outside-domain", "$.basis.q_multiplier"),
        ({"type": "adjusted", "base": G, "extra_force": -0.01}, [{"age": 60}], 422, "outside-domain", "$.basis.extra_force"),
        ({"type": "adjusted", "base": {"type": "gompertz", "B": 1e-5, "c": 0.9}, "force_multiplier": 2}, [{"age": 60}], 400, "invalid-request", "$.basis.base.c"),
        ({"type": "joint-life", "members": [G, G]}, [{"ages": [60, 50, 40]}], 422, "outside-domain", "$.lives[0].ages"),
        ({"type": "joint-life", "members": [G, G]}, [{"age": 60}], 422, "outside-domain", "$.lives[0].age"),
        (G, [{"ages": [60, 50]}], 422, "outside-domain", "$.lives[0].ages"),
        ({"type": "last-survivor", "members": [G, {"type": "table", "start_age": 0, "q": [0.1, 2], "fractional_ages": "udd"}]}, [{"ages": [1, 1]}], 400, "invalid-request", "$.basis.members[1].q[1]"),
        ({"type": "improved", "base": "thistlemoor-2024-male", "base_year": 2024, "valuation_year": 2025, "rates_by_year": {"start_age": 0, "start_year": 2025, "grid": [[0.01, 0.02], [0.01]]}}, [{"age": 60}], 422, "outside-domain", "$.basis.rates_by_year.grid[1]"),
        ({"type": "improved", "base": G, "base_year": 2024, "valuation_year": 2025, "rates": {"start_age": 0, "values": [0.01]}}, [{"age": 60}], 422, "outside-domain", "$.basis.base"),
        ({"type": "adjusted", "base": {"type": "joint-life", "members": [G, G]}, "force_multiplier": 2}, [{"age": 60}], 422, "outside-domain", "$.basis.base"),
    ],
)
def test_bad_transforms(client, assert_problem, basis, lives, status, kind, field):
    r = _post(client, "/v1/expectation", {"basis": basis, "lives": lives})
    assert_problem(r, status, kind, [field])


def test_nesting_depth_is_limited(client, assert_problem):
    basis = G
    for _ in range(9):
        basis = {"type": "adjusted", "base": basis, "force_multiplier": 1.01}
    r = _post(client, "/v1/expectation", {"basis": basis, "lives": [{"age": 60}]})
    assert_problem(r, 422, "outside-domain", ["$.basis"])


def test_laws_list_the_transforms_and_the_rating_order(client):
    laws = {law["type"]: law for law in client.get("/v1/laws").json()["laws"]}
    for kind in ("adjusted", "improved", "joint-life", "last-survivor"):
        assert kind in laws
    assert any("order of application" in rule for rule in laws["adjusted"]["rules"])

"""One test per defect found by the second robustness round, each from its reproducer.

The expected values are facts of the definitions, not of this code: a table that closes with
q = 1 (or a law whose survival falls below every double) leaves no survivor at a duration far
beyond its horizon, so ₜp_x = 0, ₜq_x = 1 and the density is 0 there (the definition of a
closing table, common practice); RFC 9110 §12.4.2 and §12.5.1 define quality values and
``q=0`` as "not acceptable".
"""

from __future__ import annotations

import json
import math

import pytest

from .own_fuzzer import GOMPERTZ, SELECT

TABLE_BASES = [
    "thistlemoor-2024-male",
    "thistlemoor-2024-select",
    "thistlemoor-2024-annuitants",
    {"type": "table", "start_age": 100, "q": [0.3, 0.5, 1.0], "fractional_ages": "constant-force"},
    {"type": "table", "start_age": 100, "q": [0.3, 0.5, 1.0], "fractional_ages": "balducci"},
    SELECT,
    {"type": "adjusted", "base": "thistlemoor-2024-male", "q_multiplier": 1.2},
    {"type": "improved", "base": "thistlemoor-2024-select", "base_year": 2024,
     "valuation_year": 2026, "rates": {"start_age": 0, "values": [0.01]}},
    {"type": "adjusted", "base": {"type": "adjusted", "base": "thistlemoor-2024-female",
                                   "extra_q": 0.001}, "force_multiplier": 1.1},
]


def problem(response, status: int, fields: list[str]) -> dict:
    """The answer is problem+json of this status naming exactly these fields."""
    assert response.status_code == status, response.text
    assert response.headers["content-type"].startswith("application/problem+json")
    body = response.json()
    assert body["status"] == status
    assert [e["field"] for e in body.get("errors", [])] == fields, body
    return body


def _life(basis) -> dict:
    if isinstance(basis, dict) and basis.get("type") == "table":
        return {"age": 100}
    return {"age": 60}


@pytest.mark.parametrize("basis", TABLE_BASES, ids=lambda b: b if isinstance(b, str) else b["type"])
@pytest.mark.parametrize("t", [1e19, 9.3e18, 1e308, 1.7976931348623157e308])
def test_a_duration_far_beyond_the_horizon_has_no_survivor(client, basis, t):
    r = client.post("/v1/survival", json={"basis": basis, "lives": [_life(basis)], "t": [1.0, t]})
    assert r.status_code == 200, r.text
    result = r.json()["results"][0]
    assert result["survival"][1] == 0.0
    assert result["death"][1] == 1.0
    assert result["density"][1] == 0.0
    assert 0.0 < result["survival"][0] < 1.0


@pytest.mark.parametrize("basis", TABLE_BASES[:3] + [
    {"type": "joint-life", "members": ["thistlemoor-2024-male", GOMPERTZ]},
], ids=str)
def test_a_deferral_far_beyond_the_horizon_has_no_death_in_it(client, basis):
    life = {"ages": [60, 55]} if "members" in str(basis) else {"age": 60}
    body = {"basis": basis, "lives": [life], "deferral": [0.0, 1e19, 1e308], "period": 1e300}
    r = client.post("/v1/deferred-death", json=body)
    assert r.status_code == 200, r.text
    # from age 60 everyone dies at some time after 0: the first interval holds every death
    assert r.json()["results"][0]["probability"] == [1.0, 0.0, 0.0]


def _nested(depth: int, opener: str = "[", closer: str = "]") -> str:
    return opener * depth + "1" + closer * depth


@pytest.mark.parametrize(
    "body, field",
    [
        (_nested(976), "$" + "[0]" * 64),
        ('{"zz": ' + _nested(3000) + ', "basis": "standard-ultimate", "lives": [{"age": 60}], '
         '"t": [1]}', "$.zz" + "[0]" * 63),
        ('{"basis": {"zz": ' + _nested(976, '{"a": ', "}") + ', "type": "gompertz", "B": 0.0001, '
         '"c": 1.1}, "lives": [{"age": 60}], "t": [1]}', "$.basis.zz" + ".a" * 62),
    ],
    ids=["top", "skipped-field", "before-the-type-tag"],
)
def test_deep_json_is_refused_before_decoding(client, body, field):
    r = client.post("/v1/survival", content=body, headers={"content-type": "application/json"})
    answer = problem(r, 400, [field])
    assert "64 levels" in answer["errors"][0]["message"]


@pytest.mark.parametrize("depth", [9, 40, 331, 975])
def test_deeply_nested_bases_are_refused_with_the_field(client, depth):
    basis = '{"type": "adjusted", "force_multiplier": 1.01, "base": ' * depth
    basis += json.dumps(GOMPERTZ) + "}" * depth
    body = '{"basis": ' + basis + ', "lives": [{"age": 60}], "t": [1]}'
    r = client.post("/v1/survival", content=body, headers={"content-type": "application/json"})
    assert r.status_code in (400, 422), r.text
    field = r.json()["errors"][0]["field"]
    problem(r, r.status_code, [field])
    assert field.startswith("$.basis")


def test_a_valid_deep_basis_is_not_caught_by_the_depth_bound(client):
    # 8 levels, the documented limit, of last-survivor statuses over select tables
    basis = {"type": "adjusted", "base": "thistlemoor-2024-select", "force_multiplier": 1.1}
    for _ in range(7):
        basis = {"type": "adjusted", "base": basis, "force_multiplier": 1.0}
    r = client.post("/v1/survival", json={"basis": basis, "lives": [{"age": 60}], "t": [1]})
    assert r.status_code == 200, r.text


LIFE_TABLE = {"basis": "standard-ultimate", "start_age": 60, "end_age": 62}


@pytest.mark.parametrize(
    "accept, media",
    [
        ("text/csv;q=0, application/json", "application/json"),  # §12.4.2: q=0 is "not acceptable"
        ("text/csv;q=0.000, application/json;q=0.1", "application/json"),
        ("text/csv", "text/csv"),
        ("text/csv;q=0.001", "text/csv"),
        ("text/csv;;;q=0.5", "text/csv"),  # §5.6.6: each parameter after ";" is optional
        ("application/json;q=0, text/csv", "text/csv"),
        ("text/csv;q=0.5, application/json;q=0.9", "application/json"),
        ("text/csv;q=0.9, application/json;q=0.5", "text/csv"),
        ("text/*", "text/csv"),
        ("*/*;q=0.8, text/csv;q=0", "application/json"),  # the most specific range decides
        ("text/*;q=0.9, */*;q=0.5", "text/csv"),
    ],
)
def test_accept_is_read_as_rfc_9110_says(client, accept, media):
    r = client.post("/v1/life-table", json=LIFE_TABLE, headers={"accept": accept})
    assert r.status_code == 200, r.text
    assert r.headers["content-type"].split(";")[0] == media
    if media == "application/json":
        assert json.loads(r.text)["results"][0]["age"] == [60.0, 61.0, 62.0]


@pytest.mark.parametrize(
    "accept",
    # §12.4.2: qvalue = ( "0" [ "." 0*3DIGIT ] ) / ( "1" [ "." 0*3("0") ] )
    ["text/csv;q=inf", "text/csv;q=1e400", "text/csv;q=-inf", "text/csv;q=nan",
     "text/csv;q=1.0001", "text/csv;q=-1", "text/csv;q=", "q=1"],
)
def test_a_malformed_accept_is_a_400_naming_the_header(client, accept):
    r = client.post("/v1/life-table", json=LIFE_TABLE, headers={"accept": accept})
    assert r.status_code == 400, r.text
    assert r.headers["content-type"].startswith("application/problem+json")
    assert r.json()["detail"].startswith("Accept: ")


@pytest.mark.parametrize(
    "accept",
    # §12.5.1: a range with parameters matches only a type with those parameters
    ["text/csv;q=0", "text/csv;" + "x=1;" * 200],
)
def test_an_accept_that_rules_out_every_offer_is_a_406(client, accept):
    r = client.post("/v1/life-table", json=LIFE_TABLE, headers={"accept": accept})
    assert r.status_code == 406, r.text
    assert "application/json or text/csv" in r.json()["detail"]


def _values(client, interest, benefit, basis="standard-ultimate", age=60):
    body = {"basis": basis, "lives": [{"age": age}], "interest": interest, "benefits": [benefit]}
    return client.post("/v1/present-values", json=body)


@pytest.mark.parametrize(
    "interest, field",
    [
        ({"rate": -0.99}, "$.interest.rate"),
        ({"rate": -0.0500001}, "$.interest.rate"),
        ({"rate": 1.0000001}, "$.interest.rate"),
        ({"spot_rates": [0.02, -0.99]}, "$.interest.spot_rates[1]"),
    ],
)
@pytest.mark.parametrize(
    "benefit",
    [
        {"type": "endowment", "term": 100},
        {"type": "pure-endowment", "term": 100},
        {"type": "life-annuity", "frequency": 12, "approximation": "woolhouse"},
    ],
    ids=lambda b: b["type"],
)
def test_a_rate_outside_the_domain_is_a_422_naming_it(client, interest, field, benefit):
    answer = problem(_values(client, interest, benefit), 422, [field])
    message = answer["errors"][0]["message"]
    assert "at least -0.05" in message or "at most 1" in message, message


@pytest.mark.parametrize("rate", [-0.05, 1.0])
def test_a_pure_endowment_at_the_edges_of_the_domain(client, rate):
    # ₙE_x = vⁿ ₙp_x (the textbook definition), with ₙp_x of a Gompertz law in closed form,
    # exp(−B cˣ (cⁿ − 1) / ln c)
    b, c, x, n = 3e-5, 1.1, 40.0, 100.0
    basis = {"type": "gompertz", "B": b, "c": c}
    r = _values(client, {"rate": rate}, {"type": "pure-endowment", "term": n}, basis, x)
    assert r.status_code == 200, r.text
    result = r.json()["results"][0]["benefits"][0]
    survival = math.exp(-b * c**x * (c**n - 1.0) / math.log(c))
    assert result["value"] == pytest.approx((1.0 + rate) ** -n * survival, rel=1e-12)
    assert result["second_moment"] == pytest.approx((1.0 + rate) ** (-2 * n) * survival, rel=1e-12)


def test_a_present_value_past_the_largest_double_is_a_422_not_an_overflow(client):
    # at −5% over 10,000 years with almost no mortality, E[Z²] = v²ⁿ ₙp ≈ e^1026 > 1.8e308
    r = _values(client, {"rate": -0.05}, {"type": "pure-endowment", "term": 10_000},
                {"type": "constant-force", "mu": 1e-6})
    answer = problem(r, 422, ["$.interest"])
    assert "1.8e308" in answer["errors"][0]["message"]


IMPROVED_MALE = {"type": "improved", "base": "thistlemoor-2024-male", "base_year": 2024,
                 "valuation_year": 2030, "rates": {"start_age": 0, "values": [0.015]}}


@pytest.mark.parametrize("basis", [
    IMPROVED_MALE,
    {**IMPROVED_MALE, "base": "thistlemoor-2024-select"},
    {"type": "adjusted", "base": "thistlemoor-2024-male", "q_multiplier": 1.02},
    {"type": "adjusted", "base": "thistlemoor-2024-select", "q_multiplier": 1.02},
], ids=["improved", "improved-select", "q-multiplier", "q-multiplier-select"])
def test_no_null_where_a_value_exists_in_the_closing_year(client, basis):
    # the tables close with q = 1 in the year from 120: a life aged 120.5 dies within 1.5
    # years for certain, so u|1.5q is 1 at u = 0 and 0 for u ≥ 0.5 (the definition of a
    # closing table, common practice)
    life = {"age": 120.5, "duration": 5} if "select" in basis["base"] else {"age": 120.5}
    body = {"basis": basis, "lives": [life], "deferral": [0, 0.5, 2.5, 10], "period": 1.5}
    r = client.post("/v1/deferred-death", json=body)
    assert r.status_code == 200, r.text
    assert r.json()["results"][0]["probability"] == [1.0, 0.0, 0.0, 0.0]
    r = client.post("/v1/survival", json={"basis": basis, "lives": [life], "t": [1.5, 2.5, 1e3]})
    assert r.json()["results"][0]["survival"] == [0.0, 0.0, 0.0]


def test_generalised_de_moivre_with_a_huge_alpha_has_a_finite_expectation(client):
    # T_x/(ω − x) is Beta(1, α), so e̊_x = (ω − x)/(α + 1) (a textbook property of the law)
    basis = {"type": "generalised-de-moivre", "omega": 100, "alpha": 1e308}
    r = client.post("/v1/expectation", json={"basis": basis, "lives": [{"age": 0.6}]})
    assert r.status_code == 200, r.text
    result = r.json()["results"][0]
    assert result["complete"] == pytest.approx(99.4 / 1e308, rel=1e-12)
    assert result["complete_variance"] is not None


def test_a_status_life_table_has_no_deaths_after_certain_death(client):
    # a common shock of force 500 leaves essentially no survivor after a year: l falls to 0,
    # and d = 0 once there is no one left to die (q, conditional on a survivor, is null)
    basis = {"type": "joint-life", "members": ["thistlemoor-2024-male", "thistlemoor-2024-female"],
             "common_shock_force": 500}
    r = client.post("/v1/life-table", json={"basis": basis, "start_ages": [60, 60], "end_age": 64})
    assert r.status_code == 200, r.text
    result = r.json()["results"][0]
    assert result["l"][2:] == [0.0, 0.0, 0.0]
    assert result["d"][2:] == [0.0, 0.0, 0.0]
    assert all(d is not None for d in result["d"])


@pytest.mark.parametrize("basis, life, field", [
    ("standard-ultimate", {"age": 60, "duration": 500}, "$.lives[0].duration"),
    ("thistlemoor-2024-male", {"age": 60, "duration": 1}, "$.lives[0].duration"),
    ({"type": "adjusted", "base": "thistlemoor-2024-male", "force_multiplier": 1.2},
     {"age": 60, "duration": 1}, "$.lives[0].duration"),
    ({"type": "joint-life", "members": ["thistlemoor-2024-select", "thistlemoor-2024-male"]},
     {"ages": [60, 60], "durations": [1, 2]}, "$.lives[0].durations[1]"),
])
def test_a_duration_where_no_select_period_applies_is_refused(client, basis, life, field):
    r = client.post("/v1/expectation", json={"basis": basis, "lives": [life]})
    answer = problem(r, 422, [field])
    assert "no select period" in answer["errors"][0]["message"]


def test_a_duration_on_a_select_basis_still_applies(client):
    r = client.post("/v1/expectation", json={
        "basis": {"type": "joint-life", "members": ["thistlemoor-2024-select", "thistlemoor-2024-male"]},
        "lives": [{"ages": [61, 60], "durations": [1, 0]}]})
    assert r.status_code == 200, r.text


def test_a_selection_age_below_zero_is_refused(client):
    # a life aged 30 cannot have been selected 40 years ago (at age −10)
    r = client.post("/v1/expectation", json={"basis": "thistlemoor-2024-select",
                                             "lives": [{"age": 30, "duration": 40}]})
    answer = problem(r, 422, ["$.lives[0].duration"])
    assert "cannot be negative" in answer["errors"][0]["message"]


def test_an_age_below_the_select_ages_is_blamed_on_the_age(client):
    r = client.post("/v1/expectation", json={"basis": "thistlemoor-2024-select",
                                             "lives": [{"age": 1}]})
    problem(r, 422, ["$.lives[0].age"])


PV = {"basis": "standard-ultimate", "lives": [{"age": 60}], "interest": {"rate": 0.03}}


@pytest.mark.parametrize("benefit, field, words", [
    ({"type": "pension"}, "$.benefits[0].type",
     "life-annuity, life-insurance, pure-endowment, endowment"),
    ({"type": "life-annuity", "timing": "in-advance"}, "$.benefits[0].timing",
     "advance, arrears, continuous"),
    ({"type": "life-insurance", "timing": "at-death"}, "$.benefits[0].timing",
     "end-of-year, end-of-period, moment-of-death"),
    ({"type": "life-annuity", "approximation": "simpson"}, "$.benefits[0].approximation",
     "exact, udd, woolhouse"),
])
def test_an_invalid_choice_lists_the_allowed_values(client, benefit, field, words):
    answer = problem(client.post("/v1/present-values", json={**PV, "benefits": [benefit]}), 400,
                     [field])
    message = answer["errors"][0]["message"]
    assert words in message
    assert "gompertz" not in message  # not the basis types


@pytest.mark.parametrize("term, status, words", [
    (20000, 422, "at most 10000"),  # a whole number outside its bounds
    (0, 422, "at least 1"),
    (10.5, 400, "must be a whole number, written without a decimal point"),  # the wrong type
    (20.0, 400, "(20, not 20.0 or 2e1)"),  # strict decoding: a float literal is not an integer
])
def test_one_rule_for_terms(client, term, status, words):
    r = client.post("/v1/expectation", json={"basis": "standard-ultimate",
                                             "lives": [{"age": 60}], "term": term})
    answer = problem(r, status, ["$.term"])
    assert words in answer["errors"][0]["message"]

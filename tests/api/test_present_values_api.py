"""POST /v1/present-values through the test client: every benefit type and the error paths."""

from __future__ import annotations

import numpy as np
import pytest
from shared_bases import SULT

from service.core.values import (
    Discount,
    Endowment,
    LifeAnnuity,
    LifeInsurance,
    PureEndowment,
    present_values,
)

URL = "/v1/present-values"


def _post(client, benefits, interest=None, lives=None, basis="standard-ultimate"):
    return client.post(URL, json={
        "basis": basis,
        "lives": lives or [{"age": 60}],
        "interest": {"rate": 0.05} if interest is None else interest,
        "benefits": benefits,
    })


def test_every_benefit_type_matches_the_core(client):
    request = [
        {"type": "life-annuity", "frequency": 12, "guarantee": 5, "net_premium": {"premium_term": 10}},
        {"type": "life-annuity", "timing": "continuous", "increasing": True, "term": 20},
        {"type": "life-annuity", "timing": "arrears", "deferral": 5, "frequency": 4, "approximation": "udd"},
        {"type": "life-insurance", "timing": "end-of-period", "frequency": 4, "term": 10},
        {"type": "life-insurance", "timing": "moment-of-death", "net_premium": {}},
        {"type": "life-insurance", "increasing": True, "deferral": 2},
        {"type": "pure-endowment", "term": 10},
        {"type": "endowment", "term": 20, "net_premium": {"premium_term": 20}},
    ]
    core = [
        LifeAnnuity(frequency=12, guarantee=5),
        LifeAnnuity(timing="continuous", increasing=True, term=20),
        LifeAnnuity(timing="arrears", deferral=5, frequency=4, approximation="udd"),
        LifeInsurance(timing="end-of-period", frequency=4, term=10),
        LifeInsurance(timing="moment-of-death"),
        LifeInsurance(increasing=True, deferral=2),
        PureEndowment(term=10),
        Endowment(term=20),
    ]
    lives = [{"age": 60}, {"age": 47.5}]
    r = _post(client, request, lives=lives)
    assert r.status_code == 200, r.text
    body = r.json()
    assert body["basis"]["id"] == "standard-ultimate"
    expected = present_values(SULT, np.array([60.0, 47.5]), np.zeros(2), Discount.constant(0.05),
                              core, [10, False, False, False, None, False, False, 20])
    for i, result in enumerate(body["results"]):
        assert result["age"] == lives[i]["age"]
        assert len(result["benefits"]) == len(request)
        for got, want in zip(result["benefits"], expected):
            assert got["value"] == want.value[i]
            assert got["second_moment"] == want.second_moment[i]
            assert got["standard_deviation"] == want.standard_deviation[i]
            if want.net_premium is None:
                assert "net_premium" not in got
            else:
                assert got["net_premium"] == want.net_premium[i]
    assert body["results"][0]["benefits"][2]["approximation"] == "udd"
    assert "approximation" not in body["results"][0]["benefits"][0]


def test_published_values_through_the_api(client):
    # Standard Ultimate Life Table at 5 % (Dickson, Hardy and Waters; quoted from memory)
    r = _post(client, [{"type": "life-annuity"}, {"type": "life-insurance"}])
    a, ins = r.json()["results"][0]["benefits"]
    assert round(a["value"], 4) == 14.9041
    assert round(ins["value"], 5) == 0.29028
    assert round(ins["second_moment"], 5) == 0.10834


def test_spot_rates_and_inline_basis(client):
    r = _post(client, [{"type": "pure-endowment", "term": 2}], interest={"spot_rates": [0.02, 0.03]},
              basis={"type": "constant-force", "mu": 0.01}, lives=[{"age": 30}])
    assert r.status_code == 200, r.text
    value = r.json()["results"][0]["benefits"][0]["value"]
    assert value == pytest.approx(np.exp(-0.02) / 1.03**2, rel=1e-14)


@pytest.mark.parametrize(
    "interest,benefits,status,kind,field",
    [
        ({"rate": -1}, [{"type": "life-annuity"}], 422, "outside-domain", "$.interest.rate"),
        ({"rate": -1.5}, [{"type": "life-annuity"}], 422, "outside-domain", "$.interest.rate"),
        ({"spot_rates": [0.03, None, 0.04]}, [{"type": "life-annuity"}], 400, "invalid-request",
         "$.interest.spot_rates[1]"),
        ({"spot_rates": []}, [{"type": "life-annuity"}], 422, "outside-domain", "$.interest.spot_rates"),
        ({}, [{"type": "life-annuity"}], 422, "outside-domain", "$.interest"),
        ({"rate": 0.05, "spot_rates": [0.05]}, [{"type": "life-annuity"}], 422, "outside-domain", "$.interest"),
        ({"rate": 0.05}, [{"type": "life-annuity", "frequency": 2.5}], 400, "invalid-request",
         "$.benefits[0].frequency"),
        ({"rate": 0.05}, [{"type": "life-annuity", "frequency": 0}], 422, "outside-domain",
         "$.benefits[0].frequency"),
        ({"rate": 0.05}, [{"type": "life-annuity"}, {"type": "life-annuity", "deferral": 95}], 422,
         "outside-domain", "$.benefits[1].deferral"),
        ({"rate": 0.05}, [{"type": "life-annuity", "guarantee": 95}], 422, "outside-domain",
         "$.benefits[0].guarantee"),
        ({"rate": 0.05}, [{"type": "life-annuity", "frequency": 1000}], 422, "outside-domain",
         "$.benefits[0]"),
        ({"rate": 0.05}, [{"type": "pension"}], 400, "invalid-request", "$.benefits[0].type"),
        ({"rate": 0.05}, [{"type": "pure-endowment"}], 400, "invalid-request", "$.benefits[0].term"),
        ({"rate": 0.05}, [], 422, "outside-domain", "$.benefits"),
        ({"spot_rates": [0.05]}, [{"type": "life-annuity", "frequency": 12, "approximation": "udd"}], 422,
         "outside-domain", "$.benefits[0].approximation"),
        ({"rate": 0.05}, [{"type": "life-insurance", "frequency": 12}], 422, "outside-domain",
         "$.benefits[0].frequency"),
    ],
)
def test_bad_input_is_a_problem_with_the_field(client, assert_problem, interest, benefits, status,
                                               kind, field):
    r = _post(client, benefits, interest=interest)
    body = assert_problem(r, status, kind, [field])
    assert "NaN" not in r.text and "Infinity" not in r.text
    assert body["errors"][0]["message"]


def test_values_that_do_not_converge_are_422(client, assert_problem):
    # v(t) ₜp = e^((0.0408 − 0.01) t) grows: at −4% a force of 0.01 does not converge
    r = _post(client, [{"type": "life-annuity"}], interest={"rate": -0.04},
              basis={"type": "constant-force", "mu": 0.01})
    assert_problem(r, 422, "outside-domain", ["$.interest"])


def test_a_life_past_the_limiting_age(client, assert_problem):
    r = _post(client, [{"type": "life-annuity"}], basis={"type": "de-moivre", "omega": 100},
              lives=[{"age": 100}])
    assert_problem(r, 422, "outside-domain", ["$.lives[0].age"])


def test_the_endpoint_is_in_the_openapi_document(client):
    doc = client.get("/schema/openapi.json").json()
    operation = doc["paths"]["/v1/present-values"]["post"]
    assert operation["requestBody"]["content"]["application/json"]["schema"]["$ref"].endswith(
        "PresentValuesRequest"
    )

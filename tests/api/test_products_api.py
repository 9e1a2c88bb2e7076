"""Product features through the API: premium terms and frequencies, escalating and decreasing
benefits, two-life benefits, policy values, sensitivities, cash flows (JSON and CSV), and the
bad input around them."""

from __future__ import annotations

import csv
import io

import numpy as np
import pytest
from shared_bases import I5, SULT

from service.core.cash_flows import cash_flows
from service.core.policy_values import policy_values
from service.core.values import (
    Endowment,
    LifeAnnuity,
    LifeInsurance,
    PremiumPlan,
    Valuation,
)

PAIR = {"type": "joint-life", "members": ["thistlemoor-2024-male", "thistlemoor-2024-female"]}


def _post(client, benefits, url="/v1/present-values", basis="standard-ultimate", lives=None,
          interest=None, **extra):
    body = {"basis": basis, "lives": lives or [{"age": 40}],
            "interest": interest or {"rate": 0.05}, "benefits": benefits, **extra}
    return client.post(url, json=body)


def _benefits(r):
    assert r.status_code == 200, r.text
    assert "NaN" not in r.text and "Infinity" not in r.text
    return [result["benefits"] for result in r.json()["results"]]


def test_the_default_premium_term_is_the_benefits(client):
    # the figures (Standard Ultimate, 5 %): 0.001126 over the term, 0.000793 for life
    r = _post(client, [
        {"type": "life-insurance", "term": 20, "net_premium": {}},
        {"type": "life-insurance", "term": 20, "net_premium": {"premium_term": "whole-life"}},
        {"type": "life-annuity", "deferral": 25, "net_premium": {"frequency": 12}},
    ])
    term, life, deferred = _benefits(r)[0]
    assert round(term["net_premium"], 6) == 0.001126 and term["premium_term"] == 20
    assert round(life["net_premium"], 6) == 0.000793 and life["premium_term"] == "whole-life"
    assert deferred["premium_term"] == 25
    want = Valuation(SULT, np.array([40.0]), np.zeros(1), I5).values(
        LifeAnnuity(deferral=25), PremiumPlan(25, 12)).net_premium[0]
    assert deferred["net_premium"] == want


def test_new_benefits_match_the_core(client):
    request = [
        {"type": "life-annuity", "frequency": 12, "escalation": 0.03},
        {"type": "life-insurance", "decreasing": True, "term": 25, "net_premium": {"frequency": 12}},
        {"type": "life-insurance", "timing": "moment-of-death", "escalation": 0.02, "term": 30},
    ]
    core = [LifeAnnuity(frequency=12, escalation=0.03), LifeInsurance(decreasing=True, term=25),
            LifeInsurance(timing="moment-of-death", escalation=0.02, term=30)]
    lives = [{"age": 40}, {"age": 55.5}]
    got = _benefits(_post(client, request, lives=lives))
    valuation = Valuation(SULT, np.array([40.0, 55.5]), np.zeros(2), I5)
    for k, b in enumerate(core):
        want = valuation.values(b, PremiumPlan(25, 12) if k == 1 else False)
        for i in range(2):
            assert got[i][k]["value"] == want.value[i]
            assert got[i][k]["second_moment"] == want.second_moment[i]
            if k == 1:
                assert got[i][k]["net_premium"] == want.net_premium[i]
                assert got[i][k]["premium_term"] == 25


def test_approximate_answers_say_which_figures_are_approximate(client):
    r = _post(client, [{"type": "life-annuity", "frequency": 12, "approximation": "woolhouse",
                        "net_premium": {}}], lives=[{"age": 65}])
    (b,), = _benefits(r)
    assert b["approximated"] == ["value", "net_premium"]
    # the answer agrees with itself: SD² = E[PV²] − (exact E[PV])²
    assert b["standard_deviation"] ** 2 == pytest.approx(
        b["second_moment"] - b["exact_value"] ** 2, rel=1e-12)
    exact = _benefits(_post(client, [{"type": "life-annuity", "frequency": 12}],
                            lives=[{"age": 65}]))[0][0]
    assert b["exact_value"] == exact["value"]
    assert "approximated" not in exact and "exact_value" not in exact


def test_two_life_benefits_add_up_through_the_api(client):
    # a_{x|y} = a_y − a_xy (textbook identity)
    lives = [{"ages": [65, 62]}]
    pair = _benefits(_post(client, [{"type": "reversionary-annuity", "frequency": 12},
                                    {"type": "life-annuity", "frequency": 12},
                                    {"type": "contingent-insurance"},
                                    {"type": "contingent-insurance", "life": 1},
                                    {"type": "life-insurance"}], basis=PAIR, lives=lives))[0]
    a_y = _benefits(_post(client, [{"type": "life-annuity", "frequency": 12}],
                          basis="thistlemoor-2024-female", lives=[{"age": 62}]))[0][0]
    assert pair[0]["value"] == pytest.approx(a_y["value"] - pair[1]["value"], rel=1e-12)
    # A¹_xy + A¹_yx = A_xy
    assert pair[2]["value"] + pair[3]["value"] == pytest.approx(pair[4]["value"], rel=1e-12)


def test_policy_values_through_the_api(client):
    durations = [0, 1, 2.5, 10, 20]
    r = _post(client, [{"type": "endowment", "term": 20, "net_premium": {"frequency": 12},
                        "policy_value_durations": durations}])
    (b,), = _benefits(r)
    valuation = Valuation(SULT, np.array([40.0]), np.zeros(1), I5)
    plan = PremiumPlan(20, 12)
    premium = valuation.values(Endowment(term=20), plan).net_premium
    want = policy_values(valuation, Endowment(term=20), durations, premium, plan)[0]
    assert b["policy_values"] == pytest.approx(list(want), rel=1e-14, abs=1e-15)
    assert b["policy_values"][0] == pytest.approx(0.0, abs=1e-14)
    assert b["policy_values"][-1] == pytest.approx(1.0, rel=1e-14)


def test_sensitivities_through_the_api(client):
    r = _post(client, [{"type": "life-annuity"}, {"type": "life-insurance", "term": 20}],
              lives=[{"age": 60}],
              sensitivities={"mortality": {"kind": "force", "size": -0.2}, "interest_shift": 0.01})
    annuity, cover = _benefits(r)[0]
    for b in (annuity, cover):
        s = b["sensitivities"]
        assert set(s) == {"mortality_shocked_value", "interest_up_value", "interest_down_value",
                          "effective_duration", "convexity"}
        v0, up, down = b["value"], s["interest_up_value"], s["interest_down_value"]
        assert s["effective_duration"] == pytest.approx((down - up) / (0.02 * v0), rel=1e-12)
    # lighter mortality: the annuity is worth more, the cover less
    assert annuity["sensitivities"]["mortality_shocked_value"] > annuity["value"]
    assert cover["sensitivities"]["mortality_shocked_value"] < cover["value"]


def test_cash_flows_json_and_csv(client):
    benefits = [{"type": "life-annuity", "frequency": 12, "escalation": 0.03, "deferral": 5},
                {"type": "life-insurance", "timing": "end-of-period", "frequency": 12,
                 "decreasing": True, "term": 10, "net_premium": {"frequency": 12}}]
    lives = [{"age": 60}, {"age": 64.5}]
    r = _post(client, benefits, url="/v1/cash-flows", lives=lives, periods_per_year=12)
    assert r.status_code == 200, r.text
    body = r.json()
    valuation = Valuation(SULT, np.array([60.0, 64.5]), np.zeros(2), I5)
    flows = cash_flows(valuation, LifeInsurance(timing="end-of-period", frequency=12,
                                                decreasing=True, term=10), 12,
                       valuation.values(LifeInsurance(timing="end-of-period", frequency=12,
                                                      decreasing=True, term=10),
                                        PremiumPlan(10, 12)).net_premium,
                       PremiumPlan(10, 12), until=body["period_end"][-1])
    cover = body["results"][1]["benefits"][1]
    assert cover["benefit_outgo"] == pytest.approx(list(flows.benefit[1]), rel=1e-14, abs=1e-300)
    assert cover["premium_income"] == pytest.approx(list(flows.premium[1]), rel=1e-14, abs=1e-300)
    total = body["total"]["benefits"][0]["benefit_outgo"]
    both = np.add(body["results"][0]["benefits"][0]["benefit_outgo"],
                  body["results"][1]["benefits"][0]["benefit_outgo"])
    np.testing.assert_allclose(total, both, rtol=1e-15)
    assert body["total"]["in_force"][0] == 2.0
    r = client.post("/v1/cash-flows", headers={"Accept": "text/csv"}, json={
        "basis": "standard-ultimate", "lives": lives, "interest": {"rate": 0.05},
        "benefits": benefits, "periods_per_year": 12})
    assert r.status_code == 200 and r.headers["content-type"].startswith("text/csv")
    rows = list(csv.reader(io.StringIO(r.text)))
    assert rows[0] == ["life", "benefit", "period_start", "period_end", "in_force",
                       "benefit_outgo", "premium_income"]
    n = len(body["period_start"])
    assert len(rows) == 1 + 3 * 2 * n  # two lives and "all", two benefits, n periods
    last_cover = [row for row in rows[1:] if row[0] == "1" and row[1] == "1"]
    assert [float(x[5]) for x in last_cover] == pytest.approx(cover["benefit_outgo"], rel=1e-15)


@pytest.mark.parametrize(
    "benefits,extra,status,field",
    [
        ([{"type": "life-annuity", "escalation": -1}], {}, 422, "$.benefits[0].escalation"),
        ([{"type": "life-annuity", "escalation": 1.5}], {}, 422, "$.benefits[0].escalation"),
        ([{"type": "life-insurance", "decreasing": True}], {}, 422, "$.benefits[0].decreasing"),
        ([{"type": "life-insurance", "decreasing": True, "increasing": True, "term": 5}], {}, 422,
         "$.benefits[0].decreasing"),
        ([{"type": "life-annuity", "escalation": 0.02, "frequency": 12,
           "approximation": "udd"}], {}, 422, "$.benefits[0].approximation"),
        ([{"type": "life-insurance", "term": 20, "policy_value_durations": [5, 21]}], {}, 422,
         "$.benefits[0].policy_value_durations[1]"),
        ([{"type": "life-insurance", "term": 20, "policy_value_durations": [-1]}], {}, 422,
         "$.benefits[0].policy_value_durations[0]"),
        ([{"type": "life-annuity", "frequency": 12, "approximation": "woolhouse",
           "policy_value_durations": [1]}], {}, 422, "$.benefits[0].policy_value_durations"),
        ([{"type": "life-insurance", "timing": "moment-of-death", "term": 10.5,
           "net_premium": {}}], {}, 422,
         "$.benefits[0].net_premium.premium_term"),
        ([{"type": "life-insurance", "net_premium": {"premium_term": 10.3, "frequency": 4}}], {},
         422, "$.benefits[0].net_premium.premium_term"),
        ([{"type": "life-insurance", "net_premium": {"premium_term": "ever"}}], {}, 400,
         "$.benefits[0].net_premium.premium_term"),
        ([{"type": "reversionary-annuity"}], {}, 422, "$.benefits[0].type"),
        ([{"type": "life-annuity"}], {"sensitivities": {"mortality": {"kind": "q", "size": 0.1}}},
         422, "$.sensitivities.mortality.kind"),
        ([{"type": "life-annuity"}], {"sensitivities": {"mortality": {"kind": "force",
                                                                       "size": -1}}},
         422, "$.sensitivities.mortality.size"),
        ([{"type": "life-annuity"}], {"sensitivities": {"interest_shift": 0}}, 422,
         "$.sensitivities.interest_shift"),
    ],
)
def test_bad_input_names_the_field(client, assert_problem, benefits, extra, status, field):
    r = _post(client, benefits, **extra)
    assert_problem(r, status, "outside-domain" if status == 422 else "invalid-request", [field])
    assert "NaN" not in r.text and "Infinity" not in r.text


def test_extreme_rates_and_escalations_are_finite_or_refused(client, assert_problem):
    # a rate near −1 is outside the interest domain (−5% to 100%): a 422 on the rate
    r = _post(client, [{"type": "life-annuity", "term": 5}], interest={"rate": -0.999999})
    assert_problem(r, 422, "outside-domain", ["$.interest.rate"])
    # at −5% each payment is worth more than at 0%: ä at −5% exceeds ä at 0% (v > 1)
    (low,), = _benefits(_post(client, [{"type": "life-annuity", "term": 5}],
                              interest={"rate": -0.05}))
    (zero,), = _benefits(_post(client, [{"type": "life-annuity", "term": 5}],
                               interest={"rate": 0.0}))
    assert zero["value"] < low["value"] < 5.0 / 0.95**4
    # an escalation near −1: the first payment only
    (b,), = _benefits(_post(client, [{"type": "life-annuity", "escalation": -0.999999}]))
    assert b["value"] == pytest.approx(1.0, rel=1e-5)
    # 100 % a year where lives survive for centuries does not converge: a 422 on the field
    r = _post(client, [{"type": "life-annuity", "escalation": 1}],
              basis={"type": "constant-force", "mu": 0.01})
    assert_problem(r, 422, "outside-domain", ["$.benefits[0].escalation"])
    # an escalation equal to the rate is fine
    (b,), = _benefits(_post(client, [{"type": "life-insurance", "escalation": 0.05}]))
    assert 0.0 < b["value"] < 1.0


def test_cash_flows_of_a_two_life_benefit_are_refused(client, assert_problem):
    r = _post(client, [{"type": "reversionary-annuity"}], url="/v1/cash-flows", basis=PAIR,
              lives=[{"ages": [65, 62]}])
    assert_problem(r, 422, "outside-domain", ["$.benefits[0].type"])

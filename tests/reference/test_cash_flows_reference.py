"""Expected cash flows: discounted, they give back the present values; summed, the textbook
totals (e̊_x, ₙq_x); in force falls by the deaths of each period."""

from __future__ import annotations

import numpy as np
import pytest
from shared_bases import I5, SULT, TABLE

from service.core.cash_flows import cash_flows
from service.core.errors import DomainError
from service.core.values import (
    Endowment,
    LifeAnnuity,
    LifeInsurance,
    PremiumPlan,
    Valuation,
)


def _valuation(model, ages):
    age = np.atleast_1d(np.asarray(ages, float))
    return Valuation(model, age, np.zeros(age.size), I5)


@pytest.mark.parametrize("model", [SULT, TABLE])
@pytest.mark.parametrize("m", [1, 12])
def test_discounted_cash_flows_are_the_present_values(model, m):
    # definition of the present value: Σ over periods of the expected payment times v(time);
    # with periods of 1/m year, payments in advance at the period start, death benefits at
    # its end
    ages = [45.0, 52.5]
    valuation = _valuation(model, ages)
    annuity = LifeAnnuity(frequency=m, escalation=0.02, guarantee=5, deferral=3)
    cover = LifeInsurance(timing="end-of-period", frequency=m, decreasing=True, term=20)
    for b, at_end in ((annuity, False), (cover, True)):
        flows = cash_flows(valuation, b, m)
        times = flows.end if at_end else flows.start
        np.testing.assert_allclose(flows.benefit @ 1.05**-times, valuation.values(b).value,
                                   rtol=1e-12)


def test_premium_income_discounts_to_the_benefit_value():
    # the equivalence principle: PV of the net premiums = PV of the benefit
    valuation = _valuation(SULT, [40.0, 55.0])
    b, plan = Endowment(term=20), PremiumPlan(20, 12)
    premium = valuation.values(b, plan).net_premium
    flows = cash_flows(valuation, b, 12, premium, plan)
    np.testing.assert_allclose(flows.premium @ 1.05**-flows.start, valuation.values(b).value,
                               rtol=1e-12)


@pytest.mark.parametrize("model", [SULT, TABLE])
def test_totals_and_the_in_force_probability(model):
    ages = [60.0, 70.3]
    valuation = _valuation(model, ages)
    age, zero = np.array(ages), np.zeros(2)
    # a continuous annuity at rate 1 pays e̊_x in all (textbook: e̊_x = ∫ ₜp_x dt)
    flows = cash_flows(valuation, LifeAnnuity(timing="continuous"), 4)
    np.testing.assert_allclose(flows.benefit.sum(axis=1), model.complete_expectation(age, zero),
                               rtol=1e-12)
    # a moment-of-death term insurance pays ₙq_x in all, and each period's deaths are the
    # fall in the probability in force
    flows = cash_flows(valuation, LifeInsurance(timing="moment-of-death", term=10))
    q10 = 1.0 - model.survival(age, zero, np.array([10.0]))[:, 0]
    np.testing.assert_allclose(flows.benefit.sum(axis=1), q10, rtol=1e-12)
    after = np.concatenate([flows.in_force[:, 1:], 1.0 - q10[:, None]], axis=1)
    np.testing.assert_allclose(flows.benefit, flows.in_force - after, rtol=1e-10, atol=1e-15)


def test_bad_cash_flow_requests_name_the_field():
    valuation = _valuation(SULT, 40.0)
    with pytest.raises(DomainError) as info:
        cash_flows(valuation, LifeInsurance(term=10), 0)
    assert info.value.field == "cash_flows.frequency"

"""Policy values against the textbook: the recursion, Thiele's equation, ₀V = 0 and the
whole-life formula ₜV = 1 − ä_{x+t}/ä_x."""

from __future__ import annotations

import math

import numpy as np
import pytest
from shared_bases import I5, SULT, TABLE

from service.core.errors import DomainError
from service.core.policy_values import policy_values
from service.core.values import (
    Endowment,
    LifeAnnuity,
    LifeInsurance,
    PremiumPlan,
    PureEndowment,
    Valuation,
)


def _valuation(model, ages, fast=True, discount=I5):
    age = np.atleast_1d(np.asarray(ages, float))
    return Valuation(model, age, np.zeros(age.size), discount, fast)


def _reserve(valuation, b, durations, plan):
    premium = valuation.values(b, plan).net_premium
    return policy_values(valuation, b, durations, premium, plan), premium


@pytest.mark.parametrize("model", [SULT, TABLE])
@pytest.mark.parametrize("benefit", [LifeInsurance(), LifeInsurance(term=20), Endowment(term=20),
                                     LifeInsurance(decreasing=True, term=15),
                                     LifeInsurance(escalation=0.03, term=25)])
def test_the_recursion_holds_at_whole_durations(model, benefit):
    # textbook recursion for annual premiums and end-of-year benefits:
    # (ₜV + P)(1 + i) = q_{x+t} S_{t+1} + p_{x+t} ₜ₊₁V, S_{t+1} the benefit for death in year t+1
    age = 40.3  # a fractional age: the recursion holds for any
    valuation = _valuation(model, age)
    n = 20 if benefit.term is None else int(benefit.term)
    durations = np.arange(0, n + 1, dtype=float)
    v, premium = _reserve(valuation, benefit, durations, PremiumPlan(n))
    surv = np.exp(-model.cumulative_hazard(np.array([age]), np.zeros(1), durations)[0])
    q = 1.0 - surv[1:] / surv[:-1]
    j = durations[:-1]
    if getattr(benefit, "decreasing", False):
        sums = (n - j) / n
    elif getattr(benefit, "escalation", 0.0):
        sums = 1.03**j
    else:
        sums = np.ones_like(j)
    left = (v[0, :-1] + premium[0]) * 1.05
    right = q * sums + (1.0 - q) * v[0, 1:]
    np.testing.assert_allclose(left, right, rtol=1e-10, atol=1e-13)
    assert v[0, 0] == pytest.approx(0.0, abs=1e-14)  # ₀V = 0: the equivalence principle
    if isinstance(benefit, Endowment):
        assert v[0, -1] == pytest.approx(1.0, rel=1e-14)  # ₙV = 1 just before maturity


def test_whole_life_policy_values_are_one_less_an_annuity_ratio():
    # textbook: for whole-life insurance with whole-life annual premiums,
    # ₜV = 1 − ä_{x+t} / ä_x (at whole ages on the Standard Ultimate law)
    valuation = _valuation(SULT, 45.0)
    t = np.array([0.0, 1.0, 10.0, 25.0])
    v, _ = _reserve(valuation, LifeInsurance(), t, PremiumPlan(None))
    annuity = [_valuation(SULT, 45.0 + s).values(LifeAnnuity()).value[0] for s in t]
    np.testing.assert_allclose(v[0], 1.0 - np.array(annuity) / annuity[0], rtol=1e-12, atol=1e-14)


@pytest.mark.parametrize("model", [SULT, TABLE])
def test_thiele_between_premium_dates(model):
    # Thiele's differential equation, between premium dates (premiums are annual, so none in
    # (3, 4)): d/dt ₜV = δ ₜV − μ_{x+t} (b − ₜV) for a moment-of-death endowment benefit b = 1,
    # and d/dt ₜV = δ ₜV − 1 + μ_{x+t} ₜV for a continuous annuity at rate 1 (no premiums);
    # the derivative by a central difference of step 1e-4
    age, h = 50.2, 1e-4
    delta = math.log(1.05)
    ts = np.array([3.3, 3.6, 3.85])
    grid = np.sort(np.concatenate([ts - h, ts, ts + h]))
    valuation = _valuation(model, age)
    mu = model.force(np.array([age]), np.zeros(1), ts)[0]
    endow = Endowment(term=20, timing="moment-of-death")
    v, premium = _reserve(valuation, endow, grid, PremiumPlan(20))
    v = v[0].reshape(-1, 3)  # rows per t: t − h, t, t + h
    slope = (v[:, 2] - v[:, 0]) / (2 * h)
    np.testing.assert_allclose(slope, delta * v[:, 1] - mu * (1.0 - v[:, 1]), rtol=2e-6)
    annuity = policy_values(valuation, LifeAnnuity(timing="continuous"), grid)[0].reshape(-1, 3)
    slope = (annuity[:, 2] - annuity[:, 0]) / (2 * h)
    np.testing.assert_allclose(slope, delta * annuity[:, 1] - 1.0 + mu * annuity[:, 1], rtol=2e-6)


@pytest.mark.parametrize("benefit", [
    LifeAnnuity(frequency=12, deferral=5, guarantee=5, term=20),
    LifeAnnuity(timing="continuous", guarantee=4, deferral=2),
    LifeInsurance(timing="end-of-period", frequency=4, term=10, deferral=1),
    LifeInsurance(timing="moment-of-death", increasing=True, term=12),
    PureEndowment(term=8),
])
def test_a_policy_value_at_a_duration_is_the_value_at_that_age(benefit):
    # on a Markov basis (a law: the future depends only on the age reached), the status in
    # force at duration s is a life aged x + s, so ₛV (no premiums) is the present value of
    # the rest of the benefit: checked at s = 0 against the valuation itself, and at s = 2.5
    # against the same payments re-expressed for a life aged x + 2.5
    valuation = _valuation(SULT, 60.0)
    v0 = policy_values(valuation, benefit, [0.0])[0, 0]
    assert v0 == pytest.approx(valuation.values(benefit).value[0], rel=1e-12)
    s = 2.5
    later = _valuation(SULT, 62.5)
    u = getattr(benefit, "deferral", 0.0)
    if isinstance(benefit, PureEndowment):
        rest = PureEndowment(term=benefit.term - s)
    elif isinstance(benefit, LifeAnnuity):
        if benefit.timing == "continuous":
            return  # (its guarantee running from 2 to 6 has no re-expression at x + 2.5)
        # deferral 5 → 2.5 more; guarantee and term unchanged
        rest = LifeAnnuity(frequency=12, deferral=u - s, guarantee=benefit.guarantee,
                           term=benefit.term)
    elif benefit.timing == "end-of-period":
        rest = LifeInsurance(timing="end-of-period", frequency=4, term=10.0 - (s - u), deferral=0)
        # periods of a quarter from 1: at 2.5 a new quarter starts, so the rest lines up
    else:
        return
    got = policy_values(valuation, benefit, [s])[0, 0]
    assert got == pytest.approx(later.values(rest).value[0], rel=1e-12)


@pytest.mark.parametrize("durations,field", [
    ([-1.0], "policy_value_durations[0]"),
    ([1.0, 21.0], "policy_value_durations[1]"),
    ([0.0, math.nan], "policy_value_durations[1]"),
    ([], "policy_value_durations"),
])
def test_bad_durations_name_the_field(durations, field):
    valuation = _valuation(SULT, 40.0)
    with pytest.raises(DomainError) as info:
        policy_values(valuation, LifeInsurance(term=20), durations)
    assert info.value.field == field


def test_a_duration_past_the_limiting_age_is_refused():
    valuation = _valuation(TABLE, 95.0)
    with pytest.raises(DomainError) as info:
        policy_values(valuation, LifeInsurance(), [6.0])
    assert info.value.field == "policy_value_durations[0]"

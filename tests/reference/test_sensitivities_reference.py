"""Sensitivities against the analytic derivatives under a constant force of mortality."""

from __future__ import annotations

import math

import numpy as np
import pytest
from shared_bases import SULT, TABLE

from service.core import laws, several
from service.core.errors import DomainError
from service.core.sensitivities import Sensitivity, sensitivities
from service.core.values import Discount, LifeAnnuity, LifeInsurance, Valuation

MU = 0.02
CONSTANT = laws.ConstantForce(MU)


def _run(model, benefits, ask, rate=0.04, ages=(40.0,)):
    age = np.array(ages, float)
    discount = Discount.constant(rate)
    base = [Valuation(model, age, np.zeros(age.size), discount).values(b).value for b in benefits]
    return base, sensitivities(model, age, np.zeros(age.size), discount, benefits, base, ask)


def test_duration_and_convexity_match_the_analytic_derivatives():
    # constant force μ and rate i, δ = log(1 + i): ā = 1/(μ + δ) and Ā = μ/(μ + δ) (textbook
    # closed forms). With k = μ + δ and dδ/di = 1/(1 + i), both have
    #   −V'/V = 1/(k (1 + i))  and  V''/V = (2/k² + 1/k) / (1 + i)².
    # Effective duration and convexity are central differences of step h, so they meet the
    # derivatives to O(h²) (here h = 1e-4: a few parts in 10⁶) and the closed forms' own
    # central differences to rounding
    i, h = 0.04, 1e-4
    k = MU + math.log1p(i)
    benefits = [LifeAnnuity(timing="continuous"), LifeInsurance(timing="moment-of-death")]
    base, got = _run(CONSTANT, benefits, Sensitivity(shift=h), i)
    assert base[0][0] == pytest.approx(1.0 / k, rel=1e-13)
    d_exact = 1.0 / (k * (1 + i))
    c_exact = (2.0 / k**2 + 1.0 / k) / (1 + i) ** 2
    for n in range(2):
        assert got.duration[n][0] == pytest.approx(d_exact, rel=1e-5)
        assert got.convexity[n][0] == pytest.approx(c_exact, rel=1e-5)

    def annuity(rate):
        return 1.0 / (MU + math.log1p(rate))

    up, mid, down = annuity(i + h), annuity(i), annuity(i - h)
    assert got.interest_up[0][0] == pytest.approx(up, rel=1e-13)
    assert got.interest_down[0][0] == pytest.approx(down, rel=1e-13)
    assert got.duration[0][0] == pytest.approx((down - up) / (2 * h * mid), rel=1e-8)
    assert got.convexity[0][0] == pytest.approx((up + down - 2 * mid) / (h * h * mid), rel=1e-4)


def test_a_force_shock_is_exact_under_constant_force():
    # μ' = μ (1 + ε): ā' = 1/(μ(1 + ε) + δ) (textbook closed form)
    eps = 0.25
    _, got = _run(CONSTANT, [LifeAnnuity(timing="continuous")], Sensitivity("force", eps))
    assert got.mortality[0][0] == pytest.approx(1.0 / (MU * (1 + eps) + math.log(1.04)),
                                                rel=1e-12)
    assert got.interest_up is None and got.duration is None


def test_a_q_shock_rebuilds_the_table():
    # q' = q (1 + ε): the annual annuity-due by its recursion ä_x = 1 + v p_x ä_{x+1} on the
    # shocked rates (textbook recursion), from the end of the table
    eps = -0.1
    _, got = _run(TABLE, [LifeAnnuity()], Sensitivity("q", eps), ages=(60.0,))
    q = np.minimum(1.0, np.array([0.001 * 1.1**k for k in range(70)] + [1.0]) * (1 + eps))
    q[-1] = 1.0
    a = 0.0
    for qx in q[30:][::-1]:
        a = 1.0 + (1.0 - qx) / 1.04 * a
    assert got.mortality[0][0] == pytest.approx(a, rel=1e-12)


def test_shocks_apply_to_each_member_of_a_status():
    pair = several.SeveralLives([SULT, CONSTANT], joint=True)
    age = np.array([[60.0, 55.0]])
    discount = Discount.constant(0.04)
    got = sensitivities(pair, age, np.zeros_like(age), discount, [LifeAnnuity()], [np.ones(1)],
                        Sensitivity("force", 0.5))
    rated_pair = several.SeveralLives(
        [laws.Makeham(A=0.00033, B=4.05e-6, c=1.124), laws.ConstantForce(0.03)], joint=True)
    want = Valuation(rated_pair, age, np.zeros_like(age), discount).values(LifeAnnuity()).value
    assert got.mortality[0][0] == pytest.approx(want[0], rel=1e-10)


@pytest.mark.parametrize("model,ask,field", [
    (SULT, Sensitivity("q", 0.1), "sensitivities.mortality.kind"),
    (SULT, Sensitivity("force", -1.0), "sensitivities.mortality.size"),
    (SULT, Sensitivity("force", math.inf), "sensitivities.mortality.size"),
    (SULT, Sensitivity(shift=0.0), "sensitivities.interest_shift"),
    (SULT, Sensitivity(shift=0.6), "sensitivities.interest_shift"),
])
def test_bad_sensitivities_name_the_field(model, ask, field):
    with pytest.raises(DomainError) as info:
        _run(model, [LifeAnnuity()], ask)
    assert info.value.field == field


def test_a_shift_to_a_rate_outside_the_interest_domain_is_refused():
    # i − h = 0.02 − 0.1 = −0.08, below the service's interest domain (−5% to 100% a year)
    with pytest.raises(DomainError) as info:
        _run(SULT, [LifeAnnuity(term=10)], Sensitivity(shift=0.1), rate=0.02)
    assert info.value.field == "sensitivities.interest_shift"
    assert "-0.05" in info.value.message
    # i − h = −0.01 is a rate, but at it a whole-life annuity on a constant force of 0.01
    # does not converge (μ + δ < 0): the shifted valuation says so, naming the shift
    with pytest.raises(DomainError) as info:
        _run(laws.ConstantForce(0.01), [LifeAnnuity()], Sensitivity(shift=0.05), rate=0.04)
    assert info.value.field == "sensitivities.interest_shift"

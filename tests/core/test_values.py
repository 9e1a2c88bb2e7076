"""The present-value core: the fast path against the general path, interest, limits."""

from __future__ import annotations

import math

import numpy as np
import pytest
from shared_bases import SULT

from service.core import laws, tables
from service.core.errors import DomainError
from service.core.values import (
    Discount,
    Endowment,
    LifeAnnuity,
    LifeInsurance,
    PureEndowment,
    benefit_values,
    present_values,
)

TABLE = tables.LifeTable(60, [0.005 * 1.1**k for k in range(45)] + [1.0], "balducci")

FAST_BENEFITS = [
    LifeAnnuity(),
    LifeAnnuity(timing="arrears"),
    LifeAnnuity(term=10, deferral=3, guarantee=5),
    LifeAnnuity(timing="arrears", term=12, guarantee=4, deferral=2),
    LifeInsurance(term=20, deferral=5),
    LifeInsurance(timing="end-of-period"),
    PureEndowment(term=7),
    Endowment(term=15),
]


@pytest.mark.parametrize("model,ages", [(SULT, [20.0, 60.0, 99.0]), (TABLE, [60.0, 72.0])])
@pytest.mark.parametrize("benefit", FAST_BENEFITS)
@pytest.mark.parametrize("rate", [0.0, 0.03, 0.12])
def test_fast_path_equals_general_path(model, ages, benefit, rate):
    age = np.array(ages)
    d = Discount.constant(rate)
    fast = benefit_values(model, age, np.zeros(age.size), d, benefit, premium_term=5)
    slow = benefit_values(model, age, np.zeros(age.size), d, benefit, premium_term=5, fast=False)
    np.testing.assert_allclose(fast.value, slow.value, rtol=1e-10, atol=1e-14)
    np.testing.assert_allclose(fast.second_moment, slow.second_moment, rtol=1e-9, atol=1e-13)
    np.testing.assert_allclose(fast.net_premium, slow.net_premium, rtol=1e-10, atol=1e-14)
    # one life alone (the scalar path) equals the batch
    one = benefit_values(model, age[:1], np.zeros(1), d, benefit, premium_term=5)
    assert one.value[0] == pytest.approx(fast.value[0], rel=1e-14)


def test_select_table_lives_on_the_fast_path():
    model = tables.SelectTable(60, [[0.01, 0.02], [0.011, 0.021]], 60, [0.01 * 1.1**k for k in range(40)] + [1.0])
    age, dur = np.array([60.0, 61.0, 62.0]), np.array([0.0, 1.0, 0.0])
    d = Discount.constant(0.04)
    for b in FAST_BENEFITS:
        f = benefit_values(model, age, dur, d, b)
        s = benefit_values(model, age, dur, d, b, fast=False)
        np.testing.assert_allclose(f.value, s.value, rtol=1e-10, atol=1e-14)


def test_spot_rates_equal_to_a_constant_rate_give_the_same_values():
    age = np.array([55.0, 70.5])
    flat = Discount.spot([0.04, 0.04, 0.04])
    const = Discount.constant(0.04)
    for b in FAST_BENEFITS + [LifeAnnuity(timing="continuous", increasing=True, guarantee=3),
                             LifeInsurance(timing="moment-of-death", increasing=True, term=30)]:
        a = benefit_values(SULT, age, np.zeros(2), flat, b)
        c = benefit_values(SULT, age, np.zeros(2), const, b, fast=False)
        np.testing.assert_allclose(a.value, c.value, rtol=1e-12)
        np.testing.assert_allclose(a.second_moment, c.second_moment, rtol=1e-11)


def test_term_structure_discount_function():
    d = Discount.spot([0.02, 0.03])
    assert d.v(1.0) == pytest.approx(1 / 1.02)
    assert d.v(2.0) == pytest.approx(1 / 1.03**2)
    assert d.v(5.0) == pytest.approx(1 / 1.03**5)  # the last rate continues
    # the forward force is constant in year 2: v(1.5)² = v(1) v(2)
    assert d.v(1.5) ** 2 == pytest.approx(d.v(1.0) * d.v(2.0))
    # a pure endowment under spot rates is v(n) ₙp
    r = benefit_values(SULT, np.array([60.0]), np.zeros(1), d, PureEndowment(term=2))
    p2 = SULT.survival([60.0], [0.0], [2.0])[0, 0]
    assert r.value[0] == pytest.approx(p2 / 1.03**2, rel=1e-14)


def test_discrete_second_moment_equals_brute_force():
    # E[Y²] by summing over the curtate lifetime directly
    age, i, n = 80.0, 0.05, 10
    b = LifeAnnuity(timing="advance", term=n, increasing=True, guarantee=2)
    r = benefit_values(SULT, np.array([age]), np.zeros(1), Discount.constant(i), b)
    v = 1 / (1 + i)
    surv = SULT.survival([age], [0.0], np.arange(n + 2.0))[0]
    e1 = e2 = 0.0
    for k in range(n + 1):  # K = k: payments at 0..max(k, 1) (guarantee of 2 years)
        pk = surv[k] - surv[k + 1] if k < n else surv[n]
        last = min(max(k, 1), n - 1)
        y = sum((j + 1) * v**j for j in range(last + 1))
        e1 += pk * y
        e2 += pk * y * y
    assert r.value[0] == pytest.approx(e1, rel=1e-12)
    assert r.second_moment[0] == pytest.approx(e2, rel=1e-12)


def test_monthly_exact_value_uses_the_fractional_age_assumption():
    # UDD table: the exact monthly value equals the UDD formula; another assumption differs
    q = [0.01 * k for k in range(1, 40)] + [1.0]
    udd = tables.LifeTable(60, q, "udd")
    cf = tables.LifeTable(60, q, "constant-force")
    d = Discount.constant(0.06)
    exact = benefit_values(udd, np.array([60.0]), np.zeros(1), d, LifeAnnuity(frequency=4))
    approx = benefit_values(udd, np.array([60.0]), np.zeros(1), d, LifeAnnuity(frequency=4, approximation="udd"))
    assert approx.approximation == "udd"
    assert exact.value[0] == pytest.approx(approx.value[0], rel=1e-12)
    other = benefit_values(cf, np.array([60.0]), np.zeros(1), d, LifeAnnuity(frequency=4))
    assert abs(other.value[0] - exact.value[0]) > 1e-5


@pytest.mark.parametrize(
    "benefit,field",
    [
        (LifeAnnuity(deferral=100.0), "benefits[0].deferral"),
        (LifeAnnuity(guarantee=100.0), "benefits[0].guarantee"),
        (LifeAnnuity(frequency=0), "benefits[0].frequency"),
        (LifeAnnuity(frequency=365), "benefits[0]"),
        (LifeAnnuity(term=1.3, frequency=4), "benefits[0].term"),
        (LifeAnnuity(term=5, guarantee=10), "benefits[0].guarantee"),
        (LifeAnnuity(timing="continuous", frequency=2), "benefits[0].frequency"),
        (LifeInsurance(frequency=4), "benefits[0].frequency"),
        (LifeAnnuity(increasing=True, frequency=2, approximation="woolhouse"), "benefits[0].approximation"),
    ],
)
def test_bad_benefits_name_their_field(benefit, field):
    with pytest.raises(DomainError) as info:
        present_values(SULT, np.array([60.0]), np.zeros(1), Discount.constant(0.05), [benefit])
    assert info.value.field == field


def test_bad_interest():
    with pytest.raises(DomainError, match="from -0.05 to 1") as info:
        Discount.constant(-1.0)
    assert info.value.field == "interest.rate"
    with pytest.raises(DomainError) as info:
        Discount.spot([0.02, float("nan")])
    assert info.value.field == "interest.spot_rates[1]"
    with pytest.raises(DomainError) as info:
        present_values(SULT, np.array([60.0]), np.zeros(1), Discount.spot([0.02]),
                       [LifeAnnuity(frequency=12, approximation="udd")])
    assert info.value.field == "benefits[0].approximation"
    # values that do not converge: constant force 0.02 with v growing faster than survival
    # falls (δ = log 0.96 ≈ −0.041)
    with pytest.raises(DomainError) as info:
        present_values(laws.ConstantForce(0.02), np.array([40.0]), np.zeros(1),
                       Discount.constant(-0.04), [LifeAnnuity()])
    assert info.value.field == "interest"


def test_net_premium_equivalence_principle():
    d = Discount.constant(0.05)
    age = np.array([45.0])
    r = benefit_values(SULT, age, np.zeros(1), d, Endowment(term=20), premium_term=20)
    a = benefit_values(SULT, age, np.zeros(1), d, LifeAnnuity(term=20)).value
    assert r.net_premium[0] * a[0] == pytest.approx(r.value[0], rel=1e-14)
    assert all(math.isfinite(x) for x in (r.value[0], r.second_moment[0], r.standard_deviation[0]))

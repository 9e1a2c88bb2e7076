"""Escalating, increasing and decreasing benefits: identities, the fast path against the general
path, and the domain of the escalation."""

from __future__ import annotations

import math

import mpmath
import numpy as np
import pytest
from shared_bases import SULT

from service.core import laws, tables
from service.core.errors import DomainError
from service.core.values import (
    Discount,
    LifeAnnuity,
    LifeInsurance,
    benefit_values,
    escalated_rate,
)

TABLE = tables.LifeTable(60, [0.005 * 1.1**k for k in range(45)] + [1.0], "balducci")


def _value(model, age, b, rate=0.05, fast=True, duration=0.0):
    age = np.atleast_1d(np.asarray(age, float))
    return benefit_values(model, age, np.full(age.size, duration), Discount.constant(rate), b,
                          fast=fast)


FAST_NEW = [
    LifeAnnuity(escalation=0.03),
    LifeAnnuity(timing="arrears", escalation=0.02, term=15, guarantee=5, deferral=3),
    LifeAnnuity(escalation=-0.02, deferral=5, guarantee=10),
    LifeInsurance(increasing=True),
    LifeInsurance(increasing=True, term=20, deferral=4),
    LifeInsurance(decreasing=True, term=25),
    LifeInsurance(decreasing=True, term=10, deferral=5, timing="end-of-period"),
    LifeInsurance(escalation=0.04, term=30),
    LifeInsurance(escalation=0.01, deferral=2),
]


@pytest.mark.parametrize("model,ages", [(SULT, [20.0, 60.0, 90.0]), (TABLE, [60.0, 71.0])])
@pytest.mark.parametrize("benefit", FAST_NEW)
def test_fast_path_equals_general_path(model, ages, benefit):
    fast = _value(model, ages, benefit)
    slow = _value(model, ages, benefit, fast=False)
    np.testing.assert_allclose(fast.value, slow.value, rtol=1e-10, atol=1e-14)
    np.testing.assert_allclose(fast.second_moment, slow.second_moment, rtol=1e-9, atol=1e-13)
    one = _value(model, ages[:1], benefit)  # the scalar path
    assert one.value[0] == pytest.approx(fast.value[0], rel=1e-13)
    assert one.second_moment[0] == pytest.approx(fast.second_moment[0], rel=1e-13)


def test_an_escalation_above_the_rate_leaves_the_fast_path_and_agrees():
    b = LifeAnnuity(escalation=0.07, term=30)  # (1.05 / 1.07) − 1 < 0: general path
    fast = _value(SULT, [50.0, 65.0], b)
    slow = _value(SULT, [50.0, 65.0], b, fast=False)
    np.testing.assert_allclose(fast.value, slow.value, rtol=1e-13)


@pytest.mark.parametrize("age", [40.0, 63.25])
@pytest.mark.parametrize("timing,m", [("advance", 1), ("advance", 12), ("arrears", 4)])
def test_escalation_is_a_change_of_the_discount_rate(age, timing, m):
    # textbook identity: (1 + e)^k v^k = v'^k with v' = (1 + e)/(1 + i), so an annuity whose
    # payments rise by e each year is, in every outcome, a level annuity at i' = (1+i)/(1+e) − 1
    # as long as each year's payments are discounted from the year's start (advance, annual);
    # 1/m-thly payments inside a year keep their amount while v falls at i, so only the
    # annual annuity-due is the pure change of rate
    e, i = 0.03, 0.05
    esc = _value(SULT, age, LifeAnnuity(timing=timing, frequency=m, escalation=e), i, fast=False)
    if (timing, m) == ("advance", 1):
        level = _value(SULT, age, LifeAnnuity(), escalated_rate(i, e), fast=False)
        assert esc.value[0] == pytest.approx(level.value[0], rel=1e-12)
        assert esc.second_moment[0] == pytest.approx(level.second_moment[0], rel=1e-12)
    else:
        # direct sum: Σ_k (1+e)^⌊k/m⌋ / m · v^(t_k) · S(t_k), with S from the law itself
        k = np.arange(0, 120 * m)
        t = (k + (0 if timing == "advance" else 1)) / m
        surv = np.exp(-SULT.cumulative_hazard(np.array([age]), np.zeros(1), t)[0])
        direct = float(np.sum((1 + e) ** np.floor(k / m) / m * (1 + i) ** -t * surv))
        assert esc.value[0] == pytest.approx(direct, rel=1e-12)


@pytest.mark.parametrize("n,u", [(10, 0), (20, 5)])
def test_decreasing_and_increasing_cover_sum_to_level_cover(n, u):
    # textbook identity: (IA)¹_{x:n} + (DA)¹_{x:n} = (n + 1) A¹_{x:n}, with decreasing cover
    # here per unit of initial sum insured, (DA)¹ / n; at a fractional age on the general path
    for timing, m in (("end-of-year", 1), ("end-of-period", 12), ("moment-of-death", 1)):
        kw = dict(timing=timing, frequency=m, term=n, deferral=u)
        inc = _value(SULT, 47.3, LifeInsurance(increasing=True, **kw), fast=False).value[0]
        dec = _value(SULT, 47.3, LifeInsurance(decreasing=True, **kw), fast=False).value[0]
        level = _value(SULT, 47.3, LifeInsurance(**kw), fast=False).value[0]
        assert inc + n * dec == pytest.approx((n + 1) * level, rel=1e-12)


@mpmath.workdps(30)  # local precision: the module-wide one of other tests stays
def test_escalating_and_decreasing_continuous_cover_against_mpmath():
    # constant force μ and force of interest δ: ∫ c(t) e^{−(μ+δ)t} μ dt with c constant within
    # each year, summed year by year in closed form with mpmath at 30 digits
    mu, i, e, n = mpmath.mpf("0.02"), mpmath.mpf("0.04"), mpmath.mpf("0.03"), 12
    k = mu + mpmath.log(1 + i)
    model = laws.ConstantForce(float(mu))

    def year(j):  # ∫_j^{j+1} e^{−k t} μ dt
        return mu * (mpmath.exp(-k * j) - mpmath.exp(-k * (j + 1))) / k

    escalating = mpmath.nsum(lambda j: (1 + e) ** j * year(j), [0, mpmath.inf])
    decreasing = sum((n - j) * year(j) for j in range(n)) / n
    got_e = _value(model, 30.0, LifeInsurance(timing="moment-of-death", escalation=float(e)),
                   float(i)).value[0]
    got_d = _value(model, 30.0, LifeInsurance(timing="moment-of-death", decreasing=True, term=n),
                   float(i)).value[0]
    assert got_e == pytest.approx(float(escalating), rel=1e-12)
    assert got_d == pytest.approx(float(decreasing), rel=1e-12)


@mpmath.workdps(20)  # local precision: the module-wide one of other tests stays
def test_a_continuous_escalating_annuity_and_its_second_moment_against_mpmath():
    # constant force μ and force of interest δ, rate c = (1 + e)^j in year j. Whole life:
    # E[Y] = Σ_j (1+e)^j e^{−kj} (1 − e^{−k})/k, k = μ + δ, a geometric series in closed form.
    # Over a term of 5 years, Y = C(min(T, 5)) with C(t) = ∫₀ᵗ c v ds, so
    # E[Y²] = ∫₀⁵ C(t)² μ e^{−μt} dt + C(5)² e^{−5μ} (mpmath quadrature, year by year)
    mu, delta, e = mpmath.mpf("0.03"), mpmath.log(mpmath.mpf("1.05")), mpmath.mpf("0.02")
    k = mu + delta
    first = (1 - mpmath.exp(-k)) / k / (1 - (1 + e) * mpmath.exp(-k))

    def big_c(t):
        j = int(mpmath.floor(t))
        full = sum((1 + e) ** y * (mpmath.exp(-delta * y) - mpmath.exp(-delta * (y + 1))) / delta
                   for y in range(j))
        return full + (1 + e) ** j * (mpmath.exp(-delta * j) - mpmath.exp(-delta * t)) / delta

    second = sum(mpmath.quad(lambda t: big_c(t) ** 2 * mu * mpmath.exp(-mu * t), [j, j + 1])
                 for j in range(5)) + big_c(mpmath.mpf(5) - mpmath.mpf("1e-30")) ** 2 * mpmath.exp(-5 * mu)
    model = laws.ConstantForce(float(mu))
    whole = _value(model, 50.0, LifeAnnuity(timing="continuous", escalation=float(e)))
    term = _value(model, 50.0, LifeAnnuity(timing="continuous", escalation=float(e), term=5))
    assert whole.value[0] == pytest.approx(float(first), rel=1e-12)
    assert term.second_moment[0] == pytest.approx(float(second), rel=1e-12)


@pytest.mark.parametrize(
    "benefit,field",
    [
        (LifeAnnuity(escalation=-1.0), "escalation"),
        (LifeAnnuity(escalation=1.5), "escalation"),
        (LifeAnnuity(escalation=math.nan), "escalation"),
        (LifeAnnuity(escalation=0.02, increasing=True), "escalation"),
        (LifeInsurance(decreasing=True), "decreasing"),
        (LifeInsurance(decreasing=True, increasing=True, term=5), "decreasing"),
        (LifeAnnuity(escalation=0.02, frequency=12, approximation="woolhouse"), "approximation"),
    ],
)
def test_impossible_amounts_name_the_field(benefit, field):
    with pytest.raises(DomainError) as info:
        _value(SULT, 60.0, benefit)
    assert info.value.field == field


def test_an_escalation_equal_to_the_rate_is_fine_and_extreme_ones_are_finite_or_refused():
    # e = i: every payment is worth 1 at time 0, so ä_{x:n} with e = i is the curtate
    # expectation plus one, capped at n: Σ_{k<n} ₖp_x (textbook: e_{x:n} = Σ_{k=1}^{n} ₖp_x)
    b = LifeAnnuity(escalation=0.05, term=30)
    got = _value(SULT, 60.0, b).value[0]
    t = np.arange(30.0)
    assert got == pytest.approx(float(np.exp(-SULT.cumulative_hazard(
        np.array([60.0]), np.zeros(1), t)[0]).sum()), rel=1e-12)
    # near −1 the amounts vanish after the first year: the value is the first payment
    tiny = _value(SULT, 60.0, LifeAnnuity(escalation=-0.999999)).value[0]
    assert tiny == pytest.approx(1.0, rel=1e-5)
    # 100 % a year on a law that lets lives survive for centuries does not converge
    with pytest.raises(DomainError) as info:
        _value(laws.ConstantForce(0.01), 40.0, LifeAnnuity(escalation=1.0), 0.05)
    assert info.value.field == "escalation"
    # …and on the Standard Ultimate law survival ends fast enough: finite
    big = _value(SULT, 60.0, LifeAnnuity(escalation=1.0), 0.05)
    assert np.isfinite(big.value[0]) and np.isfinite(big.second_moment[0])

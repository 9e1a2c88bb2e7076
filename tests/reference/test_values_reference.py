"""Present values against outside references: published values, textbook identities, mpmath."""

from __future__ import annotations

import math

import mpmath
import numpy as np
import pytest
from shared_bases import I5, SULT

from service.core import laws
from service.core.values import (
    Endowment,
    LifeAnnuity,
    LifeInsurance,
    PureEndowment,
    benefit_values,
)


def _one(model, age, benefit, discount=I5, fast=True):
    return benefit_values(model, np.array([float(age)]), np.zeros(1), discount, benefit, fast=fast)


# Standard Ultimate Life Table at 5 %, as published in Dickson, Hardy and Waters, Actuarial
# Mathematics for Life Contingent Risks (values quoted from memory; they follow from the law).
# Each computed value is rounded to the printed decimals and compared exactly.
SULT_PUBLISHED = [
    ("annuity", 60, "14.9041"),  # ä_60, quoted from memory
    ("insurance", 60, "0.29028"),  # A_60, quoted from memory
    ("insurance2", 60, "0.10834"),  # ²A_60, quoted from memory
    ("endow5", 60, "0.76687"),  # ₅E_60, quoted from memory
    ("endow10", 60, "0.57864"),  # ₁₀E_60, quoted from memory
    ("endow20", 60, "0.29508"),  # ₂₀E_60, quoted from memory
    ("annuity", 65, "13.5498"),  # ä_65, quoted from memory
    ("insurance", 65, "0.35477"),  # A_65, quoted from memory
    ("insurance2", 65, "0.15420"),  # ²A_65, quoted from memory
    ("annuity", 50, "17.0245"),  # ä_50, quoted from memory
    ("insurance", 50, "0.18931"),  # A_50, quoted from memory
]


@pytest.mark.parametrize("fast", [True, False])
@pytest.mark.parametrize("what,age,printed", SULT_PUBLISHED)
def test_standard_ultimate_published_digits(what, age, printed, fast):
    if what == "annuity":
        value = _one(SULT, age, LifeAnnuity(), fast=fast).value[0]
    elif what == "insurance":
        value = _one(SULT, age, LifeInsurance(), fast=fast).value[0]
    elif what == "insurance2":
        value = _one(SULT, age, LifeInsurance(), fast=fast).second_moment[0]
    else:
        value = _one(SULT, age, PureEndowment(term=int(what[5:])), fast=fast).value[0]
    decimals = len(printed.split(".")[1])
    assert f"{value:.{decimals}f}" == printed


@pytest.mark.parametrize("age", [30.0, 60.0, 72.5])
def test_textbook_identities(age):
    d = 0.05 / 1.05
    delta = math.log(1.05)
    a_due = _one(SULT, age, LifeAnnuity()).value[0]
    ins = _one(SULT, age, LifeInsurance())
    # A_x = 1 − d ä_x (textbook identity)
    assert ins.value[0] == pytest.approx(1.0 - d * a_due, rel=1e-12)
    # Var = ²A − A² (textbook identity), and Var(Y) = (²A − A²)/d² for the annuity-due
    var_a = _one(SULT, age, LifeAnnuity()).standard_deviation[0] ** 2
    assert var_a == pytest.approx((ins.second_moment[0] - ins.value[0] ** 2) / d**2, rel=1e-9)
    # Ā_x = 1 − δ ā_x (textbook identity)
    a_bar = _one(SULT, age, LifeAnnuity(timing="continuous")).value[0]
    ins_bar = _one(SULT, age, LifeInsurance(timing="moment-of-death"))
    assert ins_bar.value[0] == pytest.approx(1.0 - delta * a_bar, rel=1e-11)
    # Var(ā) = (²Ā − Ā²)/δ² (textbook identity)
    cont = _one(SULT, age, LifeAnnuity(timing="continuous"))
    assert cont.standard_deviation[0] ** 2 == pytest.approx(
        (ins_bar.second_moment[0] - ins_bar.value[0] ** 2) / delta**2, rel=1e-9
    )
    # ä_{x:n} = a_{x:n−1} + 1 (textbook identity)
    for fast in (True, False):
        due = _one(SULT, age, LifeAnnuity(term=10), fast=fast).value[0]
        arr = _one(SULT, age, LifeAnnuity(timing="arrears", term=9), fast=fast).value[0]
        assert due == pytest.approx(arr + 1.0, rel=1e-13)
    # A_{x:n} = A¹_{x:n} + ₙE_x (textbook identity)
    end = _one(SULT, age, Endowment(term=15)).value[0]
    term = _one(SULT, age, LifeInsurance(term=15)).value[0]
    pure = _one(SULT, age, PureEndowment(term=15)).value[0]
    assert end == pytest.approx(term + pure, rel=1e-13)


def test_woolhouse_two_terms_and_exact_monthly_are_close():
    # ä_x^(m) ≈ ä_x − (m − 1)/(2m) (Woolhouse, two terms; textbook formula)
    a = _one(SULT, 60, LifeAnnuity()).value[0]
    wool = _one(SULT, 60, LifeAnnuity(frequency=12, approximation="woolhouse")).value[0]
    assert wool == pytest.approx(a - 11 / 24, rel=1e-13)
    exact = _one(SULT, 60, LifeAnnuity(frequency=12)).value[0]
    assert abs(exact - wool) < 5e-3  # the omitted third term is −(m²−1)/(12m²)(δ + μ)
    # UDD: ä^(m) = α(m) ä − β(m) (textbook formula)
    i, m = 0.05, 12
    delta = math.log1p(i)
    i_m, d_m = m * math.expm1(delta / m), -m * math.expm1(-delta / m)
    alpha, beta = i * (i / (1 + i)) / (i_m * d_m), (i - i_m) / (i_m * d_m)
    udd = _one(SULT, 60, LifeAnnuity(frequency=12, approximation="udd")).value[0]
    assert udd == pytest.approx(alpha * a - beta, rel=1e-13)
    assert abs(exact - udd) < 5e-3


def test_constant_force_closed_form():
    # Ā = μ/(μ + δ) exactly under constant force (textbook closed form); ²Ā = μ/(μ + 2δ)
    mu, delta = 0.02, math.log(1.05)
    r = _one(laws.ConstantForce(mu), 40, LifeInsurance(timing="moment-of-death"))
    assert r.value[0] == pytest.approx(mu / (mu + delta), rel=1e-12)
    assert r.second_moment[0] == pytest.approx(mu / (mu + 2 * delta), rel=1e-12)
    # ā = 1/(μ + δ) (textbook closed form)
    a = _one(laws.ConstantForce(mu), 40, LifeAnnuity(timing="continuous")).value[0]
    assert a == pytest.approx(1.0 / (mu + delta), rel=1e-12)


def test_de_moivre_term_insurance_closed_forms():
    # de Moivre, ω = 100, age 40: T uniform on (0, 60) (textbook closed forms)
    model = laws.DeMoivre(100.0)
    n, width = 20, 60.0
    delta = math.log(1.05)
    v = 1 / 1.05
    cont = _one(model, 40, LifeInsurance(timing="moment-of-death", term=n)).value[0]
    assert cont == pytest.approx((1 - math.exp(-delta * n)) / (delta * width), rel=1e-12)
    annual = _one(model, 40, LifeInsurance(term=n), fast=False).value[0]
    assert annual == pytest.approx((v - v ** (n + 1)) / (1 - v) / width, rel=1e-12)
    # Σ_{k<n} v^(k+1)/60 = a_n/60


def _mp_integral(force, hazard, x, delta, power):
    def f(t):
        return mpmath.exp(-power * delta * t - hazard(x, t)) * force(x + t)

    return mpmath.quad(f, [0, 10, 30, 60, 100, 200])


@pytest.mark.parametrize("kind", ["gompertz", "makeham"])
def test_continuous_values_against_mpmath(kind):
    # mpmath at 40 digits (general-purpose library) for ā, Ā, ²Ā on Gompertz and Makeham
    mpmath.mp.dps = 40
    A = mpmath.mpf("0.00022") if kind == "makeham" else mpmath.mpf(0)
    B, c = mpmath.mpf("2.7e-6"), mpmath.mpf("1.124")
    lc = mpmath.log(c)
    model = laws.Makeham(0.00022, 2.7e-6, 1.124) if kind == "makeham" else laws.Gompertz(2.7e-6, 1.124)

    def hazard(x, t):
        return A * t + B * c**x * (c**t - 1) / lc

    def force(y):
        return A + B * c**y

    delta = mpmath.log(mpmath.mpf("1.05"))
    for x in (45.0, 70.25):
        xm = mpmath.mpf(x)
        ins = _one(model, x, LifeInsurance(timing="moment-of-death"))
        assert ins.value[0] == pytest.approx(float(_mp_integral(force, hazard, xm, delta, 1)), rel=1e-12)
        assert ins.second_moment[0] == pytest.approx(float(_mp_integral(force, hazard, xm, delta, 2)), rel=1e-12)
        ann = _one(model, x, LifeAnnuity(timing="continuous")).value[0]
        exact = mpmath.quad(lambda t, xm=xm: mpmath.exp(-delta * t - hazard(xm, t)), [0, 10, 30, 60, 100, 200])
        assert ann == pytest.approx(float(exact), rel=1e-12)

"""Textbook closed forms, facts of the trade, and the Standard Ultimate Life Table."""

from __future__ import annotations

import math

import mpmath as mp
import numpy as np
import pytest
from scipy import integrate

from service.core import laws, tables

# ---- textbook closed forms ------------------------------------------------------------------


@pytest.mark.parametrize("omega,x", [(105.0, 0.0), (105.0, 47.3), (90.0, 89.99)])
def test_de_moivre_complete_expectation(omega, x):
    # textbook: under de Moivre, e̊_x = (ω − x)/2
    assert laws.DeMoivre(omega).complete_expectation([x], [0])[0] == pytest.approx(
        (omega - x) / 2, rel=1e-14)


@pytest.mark.parametrize("omega,alpha,x", [(100.0, 0.5, 20.0), (100.0, 3.7, 99.2), (80.0, 12.0, 0.0)])
def test_generalised_de_moivre_complete_expectation(omega, alpha, x):
    m = laws.GeneralisedDeMoivre(omega, alpha)
    # textbook: e̊_x = (ω − x)/(α + 1)
    assert m.complete_expectation([x], [0])[0] == pytest.approx((omega - x) / (alpha + 1), rel=1e-13)


@pytest.mark.parametrize("mu", [1e-5, 0.02, 4.0])
def test_exponential_complete_expectation(mu):
    # textbook: under a constant force, e̊_x = 1/μ at every age
    m = laws.ConstantForce(mu)
    np.testing.assert_allclose(m.complete_expectation([0.0, 33.3, 1e4], [0]), 1 / mu, rtol=1e-14)


def test_udd_fractional_deaths_and_half_year():
    q = [0.02, 0.05, 0.2, 0.6, 1.0]
    m = tables.LifeTable(80, q, "udd")
    for j, qj in enumerate(q[:-1]):
        s = np.array([1e-9, 0.25, 0.5, 0.999])
        # textbook (UDD): ₛq_x = s q_x for 0 ≤ s ≤ 1 at whole ages
        np.testing.assert_allclose(m.death([80.0 + j], [0], s)[0], s * qj, rtol=1e-13)
        # textbook (UDD): e̊_x = e_x + ½ at whole ages
        assert m.complete_expectation([80.0 + j], [0])[0] == pytest.approx(
            m.curtate_expectation([80.0 + j], [0])[0] + 0.5, rel=1e-14)


# ---- facts of the trade (common practice) ----------------------------------------------------

BASES = {
    "makeham": lambda: laws.Makeham(0.00022, 2.7e-6, 1.124),
    "siler": lambda: laws.Siler(0.05, 1.0, 1e-3, 3e-5, 0.1),
    "table-balducci": lambda: tables.LifeTable(60, [0.01, 0.03, 0.1, 0.4, 1.0], "balducci"),
    "table-constant-force": lambda: tables.LifeTable(60, [0.01, 0.03, 0.1, 0.4, 1.0], "constant-force"),
}


@pytest.mark.parametrize("name", BASES)
def test_common_practice_identities(name):
    m = BASES[name]()
    x = 61.5 if name.startswith("table") else 40.5
    end = m.limiting_age - x if math.isfinite(m.limiting_age) else 120.0
    breaks = [k + 0.5 for k in range(int(end))]  # whole ages of the life
    def surv(t):
        return m.survival([x], [0], [t])[0, 0]
    def force(t):
        return m.force([x], [0], [t])[0, 0]
    # common practice: f_x(t) = ₜp_x μ_{x+t}, the derivative of ₜq_x (central difference)
    for t in (0.2, 1.7, 2.2):
        h = 1e-6
        slope = (m.death([x], [0], [t + h])[0, 0] - m.death([x], [0], [t - h])[0, 0]) / (2 * h)
        assert m.density([x], [0], [t])[0, 0] == pytest.approx(slope, rel=1e-7)
        assert m.density([x], [0], [t])[0, 0] == pytest.approx(surv(t) * force(t), rel=1e-14)
    # common practice: ₜq_x = ∫₀ᵗ ᵣp_x μ_{x+r} dr (scipy quad, breakpoints at whole ages)
    for t in (0.7, 2.5):
        pts = [b for b in breaks if b < t]
        val = integrate.quad(lambda r: surv(r) * force(r), 0, t, points=pts or None,
                             epsabs=0, epsrel=1e-13, limit=200)[0]
        assert m.death([x], [0], [t])[0, 0] == pytest.approx(val, rel=1e-10)
    # common practice: e̊_x = ∫₀^∞ ₜp_x dt and e_x = Σ_{k≥1} ₖp_x
    pts = [b for b in breaks if b < end]
    e_complete = integrate.quad(surv, 0, end, points=pts or None, epsabs=0, epsrel=1e-13,
                                limit=400)[0]
    assert m.complete_expectation([x], [0])[0] == pytest.approx(e_complete, rel=1e-10)
    e_curtate = sum(surv(k) for k in range(1, int(end) + 2))
    assert m.curtate_expectation([x], [0])[0] == pytest.approx(e_curtate, rel=1e-12)
    # common practice: e̊_x ≈ e_x + ½ (within a tenth of a year on these bases)
    assert abs(m.complete_expectation([x], [0])[0] - e_curtate - 0.5) < 0.1


# ---- the Standard Ultimate Life Table ---------------------------------------------------------

SULT = dict(A=0.00022, B=2.7e-6, c=1.124)
# Published in Dickson, Hardy and Waters, Actuarial Mathematics for Life Contingent Risks
# (values quoted from memory): radix 100,000 at age 20
SULT_L = {60: 96_634.1, 65: 94_579.7, 70: 91_082.4, 100: 6_248.2}


def _sult_l_mpmath(age):
    """l_age from the law at 40 digits (mpmath): 100,000 exp(−∫₂₀^age μ)."""
    with mp.workdps(40):
        A, B, c = (mp.mpf(str(v)) for v in SULT.values())
        h = A * (age - 20) + B * (c**age - c**20) / mp.log(c)
        return 100_000 * mp.exp(-h)


@pytest.mark.parametrize("age", sorted(SULT_L))
def test_standard_ultimate_l(age):
    m = laws.Makeham(**SULT)
    got = 100_000 * m.survival([20.0], [0], [age - 20.0])[0, 0]
    assert got == pytest.approx(SULT_L[age], abs=0.05)  # the published table, quoted from memory
    assert got == pytest.approx(float(_sult_l_mpmath(age)), rel=1e-12)  # mpmath at 40 digits
    table = m.life_table(20, age, 100_000)
    assert table["l"][-1] == pytest.approx(SULT_L[age], abs=0.05)


@pytest.mark.parametrize("fractional", tables.FRACTIONAL_AGES)
def test_standard_ultimate_as_a_table_agrees_with_the_law_at_whole_ages(fractional):
    """q_x at whole ages from the law (mpmath, q = 1 − exp(−H)), closed with 1 at age 130."""
    with mp.workdps(40):
        A, B, c = (mp.mpf(str(v)) for v in SULT.values())
        q = [float(-mp.expm1(-(A + B * c**x * (c - 1) / mp.log(c)))) for x in range(20, 130)]
    m = tables.LifeTable(20, q + [1.0], fractional)
    for age in sorted(SULT_L):
        got = 100_000 * m.survival([20.0], [0], [age - 20.0])[0, 0]
        assert got == pytest.approx(SULT_L[age], abs=0.05)  # quoted from memory
        assert got == pytest.approx(float(_sult_l_mpmath(age)), rel=1e-12)  # mpmath, 40 digits

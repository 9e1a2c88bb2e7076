"""Net premiums: the default premium term, premiums m times a year, and answers with an
approximation that do not contradict themselves."""

from __future__ import annotations

import numpy as np
import pytest
from shared_bases import I5, SULT

from service.core.errors import DomainError
from service.core.values import (
    Endowment,
    LifeAnnuity,
    LifeInsurance,
    PremiumPlan,
    PureEndowment,
    Valuation,
    default_premium_term,
)


def _valuation(age, fast=True):
    age = np.atleast_1d(np.asarray(age, float))
    return Valuation(SULT, age, np.zeros(age.size), I5, fast)


@pytest.mark.parametrize(
    "benefit,term",
    [
        (LifeInsurance(term=20), 20),
        (LifeInsurance(term=10, deferral=5), 15),
        (LifeInsurance(), None),
        (Endowment(term=25), 25),
        (PureEndowment(term=10), 10),
        (LifeAnnuity(deferral=25), 25),
        (LifeAnnuity(term=10), 10),
        (LifeAnnuity(), None),
    ],
)
def test_the_default_premium_term_follows_the_benefit(benefit, term):
    # common practice: premiums stop when cover ends, or when a deferred annuity starts
    assert default_premium_term(benefit) == term


def test_term_insurance_premiums_over_the_term():
    # the figures of the issue (Standard Ultimate basis at 5 %): P = A¹_{40:20} / ä_{40:20}
    # = 0.001126 with premiums over the term, 0.000793 with premiums for life
    b = LifeInsurance(term=20)
    over_term = _valuation(40).values(b, PremiumPlan(default_premium_term(b))).net_premium[0]
    for_life = _valuation(40).values(b, PremiumPlan(None)).net_premium[0]
    assert round(over_term, 6) == 0.001126
    assert round(for_life, 6) == 0.000793


@pytest.mark.parametrize("age", [40.0, 52.75])
def test_monthly_premiums_are_exact_from_the_basis(age):
    # P⁽¹²⁾ = A / ä⁽¹²⁾_{x:n}, with ä⁽¹²⁾ the direct sum Σ_{k<12n} (1/12) v^{k/12} ₖ/₁₂p_x from
    # the law's own survival (textbook definition of the 1/m-thly annuity-due)
    n = 20
    b = Endowment(term=n)
    got = _valuation(age).values(b, PremiumPlan(n, 12))
    t = np.arange(12 * n) / 12.0
    surv = np.exp(-SULT.cumulative_hazard(np.array([age]), np.zeros(1), t)[0])
    annuity = float(np.sum(surv * 1.05**-t) / 12.0)
    value = _valuation(age).values(b).value[0]
    assert got.net_premium[0] == pytest.approx(value / annuity, rel=1e-12)
    assert got.approximated == ()


def test_an_approximate_premium_says_so():
    b = Endowment(term=20)
    got = _valuation(45).values(b, PremiumPlan(20, 12, "woolhouse"))
    assert got.approximated == ("net_premium",)
    exact = _valuation(45).values(b, PremiumPlan(20, 12)).net_premium[0]
    # Woolhouse with two terms is within a few parts in 10⁴ here (its third term is left out)
    assert got.net_premium[0] == pytest.approx(exact, rel=1e-3)
    assert got.net_premium[0] != exact


@pytest.mark.parametrize("method", ["udd", "woolhouse"])
def test_an_approximate_value_keeps_its_moments_exact_and_consistent(method):
    b = LifeAnnuity(frequency=12, approximation=method)
    got = _valuation([65.0, 70.5]).values(b, PremiumPlan(None))
    exact = _valuation([65.0, 70.5]).values(LifeAnnuity(frequency=12))
    np.testing.assert_allclose(got.exact_value, exact.value, rtol=1e-15)
    np.testing.assert_allclose(got.second_moment, exact.second_moment, rtol=1e-15)
    # the answer agrees with itself: SD² = E[PV²] − (exact E[PV])²
    np.testing.assert_allclose(got.standard_deviation**2,
                               got.second_moment - got.exact_value**2, rtol=1e-12)
    assert got.approximated == ("value", "net_premium")
    assert np.all(got.value != got.exact_value)


@pytest.mark.parametrize(
    "plan,field",
    [
        (PremiumPlan(10.5), "net_premium.premium_term"),
        (PremiumPlan(10.3, 4), "net_premium.premium_term"),
        (PremiumPlan(0.0), "net_premium.premium_term"),
        (PremiumPlan(10, 0), "net_premium.frequency"),
        (PremiumPlan(10, 12, "guess"), "net_premium.approximation"),
    ],
)
def test_impossible_premiums_name_the_field(plan, field):
    with pytest.raises(DomainError) as info:
        _valuation(40).values(LifeInsurance(term=20), plan)
    assert info.value.field == field


def test_a_premium_term_of_whole_months_is_fine_monthly():
    got = _valuation(40).values(LifeInsurance(term=20), PremiumPlan(10.25, 12)).net_premium[0]
    assert np.isfinite(got) and got > 0

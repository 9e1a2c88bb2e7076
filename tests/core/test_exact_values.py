"""Present values at exact ages from the per-rate tables (service/core/exact_values.py),
against the general path, which sums every payment (values.py), and against textbook
identities.

The general path is the reference: the tables must reproduce it to 1e-12 relative at random
exact ages and durations on every kind of year-grid basis, a life must have the same bits
alone as in a batch, and lives in years without polynomials must get the general path's
answer.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from shared_bases import I5, SULT

from service.core import exact_values, policy_values, tables
from service.core.lifetime import place_on_select_rows
from service.core.values import (
    Discount,
    Endowment,
    LifeAnnuity,
    LifeInsurance,
    PremiumPlan,
    PureEndowment,
    Valuation,
    udd_factors,
)

Q = [0.0008 * 1.095**k for k in range(75)] + [1.0]  # synthetic rates from age 30, closing
MODELS = {
    "law": lambda: SULT,
    "table, UDD": lambda: tables.LifeTable(30, Q, "udd"),
    "table, constant force": lambda: tables.LifeTable(30, Q, "constant-force"),
    "table, Balducci": lambda: tables.LifeTable(30, Q, "balducci"),
    "select table": lambda: tables.SelectTable(
        30, [[0.5 * q, 0.7 * q, 0.9 * q] for q in Q[:40]], 30, Q),
}
BENEFITS = [
    LifeAnnuity(),
    LifeAnnuity(frequency=12, term=25),
    LifeAnnuity(timing="arrears", frequency=4, term=20, deferral=3, guarantee=5),
    LifeAnnuity(frequency=2, escalation=0.03, guarantee=10),
    LifeAnnuity(timing="arrears", escalation=0.02, term=15),
    LifeInsurance(term=20),
    LifeInsurance(decreasing=True, term=25),
    LifeInsurance(increasing=True, deferral=2, term=10),
    LifeInsurance(timing="end-of-period", frequency=12, term=15),
    LifeInsurance(escalation=0.04, term=15),
    LifeInsurance(),
    PureEndowment(10),
    Endowment(20, timing="end-of-period", frequency=4),
]
WHOLE_LIFE_MONTHLY = [LifeAnnuity(frequency=12), LifeAnnuity(frequency=12, escalation=0.03)]


def _lives(kind: str, n: int, rng):
    if kind == "select table":
        duration = rng.uniform(0.0, 5.0, n)
        selection = rng.uniform(30.0, 69.99, n)
        return place_on_select_rows(selection + duration, duration, "last-birthday")
    return rng.uniform(30.0, 95.0, n), np.zeros(n)


def _relative(fast, slow):
    return float(np.max(np.abs(fast - slow) / np.maximum(np.abs(slow), 1e-300)))


def _assert_paths_agree(model, age, duration, discount, benefits, rtol=1e-12):
    """Both moments of every benefit, the tables' path against the general path."""
    fast = Valuation(model, age, duration, discount)
    slow = Valuation(model, age, duration, discount, fast=False)
    for b in benefits:
        f1, f2 = fast.moments(b)
        s1, s2 = slow.moments(b)
        assert _relative(f1, s1) <= rtol, b
        assert _relative(f2, s2) <= rtol, b


@pytest.mark.parametrize("kind", MODELS)
@pytest.mark.parametrize("rate,lives", [(0.05, 10_000), (0.0, 2_000), (0.12, 2_000)])
def test_tables_equal_the_general_path_at_random_exact_ages(kind, rate, lives):
    model = MODELS[kind]()
    rng = np.random.default_rng([int(rate * 100), len(kind)])
    discount = Discount.constant(rate)
    age, duration = _lives(kind, lives, rng)
    _assert_paths_agree(model, age, duration, discount, BENEFITS)
    # whole-life monthly payments are 1,200 payments a life on the general path: fewer lives
    few = slice(0, 500)
    _assert_paths_agree(model, age[few], duration[few], discount,
                        [b for b in WHOLE_LIFE_MONTHLY if b.escalation <= rate])


def test_the_tables_are_what_values_the_lives():
    """The agreement above is the tables' and not the general path's twice over: the batch
    builds them, and they answer every life but those of years without polynomials."""
    model = tables.LifeTable(30, Q, "udd")
    age = np.random.default_rng(7).uniform(30.0, 100.0, 2_000)
    b = LifeAnnuity(frequency=12, term=25)
    Valuation(model, age, np.zeros(age.size), I5).moments(b)
    key = exact_values.TableKey(0.05, 12, 0.0, "advance")
    assert exact_values.CACHE.built(model, key)
    lives = Valuation(model, age, np.zeros(age.size), I5)._exact
    got = exact_values.exact_moments(lives, b, lambda kind, m, e: exact_values.CACHE.get(
        model, exact_values.TableKey(0.05, m, e, kind)))
    assert np.isfinite(got[0]).mean() > 0.95


def test_a_life_has_the_same_bits_alone_as_in_a_mixed_batch():
    model = MODELS["select table"]()
    rng = np.random.default_rng(11)
    age, duration = _lives("select table", 300, rng)
    age[:20] = np.floor(age[:20])  # whole ages among exact ones
    duration[:20] = 0.0
    batch = Valuation(model, age, duration, I5)
    for b in BENEFITS[:9]:
        first, second = batch.moments(b)
        for i in range(0, 300, 7):
            one = Valuation(model, age[i:i + 1], duration[i:i + 1], I5).moments(b)
            assert one[0][0] == first[i] and one[1][0] == second[i], (b, i)


def test_lives_in_years_without_polynomials_get_the_general_path(monkeypatch):
    """Years whose polynomials fail the build's check have none; their lives are valued by
    the general path and the others by the tables, in one answer. (Polynomials of degree 3
    on one segment fail in most years, so that there are such years to test.)"""
    monkeypatch.setattr(exact_values, "DEGREE", 3)
    monkeypatch.setattr(exact_values, "MAX_LEVEL", 0)
    model = tables.LifeTable(30, Q, "udd")
    age = np.linspace(30.3, 94.7, 200)
    b = LifeInsurance(term=20)
    fast = Valuation(model, age, np.zeros(age.size), I5).moments(b)
    slow = Valuation(model, age, np.zeros(age.size), I5, fast=False).moments(b)
    built = exact_values.CACHE.get(model, exact_values.TableKey(0.05, 1, 0.0, "insurance"))
    kept = built.expansion.cell_of >= 0
    assert kept.any() and not kept.all()
    np.testing.assert_allclose(fast[0], slow[0], rtol=1e-12)
    np.testing.assert_allclose(fast[1], slow[1], rtol=1e-12)


def test_udd_identity_for_monthly_annuities_at_whole_ages():
    """Under UDD, at whole ages ä⁽ᵐ⁾_x = α(m) ä_x − β(m) exactly (a textbook identity of
    fractional-age assumptions, e.g. Dickson, Hardy and Waters, ch. 5; from memory)."""
    model = tables.LifeTable(30, Q, "udd")
    age = np.arange(30.0, 96.0)
    annual = Valuation(model, age, np.zeros(age.size), I5).moments(LifeAnnuity())[0]
    monthly = Valuation(model, np.repeat(age, 2), np.zeros(2 * age.size), I5).moments(
        LifeAnnuity(frequency=12))[0][::2]
    alpha, beta = udd_factors(0.05, 12)
    np.testing.assert_allclose(monthly, alpha * annual - beta, rtol=1e-12)


@pytest.mark.parametrize("m", [1, 4, 12])
def test_insurance_and_annuity_due_identity_at_exact_ages(m):
    """A⁽ᵐ⁾_x = 1 − d⁽ᵐ⁾ ä⁽ᵐ⁾_x for whole-life benefits at any age (the identity behind
    annuity-due and insurance at the end of the 1/m year of death; textbook)."""
    age = np.random.default_rng(m).uniform(20.0, 90.0, 200)
    valuation = Valuation(SULT, age, np.zeros(age.size), I5)
    timing = "end-of-year" if m == 1 else "end-of-period"
    insurance = valuation.moments(LifeInsurance(timing=timing, frequency=m))[0]
    annuity = valuation.moments(LifeAnnuity(frequency=m))[0]
    d_m = m * (1.0 - 1.05 ** (-1.0 / m))
    np.testing.assert_allclose(insurance, 1.0 - d_m * annuity, rtol=1e-12)


def test_one_life_builds_the_table_so_its_answer_never_depends_on_history():
    """The first life asking for a table builds it; a life valued before a batch and after
    it has the same bits, and so has a table rebuilt after being dropped."""
    model = tables.LifeTable(30, Q, "constant-force")
    key = exact_values.TableKey(0.031, 4, 0.0, "advance")
    b = LifeAnnuity(frequency=4, term=10)
    discount = Discount.constant(0.031)
    first = Valuation(model, np.array([47.63]), np.zeros(1), discount).moments(b)
    assert exact_values.CACHE.built(model, key)
    many = np.linspace(40.2, 70.7, 100)
    Valuation(model, many, np.zeros(many.size), discount).moments(b)
    rebuilt = exact_values.build_tables(model, key)
    np.testing.assert_array_equal(rebuilt.expansion.coef,
                                  exact_values.CACHE.get(model, key).expansion.coef)
    again = Valuation(model, np.array([47.63]), np.zeros(1), discount).moments(b)
    assert first[0][0] == again[0][0] and first[1][0] == again[1][0]


def test_the_cache_stays_within_its_bytes(monkeypatch):
    cache = exact_values._Cache()
    monkeypatch.setattr(exact_values, "CACHE_BYTES", 1)
    model = tables.LifeTable(30, Q, "udd")
    for rate in (0.01, 0.02, 0.03):
        cache.get(model, exact_values.TableKey(rate, 1, 0.0, "insurance"))
    assert len(cache._tables) == 1  # the newest is kept, the others dropped
    assert cache.nbytes == next(iter(cache._tables.values())).nbytes


def test_a_basis_too_large_to_expand_keeps_the_general_path(monkeypatch):
    monkeypatch.setattr(exact_values, "MAX_BUILD_COST", 10)
    model = tables.LifeTable(30, Q, "udd")
    age = np.linspace(40.5, 60.5, 100)
    fast = Valuation(model, age, np.zeros(100), I5).moments(LifeInsurance(term=5))
    slow = Valuation(model, age, np.zeros(100), I5, fast=False).moments(LifeInsurance(term=5))
    assert not exact_values.CACHE.built(model, exact_values.TableKey(0.05, 1, 0.0, "insurance"))
    np.testing.assert_array_equal(fast[0], slow[0])


def test_an_escalation_equal_to_the_rate_is_on_the_tables():
    """Escalation at the rate of interest: the yearly discount of the payments is 1, the
    edge of the tables' path (an escalation above the rate takes the general path)."""
    age = np.linspace(40.13, 90.77, 100)
    for b in (LifeAnnuity(frequency=12, escalation=0.05), LifeInsurance(escalation=0.05)):
        fast = Valuation(SULT, age, np.zeros(100), I5).moments(b)
        slow = Valuation(SULT, age, np.zeros(100), I5, fast=False).moments(b)
        np.testing.assert_allclose(fast[0], slow[0], rtol=1e-12)
        np.testing.assert_allclose(fast[1], slow[1], rtol=1e-12)
    assert exact_values.CACHE.built(SULT, exact_values.TableKey(0.05, 12, 0.05, "advance"))


def test_term_benefits_of_old_and_young_lives_together_value_as_each_alone():
    """A term annuity for an old life, whose cover outlasts the table, beside a young one:
    the convergence check looks at each life's own end of cover (a mixed batch was refused
    before, because the young life's survival at its term end is not negligible)."""
    model = tables.LifeTable(30, Q, "udd")  # closes at 105
    b = LifeAnnuity(timing="arrears", term=20)
    age = np.array([35.25, 95.5])
    for fast in (True, False):
        both = Valuation(model, age, np.zeros(2), I5, fast=fast).moments(b)[0]
        alone = [Valuation(model, age[i:i + 1], np.zeros(1), I5, fast=fast).moments(b)[0][0]
                 for i in range(2)]
        np.testing.assert_allclose(both, alone, rtol=1e-14)


def test_premiums_and_values_of_a_quote_at_an_exact_age():
    """A monthly-premium decreasing term insurance at 47.63: the equivalence premium from
    the tables equals the general path's."""
    age = np.full(70, 47.63)
    plan = PremiumPlan(25, 12)
    b = LifeInsurance(decreasing=True, term=25)
    fast = Valuation(SULT, age, np.zeros(70), I5).values(b, plan)
    slow = Valuation(SULT, age[:1], np.zeros(1), I5, fast=False).values(b, plan)
    assert fast.net_premium[0] == pytest.approx(slow.net_premium[0], rel=1e-12)
    assert math.isfinite(fast.standard_deviation[0])


@pytest.mark.parametrize("rule", ["constant-force", "balducci", "udd"])
def test_ages_on_the_edges_of_payment_periods(rule):
    """Whole ages, and ages a whole number of payment periods past one (47.25 quarterly),
    where a payment falls exactly on a whole age: under constant force or Balducci a table
    closing with q = 1 drops survival to 0 just after its last whole age, so the value jumps
    there and the tables must take it from the left, as the general path does."""
    model = tables.LifeTable(30, Q, rule)
    age = np.concatenate([np.arange(31.0, 104.0), np.arange(31.0, 104.0) + 0.25,
                          np.arange(31.0, 104.0) + 0.75])
    zero = np.zeros(age.size)
    for b in (LifeAnnuity(frequency=4), LifeAnnuity(escalation=0.02),
              LifeInsurance(timing="end-of-period", frequency=4, term=10)):
        fast = Valuation(model, age, zero, I5).moments(b)
        slow = Valuation(model, age, zero, I5, fast=False).moments(b)
        np.testing.assert_allclose(fast[0], slow[0], rtol=1e-12)
        np.testing.assert_allclose(fast[1], slow[1], rtol=1e-12)


# the benefits above without a guarantee (valued by the general path's pass), and two more
POLICY_BENEFITS = [b for b in BENEFITS if getattr(b, "guarantee", 0.0) == 0.0] + [
    LifeAnnuity(timing="arrears", frequency=4, term=20, deferral=3),
    LifeAnnuity(frequency=12, escalation=0.03),
]


@pytest.mark.parametrize("kind", MODELS)
def test_policy_values_from_the_tables_equal_the_general_path(kind):
    """The payments still to come at whole, fractional and payment-date durations (the last
    payment of an annuity in arrears falls at its term's end), from the tables against the
    general path's pass over every payment."""
    model = MODELS[kind]()
    rng = np.random.default_rng(len(kind))
    if kind == "select table":
        d = rng.uniform(0.0, 5.0, 40)
        age, duration = place_on_select_rows(rng.uniform(30.0, 54.99, 40) + d, d, "last-birthday")
    else:
        age, duration = rng.uniform(30.0, 60.0, 40), np.zeros(40)
    for b in POLICY_BENEFITS:
        end = 30.0 if b.term is None else getattr(b, "deferral", 0.0) + b.term
        t = np.unique(np.concatenate([np.linspace(0.0, end, 37), np.arange(0.0, end + 1.0),
                                      np.arange(0.0, end, 0.25)]))
        fast = Valuation(model, age, duration, I5)
        fast.moments(b)
        assert policy_values._exact_value(fast, b, t) is not None, b
        got = policy_values.future_value(fast, b, t)
        want = policy_values.future_value(Valuation(model, age, duration, I5, fast=False), b, t)
        np.testing.assert_allclose(got, want, rtol=1e-11, atol=1e-13, err_msg=str(b))


def test_reserves_of_a_quote_satisfy_the_recursion():
    """Annual premiums and an end-of-year benefit: (ₜV + P)(1 + i) = q S + p ₜ₊₁V at whole
    durations (the recursion of net premium policy values, textbook), at an exact age."""
    b = LifeInsurance(term=20)
    valuation = Valuation(SULT, np.array([47.63]), np.zeros(1), I5)
    premium = valuation.values(b, 20).net_premium
    t = np.arange(0.0, 21.0)
    reserve = policy_values.policy_values(valuation, b, t, premium, PremiumPlan(20), valued=True)[0]
    x = 47.63 + t[:-1]
    q = np.array([SULT.death(np.array([a]), np.zeros(1), np.array([1.0]))[0, 0] for a in x])
    lhs = (reserve[:-1] + premium[0]) * 1.05
    rhs = q * 1.0 + (1.0 - q) * reserve[1:]
    np.testing.assert_allclose(lhs, rhs, rtol=1e-10, atol=1e-13)
    assert abs(reserve[0]) < 1e-12 and abs(reserve[-1]) < 1e-12


CONTINUOUS_BENEFITS = [
    LifeAnnuity(timing="continuous"),
    LifeAnnuity(timing="continuous", term=20, deferral=2, guarantee=5),
    LifeAnnuity(timing="continuous", escalation=0.02),
    LifeInsurance(timing="moment-of-death", term=20),
    LifeInsurance(timing="moment-of-death", escalation=0.03, term=15),
    Endowment(20, timing="moment-of-death"),
]


@pytest.mark.parametrize("kind", MODELS)
def test_continuous_benefits_from_the_tables_equal_the_general_path(kind):
    """Continuous annuities and insurances at the moment of death: two Gauss–Legendre panels
    per policy year on the tables' side, the general path's panels on the other."""
    model = MODELS[kind]()
    # the general path integrates each life on panels: a few hundred lives keep this short
    age, duration = _lives(kind, 300, np.random.default_rng([7, len(kind)]))
    _assert_paths_agree(model, age, duration, I5, CONTINUOUS_BENEFITS)
    assert exact_values.CACHE.built(model, exact_values.TableKey(0.05, 1, 0.0, "moment-of-death"))


def test_a_basis_dropped_takes_its_tables_with_it():
    """The tables hold no reference to their basis: when the basis goes, so do its tables
    (the cache's bytes come back)."""
    import gc

    cache = exact_values._Cache()
    model = tables.LifeTable(30, Q, "udd")
    cache.get(model, exact_values.TableKey(0.04, 1, 0.0, "insurance"))
    assert cache.nbytes > 0
    del model
    gc.collect()
    assert cache.nbytes == 0 and not cache._tables

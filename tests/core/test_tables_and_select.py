"""Life tables and select tables: rows, durations, fractional ages, derived columns.

Expected values are computed here in plain Python from the rates themselves (products of
p = 1 − q and the fractional-age assumption's own formula), never by the core.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from service.core import laws, tables
from service.core.errors import DomainError

Q = [0.01, 0.02, 0.05, 0.1, 0.3, 1.0]  # an invented table from age 60
SEL = [[0.002, 0.004, 0.006], [0.003, 0.005, 0.007]]  # selection ages 40, 41; 3-year period
ULT = [0.008 * 1.1**i for i in range(30)] + [1.0]  # ultimate from age 42


def within(assumption, q, s):
    """ₛp within a year: UDD 1 − s q, constant force p^s, Balducci p/(p + s q)."""
    p = 1.0 - q
    if s == 0.0:
        return 1.0
    if assumption == "udd":
        return 1.0 - s * q
    if assumption == "constant-force":
        return p**s
    return p / (p + s * q)


def l_of(start, q, assumption, y):
    j = int(math.floor(y - start))
    out = 1.0
    for i in range(min(j, len(q))):
        out *= 1.0 - q[i]
    return out * within(assumption, q[j], y - start - j) if j < len(q) else 0.0


@pytest.mark.parametrize("assumption", tables.FRACTIONAL_AGES)
@pytest.mark.parametrize("x", [60.0, 60.4, 62.75])
def test_survival_at_fractional_ages_follows_the_assumption(assumption, x):
    m = tables.LifeTable(60, Q, assumption)
    t = np.array([0.1, 0.6, 1.0, 1.3, 2.9])
    got = m.survival([x], [0.0], t)[0]
    want = [l_of(60, Q, assumption, x + tt) / l_of(60, Q, assumption, x) for tt in t]
    np.testing.assert_allclose(got, want, rtol=1e-13)


@pytest.mark.parametrize("assumption", tables.FRACTIONAL_AGES)
def test_tiny_durations_keep_their_digits(assumption):
    """ₜq_x for t = 1e-12, at a whole and a fractional age: no cancellation."""
    m = tables.LifeTable(60, Q, assumption)
    for x in (60.0, 61.0, 62.25):
        j = int(x) - 60
        f = x - int(x)
        q = Q[j]
        t = 1e-12
        # textbook: −d/ds log ₛp at s = f, times t, to first order (the next term is ~t²)
        mu = {"udd": q / (1 - f * q), "constant-force": -math.log1p(-q),
              "balducci": q / (1 - q + f * q)}[assumption]
        got = m.death([x], [0.0], [t])[0, 0]
        assert got == pytest.approx(mu * t, rel=1e-11)
    law = laws.Makeham(0.00022, 2.7e-6, 1.124)
    for x in (20.0, 65.5):
        mu = 0.00022 + 2.7e-6 * 1.124**x
        assert law.death([x], [0.0], [1e-12])[0, 0] == pytest.approx(mu * 1e-12, rel=1e-11)


@pytest.mark.parametrize("assumption", tables.FRACTIONAL_AGES)
def test_temporary_curtate_moments(assumption):
    """E[min(K, n)^k] = Σ_{k' < n} k'^k P(K = k') + n^k ₙp_x (the definition)."""
    m = tables.LifeTable(60, Q, assumption)
    x = 60.0
    surv = [l_of(60, Q, assumption, x + k) / l_of(60, Q, assumption, x) for k in range(8)]
    for n in (1, 2, 3, 10):
        for k in (1, 2, 3):
            want = sum(kk**k * (surv[kk] - surv[kk + 1]) for kk in range(min(n, 7)))
            want += (n**k * surv[n]) if n < 8 else 0.0
            got = m.curtate_moments([x], [0.0], [k], n)[0, 0]
            assert got == pytest.approx(want, rel=1e-13)


def test_udd_temporary_complete_expectation_is_the_trapezium():
    """Under UDD ₜp is linear within each year, so e̊_{x:n} = Σ (ₖp + ₖ₊₁p)/2 exactly."""
    m = tables.LifeTable(60, Q, "udd")
    surv = [l_of(60, Q, "udd", 60 + k) for k in range(7)]
    for n in (1, 3, 6, 50):
        want = sum((surv[k] + surv[k + 1]) / 2 for k in range(min(n, 6)))
        assert m.complete_expectation([60.0], [0.0], n)[0] == pytest.approx(want, rel=1e-14)


@pytest.mark.parametrize("assumption", tables.FRACTIONAL_AGES)
def test_quantiles(assumption):
    m = tables.LifeTable(60, Q, assumption)
    probs = np.array([0.005, 0.0295, 0.2, 0.5, 0.9])
    got_k = m.curtate_quantiles([60.0], [0.0], probs)[0]
    # curtate: the least whole k with P(K ≤ k) = 1 − ₖ₊₁p ≥ p (the definition)
    for p, k in zip(probs, got_k):
        want = next(kk for kk in range(10) if 1 - l_of(60, Q, assumption, 61 + kk) >= p)
        assert k == want
    # complete, inside the first year: the assumption's survival solved for s by hand
    q = Q[0]
    p = 0.005
    want_t = {"udd": p / q, "constant-force": math.log1p(-p) / math.log1p(-q),
              "balducci": p * (1 - q) / (q * (1 - p))}[assumption]
    assert m.complete_quantiles([60.0], [0.0], [p])[0, 0] == pytest.approx(want_t, rel=1e-13)


@pytest.mark.parametrize("assumption", tables.FRACTIONAL_AGES)
def test_select_rows_by_duration(assumption):
    m = tables.SelectTable(40, SEL, 42, ULT, assumption)
    ult = tables.LifeTable(42, ULT, assumption)
    t = np.array([0.5, 1.0, 2.0, 3.5, 10.0])

    def select_l(sel_row, sel_age, y):
        rates = list(SEL[sel_row]) + ULT[sel_age + 3 - 42:]
        return l_of(sel_age, rates, assumption, y)

    # duration 0, 1, 2 at whole ages: the row of the selection age x − d
    for age, d in [(40.0, 0.0), (41.0, 0.0), (42.0, 2.0), (42.0, 1.0)]:
        sel_age = int(age - d)
        got = m.survival([age], [d], t)[0]
        want = [select_l(sel_age - 40, sel_age, age + tt) / select_l(sel_age - 40, sel_age, age)
                for tt in t]
        np.testing.assert_allclose(got, want, rtol=1e-13)
    # a fractional duration with a whole selection age: 41.5 at duration 1.5 uses row 40
    got = m.survival([41.5], [1.5], t)[0]
    want = [select_l(0, 40, 41.5 + tt) / select_l(0, 40, 41.5) for tt in t]
    np.testing.assert_allclose(got, want, rtol=1e-13)
    # duration at or past the select period: the ultimate rates
    for age, d in [(45.0, 3.0), (50.25, 7.0)]:
        np.testing.assert_allclose(m.survival([age], [d], t), ult.survival([age], [0.0], t),
                                   rtol=1e-15)
        np.testing.assert_allclose(m.complete_moments([age], [d], [1, 2]),
                                   ult.complete_moments([age], [0.0], [1, 2]), rtol=1e-15)
    # a select life lives longer than an ultimate life of the same age (lower rates)
    e_sel = m.complete_expectation([41.0], [0.0])[0]
    e_ult = ult.complete_expectation([42.0], [0.0])[0]
    assert e_sel > e_ult


def test_select_durations_that_do_not_name_a_selection_age():
    m = tables.SelectTable(40, SEL, 42, ULT, "udd")
    with pytest.raises(DomainError) as err:
        m.check_lives(np.array([40.0, 41.3]), np.array([0.0, 1.0]))  # selected at 40.3
    assert err.value.field == "lives[1].duration" and "whole age" in err.value.message
    with pytest.raises(DomainError) as err:
        m.check_lives(np.array([45.0]), np.array([1.0]))  # selected at 44: no such row
    assert err.value.field == "lives[0].duration" and "40 to 41" in err.value.message
    with pytest.raises(DomainError) as err:
        m.check_lives(np.array([40.5]), np.array([5.0]))  # ultimate, but before age 42
    assert err.value.field == "lives[0].age" and "start at age 42" in err.value.message
    m.check_lives(np.array([40.0, 41.5, 45.0]), np.array([0.0, 1.5, 3.0]))  # all fine


@pytest.mark.parametrize("assumption", tables.FRACTIONAL_AGES)
def test_life_table_columns(assumption):
    m = tables.LifeTable(60, Q, assumption)
    out = m.life_table(60, 64, 100_000)
    ages = [60, 61, 62, 63, 64]
    np.testing.assert_array_equal(out["age"], ages)
    l_col = [100_000 * l_of(60, Q, assumption, a) for a in ages + [65]]
    np.testing.assert_allclose(out["l"], l_col[:-1], rtol=1e-14)
    np.testing.assert_allclose(out["d"], np.array(l_col[:-1]) - np.array(l_col[1:]), rtol=1e-13)
    np.testing.assert_allclose(out["q"], Q[:5], rtol=1e-13)
    # e_x = Σ_{k≥1} ₖp_x (common practice)
    curtate = [sum(l_col[k] for k in range(i + 1, 6)) / l_col[i] for i in range(5)]
    np.testing.assert_allclose(out["curtate"], curtate, rtol=1e-13)
    if assumption == "udd":
        # e̊_x = e_x + ½ at whole ages under UDD (textbook)
        np.testing.assert_allclose(out["complete"], np.array(curtate) + 0.5, rtol=1e-13)
    # a radix scales l and d only
    other = m.life_table(60, 64, 1.0)
    np.testing.assert_allclose(other["l"] * 100_000, out["l"], rtol=1e-15)
    np.testing.assert_array_equal(other["complete"], out["complete"])


def test_life_table_from_a_law_at_a_fractional_start():
    m = laws.Makeham(0.00022, 2.7e-6, 1.124)
    out = m.life_table(20.5, 23.5, 1000)
    np.testing.assert_array_equal(out["age"], [20.5, 21.5, 22.5, 23.5])
    def H(x, t):
        return 0.00022 * t + 2.7e-6 * 1.124**x * math.expm1(t * math.log(1.124)) / math.log(1.124)
    np.testing.assert_allclose(out["l"], [1000 * math.exp(-H(20.5, k)) for k in range(4)], rtol=1e-13)
    np.testing.assert_allclose(out["q"], [-math.expm1(-H(20.5 + k, 1.0)) for k in range(4)], rtol=1e-12)

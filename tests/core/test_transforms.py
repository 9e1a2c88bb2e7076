"""Ratings and mortality improvement against outside references (named beside each check)."""

from __future__ import annotations

import math

import mpmath
import numpy as np
import pytest
from scipy import stats

from service.core import laws, tables
from service.core.errors import DomainError
from service.core.transforms import improved, rated

mpmath.mp.dps = max(mpmath.mp.dps, 40)  # never lower the precision other reference tests use

B, C = 3e-5, 1.1
GOMPERTZ = laws.Gompertz(B=B, c=C)
AGES = np.array([30.0, 60.5, 85.25])
ZERO = np.zeros(AGES.size)


def _rel(a, b):
    return float(np.max(np.abs(np.asarray(a) / np.asarray(b) - 1.0)))


def _mp_moment(hazard, k, upper=200):
    """mpmath at 30 digits: E[T^k] = k ∫ t^(k−1) exp(−H(t)) dt."""
    return float(k * mpmath.quad(lambda t: t ** (k - 1) * mpmath.exp(-hazard(t)), [0, 20, 60, upper]))


def test_force_multiplier_on_gompertz_is_gompertz_with_m_b():
    m = 1.7
    model = rated(GOMPERTZ, force_multiplier=m)
    # scipy.stats.gompertz: T_x has sf exp(−η(e^(t ln c) − 1)) with η = m B c^x / ln c
    log_c = math.log(C)
    t = np.array([0.5, 5.0, 20.0])
    for i, x in enumerate(AGES):
        ref = stats.gompertz(c=m * B * C**x / log_c, scale=1.0 / log_c).sf(t)
        assert _rel(model.survival(AGES[i : i + 1], ZERO[:1], t)[0], ref) < 1e-12
    # mpmath at 30 digits, moments of orders 1, 2 and 8
    got = model.complete_moments(AGES, ZERO, [1, 2, 8])
    for i, x in enumerate(AGES):
        def hazard(s, x=x):
            return m * B * mpmath.mpf(C) ** x * (mpmath.mpf(C) ** s - 1) / mpmath.log(C)
        ref = [_mp_moment(hazard, k) for k in (1, 2, 8)]
        assert _rel(got[i], ref) < 1e-9
    # the law itself with m B (the standard result), every quantity
    same = laws.Gompertz(B=m * B, c=C)
    assert _rel(model.curtate_moments(AGES, ZERO, [1, 3]), same.curtate_moments(AGES, ZERO, [1, 3])) < 1e-10
    assert _rel(model.complete_moments(AGES, ZERO, [1, 2], term=10), same.complete_moments(AGES, ZERO, [1, 2], term=10)) < 1e-10
    p = [0.05, 0.5, 0.95]
    assert _rel(model.complete_quantiles(AGES, ZERO, p), same.complete_quantiles(AGES, ZERO, p)) < 1e-10
    assert np.array_equal(model.curtate_quantiles(AGES, ZERO, p), same.curtate_quantiles(AGES, ZERO, p))


def test_extra_force_on_gompertz_is_makeham():
    delta = 0.002
    model = rated(GOMPERTZ, extra_force=delta)
    makeham = laws.Makeham(A=delta, B=B, c=C)  # standard result: μ + δ = δ + B c^x
    assert _rel(model.complete_moments(AGES, ZERO, [1, 2, 8]), makeham.complete_moments(AGES, ZERO, [1, 2, 8])) < 1e-9
    t = np.array([1.0, 10.0])
    assert _rel(model.force(AGES, ZERO, t), makeham.force(AGES, ZERO, t)) < 1e-12
    # mpmath reference for the mean at age 60.5
    x = 60.5
    ref = _mp_moment(lambda s: delta * s + B * mpmath.mpf(C) ** x * (mpmath.mpf(C) ** s - 1) / mpmath.log(C), 1)
    assert abs(model.complete_expectation([x], [0.0])[0] / ref - 1) < 1e-10


def test_time_limited_extra_force_against_mpmath():
    delta, n = 0.01, 5.0
    model = rated(GOMPERTZ, extra_force=delta, extra_force_years=n)
    x = 60.5

    def hazard(s):
        return delta * min(s, n) + B * mpmath.mpf(C) ** x * (mpmath.mpf(C) ** s - 1) / mpmath.log(C)

    ref = float(mpmath.quad(lambda s: mpmath.exp(-hazard(s)), [0, n, 60, 200]))
    assert abs(model.complete_expectation([x], [0.0])[0] / ref - 1) < 1e-10


def _small_table(assumption="udd"):
    return tables.LifeTable(60, [0.1, 0.2, 0.4, 1.0], assumption)


def test_q_multiplier_and_extra_q_hand_computed():
    table = _small_table()
    model = rated(table, q_multiplier=3.0)
    # hand-computed: q' = min(1, 3q) = 0.3, 0.6, 1 (the row closes at age 62)
    assert model.death([60.0, 61.0, 62.0], [0, 0, 0], [1.0])[:, 0] == pytest.approx([0.3, 0.6, 1.0], abs=1e-15)
    assert model.limiting_age == 63.0
    # e_60 = p60 + p60 p61 = 0.7 + 0.7·0.4 = 0.98
    assert model.curtate_expectation([60.0], [0.0])[0] == pytest.approx(0.98, rel=1e-14)
    loaded = rated(table, extra_q=0.05, extra_q_years=1)
    # hand-computed: ₂p_60 = (1 − 0.1 − 0.05)(1 − 0.2) = 0.68 and, from 60.5 (UDD), the extra
    # covers one policy year, ages 60.5 to 61.5, on the loaded rates 0.15 and 0.25, then the
    # table's own from 61.5: ₁.₅p = (1 − 0.15)/(1 − 0.5·0.15) · (1 − 0.5·0.25) · (1 − 0.2)/(1 − 0.5·0.2)
    assert loaded.survival([60.0], [0.0], [2.0])[0, 0] == pytest.approx(0.68, rel=1e-14)
    assert loaded.survival([60.5], [0.0], [1.5])[0, 0] == pytest.approx(
        0.85 / 0.925 * 0.875 * 0.8 / 0.9, rel=1e-14)


def test_time_limited_extras_count_policy_years_from_an_exact_age():
    """An extra for n years covers durations 0 to n whatever the fraction of the age (common
    practice: underwriters state an extra as so many years from the policy's start): during
    them the life has the loaded rates, after them the table's own, on either extra."""
    table = _small_table()
    for extra, years in (({"extra_q": 0.05}, "extra_q_years"),
                         ({"extra_force": 0.05}, "extra_force_years")):
        limited = rated(table, **extra, **{years: 1})
        always = rated(table, **extra)
        age = np.array([60.3, 60.9])
        inside = limited.survival(age, [0.0, 0.0], [0.5, 1.0])
        np.testing.assert_allclose(inside, always.survival(age, [0.0, 0.0], [0.5, 1.0]),
                                   rtol=1e-14)
        # after the year: ₜp = ₁p(loaded) · ₜ₋₁p_{x+1}(table)
        after = limited.survival(age, [0.0, 0.0], [1.5])[:, 0]
        expected = (always.survival(age, [0.0, 0.0], [1.0])[:, 0]
                    * table.survival(age + 1.0, [0.0, 0.0], [0.5])[:, 0])
        np.testing.assert_allclose(after, expected, rtol=1e-14)


def test_q_multiplier_on_a_law_is_refused_with_a_suggestion():
    with pytest.raises(DomainError) as err:
        rated(GOMPERTZ, q_multiplier=2.0)
    assert err.value.field == "q_multiplier" and "force_multiplier" in err.value.message


def test_negative_extra_force_must_keep_the_force_non_negative():
    with pytest.raises(DomainError) as err:
        rated(GOMPERTZ, extra_force=-1e-3)
    assert err.value.field == "extra_force"
    makeham = laws.Makeham(A=0.002, B=B, c=C)
    ok = rated(makeham, extra_force=-0.001)  # μ = 0.001 + B c^x stays positive
    same = laws.Makeham(A=0.001, B=B, c=C)
    assert _rel(ok.complete_moments(AGES, ZERO, [1]), same.complete_moments(AGES, ZERO, [1])) < 1e-10


def test_age_shift_values_the_life_at_the_shifted_age():
    model = rated(GOMPERTZ, age_shift=-3.5)
    assert _rel(model.complete_moments(AGES, ZERO, [1, 2]), GOMPERTZ.complete_moments(AGES - 3.5, ZERO, [1, 2])) < 1e-15
    with pytest.raises(DomainError):
        model.check_lives(np.array([2.0]), np.zeros(1))


def test_rated_batch_equals_one_by_one():
    model = rated(_small_table("balducci"), q_multiplier=1.2, extra_force=0.01, extra_force_years=1.5)
    ages = np.array([60.0, 60.3, 61.7, 62.2])
    batch = model.complete_moments(ages, np.zeros(4), [1, 2])
    for i, x in enumerate(ages):
        assert np.allclose(model.complete_moments([x], [0.0], [1, 2])[0], batch[i], rtol=1e-14)


def test_improvement_hand_computed_cohort():
    table = _small_table()
    rates = {60: 0.10, 61: 0.05, 62: 0.02, 63: 0.0}
    model = improved(table, 2020, 2022, lambda ages, year: np.vectorize(rates.get)(ages))
    # hand-computed, life aged 60 in 2022 (base year 2020):
    #   age 60 in 2022: 0.1 × (1 − 0.10)²      = 0.081
    #   age 61 in 2023: 0.2 × (1 − 0.05)³      = 0.171475
    #   age 62 in 2024: 0.4 × (1 − 0.02)⁴      = 0.36893...
    #   age 63: the closing rate 1 stays 1
    q = model.death([60.0, 61.0, 62.0, 63.0], [0, 0, 0, 0], [1.0])[:, 0]
    assert q[0] == pytest.approx(0.081, rel=1e-14)
    assert q[1] == pytest.approx(0.2 * 0.95**2, rel=1e-14)  # cohort aged 61 in 2022
    cohort = model.survival([60.0], [0.0], [1.0, 2.0, 3.0])[0]
    assert cohort[0] == pytest.approx(1 - 0.081, rel=1e-14)
    assert cohort[1] == pytest.approx((1 - 0.081) * (1 - 0.171475), rel=1e-14)
    assert cohort[2] == pytest.approx((1 - 0.081) * (1 - 0.171475) * (1 - 0.4 * 0.98**4), rel=1e-14)
    assert model.survival([60.0], [0.0], [4.0])[0, 0] == 0.0
    # fractional ages follow the base table's assumption (UDD within the cohort's year)
    assert model.survival([60.5], [0.0], [0.5])[0, 0] == pytest.approx((1 - 0.081) / (1 - 0.5 * 0.081), rel=1e-14)


def test_zero_improvement_reproduces_the_base_table():
    q = list(np.linspace(0.01, 0.6, 30)) + [1.0]
    for assumption in ("udd", "constant-force", "balducci"):
        table = tables.LifeTable(50, q, assumption)
        model = improved(table, 2020, 2030, lambda ages, year: np.zeros(np.shape(ages)))
        ages = np.array([50.0, 55.5, 70.25])
        assert _rel(model.complete_moments(ages, np.zeros(3), [1, 2]), table.complete_moments(ages, np.zeros(3), [1, 2])) < 1e-13
        assert _rel(model.survival(ages, np.zeros(3), [1.0, 7.5]), table.survival(ages, np.zeros(3), [1.0, 7.5])) < 1e-14


# an invented select-and-ultimate table: selection ages 60 and 61, a 2-year select period,
# ultimate rates from age 60 (the select rows continue into q_62… and q_63…)
SELECT_ROWS = [[0.05, 0.10], [0.06, 0.12]]
ULTIMATE = [0.04, 0.08, 0.2, 0.3, 0.5, 1.0]  # ages 60..65
IMPROVEMENT = {60: 0.10, 61: 0.05, 62: 0.02, 63: 0.01}  # 0 from age 64


def _select_table(assumption="udd"):
    return tables.SelectTable(60, SELECT_ROWS, 60, ULTIMATE, assumption)


def _by_age(ages, year):
    return np.array([IMPROVEMENT.get(int(a), 0.0) for a in np.ravel(ages)]).reshape(np.shape(ages))


def test_improvement_of_a_select_table_hand_computed_cohort():
    model = improved(_select_table(), 2020, 2022, _by_age)
    # hand-computed, life selected at 60 and aged 60 in 2022 (base year 2020):
    #   age 60 in 2022: q_[60]   × (1 − 0.10)² = 0.05 × 0.81        = 0.0405
    #   age 61 in 2023: q_[60]+1 × (1 − 0.05)³ = 0.10 × 0.857375    = 0.0857375
    #   age 62 in 2024: q_62     × (1 − 0.02)⁴ = 0.2  × 0.92236816  = 0.184473632
    q = [0.0405, 0.0857375, 0.184473632]
    cohort = model.survival([60.0], [0.0], [1.0, 2.0, 3.0])[0]
    assert cohort[0] == pytest.approx(1 - q[0], rel=1e-14)
    assert cohort[1] == pytest.approx((1 - q[0]) * (1 - q[1]), rel=1e-14)
    assert cohort[2] == pytest.approx((1 - q[0]) * (1 - q[1]) * (1 - q[2]), rel=1e-14)
    # hand-computed, life selected at 60 and aged 61 in 2022 (duration 1): another cohort
    #   age 61 in 2022: q_[60]+1 × (1 − 0.05)² = 0.10 × 0.9025      = 0.09025
    #   age 62 in 2023: q_62     × (1 − 0.02)³ = 0.2  × 0.941192    = 0.1882384
    #   age 63 in 2024: q_63     × (1 − 0.01)⁴ = 0.3  × 0.96059601  = 0.288178803
    q1 = [0.09025, 0.1882384, 0.288178803]
    later = model.survival([61.0], [1.0], [1.0, 2.0, 3.0])[0]
    assert later == pytest.approx(np.cumprod([1 - v for v in q1]), rel=1e-14)
    # hand-computed, life selected at 61 and aged 61 in 2022: q_[61] × 0.95² = 0.06 × 0.9025
    assert model.death([61.0], [0.0], [1.0])[0, 0] == pytest.approx(0.05415, rel=1e-14)
    # the closing rate of 1 stays 1: no one selected at 60 survives past age 65 (UDD)
    assert model.survival([60.0], [0.0], [6.0])[0, 0] == 0.0
    assert model.death([65.0], [5.0], [1.0])[0, 0] == 1.0
    # fractional ages follow the base's assumption (UDD within the cohort's year)
    assert model.survival([60.5], [0.5], [0.5])[0, 0] == pytest.approx(
        (1 - 0.0405) / (1 - 0.5 * 0.0405), rel=1e-14
    )


@pytest.mark.parametrize("assumption", ["udd", "constant-force", "balducci"])
def test_zero_improvement_reproduces_the_select_table(assumption):
    ult = list(np.linspace(0.004, 0.6, 40)) + [1.0]  # ages 40..80, invented
    sel = [[0.5 * ult[s], 0.7 * ult[s + 1], 0.9 * ult[s + 2]] for s in range(10)]  # 40..49
    table = tables.SelectTable(40, sel, 40, ult, assumption)
    model = improved(table, 2020, 2030, lambda ages, year: np.zeros(np.shape(ages)))
    ages = np.array([40.0, 42.5, 45.0, 47.25, 44.0, 60.5, 75.0])
    durs = np.array([0.0, 1.5, 0.0, 2.25, 3.0, 10.0, 0.0])
    t = [0.5, 1.0, 4.5]
    assert _rel(model.survival(ages, durs, t), table.survival(ages, durs, t)) < 1e-14
    assert _rel(model.complete_moments(ages, durs, [1, 2]), table.complete_moments(ages, durs, [1, 2])) < 1e-13
    assert _rel(model.curtate_moments(ages, durs, [1, 2], term=10), table.curtate_moments(ages, durs, [1, 2], term=10)) < 1e-13
    p = [0.1, 0.5, 0.9]
    assert _rel(model.complete_quantiles(ages, durs, p), table.complete_quantiles(ages, durs, p)) < 1e-12
    assert model.limiting_age == table.limiting_age
    # the select table's own checks of lives carry over
    with pytest.raises(DomainError) as err:
        model.check_lives(np.array([45.5]), np.array([1.0]))  # selected at 44.5: not whole
    assert err.value.field == "lives[0].duration"


def test_a_life_past_the_select_period_equals_the_improved_ultimate_table():
    select = improved(_select_table(), 2020, 2022, _by_age)
    ultimate = improved(tables.LifeTable(60, ULTIMATE), 2020, 2022, _by_age)
    ages = np.array([62.0, 62.5, 63.0, 64.75])
    durs = np.array([2.0, 3.5, 10.0, 2.0])
    t = [0.25, 1.0, 2.5]
    assert np.array_equal(select.survival(ages, durs, t), ultimate.survival(ages, 0 * durs, t))
    assert np.array_equal(select.complete_moments(ages, durs, [1, 2]), ultimate.complete_moments(ages, 0 * durs, [1, 2]))
    # a select life leaves the select period on the same cohort: selected at 60 and aged 60
    # in 2022, it is aged 62 in 2024 like the ultimate cohort aged 60 in 2022, so survival
    # from duration 2 on is that cohort's (hand-derived: ₜp = ₂p · ₜ₋₂p_62 of that cohort)
    ratio = select.survival([60.0], [0.0], [3.0, 4.5])[0] / select.survival([60.0], [0.0], [2.0])[0, 0]
    tail = ultimate.survival([60.0], [0.0], [3.0, 4.5])[0] / ultimate.survival([60.0], [0.0], [2.0])[0, 0]
    assert _rel(ratio, tail) < 1e-14


def test_improvement_size_is_bounded_and_a_law_is_refused():
    ult = [0.01] * 999 + [1.0]
    big = tables.SelectTable(0, [[0.005] * 5] * 100, 0, ult)
    with pytest.raises(DomainError) as err:
        improved(big, 2020, 2021, lambda ages, year: np.zeros(np.shape(ages)))
    assert err.value.field == "base" and "at most 90,000 rates" in err.value.message
    with pytest.raises(DomainError) as err:
        improved(GOMPERTZ, 2020, 2021, lambda ages, year: np.zeros(np.shape(ages)))
    assert err.value.field == "base" and "select table" in err.value.message


def test_negative_improvement_closes_a_cohort_at_a_rate_of_one():
    # hand-computed, cohort aged 60 in 2022 of the table 0.1, 0.2, 0.4, 1 with r = −0.5:
    #   age 60 in 2022: 0.1 × 1.5² = 0.225; age 61 in 2023: 0.2 × 1.5³ = 0.675;
    #   age 62 in 2024: 0.4 × 1.5⁴ = 2.025 ≥ 1, so the rate is 1 and the row closes there
    model = improved(_small_table(), 2020, 2022, lambda ages, year: np.full(np.shape(ages), -0.5))
    assert model.death([60.0], [0.0], [1.0])[0, 0] == pytest.approx(0.225, rel=1e-14)
    surv = model.survival([60.0], [0.0], [2.0, 3.0])[0]
    assert surv[0] == pytest.approx(0.775 * 0.325, rel=1e-14) and surv[1] == 0.0
    # UDD: e̊ = (1 − 0.225/2) + 0.775 (1 − 0.675/2) + 0.251875 × 1/2
    #        = 0.8875 + 0.5134375 + 0.1259375 = 1.526875, finite
    assert model.complete_expectation([60.0], [0.0])[0] == pytest.approx(1.526875, rel=1e-14)

"""Bad input: a DomainError that names the field, the value given and what is allowed.

Never a NaN or infinite result and never a silent clamp.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from service.core import laws, tables
from service.core.errors import DomainError

LAW_CASES = [
    (lambda: laws.ConstantForce(0.0), "mu", "0.0", "greater than 0"),
    (lambda: laws.ConstantForce(math.nan), "mu", "nan", "greater than 0"),
    (lambda: laws.DeMoivre(-5.0), "omega", "-5.0", "greater than 0"),
    (lambda: laws.GeneralisedDeMoivre(100.0, 0.0), "alpha", "0.0", "greater than 0"),
    (lambda: laws.Gompertz(-1e-5, 1.1), "B", "-1e-05", "greater than 0"),
    (lambda: laws.Gompertz(1e-5, 0.98), "c", "0.98", "greater than 1"),
    (lambda: laws.Gompertz(1e-5, math.inf), "c", "inf", "greater than 1"),
    (lambda: laws.Makeham(-0.01, 1e-5, 1.1), "A", "-0.01", "greater than −B"),
    (lambda: laws.Weibull(1e-6, -1.0), "n", "-1.0", "greater than 0"),
    (lambda: laws.Weibull(0.0, 2.0), "k", "0.0", "greater than 0"),
    (lambda: laws.Perks(1e-4, 5e-5, 1.1, -1.0), "D", "-1.0", "greater than 0"),
    (lambda: laws.Siler(-0.1, 1.0, 1e-3, 3e-5, 0.1), "a1", "-0.1", "at least 0"),
    (lambda: laws.Siler(0.1, 1.0, 1e-3, 3e-5, 0.0), "b3", "0.0", "greater than 0"),
    (lambda: laws.GompertzMakehamFamily([math.nan], [-10.0, 0.1]), "alpha[0]", "nan", "finite"),
    (lambda: laws.GompertzMakehamFamily([], []), "beta", None, "at least one coefficient"),
]


@pytest.mark.parametrize("build,field,value,allowed", LAW_CASES)
def test_a_law_parameter_outside_its_domain(build, field, value, allowed):
    with pytest.raises(DomainError) as err:
        build()
    assert err.value.field == field
    if value is not None:
        assert f"(got {value})" in err.value.message
    assert allowed in err.value.message


def test_a_gm_law_whose_force_turns_negative():
    with pytest.raises(DomainError) as err:
        laws.GompertzMakehamFamily([0.01, -0.001], [-12.0, 0.05])
    assert err.value.field == "alpha"
    assert "positive" in err.value.message and "at age" in err.value.message


TABLE_CASES = [
    (dict(start_age=20, q=[0.1, 1.2, 1.0]), "q[1]", "1.2", "between 0 and 1"),
    (dict(start_age=20, q=[0.1, -0.01, 1.0]), "q[1]", "-0.01", "between 0 and 1"),
    (dict(start_age=20, q=[0.1, math.nan, 1.0]), "q[1]", "nan", "between 0 and 1"),
    (dict(start_age=20, q=[0.1, 0.2, 0.3]), "q", "0.3", "must close"),
    (dict(start_age=20, q=[0.1, 1.0, 0.5, 1.0]), "q[1]", None, "only the last rate may be 1"),
    (dict(start_age=20, q=[]), "q", None, "non-empty"),
    (dict(start_age=20.5, q=[0.1, 1.0]), "start_age", "20.5", "whole age"),
    (dict(start_age=-1, q=[0.1, 1.0]), "start_age", "-1.0", "whole age"),
    (dict(start_age=20, q=[0.1, 1.0], fractional_ages="linear"), "fractional_ages", "'linear'",
     "udd, constant-force, balducci"),
]


@pytest.mark.parametrize("kwargs,field,value,allowed", TABLE_CASES)
def test_a_table_that_is_not_a_table(kwargs, field, value, allowed):
    with pytest.raises(DomainError) as err:
        tables.LifeTable(**kwargs)
    assert err.value.field == field
    if value is not None:
        assert f"(got {value})" in err.value.message
    assert allowed in err.value.message


def test_a_ragged_or_empty_select_table():
    ult = [0.01] * 20 + [1.0]
    with pytest.raises(DomainError) as err:
        tables.SelectTable(40, [[0.01, 0.02], [0.01]], 42, ult)
    assert err.value.field == "select[1]" and "same number" in err.value.message
    with pytest.raises(DomainError) as err:
        tables.SelectTable(40, [], 42, ult)
    assert err.value.field == "select"
    with pytest.raises(DomainError) as err:
        tables.SelectTable(40, [[]], 42, ult)
    assert err.value.field == "select[0]"
    with pytest.raises(DomainError) as err:
        tables.SelectTable(40, [[0.01, 1.0]], 42, ult)
    assert err.value.field == "select[0][1]" and "below 1" in err.value.message
    with pytest.raises(DomainError) as err:
        tables.SelectTable(40, [[0.01, 0.02]], 45, ult)
    assert err.value.field == "ultimate_start_age" and "(got 45)" in err.value.message


AGE_CASES = [
    (lambda: laws.DeMoivre(100.0), 100.0, "limiting age 100.0"),
    (lambda: laws.DeMoivre(100.0), 130.0, "limiting age 100.0"),
    (lambda: laws.Makeham(0.00022, 2.7e-6, 1.124), 1000.0, "oldest age"),
    (lambda: laws.Gompertz(3e-5, 1.1), math.inf, "oldest age"),
    (lambda: tables.LifeTable(20, [0.1, 0.2, 1.0], "udd"), 23.0, "limiting age 23.0"),
    (lambda: tables.LifeTable(20, [0.1, 0.2, 1.0], "balducci"), 22.0, "limiting age 22.0"),
    (lambda: tables.LifeTable(20, [0.1, 0.2, 1.0], "udd"), 19.5, "first age"),
    (lambda: laws.ConstantForce(0.02), -1.0, "at least 0"),
    (lambda: laws.Makeham(0.00022, 2.7e-6, 1.124), math.nan, "(got nan)"),
]


@pytest.mark.parametrize("build,age,allowed", AGE_CASES)
def test_an_age_at_or_past_the_end_of_the_basis(build, age, allowed):
    m = build()
    with pytest.raises(DomainError) as err:
        valid = float(getattr(m, "start_age", 10.0))
        m.check_lives(np.array([valid, age]), np.zeros(2))
    assert err.value.field == "lives[1].age"
    assert allowed in err.value.message
    assert "got" in err.value.message


def test_a_negative_duration_is_refused():
    m = tables.LifeTable(20, [0.1, 0.2, 1.0])
    with pytest.raises(DomainError) as err:
        m.check_lives(np.array([20.0]), np.array([-1.0]))
    assert err.value.field == "lives[0].duration" and "(got -1.0)" in err.value.message


@pytest.mark.parametrize("orders", [[0], [9], []])
def test_orders_outside_one_to_eight(orders):
    m = laws.Gompertz(3e-5, 1.1)
    with pytest.raises(DomainError) as err:
        m.complete_moments([30.0], [0.0], orders)
    assert err.value.field == "orders" and "1 to 8" in err.value.message


@pytest.mark.parametrize("term", [0, 2.5, -3, 10_001])
def test_a_term_that_is_not_a_whole_number_of_years(term):
    m = tables.LifeTable(20, [0.1, 0.2, 1.0])
    with pytest.raises(DomainError) as err:
        m.curtate_moments([20.0], [0.0], [1], term)
    assert err.value.field == "term" and f"(got {term})" in err.value.message


@pytest.mark.parametrize("start,end,field", [(-1, 5, "start_age"), (40, 30, "end_age"),
                                              (30, 200, "end_age"), (500, 600, "start_age")])
def test_life_table_bounds(start, end, field):
    m = laws.Makeham(0.00022, 2.7e-6, 1.124)
    with pytest.raises(DomainError) as err:
        m.life_table(start, end, 100_000)
    assert err.value.field == field and "got" in err.value.message


def test_survival_past_the_limiting_age_is_zero_not_nan():
    """Not a clamp: beyond the limit survival is 0, and the force (which does not exist) is NaN,
    the core's marker for a null."""
    for m in (laws.DeMoivre(100.0), tables.LifeTable(20, [0.1, 0.2, 1.0])):
        x = 20.5
        t = np.array([0.0, 1.0, 200.0, 1e6])
        p = m.survival([x], [0.0], t)[0]
        assert p[0] == 1.0 and p[2] == 0.0 and p[3] == 0.0 and 0 < p[1] < 1
        assert np.all(np.isfinite(m.death([x], [0.0], t)))
        assert np.all(np.isfinite(m.density([x], [0.0], t)[0][:2]))
        assert np.isnan(m.force([x], [0.0], t)[0][3])

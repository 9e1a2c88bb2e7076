"""Every closed-form override of the core equals the generic year-grid path.

The overrides: ConstantForce (everything), DeMoivre / GeneralisedDeMoivre (whole-life
complete_moments and complete_quantiles), Weibull (complete_moments at age 0), Gompertz
(_invert_year). Each is compared with YearGridModel's own method called on the same model, or
with a generic model of the same distribution.
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from service.core import laws
from service.core.errors import ComputationLimitError
from service.core.lifetime import YearGridModel

SETTINGS = settings(max_examples=20, deadline=None, derandomize=True)
ORDERS = list(range(1, 9))


@pytest.mark.parametrize("alpha", [1.0, 0.5, 3.7])
@SETTINGS
@given(u=st.floats(0.0, 0.995))
def test_de_moivre_moments_and_quantiles_equal_the_generic_path(alpha, u):
    m = laws.DeMoivre(105.0) if alpha == 1.0 else laws.GeneralisedDeMoivre(105.0, alpha)
    x = np.array([105.0 * u])
    closed = m.complete_moments(x, [0.0], ORDERS)
    generic = YearGridModel.complete_moments(m, x, [0.0], ORDERS)
    np.testing.assert_allclose(closed, generic, rtol=1e-11)
    p = np.array([1e-4, 0.25, 0.5, 0.99, 1 - 1e-9])
    np.testing.assert_allclose(m.complete_quantiles(x, [0.0], p),
                               YearGridModel.complete_quantiles(m, x, [0.0], p), rtol=1e-10)


@SETTINGS
@given(k=st.floats(1e-9, 1e-2), n=st.floats(0.2, 6.0))
def test_weibull_moments_at_age_zero_equal_the_generic_path(k, n):
    try:
        m = laws.Weibull(k, n)
    except ComputationLimitError:
        assume(False)  # lives outlive the service's 10,000-year horizon: refused, by design
    closed = m.complete_moments([0.0], [0.0], ORDERS)
    generic = YearGridModel.complete_moments(m, [0.0], [0.0], ORDERS)
    np.testing.assert_allclose(closed, generic, rtol=1e-10)


@SETTINGS
@given(B=st.floats(1e-9, 1e-2), c=st.floats(1.01, 2.5), u=st.floats(0.0, 0.99),
       p=st.lists(st.floats(1e-6, 1 - 1e-6), min_size=1, max_size=4))
def test_gompertz_inversion_equals_the_bisection(B, c, u, p):
    m = laws.Gompertz(B, c)
    x = np.array([u * m.max_age])
    closed = m.complete_quantiles(x, [0.0], p)
    m_generic = laws.Gompertz(B, c)
    m_generic._invert_year = lambda *a: YearGridModel._invert_year(m_generic, *a)
    generic = m_generic.complete_quantiles(x, [0.0], p)
    np.testing.assert_allclose(closed, generic, rtol=1e-10, atol=1e-15)


def test_gompertz_equals_a_makeham_with_a_tiny_A():
    g = laws.Gompertz(3e-5, 1.1)
    mk = laws.Makeham(1e-300, 3e-5, 1.1)
    x = np.array([0.0, 30.5, 90.0, 140.25])
    p = [0.01, 0.5, 0.99]
    np.testing.assert_allclose(g.complete_quantiles(x, 0, p), mk.complete_quantiles(x, 0, p),
                               rtol=1e-12)
    np.testing.assert_allclose(g.complete_moments(x, 0, ORDERS), mk.complete_moments(x, 0, ORDERS),
                               rtol=1e-13)


# the generic model needs survival below e^-800 within 10,000 years, so μ ≥ 0.08 here
@pytest.mark.parametrize("mu", [0.1, 0.7, 5.0])
def test_constant_force_equals_the_generic_path(mu):
    m = laws.ConstantForce(mu)
    # the same distribution on the generic machinery: GM(1, 0) is μ = α₀ at every age
    g = laws.GompertzMakehamFamily([mu], [])
    x = np.array([0.0, 17.3, 60.0])
    np.testing.assert_allclose(m.complete_moments(x, 0, ORDERS), g.complete_moments(x, 0, ORDERS),
                               rtol=1e-10)
    np.testing.assert_allclose(m.curtate_moments(x, 0, ORDERS), g.curtate_moments(x, 0, ORDERS),
                               rtol=1e-10)
    for term in (1, 7, 40):
        np.testing.assert_allclose(m.complete_moments(x, 0, ORDERS, term),
                                   g.complete_moments(x, 0, ORDERS, term), rtol=1e-10)
        np.testing.assert_allclose(m.curtate_moments(x, 0, ORDERS, term),
                                   g.curtate_moments(x, 0, ORDERS, term), rtol=1e-10, atol=1e-300)
    p = [1e-6, 0.3, 0.5, 0.999]
    # absolute floor 4e-16 years: the generic path solves for the fraction of the year of age
    np.testing.assert_allclose(m.complete_quantiles(x, 0, p), g.complete_quantiles(x, 0, p),
                               rtol=1e-10, atol=4e-16)
    np.testing.assert_array_equal(m.curtate_quantiles(x, 0, p), g.curtate_quantiles(x, 0, p))
    t = [0.0, 1e-12, 0.5, 3.0, 50.0]
    np.testing.assert_allclose(m.survival(x, 0, t), g.survival(x, 0, t), rtol=1e-13)

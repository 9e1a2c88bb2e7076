"""The core against scipy.stats, a general-purpose reference for the classical distributions."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from service.core import laws

T = np.array([0.5, 3.0, 17.0, 40.0])


@pytest.mark.parametrize("B,c,x", [(3e-5, 1.1, 0.0), (2.7e-6, 1.124, 65.5), (1e-3, 3.0, 4.0)])
def test_gompertz_against_scipy_gompertz(B, c, x):
    m = laws.Gompertz(B, c)
    # scipy.stats: T_x under Gompertz is gompertz(c = B c^x / ln c, scale = 1/ln c)
    ref = stats.gompertz(B * c**x / math.log(c), scale=1 / math.log(c))
    np.testing.assert_allclose(m.survival([x], [0], T)[0], ref.sf(T), rtol=1e-10, atol=1e-300)
    assert m.complete_expectation([x], [0])[0] == pytest.approx(ref.mean(), rel=1e-10)
    # scipy's gompertz variance is itself a numerical integral, good to about 4e-9 here (mpmath
    # at 40 digits agrees with the core to 1e-14: see test_mpmath_laws_reference.py)
    assert m.complete_variance([x], [0])[0] == pytest.approx(ref.var(), rel=1e-8)
    assert m.complete_quantiles([x], [0], [0.5])[0, 0] == pytest.approx(ref.median(), rel=1e-10)


@pytest.mark.parametrize("k,n", [(1e-6, 3.0), (2e-4, 1.5), (0.5, 0.3)])
def test_weibull_at_birth_against_scipy_weibull_min(k, n):
    m = laws.Weibull(k, n)
    mm = n + 1
    # scipy.stats: T_0 under μ = k yⁿ is weibull_min(n + 1, scale = ((n + 1)/k)^(1/(n + 1)))
    ref = stats.weibull_min(mm, scale=(mm / k) ** (1 / mm))
    np.testing.assert_allclose(m.survival([0.0], [0], T)[0], ref.sf(T), rtol=1e-10, atol=1e-300)
    assert m.complete_expectation([0.0], [0])[0] == pytest.approx(ref.mean(), rel=1e-10)
    assert m.complete_variance([0.0], [0])[0] == pytest.approx(ref.var(), rel=1e-9)
    assert m.complete_quantiles([0.0], [0], [0.5])[0, 0] == pytest.approx(ref.median(), rel=1e-10)
    for order in (3, 4):
        assert m.complete_moments([0.0], [0], [order])[0, 0] == pytest.approx(
            ref.moment(order), rel=1e-9)


@pytest.mark.parametrize("mu", [1e-4, 0.02, 3.0])
def test_constant_force_against_scipy_expon(mu):
    m = laws.ConstantForce(mu)
    ref = stats.expon(scale=1 / mu)  # scipy.stats
    np.testing.assert_allclose(m.survival([37.0], [0], T)[0], ref.sf(T), rtol=1e-12)
    assert m.complete_expectation([37.0], [0])[0] == pytest.approx(ref.mean(), rel=1e-12)
    assert m.complete_variance([37.0], [0])[0] == pytest.approx(ref.var(), rel=1e-12)
    assert m.complete_quantiles([37.0], [0], [0.5])[0, 0] == pytest.approx(ref.median(), rel=1e-12)
    # K is geometric: P(K = k) = (1 − e^(−μ)) e^(−μ k); scipy's geom counts from 1
    geo = stats.geom(-math.expm1(-mu), loc=-1)
    assert m.curtate_expectation([37.0], [0])[0] == pytest.approx(geo.mean(), rel=1e-10)
    assert m.curtate_variance([37.0], [0])[0] == pytest.approx(geo.var(), rel=1e-9)


@pytest.mark.parametrize("omega,x", [(105.0, 0.0), (105.0, 64.3), (100.0, 99.9)])
def test_de_moivre_against_scipy_uniform(omega, x):
    m = laws.DeMoivre(omega)
    ref = stats.uniform(0.0, omega - x)  # scipy.stats
    t = T[T < omega - x] if x < 99 else np.array([0.01, 0.05])
    np.testing.assert_allclose(m.survival([x], [0], t)[0], ref.sf(t), rtol=1e-12)
    assert m.complete_expectation([x], [0])[0] == pytest.approx(ref.mean(), rel=1e-12)
    assert m.complete_variance([x], [0])[0] == pytest.approx(ref.var(), rel=1e-11)
    assert m.complete_quantiles([x], [0], [0.5])[0, 0] == pytest.approx(ref.median(), rel=1e-12)
    # the temporary mean through the generic path: E[min(T, n)] by scipy's expect
    n = 10
    want = ref.expect(lambda t: np.minimum(t, n), epsabs=1e-14, epsrel=1e-13)
    assert m.complete_expectation([x], [0], n)[0] == pytest.approx(want, rel=1e-10)

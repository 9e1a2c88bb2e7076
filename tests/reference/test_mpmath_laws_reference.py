"""Laws and tables against mpmath quadrature at 40 digits (see high_precision.py).

Tolerances are the service's accuracy targets: 1e-10 relative for probabilities and
expectations, 1e-9 for variances and moments.
"""

from __future__ import annotations

import mpmath as mp
import numpy as np
import pytest
from high_precision import (
    RefLaw,
    RefTable,
    complete_moment,
    complete_quantile,
    complete_variance,
    curtate_moment,
    curtate_quantile,
    curtate_variance,
    death,
    rel_err,
)

from service.core import laws, tables

P_TOL, M_TOL = 1e-10, 1e-9

# (core model, its mpmath restatement, ages) — young, middle, fractional and very old ages
LAWS = {
    "makeham": (lambda: laws.Makeham(0.00022, 2.7e-6, 1.124),
                RefLaw("makeham", (0.00022, 2.7e-6, 1.124)), (0.0, 65.25, 130.0)),
    "perks": (lambda: laws.Perks(1e-4, 5e-5, 1.1, 1e-5),
              RefLaw("perks", (1e-4, 5e-5, 1.1, 1e-5)), (0.0, 150.0)),
    "siler": (lambda: laws.Siler(0.05, 1.0, 1e-3, 3e-5, 0.1),
              RefLaw("siler", (0.05, 1.0, 1e-3, 3e-5, 0.1)), (0.5, 110.0)),
    "gm-2-2": (lambda: laws.GompertzMakehamFamily([5e-4, 1e-6], [-10.0, 0.1]),
               RefLaw("gm", ((5e-4, 1e-6), (-10.0, 0.1))), (55.5,)),
    "gm-1-3": (lambda: laws.GompertzMakehamFamily([5e-4], [-10.0, 0.08, 1e-4]),
               RefLaw("gm", ((5e-4,), (-10.0, 0.08, 1e-4))), (120.0,)),
    "gompertz-tiny-B": (lambda: laws.Gompertz(1e-12, 1.3),
                        RefLaw("gompertz", (1e-12, 1.3)), (0.0,)),
    "gompertz-huge-c": (lambda: laws.Gompertz(1e-3, 3.0),
                        RefLaw("gompertz", (1e-3, 3.0)), (5.5,)),
    "weibull-fractional": (lambda: laws.Weibull(2e-4, 1.5),
                           RefLaw("weibull", (2e-4, 1.5)), (0.0, 0.3)),
    "generalised-de-moivre": (lambda: laws.GeneralisedDeMoivre(100.0, 0.5),
                              RefLaw("generalised-de-moivre", (100.0, 0.5)), (99.5,)),
}
TABLE_Q = tuple([0.001 * 1.1**i for i in range(40)] + [0.9, 1.0])
TABLES = {
    f"table-{a}": ((lambda a=a: tables.LifeTable(30, list(TABLE_Q), a)),
                   RefTable(30, TABLE_Q, a), (30.0, 45.5, 70.75))
    for a in tables.FRACTIONAL_AGES
}
CASES = [(name, x) for name, (_, _, ages) in {**LAWS, **TABLES}.items() for x in ages]
_MODELS = {}


def _get(name):
    build, ref, _ = {**LAWS, **TABLES}[name]
    if name not in _MODELS:
        _MODELS[name] = build()
    return _MODELS[name], ref


@pytest.mark.parametrize("name,x", CASES)
def test_survival_and_death(name, x):
    m, ref = _get(name)
    t = [1e-12, 0.3, 1.0, 7.5, 25.0]
    p = m.survival([x], [0], t)[0]
    q = m.death([x], [0], t)[0]
    for tt, pv, qv in zip(t, p, q):
        rp = 1 - death(ref, x, tt)  # mpmath at 40 digits
        if rp > mp.mpf("1e-280"):
            assert rel_err(pv, rp) <= P_TOL, (tt, rel_err(pv, rp))
        assert rel_err(qv, death(ref, x, tt)) <= P_TOL, (tt, rel_err(qv, death(ref, x, tt)))


@pytest.mark.parametrize("name,x", CASES)
def test_moments_and_expectations(name, x):
    m, ref = _get(name)
    cm = m.complete_moments([x], [0], range(1, 9))[0]
    assert rel_err(cm[0], complete_moment(ref, x, 1)) <= P_TOL  # mpmath at 40 digits
    for k in range(2, 9):
        assert rel_err(cm[k - 1], complete_moment(ref, x, k)) <= M_TOL, k
    assert rel_err(m.complete_variance([x], [0])[0], complete_variance(ref, x)) <= M_TOL
    tm = m.complete_moments([x], [0], range(1, 9), 10)[0]
    assert rel_err(tm[0], complete_moment(ref, x, 1, 10)) <= P_TOL
    for k in range(2, 9):
        assert rel_err(tm[k - 1], complete_moment(ref, x, k, 10)) <= M_TOL, k
    km = m.curtate_moments([x], [0], range(1, 9))[0]
    if curtate_moment(ref, x, 1) == 0:  # death within the year: K = 0 exactly
        assert np.all(km == 0)
        return
    assert rel_err(km[0], curtate_moment(ref, x, 1)) <= P_TOL
    for k in range(2, 9):
        assert rel_err(km[k - 1], curtate_moment(ref, x, k)) <= M_TOL, k
    assert rel_err(m.curtate_variance([x], [0])[0], curtate_variance(ref, x)) <= M_TOL
    ktm = m.curtate_moments([x], [0], [1, 2, 3], 10)[0]
    for k in (1, 2, 3):
        assert rel_err(ktm[k - 1], curtate_moment(ref, x, k, 10)) <= M_TOL, k


@pytest.mark.parametrize("name,x", CASES)
def test_quantiles(name, x):
    m, ref = _get(name)
    probs = [0.01, 0.5, 0.99]
    t = m.complete_quantiles([x], [0], probs)[0]
    k = m.curtate_quantiles([x], [0], probs)[0]
    for p, tv, kv in zip(probs, t, k):
        assert rel_err(tv, complete_quantile(ref, x, p)) <= P_TOL  # mpmath bisection, 40 digits
        assert kv == curtate_quantile(ref, x, p)


def test_the_reference_integrator_agrees_with_mpmath_tanh_sinh():
    """The composite Gauss–Legendre reference against mpmath's adaptive quadrature."""
    from high_precision import integrals

    ref = RefLaw("makeham", (0.00022, 2.7e-6, 1.124))
    gl = integrals(ref, 65.25)
    ts = mp.quad(lambda t: t * ref.survival(65.25, t), mp.linspace(0, 90, 19))
    assert abs(gl[1] - ts) / ts < mp.mpf("1e-25")


def test_the_reference_hazards_integrate_their_forces():
    """Each closed-form mpmath hazard equals the quadrature of its force (40 digits)."""
    from high_precision import DPS

    with mp.workdps(DPS):
        for _, ref, ages in LAWS.values():
            x = ages[-1] if ages[-1] > 0 else 0.5
            h = ref.hazard(x, 2.5)
            hq = mp.quad(ref.force, [mp.mpf(x), mp.mpf(x) + mp.mpf(2.5)])
            assert abs(h - hq) / hq < mp.mpf("1e-25"), ref.name

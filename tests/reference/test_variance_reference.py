"""Tiny variances keep their relative accuracy: against mpmath at 40 digits (high_precision.py).

When the variance is a small fraction of the squared mean (short terms, nearly certain
survival), E[X²] − E[X]² in doubles cancels; the service's target is 1e-9 relative even when
the variance is 1e-10 of the squared mean (the second robustness round found 1.4e-5).
"""

from __future__ import annotations

import numpy as np
import pytest
from high_precision import (
    RefLaw,
    complete_moment,
    complete_variance,
    curtate_moment,
    curtate_variance,
    rel_err,
)

from service.core import laws

V_TOL = 1e-9

CASES = [
    # (core law, its mpmath restatement, age, term)
    (lambda: laws.Weibull(1e-3, 2.0), RefLaw("weibull", (1e-3, 2.0)), 0.6, 2),
    (lambda: laws.Weibull(1e-6, 3.0), RefLaw("weibull", (1e-6, 3.0)), 0.6, 2),
    (lambda: laws.Weibull(5e-11, 3.0), RefLaw("weibull", (5e-11, 3.0)), 0.6, 2),
    (lambda: laws.Gompertz(1e-9, 1.1), RefLaw("gompertz", (1e-9, 1.1)), 20.25, 3),
    (lambda: laws.Gompertz(1e-12, 1.08), RefLaw("gompertz", (1e-12, 1.08)), 30.0, 1),
]


@pytest.mark.parametrize("build, ref, age, term", CASES, ids=[f"{c[1].name}-{i}" for i, c in enumerate(CASES)])
def test_tiny_temporary_variances(build, ref, age, term):
    model = build()
    complete, curtate, var_t, var_k = model.expectation_summary(np.array([age]), np.zeros(1), term)
    exact_t = complete_variance(ref, age, term)
    exact_k = curtate_variance(ref, age, term)
    ratio = float(exact_t / complete_moment(ref, age, 1, term) ** 2)
    assert ratio < 1e-3  # the cases are near cancellation (down to about 1e-12)
    assert rel_err(var_t[0], exact_t) <= V_TOL, (ratio, var_t[0], exact_t)
    if exact_k > 0:
        assert rel_err(var_k[0], exact_k) <= V_TOL, (var_k[0], exact_k)
    assert rel_err(curtate[0], curtate_moment(ref, age, 1, term)) <= 1e-12


def test_the_smallest_ratio_is_below_1e_10():
    ref, age, term = CASES[2][1], CASES[2][2], CASES[2][3]
    ratio = complete_variance(ref, age, term) / complete_moment(ref, age, 1, term) ** 2
    assert ratio < 1e-10

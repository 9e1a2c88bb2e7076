"""Joint-life and last-survivor statuses against textbook identities and mpmath."""

from __future__ import annotations

import math

import mpmath
import numpy as np
import pytest

from service.core import laws, tables
from service.core.several import SeveralLives
from service.core.transforms import rated

mpmath.mp.dps = max(mpmath.mp.dps, 40)  # never lower the precision other reference tests use

B, C = 3e-5, 1.1
G = laws.Gompertz(B=B, c=C)
PAIRS = np.array([[60.0, 55.0], [70.5, 72.25], [40.0, 85.0]])
Z = np.zeros_like(PAIRS)


def _rel(a, b):
    return float(np.max(np.abs(np.asarray(a) / np.asarray(b) - 1.0)))


def _table(assumption):
    q = list(np.linspace(0.002, 0.5, 70)) + [1.0]
    return tables.LifeTable(30, q, assumption)


def test_gompertz_joint_life_is_one_gompertz_life_at_the_equivalent_age():
    # textbook identity (Gompertz): the joint status is one life aged w with c^w = c^x + c^y
    joint = SeveralLives([G, G], joint=True)
    w = np.log(C ** PAIRS[:, 0] + C ** PAIRS[:, 1]) / math.log(C)
    assert _rel(joint.complete_moments(PAIRS, Z, [1, 2, 8]), G.complete_moments(w, 0 * w, [1, 2, 8])) < 1e-9
    assert _rel(joint.curtate_moments(PAIRS, Z, [1, 2]), G.curtate_moments(w, 0 * w, [1, 2])) < 1e-10
    p = [0.1, 0.5, 0.9]
    assert _rel(joint.complete_quantiles(PAIRS, Z, p), G.complete_quantiles(w, 0 * w, p)) < 1e-10
    t = np.array([1.0, 10.0])
    assert _rel(joint.force(PAIRS, Z, t), G.force(w, 0 * w, t)) < 1e-12


def test_makeham_joint_life_is_one_makeham_life_with_2a_2b():
    # textbook identity (Makeham): c^w = (c^x + c^y)/2 and the status has force 2A + 2B c^(w+t)
    A = 0.0007
    m = laws.Makeham(A=A, B=B, c=C)
    joint = SeveralLives([m, m], joint=True)
    w = np.log((C ** PAIRS[:, 0] + C ** PAIRS[:, 1]) / 2.0) / math.log(C)
    status = laws.Makeham(A=2 * A, B=2 * B, c=C)
    assert _rel(joint.complete_moments(PAIRS, Z, [1, 2, 8]), status.complete_moments(w, 0 * w, [1, 2, 8])) < 1e-9
    assert _rel(joint.complete_variance(PAIRS, Z), status.complete_variance(w, 0 * w)) < 1e-9


@pytest.mark.parametrize("assumption", ["udd", "constant-force", "balducci"])
def test_independence_and_last_survivor_identities(assumption):
    t1 = _table(assumption)
    t2 = rated(_table(assumption), q_multiplier=0.8)
    pairs = np.array([[40.0, 45.5], [65.25, 60.0]])
    z = np.zeros_like(pairs)
    joint = SeveralLives([t1, t2], joint=True)
    last = SeveralLives([t1, t2], joint=False)
    t = np.array([0.5, 3.0, 17.25, 40.0])
    # textbook identity: under independence ₜp_xy = ₜp_x ₜp_y
    px = t1.survival(pairs[:, 0], z[:, 0], t)
    py = t2.survival(pairs[:, 1], z[:, 1], t)
    assert np.allclose(joint.survival(pairs, z, t), px * py, rtol=1e-13, atol=0)
    # textbook identity: ₜp_{x̄ȳ} = ₜp_x + ₜp_y − ₜp_xy
    assert np.allclose(last.survival(pairs, z, t), px + py - px * py, rtol=1e-13, atol=0)
    # textbook identity: e̊_{x̄ȳ} = e̊_x + e̊_y − e̊_xy, and e_{x̄ȳ} = e_x + e_y − e_xy
    for method in ("complete_expectation", "curtate_expectation"):
        ex = getattr(t1, method)(pairs[:, 0], z[:, 0])
        ey = getattr(t2, method)(pairs[:, 1], z[:, 1])
        exy = getattr(joint, method)(pairs, z)
        assert _rel(getattr(last, method)(pairs, z), ex + ey - exy) < 1e-10


def test_last_survivor_moments_and_force_against_mpmath():
    last = SeveralLives([G, G], joint=False, common_shock_force=0.003)
    x, y = 70.0, 65.5
    lc = mpmath.log(C)

    def surv(s):
        px = mpmath.exp(-B * mpmath.mpf(C) ** x * (mpmath.mpf(C) ** s - 1) / lc)
        py = mpmath.exp(-B * mpmath.mpf(C) ** y * (mpmath.mpf(C) ** s - 1) / lc)
        return mpmath.exp(-0.003 * s) * (px + py - px * py)

    got = last.complete_moments(np.array([[x, y]]), np.zeros((1, 2)), [1, 2, 8])[0]
    for k, value in zip((1, 2, 8), got):
        ref = k * mpmath.quad(lambda s, k=k: s ** (k - 1) * surv(s), [0, 20, 50, 120])
        assert abs(value / float(ref) - 1) < 1e-9
    # the force from the density: μ = −S'/S, by mpmath's numerical derivative at 30 digits
    s = 12.5
    ref_mu = -mpmath.diff(surv, s) / surv(s)
    assert abs(last.force(np.array([[x, y]]), np.zeros((1, 2)), [s])[0, 0] / float(ref_mu) - 1) < 1e-10


def test_batch_equals_one_by_one_and_term():
    joint = SeveralLives([G, rated(G, extra_force=0.001, extra_force_years=3)], joint=True)
    batch = joint.complete_moments(PAIRS, Z, [1, 2], term=20)
    for i in range(PAIRS.shape[0]):
        assert np.allclose(joint.complete_moments(PAIRS[i : i + 1], Z[i : i + 1], [1, 2], term=20)[0], batch[i], rtol=1e-14)
    # E[min(T, n)] ≤ n and the term-1 value is ∫₀¹ ₜp dt (mpmath)
    assert np.all(batch[:, 0] <= 20.0)

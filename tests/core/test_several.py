"""Joint-life and last-survivor statuses against textbook identities and mpmath."""

from __future__ import annotations

import math

import mpmath
import numpy as np
import pytest

from service.core import laws, tables
from service.core.errors import DomainError
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


@pytest.mark.parametrize("joint", [True, False])
def test_status_life_table_against_member_survivals(joint):
    t1 = _table("udd")
    # an invented select member: 2-year select period for selection ages 30..40
    ult = list(np.linspace(0.002, 0.5, 70)) + [1.0]  # ages 30..100
    select = tables.SelectTable(30, [[0.6 * ult[s], 0.8 * ult[s + 1]] for s in range(11)], 30, ult, "udd")
    status = SeveralLives([t1, select], joint=joint)
    start, durations, radix = np.array([40.0, 36.5]), np.array([0.0, 0.5]), 1000.0
    out = status.life_table(start, 55.0, radix, durations)
    k = np.arange(16.0)
    assert out["age"].shape == (16, 2) and np.array_equal(out["age"], start + k[:, None])
    px = t1.survival([40.0], [0.0], k)[0]
    py = select.survival([36.5], [0.5], k)[0]
    # textbook identities under independence: ₖp_xy = ₖp_x ₖp_y, ₖp_{x̄ȳ} = ₖp_x + ₖp_y − ₖp_xy
    expected_l = radix * (px * py if joint else px + py - px * py)
    assert np.allclose(out["l"], expected_l, rtol=1e-13, atol=0)
    # the rows follow the status from its start, so the columns add up for both statuses
    assert np.allclose(out["l"][1:], out["l"][:-1] - out["d"][:-1], rtol=1e-12, atol=0)
    ax, ay = 40.0 + k, 36.5 + k
    rows = np.stack([ax, ay], axis=1)
    durs = np.stack([0 * k, 0.5 + k], axis=1)
    both = SeveralLives([t1, select], joint=True)
    if joint:
        # the joint status is alive at row k only with both members alive at x + k, y + k:
        # q = 1 − (1 − q_x)(1 − q_y) and e̊, e are the status's own at the row's ages
        qx = t1.death(ax, 0 * k, [1.0])[:, 0]
        qy = select.death(ay, 0.5 + k, [1.0])[:, 0]
        assert np.allclose(out["q"], 1 - (1 - qx) * (1 - qy), rtol=1e-12, atol=0)
        for i in (0, 7, 15):
            assert out["complete"][i] == pytest.approx(status.complete_expectation(rows[i : i + 1], durs[i : i + 1])[0], rel=1e-12)
            assert out["curtate"][i] == pytest.approx(status.curtate_expectation(rows[i : i + 1], durs[i : i + 1])[0], rel=1e-12)
    else:
        # the last survivor alive at row k may have lost a member: by inclusion–exclusion
        # (textbook identity under independence) ∫_k^∞ ₜp_{x̄ȳ} dt =
        # ₖp_x e̊_{x+k} + ₖp_y e̊_{y+k} − ₖp_x ₖp_y e̊_{x+k:y+k}, and likewise for e
        sx, sy = px, py
        ex = t1.complete_expectation(ax, 0 * k)
        ey = select.complete_expectation(ay, 0.5 + k)
        exy = both.complete_expectation(rows, durs)
        identity = (sx * ex + sy * ey - sx * sy * exy) / (sx + sy - sx * sy)
        assert _rel(out["complete"], identity) < 1e-10
        cx = t1.curtate_expectation(ax, 0 * k)
        cy = select.curtate_expectation(ay, 0.5 + k)
        cxy = both.curtate_expectation(rows, durs)
        identity = (sx * cx + sy * cy - sx * sy * cxy) / (sx + sy - sx * sy)
        assert _rel(out["curtate"], identity) < 1e-10
        # row 0 is the status itself
        assert out["complete"][0] == pytest.approx(status.complete_expectation(rows[:1], durs[:1])[0], rel=1e-12)


def test_status_life_table_errors_name_the_field():
    status = SeveralLives([_table("udd"), G], joint=True)  # the table's limiting age is 101
    with pytest.raises(DomainError) as err:
        status.life_table(np.array([101.0, 60.0]), 102.0, 1.0)
    assert err.value.field == "start_ages[0]"
    with pytest.raises(DomainError) as err:
        status.life_table(np.array([60.0, 40.0]), 105.0, 1.0)  # member 0 reaches 101 at row 41
    assert err.value.field == "end_age" and "row 41" in err.value.message
    with pytest.raises(DomainError) as err:
        status.life_table(np.array([60.0, 55.0]), 50.0, 1.0)
    assert err.value.field == "end_age"
    with pytest.raises(DomainError) as err:
        status.life_table(60.0, 70.0, 1.0)
    assert err.value.field == "start_age" and "start_ages" in err.value.message
    with pytest.raises(DomainError) as err:
        G.life_table(np.array([60.0, 55.0]), 70.0, 1.0)
    assert err.value.field == "start_ages"
    with pytest.raises(DomainError) as err:
        status.life_table(np.array([60.0, 55.0, 50.0]), 70.0, 1.0)
    assert err.value.field == "start_ages"

"""Reversionary annuities and contingent insurances against textbook identities and mpmath."""

from __future__ import annotations

import mpmath
import numpy as np
import pytest
from shared_bases import SULT

from service.core import laws, several, tables
from service.core.errors import DomainError
from service.core.two_lives import ContingentInsurance, ReversionaryAnnuity
from service.core.values import Discount, LifeAnnuity, LifeInsurance, Valuation

GOMPERTZ = laws.Gompertz(B=5e-5, c=1.1)
TABLE = tables.LifeTable(50, [0.004 * 1.09**k for k in range(55)] + [1.0], "udd")
I4 = Discount.constant(0.04)


def _pair(mx, my, ages, joint=True):
    model = several.SeveralLives([mx, my], joint=joint)
    age = np.array(ages, float)
    return Valuation(model, age, np.zeros_like(age), I4)


def _single(model, ages):
    age = np.array(ages, float)
    return Valuation(model, age, np.zeros_like(age), I4)


@pytest.mark.parametrize("timing,m", [("advance", 1), ("arrears", 12)])
@pytest.mark.parametrize("members", [(SULT, GOMPERTZ), (TABLE, SULT)])
def test_reversionary_annuity_is_a_y_less_a_xy(members, timing, m):
    # textbook identity: a_{x|y} = a_y − a_xy (the annuity to y, less while both live)
    ages = [[60.0, 57.5], [71.25, 68.0]]
    pair = _pair(*members, ages)
    rev = pair.values(ReversionaryAnnuity(timing=timing, frequency=m)).value
    joint = pair.values(LifeAnnuity(timing=timing, frequency=m)).value
    a_y = _single(members[1], [a[1] for a in ages]).values(
        LifeAnnuity(timing=timing, frequency=m)).value
    np.testing.assert_allclose(rev, a_y - joint, rtol=1e-12)
    half = pair.values(ReversionaryAnnuity(timing=timing, frequency=m, proportion=0.5)).value
    np.testing.assert_allclose(half, 0.5 * rev, rtol=1e-15)


# A joint-life status of a table and a law: its moment-of-death panels must break at both
# members' kinks (the table's at whole ages, the law's at the other member's age), or the
# identities below fail by about 3e-7.
@pytest.mark.parametrize("timing,m", [("end-of-year", 1), ("end-of-period", 4),
                                      ("moment-of-death", 1)])
@pytest.mark.parametrize("members", [
    (SULT, GOMPERTZ),
    pytest.param((TABLE, SULT), id="table-law"),
])
def test_contingent_insurances_add_up(members, timing, m):
    # textbook identities: A¹_xy + A¹_yx = A_xy (the first death, either way round) and
    # A¹_xy + A²_xy = A_x (x dies before or after y)
    ages = [[60.0, 57.5], [66.5, 70.0]]
    pair = _pair(*members, ages)
    kw = dict(timing=timing, frequency=m)
    xy = pair.values(ContingentInsurance(**kw)).value
    second = pair.values(ContingentInsurance(order="second", **kw)).value
    a_x = _single(members[0], [a[0] for a in ages]).values(LifeInsurance(**kw)).value
    np.testing.assert_allclose(xy + second, a_x, rtol=1e-11)
    yx = pair.values(ContingentInsurance(life=1, **kw)).value
    joint = pair.values(LifeInsurance(**kw)).value
    np.testing.assert_allclose(xy + yx, joint, rtol=1e-11)
    # over a term the same holds for term insurances
    t_xy = pair.values(ContingentInsurance(term=10, **kw)).value
    t_yx = pair.values(ContingentInsurance(term=10, life=1, **kw)).value
    np.testing.assert_allclose(t_xy + t_yx, pair.values(LifeInsurance(term=10, **kw)).value,
                               rtol=1e-11)


def _gompertz_survival(b, c, x, t):
    # Gompertz: ₜp_x = exp(−B c^x (c^t − 1) / ln c)
    return mpmath.exp(-b * c**x * (c**t - 1) / mpmath.log(c))


@mpmath.workdps(30)  # local precision: the module-wide one of other tests stays
def test_against_mpmath_on_two_gompertz_lives():
    b1, c1, b2, c2 = mpmath.mpf("5e-5"), mpmath.mpf("1.1"), mpmath.mpf("3e-5"), mpmath.mpf("1.105")
    x, y, v = mpmath.mpf(62), mpmath.mpf(58), 1 / mpmath.mpf("1.04")
    pair = _pair(laws.Gompertz(B=5e-5, c=1.1), laws.Gompertz(B=3e-5, c=1.105), [[62.0, 58.0]])

    def sx(t):
        return _gompertz_survival(b1, c1, x, t)

    def sy(t):
        return _gompertz_survival(b2, c2, y, t)

    # reversionary annuity-due, annual: Σ_k v^k (1 − ₖp_x) ₖp_y
    rev = mpmath.nsum(lambda k: v**k * (1 - sx(k)) * sy(k), [0, 150])
    # its second moment by the double sum Σ_j Σ_k vʲ vᵏ P(T_x ≤ min(j, k), T_y > max(j, k))
    rev2 = sum(v ** (j + k) * (1 - sx(min(j, k))) * sy(max(j, k))
               for j in range(100) for k in range(100))
    # A¹_xy at the moment of death: ∫ vᵗ ₜp_x μ_{x+t} ₜp_y dt
    mu_x = lambda t: b1 * c1 ** (x + t)  # noqa: E731
    contingent = mpmath.quad(lambda t: v**t * sx(t) * mu_x(t) * sy(t), [0, 20, 40, 60, 100])
    got_rev = pair.values(ReversionaryAnnuity())
    got_a = pair.values(ContingentInsurance(timing="moment-of-death"))
    assert got_rev.value[0] == pytest.approx(float(rev), rel=1e-12)
    assert got_rev.second_moment[0] == pytest.approx(float(rev2), rel=1e-10)
    assert got_a.value[0] == pytest.approx(float(contingent), rel=1e-12)


@pytest.mark.parametrize(
    "model,benefit,field",
    [
        (SULT, ReversionaryAnnuity(), "type"),
        (several.SeveralLives([SULT, SULT], joint=True, common_shock_force=0.01),
         ContingentInsurance(), "type"),
        (several.SeveralLives([SULT, SULT], joint=True), ReversionaryAnnuity(proportion=0.0),
         "proportion"),
        (several.SeveralLives([SULT, SULT], joint=True), ContingentInsurance(order="third"),
         "order"),
        (several.SeveralLives([SULT, SULT], joint=True), ContingentInsurance(life=2), "life"),
        (several.SeveralLives([SULT, SULT], joint=True), ReversionaryAnnuity(term=2.5), "term"),
    ],
)
def test_impossible_two_life_benefits_name_the_field(model, benefit, field):
    ages = np.array([[60.0, 58.0]]) if getattr(model, "n_members", 1) == 2 else np.array([60.0])
    valuation = Valuation(model, ages, np.zeros_like(ages), I4)
    with pytest.raises(DomainError) as info:
        valuation.values(benefit)
    assert info.value.field == field

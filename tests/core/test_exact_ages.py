"""Exact ages: the per-year expansions against the direct computation, and bit-identity.

The direct computation is the one the expansions are fitted to, done per life: the partial first
year in closed form (tables) or by the law's Gauss–Legendre panels, plus the tail moments from
the next whole age shifted by binomial expansion; curtate moments as the direct sum
Σ (m^k − (m−1)^k) ₘp_x over the remaining lifetime. Targets: ≤ 1e-12 relative on expectations
and variances, ≤ 1e-10 on moments of order 8, at 10,000 random exact ages per basis.
"""

from __future__ import annotations

import numpy as np
import pytest
from core_bases import BUILDERS, SELECT_START, is_select, last_age, model

from service.core import expansion, lifetime, tables, transforms
from service.core.lifetime import Located, YearGridModel, place_on_select_rows

N_LIVES = 10_000
ORDERS = np.arange(1, 9)


def _improved():
    base = model("table-udd")
    return transforms.improved(base, 2020, 2026, lambda ages, year: np.full(ages.shape, 0.015))


def _q_rated():
    return transforms.rated(model("select-constant-force"), q_multiplier=1.5)


EXTRA = {"improved-table": _improved, "q-rated-select": _q_rated}
GRID_NAMES = [
    n for n in BUILDERS if isinstance(model(n), YearGridModel) and hasattr(model(n), "exact_ages")
] + list(EXTRA)


def _model(name):
    return EXTRA[name]() if name in EXTRA else model(name)


def _lives(name, m, n=N_LIVES, seed=7):
    """Random exact ages (and, on select bases, random durations 0–5 with any selection age,
    placed on whole selection ages by the default rule)."""
    rng = np.random.default_rng(seed)
    if "select" in name:
        sel = rng.uniform(SELECT_START, SELECT_START + 4.999, n)
        duration = rng.uniform(0.0, 5.0, n)
        return place_on_select_rows(sel + duration, duration, "last-birthday")
    lo = float(m.row_start.min())
    hi = min(last_age(m), lo + 110.0)
    return rng.uniform(lo, hi, n), np.zeros(n)


def _direct(m, age, duration):
    loc = m._locate(age, duration)
    complete = m._whole_life_direct(loc, 8) * ORDERS
    curtate = m._curtate_direct(age, duration, loc, ORDERS, None)
    return complete, curtate


def _rel(a, b):
    return np.abs(a - b) / np.maximum(np.abs(b), 1e-300)


@pytest.mark.parametrize("name", GRID_NAMES)
def test_expansions_reproduce_the_direct_computation(name):
    m = _model(name)
    age, duration = _lives(name, m)
    assert np.any(age % 1.0 > 0.0)
    complete, curtate = _direct(m, age, duration)
    fast_complete = m.complete_moments(age, duration, ORDERS)
    fast_curtate = m.curtate_moments(age, duration, ORDERS)
    assert _rel(fast_complete[:, :2], complete[:, :2]).max() <= 1e-12
    assert _rel(fast_curtate[:, :2], curtate[:, :2]).max() <= 1e-12
    assert _rel(fast_complete, complete).max() <= 1e-10
    assert _rel(fast_curtate, curtate).max() <= 1e-10
    e, k, var_t, var_k = m.expectation_summary(age, duration)
    assert _rel(e, complete[:, 0]).max() <= 1e-12
    assert _rel(k, curtate[:, 0]).max() <= 1e-12
    assert _rel(var_t, complete[:, 1] - complete[:, 0] ** 2).max() <= 1e-12
    assert _rel(var_k, curtate[:, 1] - curtate[:, 0] ** 2).max() <= 1e-12


@pytest.mark.parametrize("name", GRID_NAMES)
def test_most_years_are_expanded(name):
    """The expansions cover the years where lives are: a basis that fell back to the direct
    computation everywhere would pass the test above while being slow."""
    m = _model(name)
    if name.startswith("generalised-de-moivre"):
        pytest.skip("(ω − x − m)^α with α not whole has a branch point at the year's end")
    if name == "table-balducci":
        pytest.skip("Balducci survival p/(p + s q) has a pole at s = −p/q, within 0.18 of the "
                    "year for this table's q = 0.85, and it reaches every earlier age's curtate "
                    "moments: these lives take the direct computation")
    age, duration = _lives(name, m, n=2_000)
    loc = m._locate(age, duration)
    covered = np.mean(m.exact_ages.cells(loc.row, loc.index) >= 0)
    # laws leave out their last, steepest years (a hazard rise of more than 20 in a year)
    assert covered >= 0.6, covered


@pytest.mark.parametrize("built", [True, False], ids=["expanded", "direct"])
@pytest.mark.parametrize("name", GRID_NAMES)
def test_a_life_alone_and_in_a_mixed_batch_give_the_same_bits(name, built, monkeypatch):
    """One life takes the plain-float path, a batch the numpy path; whole ages, exact ages and
    years without an expansion share a batch. Every life gets the same bits either way, on a
    basis with its expansions built (as a stored basis has from its load) and on one that
    still computes exact ages directly (an inline basis before enough lives pay for them)."""
    if built:  # the shared model: the test above has built its expansions, which take
        m = _model(name)  # seconds on a law, so they are built once per basis
        assert m.exact_ages is not None
    else:  # a fresh model, which computes exact ages directly until enough lives pay
        monkeypatch.setattr(lifetime, "EXPANSION_AFTER_LIVES", 10**12)
        m = BUILDERS[name]() if name in BUILDERS else _model(name)
    age, duration = _lives(name, m, n=300, seed=11)
    if "select" not in name:
        age[::7] = np.floor(age[::7])  # some whole ages
    batch = m.expectation_summary(age, duration)
    moments = m.complete_moments(age, duration, [1, 2, 8])
    for i in range(0, age.size, 3):
        alone = m.expectation_summary(age[i : i + 1], duration[i : i + 1])
        for k in range(4):
            assert alone[k][0] == batch[k][i], (i, k, age[i])
        assert np.array_equal(m.complete_moments(age[i : i + 1], duration[i : i + 1], [1, 2, 8])[0],
                              moments[i])
    assert (m._exact_ages is not None) == built  # the state compared is the one intended


def test_a_year_the_polynomial_cannot_follow_keeps_the_direct_computation():
    """A kink inside a year (|f − 0.3|) defeats any polynomial: the cell is left out rather than
    answered approximately."""

    def exact(cells, fractions):
        smooth = np.exp(-fractions)[None, :, None]
        kinked = np.abs(fractions - 0.3)[None, :, None] + 1.0
        return np.concatenate([np.broadcast_to(smooth, (cells.size, fractions.size, 1)),
                               np.where(cells[:, None, None] == 1, kinked, smooth)], axis=-1)

    built = expansion.build(exact, np.ones((1, 3), bool))
    assert built.cell_of.tolist() == [[0, -1, 1]]
    f = np.array([0.123, 0.777])
    got = built.evaluate(np.zeros(2, np.int64), f, [0, 1])
    np.testing.assert_allclose(got[:, 0], np.exp(-f), rtol=1e-15)


def test_select_lives_at_fractional_selection_ages():
    """last-birthday: selected at the age last birthday before selection, the exact age kept;
    nearest-birthday: selected at the nearest whole age, the exact duration kept."""
    m = model("select-udd")
    age, duration = place_on_select_rows(np.array([41.37, 41.37, 43.5]), np.array([0.0, 1.2, 0.0]),
                                         "last-birthday")
    np.testing.assert_allclose(age, [41.37, 41.37, 43.5])
    np.testing.assert_allclose(duration, [0.37, 1.37, 0.5], rtol=1e-13)
    age, duration = place_on_select_rows(np.array([41.37, 41.37, 43.5]), np.array([0.0, 1.2, 0.0]),
                                         "nearest-birthday")
    np.testing.assert_allclose(age, [41.0, 41.2, 44.0], rtol=1e-15)
    np.testing.assert_allclose(duration, [0.0, 1.2, 0.0])
    # whole selection ages are left as they are
    same = place_on_select_rows(np.array([42.25]), np.array([1.25]), "nearest-birthday")
    assert same[0][0] == 42.25 and same[1][0] == 1.25
    # a placed life is a life of the table: its select row is that of its placed selection age
    placed = m.place_lives(np.array([41.37]), np.array([0.0]), "last-birthday")
    m.check_lives(*placed)
    assert m._locate(*placed).row[0] == 41 - SELECT_START
    with pytest.raises(Exception, match="selection_age_rule must be one of"):
        m.place_lives(np.array([41.37]), np.array([0.0]), "youngest")


def test_non_select_bases_value_lives_as_sent():
    m = tables.LifeTable(30, [0.01] * 10 + [1.0])
    age, duration = m.place_lives(np.array([33.3]), np.array([0.0]), "nearest-birthday")
    assert age[0] == 33.3 and duration[0] == 0.0


def test_whole_ages_still_use_the_whole_age_tables():
    m = model("makeham")
    age = np.array([40.0, 65.0])
    loc = Located(np.zeros(2, np.int64), age.astype(np.int64), np.zeros(2))
    np.testing.assert_array_equal(m.complete_moments(age, 0.0, [1])[:, 0],
                                  m.tail_moments[loc.row, loc.index, 0])
    assert not is_select("makeham")


def test_a_basis_builds_its_expansions_once_enough_exact_ages_pay_for_them():
    """A fresh basis values its first exact-age lives directly (building the expansions costs
    as much as some hundreds of them), then builds them; the answers agree either way."""
    from service.core.lifetime import (
        EXPANSION_AFTER_LIVES,
        EXPANSION_AFTER_LIVES_PER_YEAR,
        REQUEST_EXPANSION_BUDGET,
    )

    m = BUILDERS["table-udd"]()  # a fresh model (``model`` keeps one of each)
    assert m._expansion_cost() <= REQUEST_EXPANSION_BUDGET
    age = np.array([47.63])
    before = m.expectation_summary(age, np.zeros(1))
    assert m._exact_ages is None
    enough = max(EXPANSION_AFTER_LIVES, EXPANSION_AFTER_LIVES_PER_YEAR * m._expansion_cost())
    # the complete moments count each exact-age life once (the expectation summary counts it
    # for the complete and the curtate moments)
    many, _ = _lives("table-udd", m, n=enough - 3, seed=3)
    m.complete_moments(many, np.zeros(many.size), [1])
    assert m._exact_ages is None  # one life short
    m.complete_moments(many[:1], np.zeros(1), [1])
    assert m._exact_ages is not None
    after = m.expectation_summary(age, np.zeros(1))
    for b, a in zip(before, after):
        assert _rel(a, b)[0] <= 2e-14
    direct = _direct(m, age, np.zeros(1))
    assert _rel(before[0], direct[0][:, 0])[0] <= 1e-15  # e̊ = E[T]: the direct computation


def test_a_basis_too_large_to_expand_on_a_request_stays_direct():
    """An improved table of 47 cohorts × 47 years would take about a second to expand on the
    request path: it keeps the direct computation there, however many lives it values."""
    from service.core.lifetime import REQUEST_EXPANSION_BUDGET

    m = _improved()
    assert m._expansion_cost() > REQUEST_EXPANSION_BUDGET
    ages, _ = _lives("improved-table", m, n=N_LIVES, seed=5)
    got = m.complete_moments(ages, np.zeros(ages.size), [1])[:, 0]
    assert m._exact_ages is None
    direct = _direct(m, ages, np.zeros(ages.size))[0][:, 0]
    assert np.max(_rel(got, direct)) <= 1e-15


@pytest.mark.parametrize(
    "name", ["makeham", "gompertz", "weibull", "table-udd", "select-udd", "select-constant-force",
             "select-balducci", "q-rated-select"]
)
def test_the_lookup_answers_most_exact_ages(name):
    """The low-degree lookup, not the full expansions, answers the summary of most lives (the
    property test above holds whichever route a life takes, so it would not see a lookup that
    had stopped covering the years where lives are)."""
    m = _model(name)
    assert m.exact_ages is not None
    age, duration = _lives(name, m, n=2_000)
    loc = m._locate(age, duration)
    seg, _ = m._lookup.segments(loc.row, loc.index, loc.frac)
    assert np.mean(seg >= 0) >= 0.9
    assert m._lookup.degree <= 6
    if name.endswith("udd"):  # scaled by the survival, a UDD year's functions are cubics
        assert m._lookup.degree == 3 and m._lookup.scaled


def test_a_year_the_lookup_cannot_follow_is_left_out():
    """A kink inside a year defeats every lookup degree: that year has no segment (its lives
    take the full expansions or the direct computation), the others answer to rounding."""

    def exact(cells, fractions):
        f = fractions[None, :]
        kinked = 1.0 + np.abs(f - 0.3) * (cells[:, None] == 1)
        survival = np.exp(-0.01 * f) * np.ones((cells.size, 1))
        columns = [survival, 30.0 * survival * kinked, 600.0 * survival, 29.0 * survival,
                   1300.0 * survival]
        return np.stack(columns, axis=-1)

    valid = np.ones((1, 3), bool)
    lookup = expansion.build_lookup(exact, valid, valid)
    cells = np.array([0, 1, 1, 2])
    frac = np.array([0.123, 0.2, 0.7, 0.777])
    seg, u = lookup.segments(np.zeros(4, np.int64), cells, frac)
    assert (seg >= 0).tolist() == [True, False, False, True]
    got = lookup.evaluate(seg[[0, 3]], u[[0, 3]])  # (e̊, ½E[T²], e, E[K²]) of two lives
    values = exact(np.array([0]), frac[[0, 3]])[0]
    np.testing.assert_allclose(got.T, values[:, 1:] / values[:, :1], rtol=2e-14)

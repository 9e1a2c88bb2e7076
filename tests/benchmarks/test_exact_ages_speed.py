"""Exact ages against whole ages, in one run: figures and ratios, never a timed failure.

Run with:  python -m pytest tests/benchmarks/test_exact_ages_speed.py -s

For each stored basis kind (a law, an aggregate table, a select table): a million lives'
(e̊, e, Var T, Var K) through ``expectation_summary`` at exact ages (select: random durations
0–5) against the same count at whole ages and against one ``np.exp`` pass over a million
floats; one life at an exact age against one at a whole age; and the compile time and size of
each stored basis's per-year expansions.
"""

from __future__ import annotations

import numpy as np
import pytest
from test_core_speed import _seconds as _best

from service.bases.catalogue import Catalogue
from service.core.lifetime import place_on_select_rows

N = 1_000_000
STORED = {
    "law": "standard-ultimate",
    "aggregate table": "thistlemoor-2024-male",
    "select table": "thistlemoor-2024-select",
}


def _catalogue():
    catalogue = Catalogue()
    catalogue.load()
    return catalogue


def _lives(kind, n, rng):
    if kind == "select table":
        duration = rng.uniform(0.0, 5.0, n)
        sel = rng.uniform(20.0, 79.99, n)
        return place_on_select_rows(sel + duration, duration, "last-birthday")
    return rng.uniform(20.0, 100.0, n), np.zeros(n)


@pytest.mark.parametrize("kind", STORED)
def test_a_million_exact_ages(kind):
    model = _catalogue().get(STORED[kind]).model
    rng = np.random.default_rng(2026)
    age, duration = _lives(kind, N, rng)
    whole_age = np.floor(age)
    whole_duration = np.floor(duration) if kind == "select table" else duration
    floats = rng.random(N)
    exact = _best(lambda: model.expectation_summary(age, duration))
    whole = _best(lambda: model.expectation_summary(whole_age, whole_duration))
    one_exp = _best(lambda: np.exp(floats))
    print(f"\n[{kind}] {N:,} lives (e̊, e, Var T, Var K): exact ages {exact * 1e3:.1f} ms, "
          f"whole ages {whole * 1e3:.1f} ms, ratio {exact / whole:.2f} (target ≤ 2); "
          f"one np.exp pass {one_exp * 1e3:.2f} ms, ratio {exact / one_exp:.1f} (target ≤ 25)")


@pytest.mark.parametrize("kind", STORED)
def test_one_life(kind):
    model = _catalogue().get(STORED[kind]).model
    exact_life = (np.array([47.63]), np.array([0.63 if kind == "select table" else 0.0]))
    whole_life = (np.array([47.0]), np.array([0.0]))
    loops = 2000

    def run(life):
        for _ in range(loops):
            model.expectation_summary(*life)

    exact = _best(lambda: run(exact_life)) / loops
    whole = _best(lambda: run(whole_life)) / loops
    print(f"\n[{kind}] one life: exact age {exact * 1e6:.1f} µs, whole age {whole * 1e6:.1f} µs, "
          f"ratio {exact / whole:.2f} (target ≤ 1.5)")


def test_compile_cost_of_the_stored_bases():
    catalogue = _catalogue()
    for basis in catalogue.stored():
        model, basis_id = basis.model, basis.id
        built = getattr(model, "exact_ages", None)
        if built is None:
            print(f"\n[{basis_id}] no year grid (closed forms)")
            continue
        rebuild = _best(lambda m=model: m._finish_grid(), repeat=3)
        cells = int((built.cell_of >= 0).sum())
        years = int(model._valuable_years().sum())
        print(f"\n[{basis_id}] expansions: {rebuild * 1e3:.0f} ms to build, "
              f"{built.nbytes / 1e6:.2f} MB, {cells} of {years} years expanded, "
              f"{built.coef.shape[0]} segments of degree {built.degree}")

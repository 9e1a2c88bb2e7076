"""Exact ages against whole ages, in one run: figures and ratios, never a timed failure.

Run with:  python -m pytest tests/benchmarks/test_exact_ages_speed.py -s

For each stored basis kind (a law, an aggregate table, a select table): a million lives'
(e̊, e, Var T, Var K) through ``expectation_summary`` at random exact ages (select: random
exact durations 0–5, placed by the default selection-age rule) against the same count at whole
ages and against one ``np.exp`` pass over a million floats; one life at an exact age against
one at a whole age; then the build time and size of each stored basis's per-year expansions.

Times are the best of several runs in CPU time of this process (``time.process_time``; these
paths are single-threaded numpy), measured in turn, so that other work on a shared machine
moves the ratios less than it moves wall-clock figures.
"""

from __future__ import annotations

import time

import numpy as np

from service.bases.catalogue import Catalogue
from service.core.lifetime import EXPANSION_BUDGET, place_on_select_rows

N = 1_000_000
ONE_LIFE_LOOPS = 2_000
REPEAT = 7
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


def _best_in_turn(runs: dict, repeat: int = REPEAT) -> dict:
    """The least CPU time of each callable over ``repeat`` rounds, the callables taken in turn."""
    best = dict.fromkeys(runs, np.inf)
    for _ in range(repeat):
        for name, run in runs.items():
            t0 = time.process_time()
            run()
            best[name] = min(best[name], time.process_time() - t0)
    return best


def _one_life(model, age, duration):
    life = (np.array([age]), np.array([duration]))

    def run():
        for _ in range(ONE_LIFE_LOOPS):
            model.expectation_summary(*life)

    return run


def _row(kind, model) -> str:
    """One basis's figures, as a row of the table the run prints."""
    rng = np.random.default_rng(2026)
    age, duration = _lives(kind, N, rng)
    assert np.all(age % 1.0 > 0.0)  # every life at an exact age
    select = kind == "select table"
    whole_age = np.floor(age)
    whole_duration = np.floor(duration) if select else duration
    floats = rng.random(N)
    best = _best_in_turn({
        "exact": lambda: model.expectation_summary(age, duration),
        "whole": lambda: model.expectation_summary(whole_age, whole_duration),
        "exp": lambda: np.exp(floats),
        "one exact": _one_life(model, 47.63, 0.63 if select else 0.0),
        "one whole": _one_life(model, 47.0, 0.0),
    })
    one_exact = best["one exact"] / ONE_LIFE_LOOPS
    one_whole = best["one whole"] / ONE_LIFE_LOOPS
    return (
        f"| {kind} | {best['exact'] * 1e3:.0f} ms | {best['whole'] * 1e3:.0f} ms | "
        f"{best['exact'] / best['whole']:.2f} | {best['exp'] * 1e3:.1f} ms | "
        f"{best['exact'] / best['exp']:.1f} | {one_exact * 1e6:.1f} µs | "
        f"{one_whole * 1e6:.1f} µs | {one_exact / one_whole:.2f} |"
    )


def test_exact_ages_against_whole_ages():
    catalogue = _catalogue()
    rows = [_row(kind, catalogue.get(basis_id).model) for kind, basis_id in STORED.items()]
    print(f"\n{N:,} lives' (e̊, e, Var T, Var K), and one life (47.63 against 47):\n"
          "| basis | 1e6 exact | 1e6 whole | ratio (≤ 2) | np.exp pass | ratio (≤ 25) "
          "| one exact | one whole | ratio (≤ 1.5) |\n|---|---|---|---|---|---|---|---|---|")
    print("\n".join(rows))


def test_build_cost_of_the_stored_bases():
    catalogue = _catalogue()
    for basis in catalogue.stored():
        model, basis_id = basis.model, basis.id
        if not hasattr(model, "exact_ages"):
            print(f"\n[{basis_id}] no year grid (closed forms)")
            continue
        build = _best_in_turn({"build": lambda m=model: m._build_expansions(EXPANSION_BUDGET)},
                              repeat=3)["build"]
        full, lookup = model._exact_ages, model._lookup
        size = full.nbytes + (lookup.nbytes if lookup is not None else 0)
        cells = int((full.cell_of >= 0).sum())
        years = int(model._valuable_years().sum())
        line = (f"\n[{basis_id}] expansions: {build * 1e3:.0f} ms to build, {size / 1e6:.2f} MB; "
                f"full: {cells} of {years} years, {full.coef.shape[0]} segments of degree "
                f"{full.degree}")
        if lookup is not None:
            line += (f"; lookup: {lookup.coef.shape[2]} segments of degree {lookup.degree} "
                     f"({'scaled by the survival' if lookup.scaled else 'plain'})")
        print(line)

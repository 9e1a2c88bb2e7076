"""The core against a naive per-life scipy.integrate.quad of ₜp_x: figures and ratios.

Run with:  python -m pytest tests/benchmarks/test_core_speed.py -s
These are measurements, not timed tests: nothing here fails because a machine is slow.
"""

from __future__ import annotations

import time

import numpy as np
import pytest
from scipy import integrate

from service.core import laws, tables

QUAD_SAMPLE = 200  # the quad baseline is timed on this many lives and extrapolated linearly
N_MANY = 1_000_000


def _table():
    law = laws.Makeham(0.00022, 2.7e-6, 1.124)
    q = law.death(np.arange(20.0, 130.0), 0.0, [1.0])[:, 0]
    return tables.LifeTable(20, list(q) + [1.0], "udd")


BASES = {"table-udd": _table, "makeham": lambda: laws.Makeham(0.00022, 2.7e-6, 1.124)}


def quad_expectation(model, age):
    """The naive baseline: e̊_x = ∫ ₜp_x dt by scipy.integrate.quad, one life at a time."""
    end = model.limiting_age - age if np.isfinite(model.limiting_age) else 200.0
    def f(t):
        return float(model.survival([age], [0.0], [t])[0, 0])
    return integrate.quad(f, 0.0, end, limit=200)[0]


def _seconds(fn, repeat=3):
    best = np.inf
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return best


@pytest.mark.parametrize("name", BASES)
def test_one_life(benchmark, name):
    model = BASES[name]()
    age = np.array([47.3])
    result = benchmark(model.complete_expectation, age, np.zeros(1))
    core = benchmark.stats.stats.median
    quad = _seconds(lambda: quad_expectation(model, 47.3), repeat=5)
    print(f"\n[{name}] one life e̊_x: core {core * 1e6:.1f} µs, quad {quad * 1e3:.2f} ms, "
          f"quad/core = {quad / core:,.0f}x (values {result[0]:.10f} vs "
          f"{quad_expectation(model, 47.3):.10f})")
    benchmark.extra_info.update(quad_seconds=quad, ratio=quad / core)


@pytest.mark.parametrize("name", BASES)
def test_a_million_lives(benchmark, name):
    model = BASES[name]()
    rng = np.random.default_rng(2024)
    ages = rng.uniform(20.0, 100.0, N_MANY)
    durations = np.zeros(N_MANY)
    benchmark.pedantic(model.complete_expectation, args=(ages, durations), rounds=3, iterations=1)
    core = benchmark.stats.stats.median
    sample = ages[:QUAD_SAMPLE]
    per_life = _seconds(lambda: [quad_expectation(model, a) for a in sample], repeat=1) / QUAD_SAMPLE
    quad = per_life * N_MANY
    print(f"\n[{name}] {N_MANY:,} lives e̊_x: core {core:.3f} s in one numpy pass; quad baseline "
          f"{quad:,.0f} s, EXTRAPOLATED linearly from {QUAD_SAMPLE} lives "
          f"({per_life * 1e3:.2f} ms a life); quad/core = {quad / core:,.0f}x")
    benchmark.extra_info.update(quad_seconds_extrapolated=quad, quad_sample=QUAD_SAMPLE,
                                ratio=quad / core)

"""Benchmarks (measurements, not timed tests) for the product features, against the speed
figures of the products issue:

* 10,000 lives at exact (fractional) ages × (a monthly annuity escalating at 3 %, a decreasing
  term insurance, monthly premiums), against 10,000 expectations at the same ages (target
  ≤ 4×);
* a policy-value vector of 40 durations for one life, against one present-value call for that
  life (target ≤ 2×).

Run with ``python -m pytest tests/benchmarks/test_products_speed.py -s -p no:cacheprovider``;
the figures and ratios are printed. Nothing here asserts on time (the machine is shared).
"""

from __future__ import annotations

import time

import numpy as np
from shared_bases import I5, SULT

from service.core.policy_values import policy_values
from service.core.values import (
    LifeAnnuity,
    LifeInsurance,
    PremiumPlan,
    Valuation,
    present_values,
)

AGES = np.random.default_rng(15).uniform(20.0, 80.0, 10_000)  # exact (fractional) ages
PRODUCT = [LifeAnnuity(frequency=12, escalation=0.03), LifeInsurance(decreasing=True, term=25)]
PREMIUMS = [False, PremiumPlan(25, 12)]


def _best(work, repeats: int = 3) -> float:
    """The best of a few runs, in seconds (bounded: a handful of calls)."""
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        work()
        times.append(time.perf_counter() - start)
    return min(times)


def test_ten_thousand_lives_product_against_expectations():
    zero = np.zeros(AGES.size)
    base = _best(lambda: SULT.complete_expectation(AGES, zero))
    product = _best(lambda: present_values(SULT, AGES, zero, I5, PRODUCT, PREMIUMS), 2)
    whole = AGES.round()
    product_whole = _best(lambda: present_values(SULT, whole, zero, I5, PRODUCT, PREMIUMS), 2)
    print(f"\n10,000 expectations at exact ages: {base * 1e3:.1f} ms")
    print(f"10,000 lives × product at exact ages: {product * 1e3:.1f} ms "
          f"({product / base:.0f}× the expectations; target ≤ 4×)")
    print(f"10,000 lives × product at whole ages: {product_whole * 1e3:.1f} ms "
          f"({product_whole / base:.0f}×)")


def test_policy_value_vector_against_one_present_value():
    age, zero = np.array([47.3]), np.zeros(1)
    b, plan = LifeInsurance(decreasing=True, term=25), PremiumPlan(25, 12)
    durations = np.linspace(0.0, 25.0, 40)

    def one_value():
        return Valuation(SULT, age, zero, I5).values(b, plan)

    def reserves():
        valuation = Valuation(SULT, age, zero, I5)
        premium = valuation.values(b, plan).net_premium
        return policy_values(valuation, b, durations, premium, plan, valued=True)

    for work in (one_value, reserves):
        work()
    single = _best(one_value, 20)
    vector = _best(reserves, 20)
    print(f"\none present value (with its premium) for one life: {single * 1e6:.0f} µs")
    print(f"40 policy values for one life: {vector * 1e6:.0f} µs "
          f"({vector / single:.1f}× one present value; target ≤ 2×)")


def test_exact_age_tables_of_the_stored_bases():
    """The build time and size of the present-value tables a quote uses, per stored basis."""
    from service.bases.catalogue import Catalogue
    from service.core import exact_values

    catalogue = Catalogue()
    catalogue.load()
    for basis in catalogue.stored():
        for kind, m in (("advance", 12), ("advance", 1), ("increasing", 1), ("insurance", 12)):
            key = exact_values.TableKey(0.05, m, 0.0, kind)
            built = [None]

            def build(key=key, model=basis.model, built=built):
                built[0] = exact_values.build_tables(model, key)

            seconds = _best(build, 2)
            e = built[0].expansion
            print(f"\n[{basis.id}] {kind} m={m} at 5%: {seconds * 1e3:.0f} ms, "
                  f"{built[0].nbytes / 1e6:.2f} MB, {int((e.cell_of >= 0).sum())} years expanded "
                  f"on {e.coef.shape[0]} segments of degree {e.degree}")

"""Numeric extremes through HTTP: parameters drawn across their whole domains, for every basis
kind. Each answer is finite, a probability in [0, 1], monotone where it must be, or a 422 that
says why; and no request computes for longer than a bounded time."""

from __future__ import annotations

import math
import time

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

TIME_LIMIT = 20.0  # seconds for any one request below, on a slow shared machine

positive = st.floats(min_value=5e-324, max_value=1e6, allow_nan=False, allow_infinity=False)
tiny_to_huge = st.one_of(positive, st.floats(min_value=1e-300, max_value=1e-3))
above_one = st.one_of(
    st.floats(min_value=1.0, max_value=1.0 + 1e-6, exclude_min=True),
    st.floats(min_value=1.0, max_value=1e3, exclude_min=True),
)
rate = st.floats(min_value=0.0, max_value=0.999999)

laws = st.one_of(
    st.builds(lambda mu: {"type": "constant-force", "mu": mu}, tiny_to_huge),
    st.builds(lambda w: {"type": "de-moivre", "omega": w}, st.floats(1e-3, 2e4)),
    st.builds(lambda w, a: {"type": "generalised-de-moivre", "omega": w, "alpha": a},
              st.floats(1e-3, 2e4), tiny_to_huge),
    st.builds(lambda B, c: {"type": "gompertz", "B": B, "c": c}, tiny_to_huge, above_one),
    st.builds(lambda A, B, c: {"type": "makeham", "A": A, "B": B, "c": c},
              st.floats(0, 10), tiny_to_huge, above_one),
    st.builds(lambda k, n: {"type": "weibull", "k": k, "n": n}, tiny_to_huge, st.floats(1e-3, 20)),
    st.builds(lambda A, B, c, D: {"type": "perks", "A": A, "B": B, "c": c, "D": D},
              st.floats(0, 10), tiny_to_huge, above_one, tiny_to_huge),
    st.builds(lambda a1, b1, a2, a3, b3: {"type": "siler", "a1": a1, "b1": b1, "a2": a2, "a3": a3, "b3": b3},
              st.floats(0, 10), tiny_to_huge, st.floats(0, 10), tiny_to_huge, tiny_to_huge),
    st.builds(lambda a, b: {"type": "gompertz-makeham-family", "alpha": a, "beta": b},
              st.lists(st.floats(0, 1), max_size=3), st.lists(st.floats(-50, 5), min_size=1, max_size=3)),
)
tables = st.builds(
    lambda start, q, fa: {"type": "table", "start_age": start, "q": q + [1.0], "fractional_ages": fa},
    st.integers(0, 1000), st.lists(rate, max_size=200),
    st.sampled_from(["udd", "constant-force", "balducci"]),
)
bases = st.one_of(laws, tables)
ages = st.one_of(st.floats(0, 1e-6), st.floats(0, 150), st.floats(0, 1e4))
durations = st.lists(st.one_of(st.floats(0, 1e-6), st.floats(0, 200), st.floats(0, 1e5)),
                     min_size=1, max_size=6)


def _finite(values):
    return all(v is None or (isinstance(v, float | int) and math.isfinite(v)) for v in values)


def _post(client, path, body):
    started = time.perf_counter()
    response = client.post(path, json=body)
    elapsed = time.perf_counter() - started
    assert elapsed < TIME_LIMIT, (path, body, elapsed)
    assert response.status_code in (200, 422), response.text[:2000]
    assert "NaN" not in response.text and "Infinity" not in response.text
    if response.status_code == 422:
        problem = response.json()
        assert problem["errors"][0]["field"].startswith("$.")
        assert len(problem["errors"][0]["message"]) > 10
        return None
    return response.json()


@settings(max_examples=60, deadline=None, suppress_health_check=list(HealthCheck), database=None)
@given(basis=bases, age=ages, t=durations)
def test_survival_is_a_monotone_probability(client, basis, age, t):
    if basis["type"] == "table":
        age = basis["start_age"] + age % max(len(basis["q"]), 1)
    t = sorted(t)
    body = _post(client, "/v1/survival", {"basis": basis, "lives": [{"age": age}], "t": t})
    if body is None:
        return
    result = body["results"][0]
    p, q, dens = result["survival"], result["death"], result["density"]
    assert _finite(p + q + dens + result["force"])
    assert all(v is not None and 0.0 <= v <= 1.0 for v in p + q)
    assert all(a >= b - 1e-12 for a, b in zip(p, p[1:])), p
    assert all(abs(a + b - 1.0) <= 1e-9 for a, b in zip(p, q))


@settings(max_examples=60, deadline=None, suppress_health_check=list(HealthCheck), database=None)
@given(basis=bases, age=ages, term=st.one_of(st.none(), st.integers(1, 10_000)))
def test_expectations_are_finite_and_ordered(client, basis, age, term):
    if basis["type"] == "table":
        age = basis["start_age"] + age % max(len(basis["q"]), 1)
    request = {"basis": basis, "lives": [{"age": age}]}
    if term is not None:
        request["term"] = term
    body = _post(client, "/v1/expectation", request)
    if body is None:
        return
    r = body["results"][0]
    values = [r["complete"], r["curtate"], r["complete_variance"], r["curtate_variance"]]
    assert all(v is not None and math.isfinite(v) and v >= 0 for v in values), r
    # K ≤ T, so e ≤ e̊ (up to rounding at the extremes)
    assert r["curtate"] <= r["complete"] * (1 + 1e-9) + 1e-9, r
    if term is not None:
        assert r["complete"] <= term * (1 + 1e-12)


PATHOLOGICAL = [
    ("gompertz c barely above 1, tiny B", "/v1/expectation",
     {"basis": {"type": "gompertz", "B": 1e-300, "c": 1.0000000000000002}, "lives": [{"age": 0}]}),
    ("makeham huge B", "/v1/expectation",
     {"basis": {"type": "makeham", "A": 1e6, "B": 1e6, "c": 1e3}, "lives": [{"age": 0}]}),
    ("GM family large coefficients", "/v1/expectation",
     {"basis": {"type": "gompertz-makeham-family", "alpha": [1e6] * 8, "beta": [700, 50, 5]}, "lives": [{"age": 1}]}),
    ("GM family slow exponent", "/v1/expectation",
     {"basis": {"type": "gompertz-makeham-family", "alpha": [], "beta": [-50, 1e-3, 1e-9]}, "lives": [{"age": 1}]}),
    ("longest table", "/v1/expectation",
     {"basis": {"type": "table", "start_age": 0, "q": [1e-9] * 999 + [1.0], "fractional_ages": "balducci"},
      "lives": [{"age": i / 10 + 0.05} for i in range(10_000)], "term": 10_000}),
    ("10,000 lives x 1,000 durations", "/v1/deferred-death",
     {"basis": "standard-ultimate", "lives": [{"age": 20 + i / 250} for i in range(1000)],
      "deferral": [k / 10 for k in range(1000)]}),
    ("temporary moments to 10,000 years", "/v1/moments",
     {"basis": "standard-ultimate", "lives": [{"age": 20 + (i % 600) / 10 + 0.05} for i in range(10_000)],
      "orders": list(range(1, 9)), "term": 10_000}),
    ("longest life table", "/v1/life-table",
     {"basis": {"type": "weibull", "k": 1e-12, "n": 5}, "start_age": 0.5, "end_age": 999.5}),
]


@pytest.mark.slow
@pytest.mark.parametrize("name, path, body", PATHOLOGICAL, ids=[p[0] for p in PATHOLOGICAL])
def test_pathological_requests_answer_in_bounded_time(client, name, path, body):
    started = time.perf_counter()
    _post(client, path, body)
    print(f"\n{name}: {time.perf_counter() - started:.2f} s")

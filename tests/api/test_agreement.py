"""Property: whatever the basis and lives, the HTTP answer equals the core's own answer."""

from __future__ import annotations

import math

import msgspec
import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from service.bases.compile import build_model
from service.bases.definitions import Gompertz, Makeham, Table
from service.core.errors import DomainError

laws = st.one_of(
    st.builds(Gompertz, B=st.floats(1e-6, 1e-3), c=st.floats(1.02, 1.2)),
    st.builds(
        Makeham, A=st.floats(0.0, 0.002), B=st.floats(1e-6, 1e-3), c=st.floats(1.02, 1.2)
    ),
    st.builds(
        Table,
        start_age=st.integers(0, 60),
        q=st.lists(st.floats(0.0, 0.5), min_size=1, max_size=40).map(lambda q: q + [1.0]),
        fractional_ages=st.sampled_from(["udd", "constant-force", "balducci"]),
    ),
)


def _null(values):
    return [None if not math.isfinite(v) else v for v in values]


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(
    basis=laws,
    offsets=st.lists(st.floats(0.0, 30.0), min_size=1, max_size=4),
    t=st.lists(st.floats(0.0, 50.0), min_size=1, max_size=5),
)
def test_survival_and_expectation_over_http_equal_the_core(client, basis, offsets, t):
    model = build_model(basis)
    first = float(getattr(basis, "start_age", 0))
    ages = np.array([first + o for o in offsets])
    try:
        model.check_lives(ages, np.zeros(ages.size))
    except DomainError:
        ages = np.array([first])
    lives = [{"age": a} for a in ages.tolist()]
    payload = {"basis": msgspec.to_builtins(basis), "lives": lives}

    r = client.post("/v1/survival", json={**payload, "t": t})
    assert r.status_code == 200, r.text
    zeros = np.zeros(ages.size)
    expected = model.survival(ages, zeros, np.array(t))
    assert [res["survival"] for res in r.json()["results"]] == [_null(row) for row in expected.tolist()]

    r = client.post("/v1/expectation", json=payload)
    assert r.status_code == 200, r.text
    expected = model.complete_expectation(ages, zeros)
    assert [res["complete"] for res in r.json()["results"]] == _null(expected.tolist())


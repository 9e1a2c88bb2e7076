"""Identities that hold for every basis (hypothesis property tests).

ₜp_x starts at 1 and never rises; ₛ₊ₜp_x = ₛp_x · ₜp_{x+s}; u|ₜq_x = ᵤp_x − ᵤ₊ₜp_x; the moments
agree with the expectations and variances; quantiles invert the survival function; a batch of
lives gives the same numbers as its lives one by one.
"""

from __future__ import annotations

import numpy as np
import pytest
from core_bases import NAMES, SELECT_START, age_between, is_select, model
from hypothesis import given, settings
from hypothesis import strategies as st

SETTINGS = settings(max_examples=25, deadline=None, derandomize=True)
units = st.floats(0.0, 0.999)
durations = st.floats(0.0, 60.0)


def life(name, u, v):
    """A valid (age, duration) for the basis from two numbers in [0, 1)."""
    m = model(name)
    if is_select(name):
        # a selection age 40..44 and any duration since selection (the last row's rates run
        # to well past age 95)
        sel = SELECT_START + int(v * 5)
        d = u * 50.0
        return sel + d, d
    return age_between(m, u), 0.0


def rel(a, b):
    a, b = np.asarray(a, float), np.asarray(b, float)
    return np.abs(a - b) / np.maximum(np.abs(b), 1e-300)


@pytest.mark.parametrize("name", NAMES)
@SETTINGS
@given(u=units, v=units, ts=st.lists(durations, min_size=1, max_size=6))
def test_survival_starts_at_one_and_never_rises(name, u, v, ts):
    m = model(name)
    x, d = life(name, u, v)
    t = np.sort(np.array([0.0] + ts))
    p = m.survival([x], [d], t)[0]
    q = m.death([x], [d], t)[0]
    assert p[0] == 1.0 and q[0] == 0.0
    # each duration's cumulative hazard is computed on its own, with a rounding of about one
    # unit in the last place of H (numpy's vectorised exp and log may round differently with
    # the array's alignment), so two close durations may be out of order by that much: at
    # H ≈ 15 that is a relative 2e-15 of ₜp. More than a few such units is a real rise.
    slack = 8.0 * np.finfo(float).eps * np.maximum(1.0, -np.log(np.maximum(p[:-1], 1e-300)))
    assert np.all(np.diff(p) <= slack * p[:-1])
    assert np.all((p >= 0.0) & (p <= 1.0)) and np.all(np.isfinite(q))
    np.testing.assert_allclose(p + q, 1.0, rtol=0, atol=2e-16)


@pytest.mark.parametrize("name", NAMES)
@SETTINGS
@given(u=units, v=units, s=st.floats(0.0, 20.0), t=st.floats(0.0, 20.0))
def test_survival_is_multiplicative(name, u, v, s, t):
    """ₛ₊ₜp_x = ₛp_x · ₜp_{x+s}; the life at x + s has been selected s years longer."""
    m = model(name)
    x, d = life(name, u, v)
    whole = m.survival([x], [d], [s + t])[0, 0]
    first = m.survival([x], [d], [s])[0, 0]
    if first < 1e-250:
        return  # the life at x + s is past the basis's end
    second = m.survival([x + s], [d + s], [t])[0, 0]
    # exp(−H) carries the absolute rounding of H as a relative error: allow eps·H
    hazard = -np.log(max(whole, 1e-300))
    assert whole == pytest.approx(first * second, rel=1e-13 * (1.0 + hazard), abs=1e-300)


@pytest.mark.parametrize("name", NAMES)
@SETTINGS
@given(u=units, v=units, defer=st.lists(st.floats(0.0, 40.0), min_size=1, max_size=4),
       period=st.floats(0.01, 5.0))
def test_deferred_death_is_a_difference_of_survivals(name, u, v, defer, period):
    m = model(name)
    x, d = life(name, u, v)
    got = m.deferred_death([x], [d], defer, period)[0]
    uu = np.array(defer)
    want = m.survival([x], [d], uu)[0] - m.survival([x], [d], uu + period)[0]
    np.testing.assert_allclose(got, want, rtol=1e-9, atol=1e-15)


@pytest.mark.parametrize("name", NAMES)
@SETTINGS
@given(u=units, v=units, term=st.one_of(st.none(), st.integers(1, 60)))
def test_moments_agree_with_expectations_and_variances(name, u, v, term):
    m = model(name)
    x, d = life(name, u, v)
    cm = m.complete_moments([x], [d], range(1, 9), term)[0]
    km = m.curtate_moments([x], [d], range(1, 9), term)[0]
    assert np.all(np.isfinite(cm)) and np.all(np.isfinite(km))
    assert m.complete_expectation([x], [d], term)[0] == pytest.approx(cm[0], rel=1e-14)
    assert m.curtate_expectation([x], [d], term)[0] == pytest.approx(km[0], rel=1e-14, abs=0)
    var_t = m.complete_variance([x], [d], term)[0]
    var_k = m.curtate_variance([x], [d], term)[0]
    assert var_t == pytest.approx(cm[1] - cm[0] ** 2, rel=1e-9, abs=1e-12 * cm[1])
    assert var_k == pytest.approx(km[1] - km[0] ** 2, rel=1e-9, abs=1e-12 * max(km[1], 1e-300))
    # K ≤ T < K + 1, so the moments are ordered; Lyapunov: E[T^k]^(1/k) rises with k
    assert np.all(km <= cm * (1 + 1e-12))
    norms = cm ** (1.0 / np.arange(1, 9))
    assert np.all(np.diff(norms) >= -1e-12 * norms[1:])
    if term is not None:
        assert cm[0] <= term * (1 + 1e-15) and km[0] <= term


@pytest.mark.parametrize("name", NAMES)
@SETTINGS
@given(u=units, v=units)
def test_temporary_moments_with_a_term_beyond_the_end_equal_whole_life(name, u, v):
    m = model(name)
    x, d = life(name, u, v)
    horizon = float(m.horizon(np.array([x]), np.array([d]))[0])
    term = int(min(np.ceil(horizon) + 2, 10_000))
    if name == "constant-force":
        term = 10_000  # survival e^-200 at the term: negligible
    whole = m.complete_moments([x], [d], [1, 2, 3], None)[0]
    temp = m.complete_moments([x], [d], [1, 2, 3], term)[0]
    np.testing.assert_allclose(temp, whole, rtol=1e-11)
    whole_k = m.curtate_moments([x], [d], [1, 2, 3], None)[0]
    temp_k = m.curtate_moments([x], [d], [1, 2, 3], term)[0]
    np.testing.assert_allclose(temp_k, whole_k, rtol=1e-11, atol=1e-300)


@pytest.mark.parametrize("name", NAMES)
@SETTINGS
@given(u=units, v=units, probs=st.lists(st.floats(1e-6, 1 - 1e-6), min_size=1, max_size=5))
def test_quantiles_invert_the_survival_function(name, u, v, probs):
    m = model(name)
    x, d = life(name, u, v)
    p = np.array(probs)
    t = m.complete_quantiles([x], [d], p)[0]
    assert np.all(np.isfinite(t)) and np.all(t >= 0)
    # t = inf{t : ₜq_x ≥ p}: ₜq_x crosses p within [t − δ, t + δ]. δ is relative 1e-10, with an
    # absolute floor of 4e-16 years: the core solves for the age fraction within the year, which
    # carries about 1e-16 years of rounding (a tiny quantile at a fractional age shows it).
    delta = 1e-10 * t + 4e-16
    assert np.all(m.death([x], [d], np.maximum(t - delta, 0.0))[0] <= p * (1 + 1e-12))
    assert np.all(m.death([x], [d], t + delta)[0] >= p * (1 - 1e-12))
    k = m.curtate_quantiles([x], [d], p)[0]
    # the least whole k with P(K ≤ k) = ₖ₊₁q_x ≥ p (the definition)
    assert np.all(k == np.floor(k)) and np.all(k >= 0)
    assert np.all(m.death([x], [d], k + 1.0)[0] >= p * (1 - 1e-12))
    below = k >= 1
    assert np.all(m.death([x], [d], k[below])[0] < p[below] * (1 + 1e-12))


@pytest.mark.parametrize("name", NAMES)
@settings(max_examples=10, deadline=None, derandomize=True)
@given(us=st.lists(units, min_size=2, max_size=6), v=units,
       t=st.lists(durations, min_size=1, max_size=4), term=st.one_of(st.none(), st.integers(1, 30)))
def test_a_batch_equals_its_lives_one_by_one(name, us, v, t, term):
    m = model(name)
    lives = [life(name, u, v) for u in us]
    ages = np.array([a for a, _ in lives])
    durs = np.array([dd for _, dd in lives])
    probs = [0.1, 0.5, 0.9]
    batch = {
        "survival": m.survival(ages, durs, t),
        "force": m.force(ages, durs, t),
        "density": m.density(ages, durs, t),
        "deferred": m.deferred_death(ages, durs, t, 1.0),
        "complete": m.complete_moments(ages, durs, [1, 2, 5], term),
        "curtate": m.curtate_moments(ages, durs, [1, 2, 5], term),
        "quantiles": m.complete_quantiles(ages, durs, probs),
        "curtate_quantiles": m.curtate_quantiles(ages, durs, probs),
    }
    for i in range(ages.size):
        a, dd = ages[i : i + 1], durs[i : i + 1]
        one = {
            "survival": m.survival(a, dd, t),
            "force": m.force(a, dd, t),
            "density": m.density(a, dd, t),
            "deferred": m.deferred_death(a, dd, t, 1.0),
            "complete": m.complete_moments(a, dd, [1, 2, 5], term),
            "curtate": m.curtate_moments(a, dd, [1, 2, 5], term),
            "quantiles": m.complete_quantiles(a, dd, probs),
            "curtate_quantiles": m.curtate_quantiles(a, dd, probs),
        }
        for key, value in one.items():
            np.testing.assert_allclose(batch[key][i], value[0], rtol=1e-13, atol=0,
                                       equal_nan=True, err_msg=key)
        # a scalar age (not a list) is accepted and gives the same numbers
        np.testing.assert_allclose(m.survival(float(ages[i]), float(durs[i]), t)[0],
                                   batch["survival"][i], rtol=1e-15)


@pytest.mark.parametrize("name", NAMES)
def test_no_nan_or_infinite_results_near_the_end_of_the_basis(name):
    m = model(name)
    x, d = life(name, 0.999, 0.5)
    t = np.array([0.0, 0.1, 1.0, 10.0, 1e3])
    for arr in (m.survival([x], [d], t), m.death([x], [d], t),
                m.deferred_death([x], [d], t, 1.0),
                m.complete_moments([x], [d], range(1, 9)), m.curtate_moments([x], [d], range(1, 9)),
                m.complete_moments([x], [d], range(1, 9), 5),
                m.complete_quantiles([x], [d], [1e-9, 0.5, 1 - 1e-9])):
        assert np.all(np.isfinite(arr))
    # the force and density are NaN (null over HTTP) only where they do not exist
    mu = m.force([x], [d], t)[0]
    p = m.survival([x], [d], t)[0]
    assert np.all(np.isfinite(mu[p > 0]))

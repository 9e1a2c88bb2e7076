"""Variances of T_x and K_x (or of min(T_x, n), min(K_x, n)) that do not cancel.

E[X²] − E[X]² loses digits in proportion to E[X]²/Var X: with a variance 1e-10 of the squared
mean, about ten. For any c, with X ≥ 0 (Y = min(T, n), S its survival function, F = 1 − S):

    E[(Y − c)²] = 2 ∫₀^c (c − t) F(t) dt + 2 ∫_c^n (t − c) S(t) dt,

two integrals of positive terms, and Var Y = E[(Y − c)²] − (E[Y] − c)². With c the computed
mean the correction is of the order of the mean's rounding squared. For K (integer-valued)
and a whole c, (X − c)² = Σ_{j=1}^{|X−c|} (2j − 1), so

    E[(X − c)²] = Σ_{j≥1} (2j − 1) [P(X ≥ c + j) + P(X ≤ c − j)],

again positive terms, with P(X ≥ m) = ₘp_x (m ≤ n) and P(X ≤ m) = ₘ₊₁q_x (m < n).

The integrals use 16-point Gauss–Legendre panels between the kinks of the life's survival
function, split where the cumulative hazard rises by more than ½, so each panel is smooth and
the rule exact to rounding; F is −expm1(−H), so a tiny F keeps its digits. This costs a few
thousand evaluations per life, so the models use it only for the lives whose variance from the
raw moments is below ``RELATIVE_THRESHOLD`` of the squared mean.
"""

from __future__ import annotations

import math

import numpy as np

from .lifetime import GL_NODES, GL_WEIGHTS, MAX_HORIZON

#: below this ratio of the variance to the squared mean, the raw moments' digits are recomputed
RELATIVE_THRESHOLD = 1e-4
#: most Gauss–Legendre sub-panels per panel
MAX_SUBPANELS = 64


def _panels(model, age, duration, lo: float, hi: float) -> tuple[np.ndarray, np.ndarray]:
    """Nodes and weights on [lo, hi] for one life, panels between kinks, split by hazard."""
    if hi <= lo:
        return np.zeros(0), np.zeros(0)
    phases = np.atleast_1d(np.asarray(model.kink_phases(age, duration), float)[0])
    start = math.floor(lo)
    years = np.arange(start, math.ceil(hi) + 1, dtype=float)
    kinks = (phases[:, None] + years[None, :] - 1.0).ravel()
    edges = np.unique(np.concatenate([[lo, hi], kinks[(kinks > lo) & (kinks < hi)]]))
    with np.errstate(over="ignore", invalid="ignore"):
        h = model.cumulative_hazard(age, duration, edges)[0]
    rise = np.nan_to_num(np.diff(h), nan=0.0, posinf=2.0 * MAX_SUBPANELS)
    pieces = np.clip(np.ceil(2.0 * rise), 1, MAX_SUBPANELS).astype(np.int64)
    offsets = np.concatenate([np.arange(k) for k in pieces]).astype(float)
    counts = np.repeat(pieces, pieces).astype(float)
    left = np.repeat(edges[:-1], pieces)
    width = np.repeat(np.diff(edges), pieces) / counts
    sub_lo = left + offsets * width
    t = (sub_lo[:, None] + width[:, None] * GL_NODES[None, :]).ravel()
    w = (width[:, None] * GL_WEIGHTS[None, :]).ravel()
    return t, w


def complete_variance(model, age, duration, mean: float, end: float) -> float:
    """Var min(T, end) of one life (age, duration of shape (1,) or (1, m)), given its mean."""
    c = min(max(mean, 0.0), end)
    total = 0.0
    for lo, hi, dead in ((0.0, c, True), (c, end, False)):
        t, w = _panels(model, age, duration, lo, hi)
        if t.size == 0:
            continue
        with np.errstate(over="ignore", invalid="ignore"):
            h = model.cumulative_hazard(age, duration, t)[0]
        h = np.where(np.isnan(h), np.inf, h)
        if dead:
            total += 2.0 * float(np.sum(w * (c - t) * -np.expm1(-h)))
        else:
            total += 2.0 * float(np.sum(w * (t - c) * np.exp(-h)))
    return max(total - (mean - c) ** 2, 0.0)


def curtate_variance(model, age, duration, mean: float, last: int) -> float:
    """Var min(K, last) of one life, given its mean; ``last`` bounds K (a term, or the whole
    years the life may live)."""
    c = int(min(max(round(mean), 0), last))
    m = np.arange(1, last + 1, dtype=float)
    with np.errstate(over="ignore", invalid="ignore"):
        h = model.cumulative_hazard(age, duration, m)[0]
    h = np.where(np.isnan(h), np.inf, h)
    alive = np.exp(-h)  # P(X ≥ m) = ₘp for m = 1..last
    dead = -np.expm1(-h)  # P(X ≤ m − 1) = ₘq for m = 1..last
    above = np.arange(c + 1, last + 1)  # P(X ≥ c + j), j = m − c
    below = np.arange(1, c + 1)  # P(X ≤ c − j) = P(X ≤ m − 1) with m = c − j + 1
    total = float(np.sum((2.0 * (above - c) - 1.0) * alive[above - 1]))
    total += float(np.sum((2.0 * (c - below + 1) - 1.0) * dead[below - 1]))
    return max(total - (mean - c) ** 2, 0.0)


def _close(mean, var):
    return (var < RELATIVE_THRESHOLD * mean * mean) & (mean > 0)


def cancels(summary) -> bool:
    """Whether any life's variance from the raw moments is near cancellation (cheap: plain
    floats for one life, the path where a few microseconds count)."""
    complete, curtate, var_t, var_k = summary
    if len(complete) == 1:
        return bool(_close(float(complete[0]), float(var_t[0]))
                    or _close(float(curtate[0]), float(var_k[0])))
    with np.errstate(invalid="ignore", over="ignore"):
        return bool(np.any(_close(complete, var_t) | _close(curtate, var_k)))


def refine(model, age, duration, term, summary):
    """(e̊, e, Var T, Var K) with the variances of the lives near cancellation recomputed."""
    complete, curtate, var_t, var_k = (np.array(x, dtype=float) for x in summary)
    age = np.asarray(age, float)
    duration = np.broadcast_to(np.asarray(duration, float), age.shape)
    with np.errstate(invalid="ignore", over="ignore"):
        close_t = var_t < RELATIVE_THRESHOLD * complete**2
        close_k = var_k < RELATIVE_THRESHOLD * curtate**2
    lives = np.flatnonzero((close_t & (complete > 0)) | (close_k & (curtate > 0)))
    if lives.size == 0:
        return complete, curtate, var_t, var_k
    horizon = np.minimum(np.asarray(model.horizon(age[lives], duration[lives]), float),
                         float(MAX_HORIZON))
    for i, end in zip(lives.tolist(), np.broadcast_to(horizon, lives.shape).tolist()):
        a, d = age[i : i + 1], duration[i : i + 1]
        span = end if term is None else min(end, float(term))
        if close_t[i] and complete[i] > 0:
            var_t[i] = complete_variance(model, a, d, float(complete[i]), span)
        if close_k[i] and curtate[i] > 0:
            last = int(term) if term is not None else int(math.ceil(end)) + 1
            var_k[i] = curtate_variance(model, a, d, float(curtate[i]), min(last, MAX_HORIZON))
    return complete, curtate, var_t, var_k

"""Generic numerics for models known only through their cumulative hazard and force.

The derived models of :mod:`transforms` (a force rating, a time-limited extra) and the
statuses of :mod:`several` (joint life, last survivor) have no year grid of their own. They
give ``span_hazard``, ``force``, the durations at which survival may stop being smooth
(``kink_phases``) and a horizon; this class derives the rest:

* ∫₀ⁿ tⁱ ₜp dt by composite Gauss–Legendre (16 nodes, ``SUB_PANELS`` sub-panels) on the
  panels between consecutive kinks, so that every panel holds a smooth integrand and the rule
  is exact to rounding (tables: survival is a polynomial, an exponential or a rational
  function within a year; laws: analytic);
* E[min(K, n)^k] by direct sums of ₘp (positive terms);
* quantiles by vectorised bisection on the cumulative hazard.

Lives are processed in chunks so that at most about ``CHUNK_ELEMENTS`` nodes are held at once.
"""

from __future__ import annotations

import math

import numpy as np

from .errors import DomainError
from .lifetime import (
    CHUNK_ELEMENTS,
    GL_NODES,
    GL_WEIGHTS,
    MAX_HORIZON,
    N_MOM,
    LifetimeModel,
    _orders,
    _term,
    as_float_array,
)

#: survival below e^-NEGLIGIBLE_HAZARD is treated as 0 for whole-life integrals
NEGLIGIBLE_HAZARD = 46.0
#: sub-panels of 16 Gauss–Legendre nodes in each smooth panel of at most one year
SUB_PANELS = 1
_SUB = (np.arange(SUB_PANELS)[:, None] + GL_NODES[None, :]).ravel() / SUB_PANELS
_SUB_W = np.tile(GL_WEIGHTS, SUB_PANELS) / SUB_PANELS


def negligible_horizon(model: LifetimeModel, a, d, guess) -> np.ndarray:
    """The least t with H(t) ≥ NEGLIGIBLE_HAZARD (or H infinite), per life, searched from a
    guess: doubled until it holds (at most to MAX_HORIZON), then bisected."""
    hi = np.clip(np.asarray(guess, float), 1.0, MAX_HORIZON)
    with np.errstate(over="ignore", invalid="ignore"):
        for _ in range(16):
            h = _h(model, a, d, hi)
            short = ~(h >= NEGLIGIBLE_HAZARD) & (hi < MAX_HORIZON)
            if not np.any(short):
                break
            hi = np.where(short, np.minimum(2.0 * hi, MAX_HORIZON), hi)
        lo = np.zeros_like(hi)
        for _ in range(40):
            mid = 0.5 * (lo + hi)
            reached = _h(model, a, d, mid) >= NEGLIGIBLE_HAZARD
            hi = np.where(reached, mid, hi)
            lo = np.where(reached, lo, mid)
    return hi


def _h(model, a, d, t):
    """H(t) for lives given as _columns (N, 1, ...) and t of shape (N,)."""
    t = np.asarray(t, float)[:, None]
    return model.span_hazard(a, d, np.zeros_like(t), t)[:, 0]


class GenericModel(LifetimeModel):
    """A model given by ``span_hazard``, ``force``, ``kink_phases`` and ``horizon``."""

    # ---- what a subclass may refine --------------------------------------------------------

    def _count(self, age) -> int:
        return int(np.shape(age)[0])

    # ---- integrals ---------------------------------------------------------------------------

    def _integrals(self, age, duration, end, n_mom) -> np.ndarray:
        """∫₀^end tⁱ ₜp dt for i < n_mom, per life: (N, n_mom)."""
        n = self._count(age)
        out = np.zeros((n, n_mom))
        if n == 0:
            return out
        phases = self.kink_phases(age, duration)
        n_years = int(math.ceil(float(np.max(end)))) + 1
        per_life = (phases.shape[1] * n_years + 1) * _SUB.size
        step = max(1, CHUNK_ELEMENTS // max(per_life, 1))
        for lo in range(0, n, step):
            sl = slice(lo, lo + step)
            out[sl] = self._integrals_chunk(age[sl], duration[sl], end[sl], phases[sl], n_mom)
        return out

    def _integrals_chunk(self, age, duration, end, phases, n_mom):
        n = self._count(age)
        n_years = int(math.ceil(float(np.max(end)))) + 1
        kinks = (phases[:, :, None] + np.arange(n_years)[None, None, :]).reshape(n, -1)
        edges = np.concatenate([np.zeros((n, 1)), kinks, end[:, None]], axis=1)
        edges = np.sort(np.minimum(edges, end[:, None]), axis=1)
        lo, width = edges[:, :-1], np.diff(edges, axis=1)  # (n, P)
        t = (lo[:, :, None] + width[:, :, None] * _SUB[None, None, :]).reshape(n, -1)
        w = (width[:, :, None] * _SUB_W[None, None, :]).reshape(n, -1)
        a, d = self._columns(age, duration)
        with np.errstate(over="ignore", invalid="ignore"):
            h = self.span_hazard(a, d, np.zeros_like(t), t)
        s = np.where(np.isfinite(h), np.exp(-h), 0.0) * w
        out = np.empty((n, n_mom))
        power = np.ones_like(t)
        for i in range(n_mom):
            out[:, i] = np.sum(s * power, axis=1)
            power = power * t
        return out

    def _end(self, age, duration, term) -> np.ndarray:
        end = np.minimum(self.horizon(age, duration), MAX_HORIZON)
        if term is not None:
            end = np.minimum(end, float(term))
        return end

    def complete_moments(self, age, duration, orders, term=None):
        orders = _orders(orders)
        term = _term(term)
        age, duration = self._lives(age, duration)
        ints = self._integrals(age, duration, self._end(age, duration, term), int(orders.max()))
        return orders[None, :] * ints[:, orders - 1]

    def curtate_moments(self, age, duration, orders, term=None):
        """E[min(K, n)^k] = Σ_{m=1}^{n} (m^k − (m−1)^k) ₘp, a sum of positive terms."""
        orders = _orders(orders)
        term = _term(term)
        age, duration = self._lives(age, duration)
        n = self._count(age)
        out = np.zeros((n, orders.size))
        if n == 0:
            return out
        end = self._end(age, duration, term)
        n_terms = int(math.ceil(float(np.max(end))))
        if term is not None:
            n_terms = min(n_terms, term)
        step = max(1, CHUNK_ELEMENTS // max(n_terms, 1))
        m_all = np.arange(1, n_terms + 1, dtype=float)
        weights = m_all[:, None] ** orders - (m_all[:, None] - 1.0) ** orders  # (M, K)
        for lo in range(0, n, step):
            sl = slice(lo, lo + step)
            a, d = self._columns(age[sl], duration[sl])
            m = np.broadcast_to(m_all[None, :], (self._count(age[sl]), n_terms))
            with np.errstate(over="ignore", invalid="ignore"):
                h = self.span_hazard(a, d, np.zeros_like(m), m)
            surv = np.where(np.isfinite(h), np.exp(-h), 0.0)
            surv = np.where(m <= end[sl, None] + 1.0, surv, 0.0) if term is None else surv
            out[sl] = np.einsum("nm,mk->nk", surv, weights)  # rows independent of the batch
        return out

    def complete_quantiles(self, age, duration, probabilities):
        """The least t with H(t) ≥ −log(1 − p), by bisection on [0, horizon]."""
        probs = as_float_array(probabilities)
        age, duration = self._lives(age, duration)
        n = self._count(age)
        out = np.empty((n, probs.size))
        target = -np.log1p(-probs)[None, :]
        end = np.minimum(self.horizon(age, duration), MAX_HORIZON)
        step = max(1, CHUNK_ELEMENTS // 8 // max(probs.size, 1))
        for lo_i in range(0, n, step):
            sl = slice(lo_i, lo_i + step)
            a, d = self._columns(age[sl], duration[sl])
            hi = np.broadcast_to(end[sl, None], (self._count(age[sl]), probs.size)).copy()
            lo = np.zeros_like(hi)
            with np.errstate(over="ignore", invalid="ignore"):
                for _ in range(64):
                    mid = 0.5 * (lo + hi)
                    below = self.span_hazard(a, d, np.zeros_like(mid), mid) < target
                    lo = np.where(below, mid, lo)
                    hi = np.where(below, hi, mid)
            out[sl] = hi
        return out

    def _lives(self, age, duration):
        age = np.asarray(age, float)
        if age.ndim == 0:
            age = age.reshape(1)
        duration = np.broadcast_to(np.asarray(duration, float), age.shape)
        return age, duration


def check_single_life(model: LifetimeModel, field: str) -> None:
    """Transforms of one life take a single-life basis, not a status of several lives."""
    if getattr(model, "n_members", 1) != 1:
        raise DomainError(
            field,
            "must be a basis of a single life; a joint-life or last-survivor status cannot be "
            "the base of a rating or an improvement, nor a member of another status",
        )


def members_of(model: LifetimeModel) -> int:
    return int(getattr(model, "n_members", 1))


__all__ = ["GenericModel", "NEGLIGIBLE_HAZARD", "N_MOM", "negligible_horizon"]

"""Prospective net premium policy values ₜV at whole and fractional durations.

For a status in force at duration t (conditional on T > t), ₜV is the expected present value
at t of the benefit payments still to come, less that of the premiums still to come:

    ₜV = PV_t(benefit) − P · PV_t(premiums of 1/m each 1/m year),

valued just before any payment due at t (so ₜV + P/m is the value just after a premium due
at t; the recursion (ₜV + P)(1 + i) = q_{x+t} S + p_{x+t} ₜ₊₁V holds at whole durations of
annual premiums). With S the status's survival and v the discount function:

* a payment aₖ (discounted to 0) at tₖ ≥ t if the status survives to τₖ (τₖ = tₖ, or the end
  of the deferral for payments in a guarantee): PV_t = Σ aₖ S(max(τₖ, t)) / (v(t) S(t));
* a benefit bₖ (discounted to 0) paid at eₖ₊₁ on death in [eₖ, eₖ₊₁): the periods after t
  count whole, the one that t falls in from t: P(t < T ≤ eₖ₊₁) = S(t) − S(eₖ₊₁);
* continuous benefits and annuities: Gauss–Legendre nodes on panels that break at every
  requested duration, so each duration cuts the integral at a panel edge.

Payments and periods are those of the present-value path (values.py), so a policy value at
duration 0 is the present value itself, and ₀V = 0 for a net premium by the equivalence
principle. All durations of one request share one pass over the payment times (suffix sums).
"""

from __future__ import annotations

import math

import numpy as np

from . import exact_values
from . import values as pv
from .amounts import discounted, year_index
from .errors import DomainError, fmt

#: a status whose survival to a duration is below this has (for these values) surely left
MIN_SURVIVAL = 1e-280
MAX_DURATIONS = 1_000
#: a payment time (u + k/m) within this of a duration (j/m) is due at that duration
EDGE_SLACK = 1e-9


def benefit_end(b) -> float:
    """The last duration at which the benefit can still pay (inf for whole-life benefits)."""
    if isinstance(b, (pv.PureEndowment, pv.Endowment)):
        return float(b.term)
    if b.term is None:
        return math.inf
    return float(getattr(b, "deferral", 0.0) + b.term)


def check_durations(b, durations, horizon: np.ndarray, field: str = "policy_value_durations"):
    """DomainError naming ``field[k]`` for a duration below 0, past the benefit's term, or at
    or past where a life's status surely ends."""
    t = np.asarray(durations, float)
    if t.ndim != 1 or t.size == 0 or t.size > MAX_DURATIONS:
        raise DomainError(field, f"give 1 to {MAX_DURATIONS} durations (got {t.size})")
    end = benefit_end(b)
    outside = np.flatnonzero(~(np.isfinite(t) & (t >= 0.0) & (t <= end)))
    if outside.size:
        k = int(outside[0])
        allowed = "at least 0" if math.isinf(end) else f"from 0 to the end of cover, {fmt(end)}"
        raise DomainError(f"{field}[{k}]", f"each duration must be {allowed} (got {fmt(t[k])})")
    past = ~(t[None, :] < np.asarray(horizon, float)[:, None])  # (lives, durations)
    if past.any():
        i, k = (int(x) for x in np.argwhere(past.T)[0][::-1])
        raise DomainError(f"{field}[{k}]", pv.past_the_limit(f"duration {fmt(t[k])}", i, horizon))
    return t


def policy_values(valuation: pv.Valuation, b, durations, premium: np.ndarray | None = None,
                  plan: pv.PremiumPlan | None = None, valued: bool = False) -> np.ndarray:
    """ₜV for each life (rows) and duration (columns): benefit less ``premium`` (annual,
    one per life) under ``plan``; no premiums when ``premium`` is None. ``valued``: the
    benefit (and so its checks and the convergence of its values) was valued on
    ``valuation`` already, as a quote does, so it is not valued again."""
    if hasattr(b, "moments"):
        raise DomainError(
            "policy_value_durations",
            "policy values are offered for benefits on one status (a single life, or a joint-life "
            "or last-survivor status), not for reversionary or contingent benefits",
        )
    if not valued:
        valuation.moments(b)  # the benefit's checks (and a value that converges)
    t = check_durations(b, durations, valuation.horizon)
    h_t = in_force(valuation, t)
    out = future_value(valuation, b, t, h_t)
    if premium is not None:
        out = out - premium[:, None] * future_value(valuation, plan.annuity(), t, h_t)
    return out


def in_force(valuation: pv.Valuation, t: np.ndarray) -> np.ndarray:
    """The cumulative hazard to each duration (N, D); a DomainError naming the duration by
    which a life's status has surely ended."""
    h_t = valuation.model.cumulative_hazard(valuation.age, valuation.duration, t)
    s_t = pv._survival_from(h_t)
    if np.any(s_t < MIN_SURVIVAL):
        k = int(np.argwhere(s_t < MIN_SURVIVAL)[0][1])
        raise DomainError(f"policy_value_durations[{k}]",
                          f"the status has surely ended by duration {fmt(t[k])}")
    return h_t


def future_value(valuation: pv.Valuation, b, t: np.ndarray, h_t: np.ndarray | None = None
                 ) -> np.ndarray:
    """PV_t of the payments of ``b`` due at or after t, given the status is in force at t
    (``h_t``: :func:`in_force`, when the caller has it)."""
    age, discount = valuation.age, valuation.discount
    h_t = in_force(valuation, t) if h_t is None else h_t
    s_t = pv._survival_from(h_t)
    total = _exact_value(valuation, b, t)
    if total is None:
        total = np.zeros((age.shape[0], t.size))
        for part in pv.parts(b):
            total += _part_value(valuation, part, t, h_t)
    return total / (s_t * discount.v(t)[None, :])


def _exact_value(valuation: pv.Valuation, b, t: np.ndarray) -> np.ndarray | None:
    """The payments to come from the exact-age tables (exact_values.py), when the basis, the
    interest and the benefit are on their path and the tables are built."""
    lives = valuation._exact
    if lives is None or not exact_values.on_path(b, lives.rate):
        return None
    return exact_values.future_values(lives, valuation.age, valuation.duration, b, t,
                                      valuation.tables_for(lives))


def _part_value(valuation: pv.Valuation, b, t, h_t) -> np.ndarray:
    """Σ over the payments due from t, discounted to 0, times survival (not yet / S(t))."""
    model, age, duration, discount, horizon = (
        valuation.model, valuation.age, valuation.duration, valuation.discount,
        valuation.horizon,
    )
    s_t = pv._survival_from(h_t)
    if isinstance(b, pv.PureEndowment):
        n = float(b.term)
        paid = np.array([math.exp(float(discount.log_v(n)))])
        return _stream(model, age, duration, np.array([n]), paid, np.array([n]), t, s_t)
    u = getattr(b, "deferral", 0.0)
    end = pv._end_of_cover(horizon, u, b.term, discount, b)
    if isinstance(b, pv.LifeAnnuity) and b.timing != "continuous":
        end = np.maximum(end, u + b.guarantee)
        times, paid, tau = pv._annuity_payments(b, float(np.max(end)), discount)
        return _stream(model, age, duration, times, paid, tau, t, s_t)
    if isinstance(b, pv.LifeAnnuity):  # continuous: nodes from u, those in the guarantee sure
        out = np.zeros((age.shape[0], t.size))
        g_end = u + b.guarantee
        end = np.maximum(end, g_end)
        for idx, x, w in pv.continuous_nodes(model, age, duration, u, end, b, discount,
                                             list(t) + [g_end]):
            paid = w * discounted(b, year_index(x, u), discount.log_v(x))
            tau = np.where(x < g_end, u, x)
            out[idx] = _stream(model, age[idx], duration[idx], x, paid, tau, t, s_t[idx])
        return out
    if b.timing == "moment-of-death":
        out = np.zeros((age.shape[0], t.size))
        for idx, x, w in pv.continuous_nodes(model, age, duration, u, end, b, discount, list(t)):
            bv = w * discounted(b, year_index(x, u), discount.log_v(x))
            mu = np.nan_to_num(model.force(age[idx], duration[idx], x), nan=0.0, posinf=0.0)
            out[idx] = _stream(model, age[idx], duration[idx], x, bv[None, :] * mu, x, t, s_t[idx])
        return out
    edges, paid = pv._death_periods(b, float(np.max(end)), discount)
    return _periods(model, age, duration, edges, paid, t, h_t)


def _stream(model, age, duration, times, paid, tau, t, s_t) -> np.ndarray:
    """Σ_{tₖ ≥ t} aₖ S(max(τₖ, t)) for each life and duration t (τ non-decreasing):
    suffix sums over the payments, the ones still sure (τₖ < t ≤ tₖ) at S(t)."""
    n_lives = age.shape[0]
    paid = np.broadcast_to(paid, (n_lives, times.size))
    s_tau = pv._survival_from(model.cumulative_hazard(age, duration, tau))
    tail = _suffix(paid * s_tau)
    cum = np.concatenate([np.zeros((n_lives, 1)), np.cumsum(paid, axis=1)], axis=1)
    a = np.searchsorted(times, t - EDGE_SLACK, side="left")  # a payment due at t is to come
    b = np.maximum(a, np.searchsorted(tau, t, side="left"))
    return tail[:, b] + s_t * (cum[:, b] - cum[:, a])


def _periods(model, age, duration, edges, paid, t, h_t) -> np.ndarray:
    """Σ over the periods of cover from t of bₖ P(max(eₖ, t) < T ≤ eₖ₊₁)."""
    if paid.size == 0:
        return np.zeros((age.shape[0], t.size))
    h = model.cumulative_hazard(age, duration, edges)
    with np.errstate(invalid="ignore", over="ignore"):
        s0 = pv._survival_from(h[:, :-1])
        dq = np.nan_to_num(-np.expm1(-(h[:, 1:] - h[:, :-1])), nan=1.0)
    tail = _suffix(paid * np.where(s0 > 0.0, s0 * dq, 0.0))
    a = np.searchsorted(edges[:-1], t - EDGE_SLACK, side="left")  # the first period from t
    out = tail[:, a]
    inside = (a >= 1) & (t < edges[np.minimum(a, edges.size - 1)])
    p = np.clip(a - 1, 0, paid.size - 1)
    s_t = pv._survival_from(h_t)
    with np.errstate(invalid="ignore", over="ignore"):
        part = s_t * np.nan_to_num(-np.expm1(-(h[:, p + 1] - h_t)), nan=1.0)
    return out + np.where(inside[None, :], paid[p][None, :] * part, 0.0)


def _suffix(x: np.ndarray) -> np.ndarray:
    """Suffix sums along the last axis, with a final 0: out[..., i] = Σ_{k ≥ i} x[..., k]."""
    out = np.zeros(x.shape[:-1] + (x.shape[-1] + 1,))
    out[..., :-1] = np.cumsum(x[..., ::-1], axis=-1)[..., ::-1]
    return out

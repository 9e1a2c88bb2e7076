"""Expected cash flows per period: benefit outgo, premium income and the probability in force.

Periods are [pⱼ, pⱼ₊₁) with pⱼ = j/m (m periods a year) from 0 to the end of the benefit's
cover (or of the status's horizon). The expected (undiscounted) payments of the present-value
path (values.py) are counted in the period of their payment time, as a profit test counts
them: payments at the start of a period (premiums, annuities in advance) in the period they
open, payments at its end (annuities in arrears, benefits at the end of the period of death,
a pure endowment) in the period they close; continuous payments where they fall (panels break
at every period edge, so each period's integral is its own). ``in_force`` is S(pⱼ), the
probability that the status is in force at the start of period j.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from . import values as pv
from .amounts import year_amounts, year_index
from .errors import DomainError
from .policy_values import EDGE_SLACK, benefit_end


@dataclass
class CashFlows:
    start: np.ndarray  # (P,) period starts
    end: np.ndarray  # (P,) period ends
    in_force: np.ndarray  # (N, P)
    benefit: np.ndarray  # (N, P) expected benefit outgo per unit of benefit
    premium: np.ndarray | None  # (N, P) expected net premium income, when premiums are asked


def cash_flow_end(valuation: pv.Valuation, b, plan: pv.PremiumPlan | None = None) -> float:
    """Where the benefit's (and the premiums') cash flows end for every life."""
    horizon = float(np.max(valuation.horizon))
    last = min(benefit_end(b), horizon)
    if plan is not None:
        last = max(last, horizon if plan.term is None else min(plan.term, horizon))
    return last


def cash_flows(valuation: pv.Valuation, b, frequency: int = 1,
               premium: np.ndarray | None = None,
               plan: pv.PremiumPlan | None = None, until: float | None = None) -> CashFlows:
    """Expected cash flows of ``b`` (and of ``premium`` a year per life under ``plan``), in
    periods up to ``until`` (by default the end of the benefit's and premiums' cash flows)."""
    if hasattr(b, "moments"):
        raise DomainError(
            "type",
            "cash flows are offered for benefits on one status (a single life, or a joint-life "
            "or last-survivor status), not for reversionary or contingent benefits",
        )
    if not (isinstance(frequency, (int, np.integer)) and 1 <= frequency <= 365):
        raise DomainError("cash_flows.frequency",
                          f"frequency must be a whole number from 1 to 365 (got {frequency!r})")
    valuation.moments(b)  # the benefit's checks (and values that converge)
    last = cash_flow_end(valuation, b, plan if premium is not None else None)
    last = last if until is None else until
    n_periods = pv._check_count(max(1, math.ceil(round(last * frequency, 9))), "cash_flows")
    grid = np.arange(n_periods + 1, dtype=float) / frequency
    model, age, duration = valuation.model, valuation.age, valuation.duration
    in_force = pv._survival_from(model.cumulative_hazard(age, duration, grid[:-1]))
    outgo = np.zeros((age.shape[0], n_periods))
    for part in pv.parts(b):
        outgo += _expected(valuation, part, grid)
    income = None
    if premium is not None:
        income = premium[:, None] * _expected(valuation, plan.annuity(), grid)
    for name, x in (("escalation", outgo), ("net_premium", income)):
        if x is not None and not np.all(np.isfinite(x)):
            raise DomainError(name, "the expected cash flows are too large to represent")
    return CashFlows(grid[:-1], grid[1:], in_force, outgo, income)


def _expected(valuation: pv.Valuation, b, grid: np.ndarray) -> np.ndarray:
    """Expected payments of one benefit per life and period."""
    model, age, duration, discount, horizon = (
        valuation.model, valuation.age, valuation.duration, valuation.discount,
        valuation.horizon,
    )
    top = float(grid[-1])
    if isinstance(b, pv.PureEndowment):
        s = pv._survival_from(model.cumulative_hazard(age, duration, np.array([b.term])))
        return _bucket(np.array([float(b.term)]), s, grid, at_end=True)
    u = getattr(b, "deferral", 0.0)
    end = np.minimum(pv._end_of_cover(horizon, u, b.term, discount, b), top)
    if isinstance(b, pv.LifeAnnuity) and b.timing != "continuous":
        end = np.maximum(end, min(u + b.guarantee, top))
        times, j, tau = pv._annuity_times(b, float(np.max(end)))
        s = pv._survival_from(model.cumulative_hazard(age, duration, tau))
        paid = _times_amount(year_amounts(b, j) / int(b.frequency), s)
        return _bucket(times, paid, grid, at_end=b.timing == "arrears")
    if isinstance(b, pv.LifeAnnuity) or b.timing == "moment-of-death":
        out = np.zeros((age.shape[0], grid.size - 1))
        g_end = u + getattr(b, "guarantee", 0.0)
        for idx, x, w in pv.continuous_nodes(model, age, duration, u, np.maximum(end, g_end), b,
                                             discount, list(grid) + [g_end]):
            rate = w * year_amounts(b, year_index(x, u))
            if isinstance(b, pv.LifeAnnuity):
                tau = np.where(x < g_end, u, x)
                weight = pv._survival_from(model.cumulative_hazard(age[idx], duration[idx], tau))
            else:
                weight = pv.density_at(model, age[idx], duration[idx], x)
            out[idx] = _bucket(x, _times_amount(rate, weight), grid, at_end=False)
        return out
    edges, _ = pv._death_periods(b, float(np.max(end)), discount)
    h = model.cumulative_hazard(age, duration, edges)
    with np.errstate(invalid="ignore", over="ignore"):
        s0 = pv._survival_from(h[:, :-1])
        dq = np.nan_to_num(-np.expm1(-(h[:, 1:] - h[:, :-1])), nan=1.0)
    amount = year_amounts(b, year_index(edges[:-1], u))
    deaths = np.where(s0 > 0.0, s0 * dq, 0.0)
    return _bucket(edges[1:], _times_amount(amount, deaths), grid, at_end=True)


def _times_amount(amount, probability):
    """amount × probability, 0 where the probability is 0 (however large the amount)."""
    with np.errstate(over="ignore", invalid="ignore"):
        return np.where(probability > 0.0, amount * probability, 0.0)


def _bucket(times: np.ndarray, paid: np.ndarray, grid: np.ndarray, at_end: bool) -> np.ndarray:
    """Σ of ``paid`` (N, K) over the payments of each period (times sorted): a payment at tₖ
    falls in [pⱼ, pⱼ₊₁), or with ``at_end`` in (pⱼ, pⱼ₊₁]. Sums of each period's own terms
    (np.add.reduceat), so a small late period loses nothing to the large early ones."""
    n_lives, n_periods = paid.shape[0], grid.size - 1
    # a payment due at a period edge (up to rounding: u + k/m against j/m) is on that edge
    if at_end:
        period = np.searchsorted(grid, times - EDGE_SLACK, side="left") - 1
    else:
        period = np.searchsorted(grid, times + EDGE_SLACK, side="right") - 1
    keep = (period >= 0) & (period < n_periods)
    times, paid, period = times[keep], paid[:, keep], period[keep]
    out = np.zeros((n_lives, n_periods))
    if times.size == 0:
        return out
    firsts = np.flatnonzero(np.concatenate([[True], np.diff(period) > 0]))
    out[:, period[firsts]] = np.add.reduceat(paid, firsts, axis=1)
    return out

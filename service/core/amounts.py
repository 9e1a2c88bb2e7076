"""How a benefit's amount moves with the years: the one place for the amount rules.

A benefit's amount is set for each whole year j = 0, 1, 2, … counted from the start of its
payments (an annuity: the end of the deferral) or of its cover (an insurance), and per unit:

* level:        1;
* increasing:   j + 1 (1 in the first year, 2 in the second, …: the standard (Iä) and (IA));
* decreasing:   (n − j) / n over a term of n years (1 in the first year, falling by 1/n on each
                anniversary, zero at the end of the term: cover for a loan repaid in yearly
                steps; n (DA)¹ of the textbooks divided by n);
* escalating:   (1 + e)^j at a compound rate e a year (pension increases), e > −1.

Payments 1/m-thly keep the amount of their year (a payment due at u + k/m belongs to year
⌊k/m⌋ in advance, ⌊(k + 1)/m − 1/m⌋ = ⌊k/m⌋ in arrears), and a continuous stream pays at the
rate of its year. :func:`discounted` forms amount × v(t) as one exponential, so that extreme
escalations never give inf × 0.
"""

from __future__ import annotations

import math

import numpy as np

from .errors import DomainError, fmt

#: the largest escalation accepted (100 % a year); larger rates are not a pension increase
MAX_ESCALATION = 1.0
#: a year index within this of a whole number counts as that whole number
YEAR_SLACK = 1e-12


def is_level(b) -> bool:
    return not (
        getattr(b, "increasing", False)
        or getattr(b, "decreasing", False)
        or getattr(b, "escalation", 0.0) != 0.0
    )


def growth(b) -> float:
    """log(1 + e) for an escalating benefit (0 otherwise): the yearly growth of its amount."""
    e = getattr(b, "escalation", 0.0)
    return math.log1p(e) if e > 0.0 else 0.0


def check_amounts(b) -> None:
    """DomainError for an escalation outside (−1, MAX_ESCALATION] or a mixture of rules."""
    e = getattr(b, "escalation", 0.0)
    if not (math.isfinite(e) and -1.0 < e <= MAX_ESCALATION):
        raise DomainError(
            "escalation",
            f"escalation must be a compound rate a year greater than −1 and at most "
            f"{fmt(MAX_ESCALATION)} (100 % a year) (got {fmt(e)})",
        )
    rules = [name for name in ("increasing", "decreasing") if getattr(b, name, False)]
    if e != 0.0:
        rules.append("escalation")
    if len(rules) > 1:
        raise DomainError(
            rules[1],
            f"choose one way for the amount to move: {' and '.join(rules)} were both given",
        )
    if getattr(b, "decreasing", False) and getattr(b, "term", None) is None:
        raise DomainError(
            "decreasing", "decreasing cover falls to zero over the term: give a term"
        )


def year_index(t, start: float) -> np.ndarray:
    """The whole year j (0 = the first) that time t falls in, counted from ``start``."""
    return np.maximum(np.floor(np.asarray(t, float) - start + YEAR_SLACK), 0.0)


def year_amounts(b, j) -> np.ndarray:
    """The amount per unit in year j (0 = the first year of payments or cover)."""
    j = np.asarray(j, float)
    if getattr(b, "increasing", False):
        return j + 1.0
    if getattr(b, "decreasing", False):
        n = float(b.term)
        return np.maximum(n - j, 0.0) / n
    e = getattr(b, "escalation", 0.0)
    if e != 0.0:
        with np.errstate(over="ignore", under="ignore"):
            return np.exp(j * math.log1p(e))
    return np.ones_like(j)


def discounted(b, j, log_v) -> np.ndarray:
    """amount(j) × v as one exponential for an escalation (no inf × 0), else the product."""
    e = getattr(b, "escalation", 0.0)
    with np.errstate(over="ignore", under="ignore", divide="ignore"):
        if e != 0.0:
            return np.exp(np.asarray(j, float) * math.log1p(e) + log_v)
        return year_amounts(b, j) * np.exp(log_v)


def stream_rate(b, t, start: float) -> np.ndarray:
    """The rate of payment (or the benefit) at time t of a benefit that starts at ``start``."""
    return year_amounts(b, year_index(t, start))


def _phi(f, x):
    """∫₀ˣ e^(−f s) ds, accurate for small f x."""
    f = np.asarray(f, float)
    x = np.asarray(x, float)
    fx = f * x
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        exact = -np.expm1(-fx) / np.where(f == 0.0, 1.0, f)
    series = x * (1.0 - fx / 2.0 + fx * fx / 6.0)
    return np.where(np.abs(fx) > 1e-5, exact, series)


def stream_cumulative(b, discount, t, start: float) -> np.ndarray:
    """C(t) = ∫_start^t c(s) v(s) ds for the benefit's rate c, t ≥ start.

    Exact: c and the force of interest are constant between the breakpoints (whole years and,
    unless the amount is level, start + whole years).
    """
    t = np.asarray(t, float)
    top = float(np.max(t)) if t.size else start
    n = int(math.ceil(max(top - start, 0.0))) + 2
    points = [np.array([start])] if is_level(b) else [start + np.arange(n + 1, dtype=float)]
    whole = np.arange(math.ceil(start), math.ceil(top) + 2, dtype=float)
    breaks = np.unique(np.concatenate(points + [whole[whole > start]]))
    j = year_index(breaks, start)
    f = discount.force(breaks)
    with np.errstate(over="ignore", invalid="ignore"):
        cv = discounted(b, j, discount.log_v(breaks))
        seg = cv[:-1] * _phi(f[:-1], np.diff(breaks))
        cum = np.concatenate([[0.0], np.cumsum(seg)])
        i = np.clip(np.searchsorted(breaks, t, side="right") - 1, 0, breaks.size - 1)
        return cum[i] + cv[i] * _phi(f[i], t - breaks[i])


def negligible_after(b, discount) -> float:
    """A time after which amount × v(t) < e^-60 for good (inf when it does not fall for good).

    Level, increasing (at most linear growth, absorbed by the margin of e^-60) and decreasing
    amounts follow the discount function; an escalation slows its fall by log(1 + e) a year.
    """
    g = growth(b)
    if g == 0.0:
        return discount.negligible_after()
    tail = discount.tail_force - g
    if tail <= 0.0:
        return math.inf
    k = discount.years
    grown = discount.log_v_whole + g * np.arange(k + 1)
    at_k = float(grown[-1])
    return k + max(0.0, (at_k + 60.0) / tail)

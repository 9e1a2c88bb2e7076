"""Present values at interest: life annuities, insurances, pure endowments and endowments,
with the second moment of each present-value random variable, and net level premiums.

Everything here works on any :class:`LifetimeModel` through its public methods
(``cumulative_hazard``, ``force``, ``horizon``, ``kink_phase``, ``check_lives``), so rated,
improved and several-life models value exactly as single lives do.

Interest
    :class:`Discount` is a discount function v(t). A constant annual effective rate i gives
    v(t) = (1 + i)^(−t). A term structure gives one annual effective spot rate sₖ for each
    whole year k = 1..K, so v(k) = (1 + sₖ)^(−k); the last rate continues, v(k) = (1 + s_K)^(−k)
    for k > K. Between whole years log v is linear: the forward force of interest is constant
    within each year, so v is continuous and the force jumps only at whole years.
    Second moments discount with v(t)², the rate "at twice the force".

Benefits (per unit, for each life)
    * a discrete payment stream pays cₖ at tₖ if the status survives to τₖ (τₖ = tₖ, or the
      end of the deferral for payments inside a guarantee). With aₖ = cₖ v(tₖ) and the
      present value Y = Σ aₖ 1{T > τₖ} (τ non-decreasing),
      E[Y] = Σ aₖ S(τₖ) and E[Y²] = Σₖ aₖ S(τₖ) (aₖ + 2 Σ_{j<k} aⱼ): positive terms, O(n);
    * a continuous annuity at rate c(t): E[Y] = ∫ c v S(τ) dt and
      E[Y²] = 2 ∫ c(t) v(t) S(τ(t)) C(t) dt with C(t) = ∫_u^t c v ds in closed form;
    * an insurance paying bₖ at the end of the period of death:
      E[Z] = Σ bₖ v(t_{k+1}) P(tₖ < T ≤ t_{k+1}), E[Z²] = Σ bₖ² v(t_{k+1})² P(…);
      at the moment of death E[Z] = ∫ b v S μ dt, E[Z²] = ∫ b² v² S μ dt.

Continuous integrals use composite Gauss–Legendre panels whose edges are the life's kinks
(``kink_phase`` + whole years), the whole years where the force of interest may jump, the
yearly steps of an increasing benefit and the ends of deferral, guarantee and term; a panel is
split further where the cumulative hazard rises by more than 1/2 across it. On each panel
every factor is smooth, so the rule is exact to rounding.

Fast path
    For a constant rate on a year-grid model (life tables, select tables, laws) and lives at
    whole ages, :func:`whole_age_tables` keeps per (model, rate), in a small bounded cache, the
    whole-life annuity-due ä and its second moment, and A and ²A at every whole age of every
    row, by backward recursion of positive terms. Level annual benefits with whole-year terms,
    deferrals and guarantees are then a few lookups. The general path is the reference; the
    tests check that both agree.
"""

from __future__ import annotations

import math
import threading
import weakref
from collections import OrderedDict
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from . import amounts, exact_values
from .amounts import discounted, stream_cumulative, year_index
from .errors import ComputationLimitError, DomainError, fmt
from .lifetime import GL_NODES, GL_WEIGHTS, LifetimeModel, Located, YearGridModel

#: most payment times (or periods) per life in one benefit
MAX_PAYMENT_TIMES = 20_000
#: most spot rates in a term structure
MAX_SPOT_RATES = 1_000
#: the domain of an annual effective rate (constant or spot): −5% to 100% a year. Real rates
#: as low as about −3% have been used in valuations; below −5% nothing is priced, and a rate
#: near −1 makes v(t) = (1 + i)^−t grow past every double within a few hundred years.
MIN_RATE = -0.05
MAX_RATE = 1.0
RATE_DOMAIN = f"an annual effective rate from {MIN_RATE:g} to {MAX_RATE:g} (−5% to 100% a year)"
#: discounting below e^-60 is negligible: payments after that time are left out
LOG_DISCOUNT_NEGLIGIBLE = 60.0
#: discounted survival at the horizon above this means the values do not converge
TAIL_TOLERANCE = 1e-13
#: lives × values per block of a direct sum, to bound memory
CHUNK_ELEMENTS = 2_000_000
#: most Gauss–Legendre sub-panels per panel
MAX_SUBPANELS = 64
#: the fast path needs |d| well away from 0 nowhere, but it serves rates ≥ 0 only
FAST_RATES_FROM = 0.0

TIMINGS_ANNUITY = ("advance", "arrears", "continuous")
TIMINGS_INSURANCE = ("end-of-year", "end-of-period", "moment-of-death")
APPROXIMATIONS = ("exact", "udd", "woolhouse")


# ---- interest -----------------------------------------------------------------------------------


class Discount:
    """A discount function v(t): a constant annual effective rate or annual spot rates.

    ``log_v`` at whole years 0..K and the forward force of interest in each year; beyond K the
    force is ``tail_force`` (log(1 + s_K), so that the last spot rate continues).
    """

    def __init__(self, log_v_whole: np.ndarray, tail_force: float, rate: float | None):
        self.log_v_whole = log_v_whole  # (K + 1,), log_v_whole[0] = 0
        self.forward = log_v_whole[:-1] - log_v_whole[1:]  # (K,) force in year k
        self.tail_force = float(tail_force)
        self.years = log_v_whole.size - 1
        #: the constant annual effective rate, or None for a term structure
        self.rate = rate

    @classmethod
    def constant(cls, rate: float) -> Discount:
        rate = float(rate)
        if not (MIN_RATE <= rate <= MAX_RATE):
            raise DomainError("interest.rate", f"the rate must be {RATE_DOMAIN} (got {fmt(rate)})")
        delta = math.log1p(rate)
        return cls(np.array([0.0, -delta]), delta, rate)

    @classmethod
    def spot(cls, spot_rates: Sequence[float]) -> Discount:
        s = np.asarray(list(spot_rates), dtype=float)
        if s.ndim != 1 or s.size == 0:
            raise DomainError("interest.spot_rates", "give at least one spot rate")
        if s.size > MAX_SPOT_RATES:
            raise DomainError(
                "interest.spot_rates",
                f"at most {MAX_SPOT_RATES} spot rates (got {s.size})",
            )
        bad = np.flatnonzero(~((s >= MIN_RATE) & (s <= MAX_RATE)))
        if bad.size:
            k = int(bad[0])
            raise DomainError(
                f"interest.spot_rates[{k}]", f"each spot rate must be {RATE_DOMAIN} (got {fmt(s[k])})"
            )
        years = np.arange(1, s.size + 1, dtype=float)
        log_v = np.concatenate([[0.0], -years * np.log1p(s)])
        return cls(log_v, math.log1p(s[-1]), None)

    @property
    def delta(self) -> float | None:
        """The constant force of interest, when the rate is constant."""
        return None if self.rate is None else self.tail_force

    def force(self, t) -> np.ndarray:
        """The force of interest in effect at t (right-continuous at whole years)."""
        t = np.asarray(t, float)
        k = np.floor(t).astype(np.int64)
        inside = (k >= 0) & (k < self.years)
        return np.where(inside, self.forward[np.clip(k, 0, max(self.years - 1, 0))], self.tail_force)

    def log_v(self, t) -> np.ndarray:
        t = np.asarray(t, float)
        k = np.clip(np.floor(t), 0, self.years).astype(np.int64)
        return self.log_v_whole[k] - (t - k) * self.force(t)

    def v(self, t) -> np.ndarray:
        return np.exp(self.log_v(t))

    def negligible_after(self) -> float:
        """A time after which v(t) < e^-60 for good (inf when v does not fall for good)."""
        if self.tail_force <= 0.0:
            return math.inf
        peak = float(np.max(self.log_v_whole))
        k_last = self.years
        # after K, log v falls linearly at tail_force; before K it may wander
        at_k = float(self.log_v_whole[-1])
        t = k_last + max(0.0, (at_k + LOG_DISCOUNT_NEGLIGIBLE) / self.tail_force)
        if peak > -LOG_DISCOUNT_NEGLIGIBLE or at_k > -LOG_DISCOUNT_NEGLIGIBLE:
            return t
        return float(k_last)

    def key(self) -> tuple:
        return (self.rate, self.tail_force, self.log_v_whole.tobytes())


# ---- benefits ------------------------------------------------------------------------------------


@dataclass(frozen=True)
class LifeAnnuity:
    """Payments of 1/m each 1/m year while the status survives (rate 1 when continuous),
    times the amount of their year of payment (see :mod:`.amounts`: 1 in the first year, and
    k in the k-th when increasing, (1 + e)^(k − 1) when escalating at e)."""

    timing: str = "advance"
    frequency: int = 1
    term: float | None = None
    deferral: float = 0.0
    guarantee: float = 0.0
    increasing: bool = False
    approximation: str = "exact"
    escalation: float = 0.0


@dataclass(frozen=True)
class LifeInsurance:
    """1 on death, times the amount of the year of cover of the death (see :mod:`.amounts`:
    k in the k-th year when increasing, (n − k + 1)/n when decreasing over a term of n years,
    (1 + e)^(k − 1) when escalating at e)."""

    timing: str = "end-of-year"
    frequency: int = 1
    term: float | None = None
    deferral: float = 0.0
    increasing: bool = False
    decreasing: bool = False
    escalation: float = 0.0


@dataclass(frozen=True)
class PureEndowment:
    """1 at the end of the term if the status survives: ₙE_x."""

    term: float


@dataclass(frozen=True)
class Endowment:
    """A term insurance plus a pure endowment over the same term."""

    term: float
    timing: str = "end-of-year"
    frequency: int = 1


Benefit = LifeAnnuity | LifeInsurance | PureEndowment | Endowment


def parts(b) -> list:
    """The benefit as the parts it adds up from: an endowment is a term insurance plus a pure
    endowment over the same term; every other benefit is one part."""
    if isinstance(b, Endowment):
        return [LifeInsurance(timing=b.timing, frequency=b.frequency, term=b.term),
                PureEndowment(b.term)]
    return [b]


@dataclass(frozen=True)
class PremiumPlan:
    """Level premiums of 1/m a year each 1/m year in advance while the status survives, for
    ``term`` years (None: for life), valued exactly or with a named approximation."""

    term: float | None = None
    frequency: int = 1
    approximation: str = "exact"

    def annuity(self) -> LifeAnnuity:
        return LifeAnnuity(timing="advance", frequency=self.frequency, term=self.term,
                           approximation=self.approximation)


@dataclass
class BenefitValues:
    """For each life: E[PV], E[PV²], the standard deviation, and optionally a premium.

    With an approximation, ``value`` (and a premium from it) is approximate while
    ``exact_value``, ``second_moment`` and ``standard_deviation`` are exact, so that
    standard_deviation² = second_moment − exact_value²; ``approximated`` names the figures
    that carry the approximation.
    """

    value: np.ndarray
    second_moment: np.ndarray
    standard_deviation: np.ndarray
    net_premium: np.ndarray | None = None
    approximation: str | None = None
    exact_value: np.ndarray | None = None
    approximated: tuple[str, ...] = ()


# ---- validation of benefits --------------------------------------------------------------------


def _whole_multiple(value: float, m: int) -> bool:
    x = value * m
    return abs(x - round(x)) <= 1e-9 * max(1.0, abs(x))


def check_benefit(b: Benefit, discount: Discount) -> None:
    """Raises DomainError (fields relative to the benefit) for an impossible benefit."""
    amounts.check_amounts(b)
    if isinstance(b, (LifeAnnuity, LifeInsurance, Endowment)):
        if not (isinstance(b.frequency, (int, np.integer)) and b.frequency >= 1):
            raise DomainError(
                "frequency", f"frequency must be a positive whole number (got {b.frequency!r})"
            )
    term = getattr(b, "term", None)
    if term is not None and not (math.isfinite(term) and term > 0):
        raise DomainError("term", f"term must be greater than 0 (got {fmt(term)})")
    deferral = getattr(b, "deferral", 0.0)
    if not (math.isfinite(deferral) and deferral >= 0):
        raise DomainError("deferral", f"deferral must be at least 0 (got {fmt(deferral)})")
    if isinstance(b, LifeAnnuity):
        if b.timing not in TIMINGS_ANNUITY:
            raise DomainError("timing", f"timing must be one of {', '.join(TIMINGS_ANNUITY)}")
        if b.approximation not in APPROXIMATIONS:
            raise DomainError(
                "approximation", f"approximation must be one of {', '.join(APPROXIMATIONS)}"
            )
        if not (math.isfinite(b.guarantee) and b.guarantee >= 0):
            raise DomainError("guarantee", f"guarantee must be at least 0 (got {fmt(b.guarantee)})")
        if b.term is not None and b.guarantee > b.term:
            raise DomainError(
                "guarantee",
                f"the guarantee ({fmt(b.guarantee)} years) cannot be longer than the term "
                f"({fmt(b.term)} years)",
            )
        if b.timing == "continuous":
            if b.frequency != 1:
                raise DomainError(
                    "frequency",
                    "a continuous annuity has no frequency: leave frequency out (or give 1)",
                )
            if b.approximation != "exact":
                raise DomainError(
                    "approximation",
                    "the approximations value 1/m-thly annuities from annual ones; a "
                    "continuous annuity is always valued exactly",
                )
        else:
            m = int(b.frequency)
            for name in ("term", "guarantee"):
                value = getattr(b, name)
                if value is not None and not _whole_multiple(value, m):
                    raise DomainError(
                        name,
                        f"{name} must be a whole number of payment periods of 1/{m} year "
                        f"(got {fmt(value)})",
                    )
        if b.approximation != "exact":
            if not amounts.is_level(b):
                raise DomainError(
                    "approximation",
                    f"the {b.approximation} approximation applies to level annuities; value an "
                    "increasing or escalating annuity exactly",
                )
            for name in ("term", "deferral", "guarantee"):
                value = getattr(b, name)
                if value is not None and value != math.floor(value):
                    raise DomainError(
                        name,
                        f"with the {b.approximation} approximation, {name} must be a whole "
                        f"number of years (got {fmt(value)})",
                    )
            if b.approximation == "udd" and discount.rate is None:
                raise DomainError(
                    "approximation",
                    "the UDD approximation needs a constant rate of interest "
                    "(its factors α(m) and β(m) depend on i); use woolhouse or exact with "
                    "spot rates",
                )
    if isinstance(b, (LifeInsurance, Endowment)):
        if b.timing not in TIMINGS_INSURANCE:
            raise DomainError("timing", f"timing must be one of {', '.join(TIMINGS_INSURANCE)}")
        if b.timing != "end-of-period" and b.frequency != 1:
            raise DomainError(
                "frequency",
                f"frequency applies to end-of-period timing only (timing is {b.timing})",
            )
        m = int(b.frequency)
        if b.timing != "moment-of-death" and b.term is not None and not _whole_multiple(b.term, m):
            raise DomainError(
                "term",
                f"term must be a whole number of periods of 1/{m} year (got {fmt(b.term)})",
            )


# ---- survival helpers ------------------------------------------------------------------------


def _survival_from(h: np.ndarray) -> np.ndarray:
    with np.errstate(over="ignore", invalid="ignore"):
        s = np.exp(-h)
    return np.where(np.isfinite(h), s, 0.0)


#: terms per block of a per-life sum (see row_dot)
ROW_BLOCK = 128


def row_dot(a: np.ndarray, w: np.ndarray) -> np.ndarray:
    """a @ w for each row (life) on its own, with the same bits whatever the other rows and
    however many trailing zero terms the batch's longer lives add: the products are summed
    in fixed blocks of ROW_BLOCK (numpy's pairwise sum of a full block), then the block sums
    in order. A matrix product's blocking, and a pairwise sum's split, depend on the shape."""
    n, t = a.shape
    blocks = -(-t // ROW_BLOCK)
    prod = np.zeros((n, blocks * ROW_BLOCK))
    np.multiply(a, w, out=prod[:, :t])
    sums = prod.reshape(n, blocks, ROW_BLOCK).sum(axis=2)
    return np.cumsum(sums, axis=1)[:, -1] if blocks else np.zeros(n)


def _chunks(n_lives: int, n_values: int):
    step = max(1, CHUNK_ELEMENTS // max(n_values, 1))
    for lo in range(0, n_lives, step):
        yield slice(lo, min(lo + step, n_lives))


def _lives_slice(age, duration, sl):
    return age[sl], duration[sl]


def _end_of_cover(horizon: np.ndarray, start: float, term: float | None, discount: Discount,
                  b=None):
    """Where each life's payments can stop mattering: term end, horizon or discount floor."""
    end = np.minimum(horizon, amounts.negligible_after(b, discount))
    if term is not None:
        end = np.minimum(end, start + term)
    return np.maximum(end, start)


def _check_count(count: float, field: str = "") -> int:
    if not math.isfinite(count) or count > MAX_PAYMENT_TIMES:
        shown = "an unbounded number of" if not math.isfinite(count) else f"{int(count):,}"
        raise ComputationLimitError(
            field,
            f"this benefit needs {shown} payment times (or periods) per life; at most "
            f"{MAX_PAYMENT_TIMES:,} are computed: use a lower frequency or a term, or a "
            f"basis under which survival (or discounting) ends sooner",
        )
    return int(count)


def _check_tail(model, age, duration, t_end: np.ndarray, discount: Discount, open_ended: bool,
                b=None, start: float = 0.0, term_end: float | None = None):
    """Whole-life values stop at the horizon: survival there, discounted (and escalated),
    must be negligible. With ``term_end``, only for the lives whose cover stops before it
    (the others stop at the end of their term, where survival need not be negligible)."""
    if not open_ended:
        return
    if term_end is not None:
        stops_early = np.asarray(t_end) < term_end
        age, duration = age[stops_early], duration[stops_early]
        t_end = np.asarray(t_end)[stops_early]
    g = amounts.growth(b)
    t_end = np.broadcast_to(np.asarray(t_end, float), np.shape(age)[:1])
    if t_end.size == 0:
        return
    if np.ndim(age) == 1:  # each life at its own end, in one call
        h = model.span_hazard(age, duration, np.zeros(t_end.shape), t_end)
    else:  # a status of several lives: its members' ages per life, so by distinct end
        h = np.empty(t_end.shape)
        for t in np.unique(t_end):
            sel = t_end == t
            h[sel] = model.cumulative_hazard(age[sel], duration[sel], np.array([t]))[:, 0]
    with np.errstate(over="ignore", invalid="ignore"):
        lv = discount.log_v(t_end) + g * np.maximum(t_end - start, 0.0)
        log_w = -h + np.maximum(lv, 2.0 * lv) + np.log1p(t_end)
    bad = np.nan_to_num(log_w, nan=-np.inf) > math.log(TAIL_TOLERANCE)
    if np.any(bad):
        _not_converging(g, float(np.min(t_end[bad])))


def _cover_end(horizon: np.ndarray, b, discount: Discount) -> np.ndarray:
    """Where each life's cover stops mattering: the term, the horizon or the discount floor
    (never before the end of a guarantee)."""
    u = getattr(b, "deferral", 0.0)
    end = _end_of_cover(horizon, u, b.term, discount, b)
    if isinstance(b, LifeAnnuity):
        end = np.maximum(end, u + b.guarantee)
    return end


def _check_converges(model, age, duration, end: np.ndarray, b, discount: Discount) -> None:
    """Whole-life (or longer than the basis) cover must have negligible discounted survival
    where the basis stops (:func:`_check_tail`), for the lives whose cover reaches there."""
    u = getattr(b, "deferral", 0.0)
    _check_tail(model, age, duration, end, discount,
                b.term is None or bool(np.any(end < u + b.term)), b, u, _term_end(b))


def _term_end(b) -> float | None:
    """When the cover of a benefit with a term ends (None for whole life)."""
    return None if b.term is None else getattr(b, "deferral", 0.0) + b.term


def _not_converging(g: float, t: float):
    """The DomainError for whole-life values whose discounted survival is not negligible where
    the basis stops (duration t)."""
    if g > 0.0:
        raise DomainError(
            "escalation",
            "at this escalation the present values do not converge on this basis: "
            "escalated, discounted survival is still not negligible where the basis "
            f"stops (duration {fmt(round(t, 6))} years); use a lower escalation or a term",
        )
    raise DomainError(
        "interest",
        "at this interest the present values do not converge on this basis: "
        "discounted survival is still not negligible where the basis stops "
        f"(duration {fmt(round(t, 6))} years); use a higher rate",
    )


# ---- the general (reference) path ---------------------------------------------------------------


def _discrete_stream(model, age, duration, times, amounts, tau):
    """E[Y], E[Y²] of Y = Σ aₖ 1{T > τₖ} with aₖ already discounted: (N,), (N,)."""
    prior = np.cumsum(amounts) - amounts
    w1 = amounts
    w2 = amounts * (amounts + 2.0 * prior)
    n = age.shape[0]
    v1 = np.zeros(n)
    v2 = np.zeros(n)
    for sl in _chunks(n, tau.size):
        a, d = _lives_slice(age, duration, sl)
        s = _survival_from(model.cumulative_hazard(a, d, tau))
        v1[sl] = row_dot(s, w1)
        v2[sl] = row_dot(s, w2)
    return v1, v2


def _annuity_times(b: LifeAnnuity, end: float):
    """Payment times, their year of payment j (the amount is year_amounts(b, j) / m) and
    survival times of a discrete annuity."""
    m = int(b.frequency)
    u, g = b.deferral, b.guarantee
    n_pay = _check_count(math.ceil(round((end - u) * m, 9)) if end > u else 0, "")
    k = np.arange(n_pay, dtype=float)
    if b.timing == "advance":
        t = u + k / m
    else:
        t = u + (k + 1.0) / m
    j = np.floor(k / m + amounts.YEAR_SLACK)
    if b.timing == "advance":
        guaranteed = k / m < g - 1e-12
    else:
        guaranteed = (k + 1.0) / m <= g + 1e-12
    tau = np.where(guaranteed, u, t)
    return t, j, tau


def _annuity_payments(b: LifeAnnuity, end: float, discount: Discount):
    """Payment times, discounted amounts and survival times of a discrete annuity."""
    t, j, tau = _annuity_times(b, end)
    return t, discounted(b, j, discount.log_v(t)) / int(b.frequency), tau


def _annuity_general(model, age, duration, horizon, b: LifeAnnuity, discount: Discount):
    if b.timing == "continuous":
        return _continuous_annuity(model, age, duration, horizon, b, discount)
    end = _cover_end(horizon, b, discount)
    t, paid, tau = _annuity_payments(b, float(np.max(end)), discount)
    _check_converges(model, age, duration, end, b, discount)
    return _discrete_stream(model, age, duration, t, paid, tau)


def _insurance_general(model, age, duration, horizon, b, discount: Discount):
    """Death benefit over [u, u + n) (n may be None): E[Z], E[Z²]."""
    u = getattr(b, "deferral", 0.0)
    end = _cover_end(horizon, b, discount)
    _check_converges(model, age, duration, end, b, discount)
    if b.timing == "moment-of-death":
        return _continuous_insurance(model, age, duration, u, end, b, discount)
    edges, w1 = _death_periods(b, float(np.max(end)), discount)
    w2 = w1 * w1
    n = age.shape[0]
    z1 = np.zeros(n)
    z2 = np.zeros(n)
    for sl in _chunks(n, edges.size):
        a, d = _lives_slice(age, duration, sl)
        h = model.cumulative_hazard(a, d, edges)
        with np.errstate(invalid="ignore", over="ignore"):
            s0 = _survival_from(h[:, :-1])
            dq = -np.expm1(-(h[:, 1:] - h[:, :-1]))
        p = np.where(s0 > 0.0, s0 * np.nan_to_num(dq, nan=1.0), 0.0)
        z1[sl] = row_dot(p, w1)
        z2[sl] = row_dot(p, w2)
    return z1, z2


def _death_periods(b, top: float, discount: Discount):
    """The periods [eₖ, eₖ₊₁) of cover from the deferral u to ``top`` (years, or 1/m years
    at end-of-period timing) and the discounted benefit paid at eₖ₊₁ on death in each."""
    u = getattr(b, "deferral", 0.0)
    m = int(b.frequency) if b.timing == "end-of-period" else 1
    n_per = _check_count(math.ceil(round((top - u) * m, 9)) if top > u else 0, "")
    k = np.arange(n_per + 1, dtype=float)
    edges = u + k / m
    j = np.floor(k[:-1] / m + amounts.YEAR_SLACK)
    return edges, discounted(b, j, discount.log_v(edges[1:]))


def _pure_endowment(model, age, duration, term: float, discount: Discount):
    h = model.cumulative_hazard(age, duration, np.array([term]))[:, 0]
    lv = float(discount.log_v(term))
    with np.errstate(over="ignore", invalid="ignore"):  # in logs: v may be large, S tiny
        return np.exp(lv - h), np.exp(2.0 * lv - h)


# ---- continuous benefits: Gauss–Legendre panels between kinks ---------------------------------


def _panel_edges(lo: float, hi: float, phases: tuple[float, ...], extra: list[float],
                 discount: Discount, steps_from: float | None,
                 limit_offset: float | None) -> np.ndarray:
    """Panel edges from ``lo`` to ``hi``: every kink of each family (its phase + whole years),
    the interest's and the benefit's yearly steps, the limiting age and ``extra``."""
    if hi <= lo:
        return np.array([lo, lo])
    pts = [np.array([lo, hi])]
    for phase in phases:
        first = phase + math.floor(lo - phase)
        pts.append(first + np.arange(0, math.ceil(hi - first) + 2, dtype=float))
    if discount.rate is None:
        pts.append(np.arange(math.floor(lo), math.ceil(hi) + 1, dtype=float))
    if steps_from is not None:
        pts.append(steps_from + np.arange(0, math.ceil(hi - steps_from) + 2, dtype=float))
    if limit_offset is not None:
        k0 = math.floor(lo - limit_offset)
        pts.append(limit_offset + np.arange(k0, k0 + math.ceil(hi - lo) + 3, dtype=float))
    pts.append(np.asarray(extra, float))
    e = np.unique(np.concatenate(pts))
    e = e[(e >= lo) & (e <= hi)]
    # drop slivers left by rounding
    keep = np.concatenate([[True], np.diff(e) > 1e-12 * max(1.0, hi)])
    return e[keep]


def _nodes(model, age, duration, edges: np.ndarray):
    """Gauss–Legendre nodes and weights on the panels, split where the hazard jumps."""
    if edges.size < 2 or edges[-1] <= edges[0]:
        return np.zeros(0), np.zeros(0)
    h = model.cumulative_hazard(age, duration, edges)
    with np.errstate(invalid="ignore"):
        dh = np.diff(h, axis=1)
    dh = np.where(np.isfinite(dh), dh, 0.0)
    worst = np.max(dh, axis=0) if dh.shape[0] else np.zeros(edges.size - 1)
    n_sub = np.clip(np.ceil(2.0 * worst), 1, MAX_SUBPANELS).astype(np.int64)
    lo = np.repeat(edges[:-1], n_sub)
    width = np.repeat(np.diff(edges) / n_sub, n_sub)
    offset = np.concatenate([np.arange(n) for n in n_sub]).astype(float)
    start = lo + offset * width
    t = (start[:, None] + width[:, None] * GL_NODES[None, :]).ravel()
    w = (width[:, None] * GL_WEIGHTS[None, :]).ravel()
    return t, w


def _phase_groups(model, age, duration):
    """The lives grouped by the phases of all their kink families (a status has one family
    per member: a table's kinks at whole ages beside a law's or a select table's)."""
    phases = np.asarray(model.kink_phases(age, duration), float)
    phases = np.round(phases.reshape(age.shape[0], -1), 12)
    values, inverse = np.unique(phases, axis=0, return_inverse=True)
    inverse = inverse.reshape(-1)
    return [(tuple(float(x) for x in row), np.flatnonzero(inverse == i))
            for i, row in enumerate(values)]


def _limit_offset(model, age) -> float | None:
    """Where the status's survival reaches 0 at a limiting age, as a fractional offset."""
    omega = getattr(model, "limiting_age", math.inf)
    if age.ndim != 1 or not math.isfinite(omega) or age.size == 0:
        return None
    return float((omega - age[0]) % 1.0)


def continuous_nodes(model, age, duration, lo: float, end: np.ndarray, b, discount: Discount,
                     extra=()):
    """For each group of lives with the same kink phase: (indices, nodes t, weights w) of
    Gauss–Legendre panels from ``lo`` to the group's latest ``end``, with edges at the
    benefit's yearly steps (unless level) and at the times ``extra``."""
    u = getattr(b, "deferral", 0.0)
    steps = None if amounts.is_level(b) else u
    for phase, idx in _phase_groups(model, age, duration):
        a, d = age[idx], duration[idx]
        hi = float(np.max(end[idx]))
        edges = _panel_edges(lo, hi, phase, list(extra), discount, steps, _limit_offset(model, a))
        _check_count(edges.size * 4)
        t, w = _nodes(model, a, d, edges)
        if t.size == 0:
            continue
        _check_count(t.size / 16)
        yield idx, t, w


def _continuous_annuity(model, age, duration, horizon, b: LifeAnnuity, discount: Discount):
    u, g = b.deferral, b.guarantee
    end = _cover_end(horizon, b, discount)
    _check_converges(model, age, duration, end, b, discount)
    n = age.shape[0]
    v1 = np.zeros(n)
    v2 = np.zeros(n)
    certain = float(stream_cumulative(b, discount, np.array([u + g]), u)[0]) if g > 0 else 0.0
    s_u = _survival_from(model.cumulative_hazard(age, duration, np.array([u])))[:, 0]
    v1 += s_u * certain
    v2 += s_u * certain**2
    for idx, t, w in continuous_nodes(model, age, duration, u + g, end, b, discount):
        a, d = age[idx], duration[idx]
        cv = discounted(b, year_index(t, u), discount.log_v(t))
        cum = stream_cumulative(b, discount, t, u)
        for sl in _chunks(idx.size, t.size):
            s = _survival_from(model.cumulative_hazard(a[sl], d[sl], t))
            v1[idx[sl]] += row_dot(s, w * cv)
            v2[idx[sl]] += row_dot(s, w * 2.0 * cv * cum)
    return v1, v2


def density_at(model, age, duration, t) -> np.ndarray:
    """ₜp μ at the nodes t for each life (0 where survival has ended)."""
    s = _survival_from(model.cumulative_hazard(age, duration, t))
    mu = model.force(age, duration, t)
    return np.where(s > 0.0, s * np.nan_to_num(mu, nan=0.0, posinf=0.0), 0.0)


def _continuous_insurance(model, age, duration, u, end, b, discount: Discount):
    n = age.shape[0]
    z1 = np.zeros(n)
    z2 = np.zeros(n)
    for idx, t, w in continuous_nodes(model, age, duration, u, end, b, discount):
        a, d = age[idx], duration[idx]
        bv = discounted(b, year_index(t, u), discount.log_v(t))
        for sl in _chunks(idx.size, t.size):
            dens = density_at(model, a[sl], d[sl], t)
            z1[idx[sl]] += row_dot(dens, w * bv)
            z2[idx[sl]] += row_dot(dens, w * bv * bv)
    return z1, z2


# ---- approximations for 1/m-thly annuities -------------------------------------------------------


def udd_factors(rate: float, m: int) -> tuple[float, float]:
    """α(m) = i d / (i⁽ᵐ⁾ d⁽ᵐ⁾) and β(m) = (i − i⁽ᵐ⁾) / (i⁽ᵐ⁾ d⁽ᵐ⁾) (→ 1 and (m−1)/(2m) at i = 0)."""
    delta = math.log1p(rate)
    if abs(delta) < 1e-8:
        return 1.0, (m - 1.0) / (2.0 * m)
    i = rate
    d = -math.expm1(-delta)
    i_m = m * math.expm1(delta / m)
    d_m = -m * math.expm1(-delta / m)
    return i * d / (i_m * d_m), (i - i_m) / (i_m * d_m)


def _approximate_value(model, age, duration, horizon, b: LifeAnnuity, discount: Discount):
    """The value of a level 1/m-thly annuity from annual values and pure endowments."""
    m = int(b.frequency)
    u, g = b.deferral, b.guarantee
    # the certain part: exact (payments in the guarantee, if the status reaches u)
    certain = np.zeros(age.shape[0])
    if g > 0:
        part = LifeAnnuity(timing=b.timing, frequency=m, term=g, deferral=u, guarantee=g)
        certain = _annuity_general(model, age, duration, horizon, part, discount)[0]
    start = u + g
    term = None if b.term is None else b.term - g
    if term is not None and term <= 0:
        return certain
    annual = LifeAnnuity(timing="advance", frequency=1, term=term, deferral=start)
    a_annual = _annuity_general(model, age, duration, horizon, annual, discount)[0]
    e_start = _pure_endowment(model, age, duration, start, discount)[0] if start > 0 else np.ones(age.shape[0])
    e_end = (
        _pure_endowment(model, age, duration, start + term, discount)[0]
        if term is not None
        else np.zeros(age.shape[0])
    )
    if b.approximation == "udd":
        alpha, beta = udd_factors(float(discount.rate), m)
        life = alpha * a_annual - beta * (e_start - e_end)
    else:  # Woolhouse, two terms
        life = a_annual - (m - 1.0) / (2.0 * m) * (e_start - e_end)
    if b.timing == "arrears":
        life = life - (e_start - e_end) / m
    return certain + life


# ---- the fast path: whole-age tables per (model, rate) ----------------------------------------


@dataclass(frozen=True)
class WholeAgeTables:
    """At every whole-age index j of every row r of a year-grid model, at one rate."""

    v: float
    lam_safe: np.ndarray  # (R, L + 1) cumulative hazard at whole ages, +inf as 1e300
    annuity: np.ndarray  # (R, L + 1) whole-life annuity-due ä
    annuity_second: np.ndarray  # (R, L + 1) E[Y²] of the annuity-due
    insurance: np.ndarray  # (R, L + 1) A (end of year of death)
    insurance_second: np.ndarray  # (R, L + 1) ²A
    increasing: np.ndarray  # (R, L + 1) (IA): Σ k vᵏ P(K = k − 1)
    increasing_second: np.ndarray  # (R, L + 1) Σ k v²ᵏ P(K = k − 1)
    square_second: np.ndarray  # (R, L + 1) Σ k² v²ᵏ P(K = k − 1), the E[Z²] of (IA)


_TABLES: weakref.WeakKeyDictionary = weakref.WeakKeyDictionary()
_TABLES_LOCK = threading.Lock()
#: rates kept per model (least recently used dropped)
TABLES_PER_MODEL = 16


def fast_path_model(model) -> bool:
    return isinstance(model, YearGridModel) and hasattr(model, "one_year_survival") and hasattr(
        model, "lam"
    )


def whole_age_tables(model: YearGridModel, rate: float) -> WholeAgeTables:
    """The tables for ``rate``, built once (backward recursions of positive terms) and kept."""
    key = float(rate)
    with _TABLES_LOCK:
        per_model = _TABLES.get(model)
        if per_model is not None and key in per_model:
            per_model.move_to_end(key)
            return per_model[key]
    tables = _build_tables(model, key)
    with _TABLES_LOCK:
        per_model = _TABLES.setdefault(model, OrderedDict())
        per_model[key] = tables
        per_model.move_to_end(key)
        while len(per_model) > TABLES_PER_MODEL:
            per_model.popitem(last=False)
    return tables


def _build_tables(model: YearGridModel, rate: float) -> WholeAgeTables:
    v = 1.0 / (1.0 + rate)
    p = model.one_year_survival  # (R, L)
    n_rows, n_years = p.shape
    ann = np.zeros((n_rows, n_years + 1))
    ann2 = np.zeros((n_rows, n_years + 1))
    ins = np.zeros((n_rows, n_years + 1))
    ins2 = np.zeros((n_rows, n_years + 1))
    inc = np.zeros((n_rows, n_years + 1))
    inc2 = np.zeros((n_rows, n_years + 1))
    sq2 = np.zeros((n_rows, n_years + 1))
    inc[:, n_years] = v
    inc2[:, n_years] = v * v
    sq2[:, n_years] = v * v
    ann[:, n_years] = 1.0  # a life at the grid's end (probability ~0) dies within the year
    ann2[:, n_years] = 1.0
    ins[:, n_years] = v
    ins2[:, n_years] = v * v
    for j in range(n_years - 1, -1, -1):
        pj = p[:, j]
        qj = 1.0 - pj
        ann[:, j] = 1.0 + v * pj * ann[:, j + 1]
        ann2[:, j] = 1.0 + pj * (2.0 * v * ann[:, j + 1] + v * v * ann2[:, j + 1])
        ins[:, j] = v * qj + v * pj * ins[:, j + 1]
        ins2[:, j] = v * v * qj + v * v * pj * ins2[:, j + 1]
        # a death one year later pays one more: k → k + 1, k² → k² + 2k + 1
        inc[:, j] = v * qj + v * pj * (inc[:, j + 1] + ins[:, j + 1])
        sq2[:, j] = v * v * qj + v * v * pj * (sq2[:, j + 1] + 2.0 * inc2[:, j + 1] + ins2[:, j + 1])
        inc2[:, j] = v * v * qj + v * v * pj * (inc2[:, j + 1] + ins2[:, j + 1])
    lam_safe = np.where(np.isfinite(model.lam), model.lam, 1e300)
    return WholeAgeTables(v, lam_safe, ann, ann2, ins, ins2, inc, inc2, sq2)


class _FastLives:
    """Lives at whole ages on a year-grid model, with the lookups the formulas need.

    Built once per request; each lookup is a couple of numpy operations on the lives.
    """

    def __init__(self, model: YearGridModel, loc, rate: float):
        self.model, self.loc, self.rate = model, loc, rate
        self.tab = whole_age_tables(model, rate)
        self.last = self.tab.lam_safe.shape[1] - 1
        # one life: plain Python numbers (numpy's fixed cost per call dominates otherwise)
        self.scalar = loc.row.size == 1
        if self.scalar:
            self.r = int(loc.row[0])
            self.j = int(loc.index[0])
            self.lam_row = self.tab.lam_safe[self.r].tolist()
        else:
            self.r = loc.row
            self.j = loc.index

    def endow(self, n: float, power: int = 1, start: float = 0.0):
        """v^(power·n) ₙp at age j + start (0 past the grid)."""
        tab = self.tab
        n = int(n)
        if self.scalar:
            j0 = min(self.j + int(start), self.last)
            j1 = min(self.j + int(start) + n, self.last)
            gap = self.lam_row[j1] - self.lam_row[j0]
            # numpy's exp, as in a batch, for the same bits
            return tab.v ** (power * n) * (float(np.exp(-gap)) if gap < 745.0 else 0.0)
        j0 = np.minimum(self.j + int(start), self.last)
        j1 = np.minimum(self.j + int(start) + n, self.last)
        return tab.v ** (power * n) * np.exp(tab.lam_safe[self.r, j0] - tab.lam_safe[self.r, j1])

    def at(self, table: np.ndarray, n: float):
        if self.scalar:
            return float(table[self.r, min(self.j + int(n), self.last)])
        return table[self.r, np.minimum(self.j + int(n), self.last)]

    def annuity_due(self, n: float | None, start: float = 0.0):
        """E[Y], E[Y²] of the annual annuity-due for n years from whole age j + start."""
        a_x = self.at(self.tab.annuity, start)
        a2_x = self.at(self.tab.annuity_second, start)
        if n is None:
            return a_x, a2_x
        e1 = self.endow(n, 1, start)
        p_n = self.endow(n, 0, start)
        a_xn = self.at(self.tab.annuity, start + n)
        a2_xn = self.at(self.tab.annuity_second, start + n)
        v = self.tab.v
        certain = _annuity_certain_due(v, int(n))
        first = a_x - e1 * a_xn
        second = a2_x - p_n * (2.0 * certain * v**n * a_xn + v ** (2 * n) * a2_xn)
        return first, second

    def insurance(self, n: float | None, start: float = 0.0):
        a = self.at(self.tab.insurance, start)
        a2 = self.at(self.tab.insurance_second, start)
        if n is None:
            return a, a2
        return (
            a - self.endow(n, 1, start) * self.at(self.tab.insurance, start + n),
            a2 - self.endow(n, 2, start) * self.at(self.tab.insurance_second, start + n),
        )

    def increasing_insurance(self, n: float | None, start: float = 0.0):
        """Σ k vᵏ P, Σ k v²ᵏ P and Σ k² v²ᵏ P over deaths in years k = 1..n from j + start."""
        tab = self.tab
        parts = (tab.increasing, tab.increasing_second, tab.square_second)
        inc, inc2, sq2 = (self.at(t, start) for t in parts)
        if n is None:
            return inc, inc2, sq2
        n = int(n)
        e1, e2 = self.endow(n, 1, start), self.endow(n, 2, start)
        a_n, a2_n = self.at(tab.insurance, start + n), self.at(tab.insurance_second, start + n)
        inc_n, inc2_n, sq2_n = (self.at(t, start + n) for t in parts)
        # after n years a death in year k of the rest pays n + k
        return (
            inc - e1 * (inc_n + n * a_n),
            inc2 - e2 * (inc2_n + n * a2_n),
            sq2 - e2 * (sq2_n + 2.0 * n * inc2_n + n * n * a2_n),
        )

    def at_rate(self, rate: float) -> _FastLives:
        """The same lives at another rate (an escalating benefit's rate (1 + i)/(1 + e) − 1)."""
        return self if rate == self.rate else _FastLives(self.model, self.loc, rate)


def escalated_rate(rate: float, escalation: float) -> float:
    """(1 + i)/(1 + e) − 1: payments growing by (1 + e) a year, discounted at i, are level
    payments discounted at this rate."""
    return (rate - escalation) / (1.0 + escalation)


def _annuity_certain_due(v: float, n: int) -> float:
    """ä_n at v: Σ_{k<n} vᵏ."""
    if n <= 0:
        return 0.0
    if v == 1.0:
        return float(n)
    return (1.0 - v**n) / (1.0 - v)


def _is_whole(x) -> bool:
    return x is None or (float(x) == math.floor(float(x)))


def _benefit_on_fast_path(b: Benefit, rate: float) -> bool:
    """Annual benefits with whole-year terms, deferrals and guarantees: level or escalating
    (at a rate that leaves (1 + i)/(1 + e) − 1 on the fast path), and insurances increasing
    or decreasing."""
    escalation = getattr(b, "escalation", 0.0)
    if escalation != 0.0 and escalated_rate(rate, escalation) < FAST_RATES_FROM:
        return False
    if isinstance(b, LifeAnnuity):
        return (
            b.timing in ("advance", "arrears")
            and b.frequency == 1
            and not b.increasing
            and b.approximation == "exact"
            and _is_whole(b.term) and _is_whole(b.deferral) and _is_whole(b.guarantee)
        )
    annual = getattr(b, "timing", "") == "end-of-year" or (
        getattr(b, "timing", "") == "end-of-period" and getattr(b, "frequency", 1) == 1
    )
    if isinstance(b, LifeInsurance):
        return annual and _is_whole(b.term) and _is_whole(b.deferral)
    if isinstance(b, Endowment):
        return annual and _is_whole(b.term)
    return _is_whole(b.term)


def _fast_path_lives(model, age, duration, discount: Discount):
    """The lives placed on the year grid when the model and the interest allow the tables
    (a year-grid model at a constant rate ≥ 0); None otherwise."""
    if discount.rate is None or discount.rate < FAST_RATES_FROM or not fast_path_model(model):
        return None
    if np.ndim(age) != 1:
        return None
    return model._locate(age, np.broadcast_to(duration, age.shape))


def _surely_converges(model, lives: exact_values.ExactLives, horizon: np.ndarray) -> bool:
    """Whether the convergence check must pass for these lives on the tables' path (rate ≥ 0,
    escalation at most the rate, so discounting never grows): survival from each life to
    the end of its row's grid is already below TAIL_TOLERANCE / (1 + horizon)."""
    with np.errstate(invalid="ignore", over="ignore"):
        log_w = lives.hazard(0) - model.lam[lives.loc.row, -1] + np.log1p(horizon)
    return bool(np.all(np.nan_to_num(log_w, nan=0.0, neginf=-np.inf) < math.log(TAIL_TOLERANCE)))


def _subset(loc: Located, index) -> Located:
    return Located(loc.row[index], loc.index[index], loc.frac[index])


def exact_tables_apply(model, discount: Discount) -> bool:
    """Whether the exact-age tables may value benefits on this basis at this interest."""
    return (discount.rate is not None and discount.rate >= FAST_RATES_FROM
            and fast_path_model(model))


def exact_build_seconds(model, discount: Discount, benefits) -> float:
    """The estimated seconds of the exact-age table builds a valuation would start now (for
    a request's work estimate)."""
    if not exact_tables_apply(model, discount):
        return 0.0
    return exact_values.build_seconds(model, float(discount.rate), benefits)


def _fast_values(lives: _FastLives, n_lives: int, b: Benefit):
    """E[PV], E[PV²] from the whole-age tables (see the module docstring)."""
    if isinstance(b, PureEndowment):
        return _array(lives.endow(b.term), n_lives), _array(lives.endow(b.term, 2), n_lives)
    if isinstance(b, Endowment):
        z1, z2 = lives.insurance(b.term)
        return (_array(z1 + lives.endow(b.term), n_lives),
                _array(z2 + lives.endow(b.term, 2), n_lives))
    if isinstance(b, LifeInsurance):
        u = int(b.deferral)
        if b.increasing or b.decreasing:
            inc, inc2, sq2 = lives.increasing_insurance(b.term, u)
            z1, z2 = inc, sq2
            if b.decreasing:  # (n − k + 1)/n = ((n + 1) − k)/n in year k
                n = int(b.term)
                a1, a2 = lives.insurance(n, u)
                z1 = ((n + 1) * a1 - inc) / n
                z2 = ((n + 1) ** 2 * a2 - 2.0 * (n + 1) * inc2 + sq2) / (n * n)
        elif b.escalation != 0.0:  # (1 + e)^k v^(k+1) = v'^(k+1) / (1 + e)
            grow = 1.0 + b.escalation
            z1, z2 = lives.at_rate(escalated_rate(lives.rate, b.escalation)).insurance(b.term, u)
            z1, z2 = z1 / grow, z2 / (grow * grow)
        else:
            z1, z2 = lives.insurance(b.term, u)
        if u:
            z1 = lives.endow(u) * z1
            z2 = lives.endow(u, 2) * z2
        return _array(z1, n_lives), _array(z2, n_lives)
    # a life annuity in advance: guarantee g, term n, deferral u, as
    # Y = 1{T > u} v^u (ä_g + 1{T > u + g} v^g Y'), Y' the annuity-due for n − g years at x + u + g;
    # in arrears, payments at 1..n are the advance annuity with (g + 1, n + 1) less the first 1
    # an escalation e is level payments at v' = v (1 + e) from the start of payments, the
    # arrears ones divided by (1 + e): (1 + e)^k v^(k+1) = v'^(k+1) / (1 + e)
    u, g = int(b.deferral), int(b.guarantee)
    n = None if b.term is None else int(b.term)
    pay = lives.at_rate(escalated_rate(lives.rate, b.escalation)) if b.escalation else lives
    arrears = b.timing == "arrears"
    if arrears:
        g = g + 1
        n = None if n is None else n + 1
    certain = _annuity_certain_due(pay.tab.v, g)
    rest = None if n is None else n - g
    if rest is not None and rest <= 0:
        y1 = certain if lives.scalar else np.full(n_lives, certain)
        y2 = y1 * certain
    else:
        l1, l2 = pay.annuity_due(rest, u + g)
        e1 = pay.endow(g, 1, u) if g else 1.0
        e2 = pay.endow(g, 2, u) if g else 1.0
        y1 = certain + e1 * l1
        y2 = certain**2 + 2.0 * certain * e1 * l1 + e2 * l2
    if arrears:
        y2 = y2 - 2.0 * y1 + 1.0
        y1 = y1 - 1.0
        if b.escalation:
            grow = 1.0 + b.escalation
            y1, y2 = y1 / grow, y2 / (grow * grow)
    if u:
        y1 = lives.endow(u) * y1
        y2 = lives.endow(u, 2) * y2
    return _array(y1, n_lives), _array(max(y2, 0.0) if lives.scalar else np.maximum(y2, 0.0), n_lives)


def _array(x, n_lives: int) -> np.ndarray:
    return np.full(n_lives, x) if np.ndim(x) == 0 else x


# ---- the entry point ---------------------------------------------------------------------------


def _check_reach(horizon: np.ndarray, b: Benefit) -> None:
    """A deferral or guarantee must end before the status's limiting age (or horizon)."""
    checks = []
    if isinstance(b, (LifeAnnuity, LifeInsurance)) and b.deferral > 0:
        checks.append(("deferral", b.deferral))
    if isinstance(b, LifeAnnuity) and b.guarantee > 0:
        checks.append(("guarantee", b.deferral + b.guarantee))
    for name, reach in checks:
        bad = np.flatnonzero(~(reach < horizon))
        if bad.size:
            i = int(bad[0])
            what = "deferral" if name == "deferral" else "deferral plus guarantee"
            raise DomainError(name, past_the_limit(f"the {what} ({fmt(reach)} years)", i, horizon))


def past_the_limit(what: str, i: int, horizon: np.ndarray) -> str:
    return (f"{what} reaches past the limiting age of the basis for lives[{i}], whose survival "
            f"ends (or becomes negligible) after {fmt(round(float(horizon[i]), 6))} years")


class Valuation:
    """One request's lives on one basis at one interest: what every benefit shares.

    Each life takes its own route, whatever the other lives of the request: a life at a
    whole age, for a benefit the whole-age tables value, takes those (:class:`_FastLives`);
    any other life on a year-grid basis at a constant rate takes the exact-age tables
    (exact_values.py) where they are built; the rest take the general path."""

    def __init__(self, model: LifetimeModel, age, duration, discount: Discount, fast: bool = True,
                 tables: bool = True):
        """``fast=False``: the general path for every life (the reference); ``tables=False``:
        no exact-age tables (a throwaway basis, such as a sensitivity's shocked one, would
        build them for one use)."""
        self.model = model
        self.age = np.asarray(age, float)
        self.duration = np.broadcast_to(np.asarray(duration, float), self.age.shape)
        self.discount = discount
        n = self.age.shape[0]
        self.horizon = np.broadcast_to(
            np.asarray(model.horizon(self.age, self.duration), float), (n,)
        )
        self.fast = None  # the whole-age lives, on the whole-age tables
        self._exact = None  # every life, for the exact-age tables
        self._rest = None  # the other lives, when some are at whole ages
        loc = _fast_path_lives(model, self.age, self.duration, discount) if fast else None
        if loc is not None:
            rate = float(discount.rate)
            whole = loc.frac == 0.0
            if tables:
                self._exact = exact_values.ExactLives(model, loc, rate)
            if whole.all():
                self.fast, self._whole = _FastLives(model, loc, rate), slice(None)
            elif whole.any():
                self._whole, others = np.flatnonzero(whole), np.flatnonzero(~whole)
                self.fast = _FastLives(model, _subset(loc, self._whole), rate)
                if tables:
                    self._rest = (exact_values.ExactLives(model, _subset(loc, others), rate),
                                  others)
        self._tables: dict = {}
        self._premium_annuities: dict = {}

    def moments(self, b: Benefit) -> tuple[np.ndarray, np.ndarray]:
        """E[PV], E[PV²] per unit for each life, exact (fast path or general path)."""
        if hasattr(b, "moments"):  # a benefit on two lives values itself (two_lives.py)
            b.check(self)
            return b.moments(self)
        check_benefit(b, self.discount)
        _check_reach(self.horizon, b)
        n = self.age.shape[0]
        if self.fast is not None and _benefit_on_fast_path(b, self.fast.rate):
            got = _fast_values(self.fast, self.fast.loc.row.size, b)
            if not isinstance(self._whole, slice):  # the other lives by their own route
                others = np.setdiff1d(np.arange(n), self._whole)
                first, second = np.empty(n), np.empty(n)
                first[self._whole], second[self._whole] = got
                first[others], second[others] = (
                    self._general_moments(b, others) if self._rest is None
                    else self._exact_moments(b, self._rest[0], others))
                got = first, second
        elif self._exact is not None:
            got = self._exact_moments(b, self._exact, slice(None))
        else:
            got = self._general_moments(b, slice(None))
        first, second = got
        if not (np.all(np.isfinite(first)) and np.all(np.isfinite(second))):
            field = "escalation" if getattr(b, "escalation", 0.0) else "interest"
            raise DomainError(
                field,
                "the present values (or their second moments) exceed the largest number the "
                "service represents (about 1.8e308): payments grow faster than survival and "
                "discounting make them fall; use a lower escalation, a higher rate or a term",
            )
        return first, second

    def _exact_moments(self, b: Benefit, lives: exact_values.ExactLives, index):
        """The lives at ``index`` by the exact-age tables (exact_values.py), and by the general
        path where a life's years have no polynomials, the benefit is not on the tables'
        path, or the basis is too large to expand."""
        if not exact_values.on_path(b, lives.rate):
            return self._general_moments(b, index)
        model = self.model
        if lives.converges is None:  # the same for every benefit of these lives
            lives.converges = _surely_converges(model, lives, self.horizon[index])
        if not lives.converges:
            _check_converges(model, self.age[index], self.duration[index],
                             _cover_end(self.horizon[index], b, self.discount), b,
                             self.discount)

        got = exact_values.exact_moments(lives, b, self.tables_for(lives))
        if got is None:
            return self._general_moments(b, index)
        first, second = got
        missing = np.flatnonzero(~(np.isfinite(first) & np.isfinite(second)))
        if missing.size:
            first, second = first.copy(), second.copy()
            at = missing if isinstance(index, slice) else index[missing]
            first[missing], second[missing] = self._general_moments(b, at)
        return first, second

    def tables_for(self, lives: exact_values.ExactLives):
        """tables_for(kind, m, e) for these lives: the exact-age tables, asked for once per
        request and lives, however many benefits and premiums use them."""

        def tables_for(kind, m, escalation):
            key = (exact_values.TableKey(lives.rate, int(m), float(escalation), kind), lives)
            if key not in self._tables:
                self._tables[key] = exact_values.CACHE.get(self.model, key[0])
            return self._tables[key]

        return tables_for

    def _general_moments(self, b: Benefit, lives):
        """The general (reference) path for the given lives (an index array or a slice)."""
        model, discount = self.model, self.discount
        age, duration, horizon = self.age[lives], self.duration[lives], self.horizon[lives]
        if isinstance(b, LifeAnnuity):
            return _annuity_general(model, age, duration, horizon, b, discount)
        if isinstance(b, LifeInsurance):
            return _insurance_general(model, age, duration, horizon, b, discount)
        if isinstance(b, PureEndowment):
            return _pure_endowment(model, age, duration, b.term, discount)
        z1, z2 = _insurance_general(model, age, duration, horizon, b, discount)
        e1, e2 = _pure_endowment(model, age, duration, b.term, discount)
        return z1 + e1, z2 + e2

    def values(self, b: Benefit, premium_term=False) -> BenefitValues:
        """E[PV], E[PV²] and the standard deviation per unit of benefit for each life.

        ``premium_term``: False for no premium; a :class:`PremiumPlan`; or, for annual
        premiums, None for premiums for life and n for n years.
        """
        first, second = self.moments(b)
        with np.errstate(over="ignore"):
            sd = np.sqrt(np.maximum(second - first * first, 0.0))
        approximation = getattr(b, "approximation", "exact")
        value = first
        approximated: tuple[str, ...] = ()
        if approximation != "exact":
            model, age, duration = self.model, self.age, self.duration
            value = _approximate_value(model, age, duration, self.horizon, b, self.discount)
            approximated = ("value",)
        out = BenefitValues(
            value, second, sd, approximation=None if approximation == "exact" else approximation,
            exact_value=first if approximated else None,
        )
        if premium_term is not False:
            plan = as_premium_plan(premium_term)
            out.net_premium = value / self.premium_annuity(plan)
            if approximated or plan.approximation != "exact":
                approximated = approximated + ("net_premium",)
        out.approximated = approximated
        return out

    def premium_annuity(self, plan: PremiumPlan | float | None) -> np.ndarray:
        """ä⁽ᵐ⁾_{x:n} (or ä⁽ᵐ⁾_x): 1 a year in premiums of 1/m each 1/m year in advance while
        the status survives (approximate when the plan names an approximation)."""
        plan = as_premium_plan(plan)
        check_premium_plan(plan)
        if plan not in self._premium_annuities:
            try:
                self._premium_annuities[plan] = self.values(plan.annuity()).value
            except DomainError as exc:
                field = "premium_term" if exc.field == "term" else exc.field
                raise DomainError(field, exc.message).within("net_premium") from None
        return self._premium_annuities[plan]


def as_premium_plan(premium_term) -> PremiumPlan:
    """A PremiumPlan as given, or annual premiums for ``premium_term`` years (None: for life)."""
    return premium_term if isinstance(premium_term, PremiumPlan) else PremiumPlan(premium_term)


def check_premium_plan(plan: PremiumPlan) -> None:
    m = plan.frequency
    if not (isinstance(m, (int, np.integer)) and m >= 1):
        raise DomainError("net_premium.frequency",
                          f"frequency must be a positive whole number (got {m!r})")
    n = plan.term
    if n is not None and not (math.isfinite(n) and n > 0 and _whole_multiple(n, int(m))):
        period = "years" if m == 1 else f"premium periods of 1/{m} year"
        raise DomainError(
            "net_premium.premium_term",
            f"premium_term (as given, or by default the benefit's own term or deferral) must "
            f"be a whole number of {period}, more than 0 (got {fmt(n)}): give premium_term",
        )


def default_premium_term(b) -> float | None:
    """Premiums by default stop when the benefit can no longer become payable or when its
    payments start: the term of a term insurance, an endowment or a pure endowment (after
    any deferral), the deferral of a deferred annuity, the term of an immediate temporary
    annuity; for life (None) for whole-life cover and immediate whole-life annuities."""
    if hasattr(b, "default_premium_term"):
        return b.default_premium_term()
    u = getattr(b, "deferral", 0.0)
    if isinstance(b, LifeAnnuity) and u > 0:
        return u
    return None if b.term is None else u + b.term


def benefit_values(model: LifetimeModel, age, duration, discount: Discount, b: Benefit,
                   premium_term: float | None | bool = False, fast: bool = True) -> BenefitValues:
    """One benefit for every life. ``fast=False`` forces the general (reference) path."""
    return Valuation(model, age, duration, discount, fast).values(b, premium_term)


def present_values(model: LifetimeModel, age, duration, discount: Discount,
                   benefits: Sequence[Benefit],
                   premium_terms: Sequence[float | None | bool] | None = None,
                   fast: bool = True) -> list[BenefitValues]:
    """Every benefit for every life; DomainError fields are ``benefits[i].<field>``."""
    premium_terms = premium_terms or [False] * len(benefits)
    valuation = Valuation(model, age, duration, discount, fast)
    out = []
    for i, (b, p) in enumerate(zip(benefits, premium_terms)):
        try:
            out.append(valuation.values(b, p))
        except DomainError as exc:
            if exc.field.startswith("interest"):
                raise
            raise exc.within(f"benefits[{i}]") from None
    return out


def is_continuous(b) -> bool:
    """A benefit valued by quadrature (continuous annuity, moment-of-death insurance)."""
    return getattr(b, "timing", "") in ("continuous", "moment-of-death")


def payment_count(b: Benefit, horizon: float) -> int:
    """An upper bound on the payment times (or periods, or nodes / 16) per life, for budgets."""
    if isinstance(b, PureEndowment):
        return 1
    m = int(getattr(b, "frequency", 1))
    if is_continuous(b):
        m = 2
    u = getattr(b, "deferral", 0.0)
    span = horizon - u if b.term is None else min(b.term, max(horizon - u, 0.0))
    return int(max(span, 1.0) * m) + 1

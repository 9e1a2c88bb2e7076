"""The base lifetime model: the distribution of T_x and K_x from a survival model.

A model answers, for many lives at once (arrays of ages and durations since selection), the
survival function ₜp_x, ₜq_x, u|ₜq_x, the force μ_{x+t}, the density f_x(t) = ₜp_x μ_{x+t},
the moments of T_x and K_x (whole life or temporary), and their quantiles.

Most models are *year-grid* models: the mortality of each whole year of age is known exactly
(in closed form for life tables, by fixed Gauss–Legendre panels for laws), and everything
else follows from per-year pieces that are computed once per basis:

* ``lam[r, j]``  the cumulative hazard from the row's first age to its whole age j;
* ``year_moments[r, j, i]`` = ∫₀¹ sⁱ ₛp dt over the year of age j (i = 0..7);
* ``tail_moments[r, j, i]`` = ∫₀^∞ tⁱ ₜp dt for a life at whole age j, by a backward
  recursion of positive terms, so there is no cancellation;
* ``curtate[r, j, k]`` = E[K^k] at whole age j, by the recursion K_j = 1 + K_{j+1} on survival.

A "row" is one life table (a select table has one row per selection age and one for the
ultimate rates; a law has a single row starting at age 0). A life at a fractional age
x = j + f adds a partial first year, computed by the model's own within-year survival.
"""

from __future__ import annotations

import math
import re
from abc import ABC, abstractmethod
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from scipy.special import comb

from service.selection import SELECTION_AGE_RULES

from . import expansion
from .errors import ComputationLimitError, DomainError, fmt

MAX_ORDER = 8  # highest moment served
N_MOM = MAX_ORDER  # ∫ tⁱ ₜp dt for i = 0..7 gives E[T^k] = k ∫ t^(k-1) ₜp dt for k = 1..8
MAX_TERM = 10_000  # the longest term (years) a temporary quantity may ask for
MAX_HORIZON = 10_000  # the longest span of years a basis may need for its computations
CHUNK_ELEMENTS = 2_000_000  # lives × years per block in direct sums, to bound memory

# The quantities expanded per year of age (see YearGridModel._exact_age_functions)
EXP_S = 0  # S(j + f)/S(j)
EXP_TAIL = 1  # EXP_TAIL + i: s · ∫₀^∞ tⁱ ₜp dt, i < N_MOM
EXP_CURTATE = EXP_TAIL + N_MOM - 1  # EXP_CURTATE + k: s · E[K^k], k = 1..MAX_ORDER
_TERM_BLOCK = 128  # durations per block of a direct sum (fixed, so sums do not depend on the batch)
EXPAND_HAZARD = 20.0  # see YearGridModel._valuable_years
EXPANSION_BUDGET = 12_000  # years (tables) or panel-years (laws) a basis may expand
#: exact-age lives a basis values directly before its expansions are built, at least, and per
#: (panel-)year to expand: building costs about 0.3 ms a year and a direct life 20 to 40 µs in
#: a batch (measured), so the build pays for itself after about ten lives a year. An inline
#: basis sent once with a few lives never pays for it; a stored basis builds at load
#: (service/bases/catalogue.py)
EXPANSION_AFTER_LIVES = 256
EXPANSION_AFTER_LIVES_PER_YEAR = 10
#: the years (or panel-years) a basis may expand on the request path, where building takes
#: about 0.2 to 2.5 ms a year (measured; the stored bases build theirs at load within
#: EXPANSION_BUDGET): a larger inline basis keeps the direct computation
REQUEST_EXPANSION_BUDGET = 600
_SUMMARY = [EXP_S, EXP_TAIL, EXP_TAIL + 1, EXP_CURTATE + 1, EXP_CURTATE + 2]

# Binomial coefficients binom(k, i) for the moment shifts.
BINOM = comb(np.arange(N_MOM + 1)[:, None], np.arange(N_MOM + 1)[None, :], exact=False)

_GL_X, _GL_W = np.polynomial.legendre.leggauss(16)
GL_NODES = 0.5 * (_GL_X + 1.0)  # on [0, 1]
GL_WEIGHTS = 0.5 * _GL_W


def as_float_array(values, name: str = "value") -> np.ndarray:
    arr = np.asarray(values, dtype=float)
    if arr.ndim == 0:
        arr = arr.reshape(1)
    return arr


def shift_moments(moments: np.ndarray, shift: np.ndarray) -> np.ndarray:
    """From Mᵢ = ∫ tⁱ g(t) dt (i = 0..K-1) to ∫ (t + a)ᵏ g(t) dt (k = 0..K-1).

    ``moments`` has shape (N, K) and ``shift`` shape (N,); all terms are non-negative when
    a ≥ 0 and g ≥ 0, so the sum has no cancellation.
    """
    n_mom = moments.shape[-1]
    k = np.arange(n_mom)
    powers = np.where(
        (k[:, None] - k[None, :]) >= 0,
        np.asarray(shift, float)[..., None, None] ** np.maximum(k[:, None] - k[None, :], 0),
        0.0,
    )
    coef = BINOM[:n_mom, :n_mom] * powers
    return np.einsum("...ki,...i->...k", coef, moments)


def _binomial_pairs(n_mom: int) -> np.ndarray:
    """W[i, p, r] = binom(i, r) where p + r = i, else 0 (for i, p, r < n_mom)."""
    w = np.zeros((n_mom, n_mom, n_mom))
    for i in range(n_mom):
        for r in range(i + 1):
            w[i, i - r, r] = BINOM[i, r]
    return w


_PAIRS = [_binomial_pairs(k) for k in range(N_MOM + 1)]


def _shifted_sum(weight: np.ndarray, shift: np.ndarray, moments: np.ndarray) -> np.ndarray:
    """Σₘ wₘ ∫ (aₘ + s)ⁱ g_m(s) ds from Mₘᵣ = ∫ sʳ g_m(s) ds: (N, M), (N, M), (N, M, K) → (N, K).

    Expands (aₘ + s)ⁱ binomially and sums over m first, as one batched matrix product
    Q[n, p, r] = Σₘ wₘ aₘᵖ Mₘᵣ; every term is non-negative, so nothing cancels.
    """
    n_mom = moments.shape[-1]
    powers = np.empty(shift.shape + (n_mom,))
    powers[..., 0] = weight
    for p in range(1, n_mom):
        powers[..., p] = powers[..., p - 1] * shift
    q = np.einsum("...mp,...mr->...pr", powers, moments)  # (N, K, K), rows independent
    return np.einsum("npr,ipr->ni", q, _PAIRS[n_mom])


@dataclass(frozen=True)
class Located:
    """Lives placed on the year grid: row, whole-age index in the row, fraction of a year."""

    row: np.ndarray
    index: np.ndarray
    frac: np.ndarray


class LifetimeModel(ABC):
    """A distribution of future lifetime for lives given by age and duration."""

    #: ages at or beyond this are not lives of the basis; math.inf when there is none
    limiting_age: float = math.inf
    #: the highest age the basis can value (may be lower than the limiting age for laws)
    max_age: float = math.inf
    #: a name for messages, e.g. "Gompertz law"
    kind: str = "basis"

    # ----------------------------------------------------------------------------------
    # Validation of lives

    def check_lives(self, age, duration) -> None:
        age = as_float_array(age)
        if age.size == 1 and 0.0 <= float(age[0]) < self.max_age:  # the common single life
            return
        bad = np.flatnonzero(~(age < self.max_age))
        if bad.size:
            i = int(bad[0])
            raise DomainError(f"lives[{i}].age", self._age_message(age[i]))
        bad = np.flatnonzero(~(age >= 0))
        if bad.size:
            i = int(bad[0])
            raise DomainError(f"lives[{i}].age", f"age must be at least 0 (got {fmt(age[i])})")

    def _age_message(self, age: float) -> str:
        if self.max_age >= self.limiting_age:
            return (
                f"age must be below the limiting age {fmt(self.limiting_age)} of this "
                f"{self.kind} (got {fmt(age)})"
            )
        return (
            f"age must be below {fmt(round(self.max_age, 6))}, the oldest age this {self.kind} "
            f"can value: beyond it survival for even a few years falls below 1e-20 "
            f"(got {fmt(age)})"
        )

    def place_lives(self, age, duration, rule: str = "last-birthday"):
        """The (age, duration) at which each life is valued. Only select tables change them:
        see :func:`place_on_select_rows`; every other basis values a life as it is sent."""
        return age, duration

    # ----------------------------------------------------------------------------------
    # Primitives a model provides

    @abstractmethod
    def span_hazard(self, age, duration, t0, t1) -> np.ndarray:
        """The cumulative hazard between durations t0 ≤ t1 for lives aged ``age``.

        ``age`` and ``duration`` have shape (N, 1) or broadcast with t0 and t1.
        """

    @abstractmethod
    def force(self, age, duration, t) -> np.ndarray:
        """μ_{x+t} with shape (N, T); NaN where it does not exist."""

    @abstractmethod
    def complete_moments(self, age, duration, orders: Sequence[int], term=None) -> np.ndarray:
        """E[T_x^k] (or E[min(T_x, n)^k]) for each life and order: shape (N, K)."""

    @abstractmethod
    def curtate_moments(self, age, duration, orders: Sequence[int], term=None) -> np.ndarray:
        """E[K_x^k] (or E[min(K_x, n)^k]) for each life and order: shape (N, K)."""

    @abstractmethod
    def complete_quantiles(self, age, duration, probabilities) -> np.ndarray:
        """The least t with ₜq_x ≥ p: shape (N, P)."""

    def horizon(self, age, duration) -> np.ndarray:
        """Years after which survival is 0, or below e^-46 (negligible), for each life."""
        return np.full(np.shape(age), float(MAX_HORIZON))

    def kink_phase(self, age, duration) -> np.ndarray:
        """The first duration in (0, 1] at which survival may stop being smooth.

        Survival is smooth between phase + k and phase + k + 1 for whole k ≥ 0 (and on
        [0, phase]), so composite Gauss–Legendre panels on those intervals are exact to
        rounding. Tables have their kinks at whole ages of their rows.
        """
        y = as_float_array(age)
        return np.ceil(y) - y + np.where(np.ceil(y) == y, 1.0, 0.0)

    # ----------------------------------------------------------------------------------
    # Derived quantities

    @staticmethod
    def _columns(age, duration):
        age = as_float_array(age)[:, None]
        duration = np.broadcast_to(as_float_array(duration), age.shape[:1])[:, None]
        return age, duration

    def cumulative_hazard(self, age, duration, t) -> np.ndarray:
        a, d = self._columns(age, duration)
        t = as_float_array(t)[None, :]
        with np.errstate(over="ignore", invalid="ignore"):
            return self.span_hazard(a, d, np.zeros_like(t), t)

    def survival(self, age, duration, t) -> np.ndarray:
        return np.exp(-self.cumulative_hazard(age, duration, t))

    def death(self, age, duration, t) -> np.ndarray:
        """ₜq_x = −expm1(−H): no cancellation for small t."""
        return -np.expm1(-self.cumulative_hazard(age, duration, t))

    def density(self, age, duration, t) -> np.ndarray:
        """f_x(t) = ₜp_x μ_{x+t}; 0 where survival is 0, NaN where the density is infinite."""
        surv = self.survival(age, duration, t)
        mu = self.force(age, duration, t)
        with np.errstate(invalid="ignore", over="ignore"):
            dens = surv * mu
        dens = np.where(surv == 0.0, 0.0, dens)
        return np.where(np.isfinite(dens), dens, np.nan)

    def deferred_death(self, age, duration, deferral, period: float = 1.0) -> np.ndarray:
        """u|ₜq_x = ᵤp_x · ₜq_{x+u}, each factor from its own cumulative hazard."""
        a, d = self._columns(age, duration)
        u = as_float_array(deferral)[None, :]
        with np.errstate(over="ignore", invalid="ignore"):
            h_u = self.span_hazard(a, d, np.zeros_like(u), u)
            h_t = self.span_hazard(a, d, u, u + float(period))
            out = np.exp(-h_u) * -np.expm1(-h_t)
        return np.where(np.isfinite(h_u), out, 0.0)

    def survival_summary(self, age, duration, t):
        """ₜp_x, ₜq_x, μ_{x+t} and f_x(t) from one evaluation of the cumulative hazard."""
        h = self.cumulative_hazard(age, duration, t)
        surv = np.exp(-h)
        death = -np.expm1(-h)
        mu = self.force(age, duration, t)
        with np.errstate(invalid="ignore", over="ignore"):
            dens = surv * mu
        dens[surv == 0.0] = 0.0
        dens[~np.isfinite(dens)] = np.nan
        return surv, death, mu, dens

    def expectation_summary(self, age, duration, term=None):
        """(e̊, e, Var T, Var K), whole life or temporary: from the first two moments, with the
        variances that the difference E[X²] − E[X]² would leave with few digits recomputed
        as integrals of positive terms (:mod:`variance`)."""
        summary = self._moment_summary(age, duration, term)
        if not variance.cancels(summary):
            return summary
        return variance.refine(self, age, duration, term, summary)

    def _moment_summary(self, age, duration, term=None):
        """(e̊, e, Var T, Var K) from the first two moments."""
        complete = self.complete_moments(age, duration, _FIRST_TWO, term)
        curtate = self.curtate_moments(age, duration, _FIRST_TWO, term)
        return _summary(complete[:, 0], complete[:, 1], curtate[:, 0], curtate[:, 1])

    def complete_expectation(self, age, duration, term=None) -> np.ndarray:
        return self.complete_moments(age, duration, [1], term)[:, 0]

    def curtate_expectation(self, age, duration, term=None) -> np.ndarray:
        return self.curtate_moments(age, duration, [1], term)[:, 0]

    def complete_variance(self, age, duration, term=None) -> np.ndarray:
        return self.expectation_summary(age, duration, term)[2]

    def curtate_variance(self, age, duration, term=None) -> np.ndarray:
        return self.expectation_summary(age, duration, term)[3]

    def curtate_quantiles(self, age, duration, probabilities) -> np.ndarray:
        """The least whole k with P(K_x ≤ k) ≥ p, i.e. with ₖ₊₁p_x ≤ 1 − p.

        Starts from the complete quantile t* (K ≤ k ⇔ T < k + 1) and settles the candidate
        on the survival function itself, so that rounding in t* cannot move it by one.
        """
        probs = as_float_array(probabilities)
        t_star = self.complete_quantiles(age, duration, probs)
        k = np.maximum(np.ceil(t_star) - 1.0, 0.0)
        a, d = self._columns(age, duration)
        target = -np.log1p(-probs)[None, :]  # ₖ₊₁p ≤ 1 − p ⇔ H(k + 1) ≥ −log(1 − p)
        with np.errstate(over="ignore", invalid="ignore"):
            for _ in range(2):
                h_next = self.span_hazard(a, d, np.zeros_like(k), k + 1.0)
                k = np.where(h_next < target, k + 1.0, k)
                h_here = self.span_hazard(a, d, np.zeros_like(k), k)
                k = np.where((k >= 1.0) & (h_here >= target), k - 1.0, k)
        return k

    def life_table(self, start_age, end_age: float, radix: float, duration=0.0):
        """A derived life table for one life aged ``start_age`` (duration since selection
        ``duration``), at ages start_age, start_age + 1, …, up to ``end_age``.

        For a status of several lives, ``start_age`` and ``duration`` hold one value per
        member: row k is the status of the members aged start_age + k (durations + k), up to
        the first member's age ``end_age``; ``age`` then has one column per member. The rows
        follow the status from its start: l is radix × ₖp of the status, q, e̊ and e are
        conditional on the status being alive at row k (for a last survivor, some members may
        have died by then), and d = l q, so l_{k+1} = l_k − d_k.
        """
        start = np.asarray(start_age, dtype=float)
        several = start.ndim == 1
        members = int(getattr(self, "n_members", 1))
        if several != (members > 1):
            if several:
                raise DomainError(
                    "start_ages",
                    f"this {self.kind} is of a single life: give start_age, not start_ages",
                )
            raise DomainError(
                "start_age",
                f"this {self.kind} is a status of {members} lives: give start_ages (one per "
                f"member), not start_age",
            )
        first = float(start[0]) if several else float(start)
        end_age = float(end_age)
        if not several:
            if not first >= 0:
                raise DomainError("start_age", f"start_age must be at least 0 (got {fmt(first)})")
            if not first < self.max_age:
                raise DomainError("start_age", self._age_message(first))
        if end_age < first:
            which = "the first member's start age" if several else "start_age"
            raise DomainError(
                "end_age", f"end_age must be at least {which} {fmt(first)} (got {fmt(end_age)})"
            )
        n = int(math.floor(end_age - first + 1e-9)) + 1
        k = np.arange(n, dtype=float)
        if several:
            start_duration = np.broadcast_to(np.asarray(duration, dtype=float), start.shape)
            ages = start[None, :] + k[:, None]
            durations = start_duration[None, :] + k[:, None]
            self._check_table_rows(ages, durations)
            surv = self.survival(ages[:1], durations[:1], np.arange(n + 1, dtype=float))[0]
        else:
            ages = first + k
            if not ages[-1] < self.max_age:
                raise DomainError(
                    "end_age",
                    f"end_age must be below {fmt(round(self.max_age, 6))} for this {self.kind} "
                    f"(got {fmt(end_age)})",
                )
            durations = float(duration) + k
            self.check_lives(np.array([first]), np.array([float(duration)]))
            surv = self.survival([first], [float(duration)], np.arange(n + 1, dtype=float))[0]
        l_col = radix * surv
        if several:
            # the status followed from its start: for a last survivor the status alive at
            # row k may have lost members, so its rows come from the starting status itself
            q_col, complete, curtate = self._status_rows(start, start_duration, surv[:-1])
        else:
            q_col = self.death(ages, durations, [1.0])[:, 0]
            complete = self.complete_expectation(ages, durations)
            curtate = self.curtate_expectation(ages, durations)
        # d = l q, free of the rounding in l_x − l_{x+1}; once l is 0 no one is left to die,
        # so d is 0 even where q (conditional on a survivor) does not exist
        d_col = np.where(l_col[:-1] == 0.0, 0.0, l_col[:-1] * q_col)
        return {
            "age": ages,
            "l": l_col[:-1],
            "d": d_col,
            "q": q_col,
            "complete": complete,
            "curtate": curtate,
        }

    def _status_rows(self, start, duration, surv):
        """q, e̊ and e at rows k = 0, 1, … of a status followed from its start ages: each is
        conditional on the status being alive at k (not on every member being alive), so
        l_{k+1} = l_k (1 − q_k) for every status. With S(t) the status's survival from the
        start: q_k = 1 − S(k+1)/S(k) from the hazard over [k, k+1]; e̊_k = ∫_k^∞ S / S(k)
        from per-year integrals; e_k = Σ_{j≥1} S(k+j) / S(k). All sums are of positive terms."""
        a, d = start[None, :], np.asarray(duration, float)[None, :]
        n = surv.size
        k = np.arange(n, dtype=float)
        q = self.deferred_death(a, d, k, 1.0)[0] / surv
        years = int(math.ceil(min(float(self.horizon(a, d)[0]), MAX_HORIZON)))
        years = max(years, n)
        per_year = self.year_integrals(a, d, years)
        tail = np.cumsum(per_year[::-1])[::-1]
        whole = self.survival(a, d, np.arange(1, years + 1, dtype=float))[0]
        later = np.concatenate([np.cumsum(whole[::-1])[::-1], [0.0]])  # Σ_{i ≥ k+1} S(i)
        return q, tail[:n] / surv, later[:n] / surv

    def year_integrals(self, age, duration, years: int) -> np.ndarray:
        """∫_j^{j+1} ₜp dt for j < years, for one life (or status), by 16-point Gauss–Legendre
        on the panels between consecutive kinks of its survival function (exact to rounding
        on each smooth piece)."""
        phases = np.atleast_1d(np.asarray(self.kink_phases(age, duration), float)[0])
        kinks = (phases[:, None] + np.arange(years + 1)[None, :]).ravel()
        edges = np.unique(np.concatenate([np.arange(years + 1.0), kinks[kinks < years]]))
        lo, width = edges[:-1], np.diff(edges)
        t = (lo[:, None] + width[:, None] * GL_NODES[None, :]).ravel()
        w = (width[:, None] * GL_WEIGHTS[None, :]).ravel()
        with np.errstate(over="ignore", invalid="ignore"):
            h = self.cumulative_hazard(age, duration, t)[0]
        s = np.where(np.isfinite(h), np.exp(-h), 0.0) * w
        per_panel = s.reshape(lo.size, -1).sum(axis=1)
        return np.bincount(np.floor(lo).astype(np.int64), weights=per_panel, minlength=years)[:years]

    def kink_phases(self, age, duration) -> np.ndarray:
        """(N, K): the phases of every kink family of each life (one for a single life)."""
        return self.kink_phase(age, duration)[:, None]

    def _check_table_rows(self, ages, durations) -> None:
        """The rows of a status's life table (ages (n, m)) are lives of the basis: an error in
        row 0 names start_ages or durations, one in a later row names end_age."""
        try:
            self.check_lives(ages[:1], durations[:1])
        except DomainError as exc:
            field = exc.field.replace("lives[0].ages", "start_ages")
            field = field.replace("lives[0].durations", "durations")
            raise DomainError("start_ages" if field == "lives" else field, exc.message) from None
        try:
            self.check_lives(ages, durations)
        except DomainError as exc:
            found = re.match(r"lives\[(\d+)\]", exc.field)
            row = int(found.group(1)) if found else ages.shape[0] - 1
            raise DomainError(
                "end_age",
                f"at row {row}, the members aged {', '.join(fmt(a) for a in ages[row])}: "
                f"{exc.message}; end_age (the first member's age at the last row) must be "
                f"below {fmt(ages[row, 0])}",
            ) from None


_FIRST_TWO = (1, 2)


def _subset(loc: Located, mask) -> Located:
    return Located(loc.row[mask], loc.index[mask], loc.frac[mask])


def _summary(complete, second, curtate, curtate_second):
    """(e̊, e, Var T, Var K) from the first two moments of T and K (arrays)."""
    return (
        complete,
        curtate,
        np.maximum(second - complete * complete, 0.0),
        np.maximum(curtate_second - curtate * curtate, 0.0),
    )


def _lookup_summary_into(values, out) -> None:
    """``_summary`` from a lookup's (e̊, ½E[T²], e, E[K²]) rows, into the rows of ``out``
    (the same operations, so the same bits)."""
    complete, half_second, curtate, curtate_second = values
    out[0] = complete
    out[1] = curtate
    np.multiply(half_second, 2.0, out=out[2])
    out[2] -= complete * complete
    np.maximum(out[2], 0.0, out=out[2])
    np.subtract(curtate_second, curtate * curtate, out=out[3])
    np.maximum(out[3], 0.0, out=out[3])


def _summary_arrays(complete, second, curtate, curtate_second):
    """``_summary`` for one life in plain floats: the same operations, so the same bits."""
    return (
        np.array([complete]),
        np.array([curtate]),
        np.array([max(second - complete * complete, 0.0)]),
        np.array([max(curtate_second - curtate * curtate, 0.0)]),
    )
_ORDER_ARRAYS: dict[tuple, np.ndarray] = {}


def _orders(orders: Sequence[int]) -> np.ndarray:
    """The orders as a (shared, read-only) integer array, checked to lie in 1..MAX_ORDER."""
    key = tuple(orders)
    arr = _ORDER_ARRAYS.get(key)
    if arr is None:
        if not key or not all(int(k) == k and 1 <= k <= MAX_ORDER for k in key):
            raise DomainError("orders", f"orders must be whole numbers from 1 to {MAX_ORDER}")
        arr = np.array(key, dtype=np.int64)
        arr.flags.writeable = False
        if len(_ORDER_ARRAYS) < 512:
            _ORDER_ARRAYS[key] = arr
    return arr


def _term(term) -> int | None:
    if term is None:
        return None
    if int(term) != term or term < 1 or term > MAX_TERM:
        raise DomainError("term", f"term must be a whole number from 1 to {MAX_TERM} (got {term})")
    return int(term)


class YearGridModel(LifetimeModel):
    """A model whose mortality is organised by whole years of age in one or more rows.

    Subclasses set ``row_start`` (whole first age of each row), ``lam`` (R, L+1),
    ``year_moments`` (R, L, N_MOM) and call :meth:`_finish_grid`, and they provide the
    within-year primitives :meth:`_year_hazard`, :meth:`_year_partial` and :meth:`_year_force`.
    Rows are padded to a common length L with years of zero survival (hazard +inf).
    """

    row_start: np.ndarray  # (R,) whole ages
    row_end: np.ndarray  # (R,) the age at which survival in the row reaches 0 (or the grid ends)
    lam: np.ndarray  # (R, L + 1) cumulative hazard at whole ages from the row's first age
    year_moments: np.ndarray  # (R, L, N_MOM)
    tail_moments: np.ndarray  # (R, L + 1, N_MOM)
    curtate_table: np.ndarray  # (R, L + 1, MAX_ORDER + 1)

    # ---- per-year primitives ------------------------------------------------------------

    @abstractmethod
    def _year_hazard(self, row, index, f0, f1) -> np.ndarray:
        """−log(S_j(f1)/S_j(f0)) within the year of whole age j = row_start + index."""

    def _year_span_hazard(self, row, index, f0, dt) -> np.ndarray:
        """−log(S_j(f0 + dt)/S_j(f0)) within one year; override to use dt without rounding."""
        return self._year_hazard(row, index, f0, f0 + dt)

    @abstractmethod
    def _year_partial(self, row, index, f0, length) -> np.ndarray:
        """∫₀^a tⁱ S_j(f0 + t)/S_j(f0) dt for i = 0..N_MOM-1, a = length ≤ 1 − f0: (N, N_MOM)."""

    @abstractmethod
    def _year_force(self, row, index, f) -> np.ndarray:
        """μ at age j + f within the year (right-continuous at whole ages)."""

    @abstractmethod
    def _locate(self, age, duration) -> Located:
        """The row, whole-age index and fraction of each life."""

    def _locate_one(self, age: float, duration: float) -> tuple[int, int, float]:
        """``_locate`` for one life, as plain numbers (the scalar fast path)."""
        loc = self._locate(np.array([age]), np.array([duration]))
        return int(loc.row[0]), int(loc.index[0]), float(loc.frac[0])

    def horizon(self, age, duration):
        age = as_float_array(age)
        duration = np.broadcast_to(as_float_array(duration), age.shape)
        loc = self._locate(age, duration)
        n_years = self.year_moments.shape[1]
        return self.row_start[loc.row] + n_years - age

    def kink_phase(self, age, duration):
        age = as_float_array(age)
        duration = np.broadcast_to(as_float_array(duration), age.shape)
        loc = self._locate(age, duration)
        return 1.0 - loc.frac

    # ---- compile-time ---------------------------------------------------------------------

    def _finish_grid(self) -> None:
        """The tail moments and curtate moments at whole ages, by backward recursion."""
        lam = self.lam
        n_rows, n_years = self.year_moments.shape[:2]
        with np.errstate(invalid="ignore", over="ignore"):
            p = np.exp(-(lam[:, 1:] - lam[:, :-1]))
        p = np.where(np.isfinite(lam[:, :-1]), np.nan_to_num(p, nan=0.0), 0.0)
        self.one_year_survival = p  # (R, L)
        tail = np.zeros((n_rows, n_years + 1, N_MOM))
        curt = np.zeros((n_rows, n_years + 1, MAX_ORDER + 1))
        curt[:, :, 0] = 1.0
        shift_one = BINOM[:N_MOM, :N_MOM]  # (t + 1)^k expansion
        shift_one_k = BINOM[: MAX_ORDER + 1, : MAX_ORDER + 1]
        ym = self.year_moments
        for j in range(n_years - 1, -1, -1):
            nxt = tail[:, j + 1, :] @ shift_one.T
            tail[:, j, :] = ym[:, j, :] + p[:, j, None] * nxt
            curt[:, j, :] = p[:, j, None] * (curt[:, j + 1, :] @ shift_one_k.T)
            curt[:, j, 0] = 1.0
        self.tail_moments = tail
        self.curtate_table = curt
        # (e̊, E[T²], e, E[K²]) at every whole age, one row each, for a one-take gather
        self._whole_columns = np.stack(
            [tail[..., 0], 2.0 * tail[..., 1], curt[..., 1], curt[..., 2]]
        ).reshape(4, -1)
        self._exact_ages = None
        self._lookup = None
        self._direct_exact_lives = 0

    def _expansions(self, lives: int) -> expansion.Expansion | None:
        """The per-year expansions if they are built, or worth building now that the basis
        has valued ``lives`` more lives at exact ages (EXPANSION_AFTER_LIVES); None while
        the direct computation is cheaper."""
        if self._exact_ages is None:
            self._direct_exact_lives += lives
            cost = self._expansion_cost()
            if cost > REQUEST_EXPANSION_BUDGET or self._direct_exact_lives < max(
                EXPANSION_AFTER_LIVES, EXPANSION_AFTER_LIVES_PER_YEAR * cost
            ):
                return None
            self._build_expansions(REQUEST_EXPANSION_BUDGET)
        return self._exact_ages

    @property
    def exact_ages(self) -> expansion.Expansion:
        """The per-year expansions, built on first use within EXPANSION_BUDGET (as a stored
        basis is at load)."""
        if self._exact_ages is None:
            self._build_expansions(EXPANSION_BUDGET)
        return self._exact_ages

    def _build_expansions(self, budget: int) -> None:
        """Expand every year a life can be in; a basis whose years would take more than
        ``budget`` (panel-)years to expand keeps the direct computation in all of them."""
        valid = self._valuable_years()
        if self._expansion_cost(valid) > budget:
            valid = np.zeros_like(valid)
        self._exact_ages = expansion.build(self._exact_age_functions, valid)
        covered = self._exact_ages.cell_of >= 0
        lookup = expansion.build_lookup(
            lambda cells, f: self._exact_age_functions(cells, f, 2, 2), valid, covered
        )
        self._lookup = lookup if lookup.scale.size else None

    def _expansion_cost(self, valid: np.ndarray | None = None) -> int:
        """The (panel-)years expanding this basis takes (kept once counted)."""
        if getattr(self, "_cost_of_expanding", None) is None:
            valid = self._valuable_years() if valid is None else valid
            panels = getattr(self, "year_panels", None)
            self._cost_of_expanding = int(valid.sum()) if panels is None else int(
                np.sum(np.where(valid[0], panels[: valid.shape[1]], 0))
            )
        return self._cost_of_expanding

    def _same_future(self, row, index):
        """The (row, year) cells whose future is that of (row, year): themselves here (a select
        table maps a select row past its select period to the ultimate row)."""
        return row, index

    def _valuable_years(self) -> np.ndarray:
        """(R, L): the years of age in which a life of the basis can be: inside its row and
        below the row's limit."""
        n_rows, n_years = self.year_moments.shape[:2]
        j = np.arange(n_years)[None, :]
        length = getattr(self, "row_length", np.full(n_rows, n_years))
        inside = (j < np.asarray(length)[:, None]) & (
            self.row_start[:, None] + j < np.asarray(self.row_limit)[:, None]
        )
        # a year through which survival falls below e^-EXPAND_HAZARD (the last ages of a law)
        # keeps the direct computation: its functions are too steep for a polynomial
        with np.errstate(invalid="ignore"):
            steep = ~(np.diff(self.lam, axis=1) <= EXPAND_HAZARD)
        return inside & ~(steep & np.isfinite(self.lam[:, 1:]))

    def _exact_age_functions(self, cells: np.ndarray, fractions: np.ndarray, n_mom: int = N_MOM,
                             n_orders: int = MAX_ORDER) -> np.ndarray:
        """The direct values, for lives aged j + f in the given cells (flat indices into the
        (R, L) grid) at each fraction f: (cells, fractions, 1 + n_mom + n_orders) holding

        * ``s`` = S(j + f)/S(j), the survival through the year to the life's age;
        * ``s · ∫₀^∞ tⁱ ₜp dt`` for i < n_mom: the first, partial, year in closed form (or the
          law's panels), then the tail moments at j + 1 shifted by 1 − f;
        * ``s · E[K^k]`` for k = 1..n_orders, by the backward recursion over the years of the
          row at the same fraction: K at j + f is 1 + K at j + 1 + f, given survival a year.

        Every term is positive; the scaling by s keeps the normalisation's pole (UDD with q
        near 1) out of the functions that are expanded.
        """
        n_rows, n_years = self.year_moments.shape[:2]
        f = np.asarray(fractions, float)
        row_of_cell, year_of_cell = np.divmod(cells, n_years)
        rows, where = np.unique(row_of_cell, return_inverse=True)
        rr, jj, ff = np.broadcast_arrays(
            rows[:, None, None], np.arange(n_years)[None, :, None], f[None, None, :]
        )
        with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
            s = np.nan_to_num(np.exp(-self._year_hazard(rr, jj, np.zeros_like(ff), ff)), nan=0.0)
            s_out = np.exp(-self._year_hazard(rr, jj, ff, np.ones_like(ff)))
        s_out = np.nan_to_num(s_out, nan=0.0)
        # curtate: C(j, f) = S(j+1+f)/S(j+f) · (C(j+1, f) shifted by one year), C = 1 at order 0
        s_next_year = np.concatenate([s[:, 1:], np.zeros_like(s[:, :1])], axis=1)
        p_year = s_out * s_next_year  # (rows, L, M)
        curt = np.zeros((rows.size, f.size, n_orders + 1))
        curt[..., 0] = 1.0
        shift_one = BINOM[: n_orders + 1, : n_orders + 1].T
        kept = np.empty((rows.size, n_years, f.size, n_orders))
        for j in range(n_years - 1, int(year_of_cell.min(initial=0)) - 1, -1):
            curt = p_year[:, j, :, None] * (curt @ shift_one)
            curt[..., 0] = 1.0
            kept[:, j] = curt[..., 1:]
        # complete: the partial first year, then the tail from the next whole age
        cr, cj = np.broadcast_arrays(row_of_cell[:, None], year_of_cell[:, None])
        cr = np.broadcast_to(cr, (cells.size, f.size))
        cj = np.broadcast_to(cj, (cells.size, f.size))
        cf = np.broadcast_to(f[None, :], cr.shape)
        partial = self._year_partial(cr.ravel(), cj.ravel(), cf.ravel(), 1.0 - cf.ravel())
        partial = partial.reshape(cr.shape + (N_MOM,))[..., :n_mom]
        s_cells = s[where, year_of_cell]  # (C, M)
        out_cells = s_out[where, year_of_cell]
        tail = shift_moments(
            np.broadcast_to(self.tail_moments[row_of_cell, year_of_cell + 1][:, None, :n_mom],
                            cr.shape + (n_mom,)),
            1.0 - cf,
        )
        scaled_tail = s_cells[..., None] * (partial + out_cells[..., None] * tail)
        scaled_curtate = s_cells[..., None] * kept[where, year_of_cell]
        return np.concatenate([s_cells[..., None], scaled_tail, scaled_curtate], axis=-1)

    # ---- the hot paths ----------------------------------------------------------------------

    def _moment_summary(self, age, duration, term=None):
        """Whole life: four lookups in the per-basis tables at whole ages; at exact ages the
        lookup expansion (:class:`expansion.Lookup`), else the full expansions, else the
        direct computation. One life takes a plain-float path with the same operations as
        the batch path, so the same bits; a life's route depends only on the life."""
        if term is not None:
            return super()._moment_summary(age, duration, term)
        age = as_float_array(age)
        duration = as_float_array(duration)
        if duration.shape != age.shape:
            duration = np.broadcast_to(duration, age.shape)
        if age.size == 1:
            return self._summary_of_one(age, duration)
        loc = self._locate(age, duration)
        exact = loc.frac > 0.0
        if not np.any(exact):
            return self._whole_summary(loc.row, loc.index)
        summary = self._direct_until_built(age, duration)
        if summary is not None:
            return summary
        lookup = self._lookup
        if lookup is not None:
            summary, fast = lookup.evaluate_lives(loc.row, loc.index, loc.frac,
                                                  _lookup_summary_into, 4)
            fast &= exact
            if np.all(fast):
                return tuple(summary)
        else:
            fast = np.zeros_like(exact)
        out = tuple(np.empty(age.size) for _ in range(4))
        for lives, part in (
            (~exact, lambda w: self._whole_summary(loc.row[w], loc.index[w])),
            (fast, lambda w: summary[:, w]),
            (exact & ~fast, lambda w: super(YearGridModel, self)._moment_summary(
                age[w], duration[w])),
        ):
            if np.any(lives):
                for column, values in zip(out, part(lives)):
                    column[lives] = values
        return out

    def _direct_until_built(self, age, duration):
        """The summary of lives on a basis whose expansions are not built: direct (counting
        the lives toward building them); None when they are built, or these lives made it
        build them, to be answered as it now answers every life."""
        if self._exact_ages is not None:
            return None
        summary = super()._moment_summary(age, duration)
        return summary if self._exact_ages is None else None

    def _summary_of_one(self, age, duration):
        """``_moment_summary`` of one life in plain floats (``age``, ``duration``: shape (1,))."""
        r, j, frac = self._locate_one(float(age[0]), float(duration[0]))
        if frac == 0.0:
            e0, m1 = self.tail_moments[r, j, :2].tolist()
            k1, k2 = self.curtate_table[r, j, 1:3].tolist()
            return _summary_arrays(e0, 2.0 * m1, k1, k2)
        summary = self._direct_until_built(age, duration)
        if summary is not None:
            return summary
        lookup = self._lookup
        if lookup is not None:
            seg, u = lookup.segment_one(r, j, frac)
            if seg >= 0:
                e0, m1, k1, k2 = lookup.evaluate_one(seg, u)
                return _summary_arrays(e0, 2.0 * m1, k1, k2)
        expanded = self._exact_ages
        cell = expanded.cell_of_one(r, j)
        if cell >= 0:
            s, u0, u1, v1, v2 = expanded.evaluate_one(cell, frac, _SUMMARY)
            return _summary_arrays(u0 / s, 2.0 * (u1 / s), v1 / s, v2 / s)
        return super()._moment_summary(age, duration)

    def _whole_summary(self, row, index):
        at = row * self.tail_moments.shape[1]
        at += index
        return _summary(*self._whole_columns.take(at, axis=1))

    def span_hazard(self, age, duration, t0, t1):
        age, duration, t0, t1 = np.broadcast_arrays(
            np.asarray(age, float), np.asarray(duration, float), np.asarray(t0, float),
            np.asarray(t1, float),
        )
        loc0 = self._locate_at(age, duration, t0)
        loc1 = self._locate_at(age, duration, t1)
        n_years = self.year_moments.shape[1]
        r = loc0.row
        j0, f0, j1, f1 = loc0.index, loc0.frac, loc1.index, loc1.frac
        beyond = j1 >= n_years
        j0c = np.minimum(j0, n_years - 1)
        j1c = np.minimum(j1, n_years - 1)
        with np.errstate(invalid="ignore", over="ignore"):
            # within one year, the span is passed as t1 − t0 so that a tiny span keeps its digits
            same = np.where(
                j1 == j0,
                self._year_span_hazard(r, j0c, f0, t1 - t0),
                self._year_hazard(r, j0c, f0, np.ones_like(f0)),
            )
            first_end = np.minimum(j0 + 1, n_years)
            middle = np.where(
                np.minimum(j1, n_years) > first_end,
                self.lam[r, np.minimum(j1, n_years)] - self.lam[r, first_end],
                0.0,
            )  # no whole years between: 0, not inf − inf at a closing year
            # a row closed before the first whole age (lam infinite at both ends): no one
            # survives to t1, which is past that age, so the hazard is infinite, not inf − inf
            middle = np.where(np.isnan(middle), np.inf, middle)
            last = self._year_hazard(r, j1c, np.zeros_like(f1), f1)
            out = np.where(j1 == j0, same, same + np.where(j1 > j0 + 0, middle + last, 0.0))
        out = np.where(beyond & ~((j1 == n_years) & (f1 == 0.0)), np.inf, out)
        out = np.where(t1 <= t0, 0.0, out)
        return out

    def _locate_at(self, age, duration, t) -> Located:
        """Lives aged age + t (duration + t): the row is that of the life at t = 0."""
        base = self._locate(age.ravel(), duration.ravel())
        start = self.row_start[base.row]
        # every point past the grid is alike (no survival there); capping keeps a duration
        # near 1e308 from overflowing the whole-age index
        y = np.minimum(age.ravel() + t.ravel() - start, self.year_moments.shape[1] + 1.0)
        j = np.floor(y)
        f = y - j
        return Located(base.row.reshape(age.shape), j.astype(np.int64).reshape(age.shape),
                       f.reshape(age.shape))

    def force(self, age, duration, t):
        a, d = self._columns(age, duration)
        t = as_float_array(t)[None, :]
        a, d, t = np.broadcast_arrays(a, d, t)
        loc = self._locate_at(a, d, t)
        n_years = self.year_moments.shape[1]
        inside = loc.index < n_years
        with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
            mu = self._year_force(loc.row, np.minimum(loc.index, n_years - 1), loc.frac)
            h = self.span_hazard(a, d, np.zeros_like(t), t)
        mu = np.where(inside & np.isfinite(h), mu, np.nan)
        return np.where(np.isfinite(mu), mu, np.nan)

    def complete_moments(self, age, duration, orders, term=None):
        orders = _orders(orders)
        term = _term(term)
        age = as_float_array(age)
        duration = np.broadcast_to(as_float_array(duration), age.shape)
        loc = self._locate(age, duration)
        n_mom = int(orders.max())
        if term is None:
            ints = self._whole_life_integrals(loc, n_mom)
        else:
            ints = self._temporary_integrals(loc, n_mom, term)
        # E[T^k] = k ∫ t^(k-1) ₜp dt
        return orders[None, :] * ints[:, orders - 1]

    def _whole_life_integrals(self, loc: Located, n_mom: int) -> np.ndarray:
        """∫₀^∞ tⁱ ₜp_x dt for i < n_mom: the tables at whole ages, the expansions at exact
        ages, the direct computation in a year that has no expansion."""
        return self._by_age_kind(
            loc,
            lambda r, j: self.tail_moments[r, j, :n_mom],
            list(range(EXP_TAIL, EXP_TAIL + n_mom)),
            lambda rest: self._whole_life_direct(_subset(loc, rest), n_mom),
        )

    def _by_age_kind(self, loc: Located, at_whole, expanded, direct) -> np.ndarray:
        """Each life by the cheapest exact route: ``at_whole(row, index)`` at whole ages, the
        quantities ``expanded`` of the per-year expansions divided by the expanded survival
        at exact ages, ``direct(mask of those lives)`` elsewhere. A life's route depends only on the
        life, so its answer does not depend on the other lives of the batch."""
        r, j, f = loc.row, loc.index, loc.frac
        whole = f == 0.0
        if np.all(whole):
            return at_whole(r, j)
        expansions = self._expansions(int(np.count_nonzero(~whole)))
        if expansions is None:
            fast = np.zeros_like(whole)
        else:
            cell = expansions.cells(r, j)
            fast = ~whole & (cell >= 0)
            if np.all(fast):
                v = expansions.evaluate(cell, f, [EXP_S] + expanded)
                return v[:, 1:] / v[:, :1]
        out = np.empty((r.size, len(expanded)))
        if np.any(whole):
            out[whole] = at_whole(r[whole], j[whole])
        if np.any(fast):
            v = expansions.evaluate(cell[fast], f[fast], [EXP_S] + expanded)
            out[fast] = v[:, 1:] / v[:, :1]
        rest = ~whole & ~fast
        if np.any(rest):
            out[rest] = direct(rest)
        return out

    def _whole_life_direct(self, loc: Located, n_mom: int) -> np.ndarray:
        """∫₀^∞ tⁱ ₜp_x dt for lives at exact ages: the partial first year, then the tail."""
        r, j, f = loc.row, loc.index, loc.frac
        partial = self._year_partial(r, j, f, 1.0 - f)[:, :n_mom]
        with np.errstate(over="ignore", invalid="ignore"):
            s_next = np.exp(-self._year_hazard(r, j, f, np.ones_like(f)))
        s_next = np.nan_to_num(s_next, nan=0.0)
        tail = shift_moments(self.tail_moments[r, j + 1, :n_mom], 1.0 - f)
        return partial + s_next[:, None] * tail

    def _temporary_integrals(self, loc: Located, n_mom: int, term: int) -> np.ndarray:
        """∫₀ⁿ tⁱ ₜp_x dt for i < n_mom, as a sum of positive per-year pieces."""
        r, j, f = loc.row, loc.index, loc.frac
        n_lives = r.shape[0]
        n_years = self.year_moments.shape[1]
        out = np.zeros((n_lives, n_mom))
        # first (possibly partial) year: [0, 1 − f]
        first_len = 1.0 - f
        jc = np.minimum(j, n_years - 1)
        out += self._year_partial(r, jc, f, np.minimum(first_len, term))[:, :n_mom]
        if term <= 1 and np.all(first_len >= term):
            return out
        with np.errstate(over="ignore", invalid="ignore"):
            h_first = self._year_hazard(r, jc, f, np.ones_like(f))
        log_s = -h_first  # log survival to the start of the next whole year
        step = _TERM_BLOCK  # fixed, so that a life's sum does not depend on the batch
        # years past the end of the grid add nothing (no survival there): stop at the grid
        m_all = np.arange(1, max(min(term, n_years - int(j.min(initial=0))), 0) + 1)
        for start in range(0, m_all.size, step):
            m = m_all[start : start + step]  # whole years j + m, starting at t = first_len + m - 1
            jm = j[:, None] + m[None, :]
            inside = jm < n_years
            jmc = np.minimum(jm, n_years - 1)
            t_start = first_len[:, None] + (m[None, :] - 1.0)
            length = np.clip(term - t_start, 0.0, 1.0)
            with np.errstate(invalid="ignore", over="ignore"):
                log_s_m = log_s[:, None] - (
                    self.lam[r[:, None], jmc] - self.lam[r[:, None], np.minimum(j + 1, n_years)[:, None]]
                )
            surv = np.where(inside & np.isfinite(log_s_m), np.exp(log_s_m), 0.0)
            full = length >= 1.0
            pieces = np.where(full[..., None], self.year_moments[r[:, None], jmc], 0.0)
            part_needed = inside & (length > 0.0) & ~full
            if np.any(part_needed):
                idx = np.nonzero(part_needed)
                pieces[idx] = self._year_partial(
                    r[idx[0]], jmc[idx], np.zeros(idx[0].size), length[idx]
                )
            out += _shifted_sum(surv, t_start, pieces[..., :n_mom])
            if np.all(t_start[:, -1] + 1.0 >= term):
                break
        return out

    def curtate_moments(self, age, duration, orders, term=None):
        orders = _orders(orders)
        term = _term(term)
        age = as_float_array(age)
        duration = np.broadcast_to(as_float_array(duration), age.shape)
        loc = self._locate(age, duration)
        if term is None:
            return self._by_age_kind(
                loc,
                lambda r, j: self.curtate_table[r, j][:, orders],
                [EXP_CURTATE + int(k) for k in orders],
                lambda rest: self._curtate_direct(
                    age[rest], duration[rest], _subset(loc, rest), orders, None
                ),
            )
        return self._curtate_direct(age, duration, loc, orders, term)

    def _curtate_direct(self, age, duration, loc, orders, term):
        """E[min(K, n)^k] = Σ_{m=1}^{n} (m^k − (m−1)^k) ₘp_x, a sum of positive terms.

        Every life sums the same terms in the same order (m = 1, 2, … to the end of the grid,
        zeros past its own horizon), in blocks that do not depend on the batch, so its answer
        does not depend on the other lives of the request."""
        n_years = self.year_moments.shape[1]
        n_terms = n_years + 1 if term is None else min(n_years + 1, term)
        out = np.zeros((age.size, orders.size))
        if n_terms <= 0 or age.size == 0:
            return out
        m_all = np.arange(1, n_terms + 1, dtype=float)
        weights = m_all[:, None] ** orders - (m_all[:, None] - 1.0) ** orders  # (M, K)
        lives = max(1, CHUNK_ELEMENTS // _TERM_BLOCK)
        for lo in range(0, age.size, lives):
            a = age[lo : lo + lives, None]
            d = duration[lo : lo + lives, None]
            acc = out[lo : lo + lives]
            for start in range(0, n_terms, _TERM_BLOCK):
                m = m_all[None, start : start + _TERM_BLOCK]
                with np.errstate(over="ignore", invalid="ignore"):
                    h = self.span_hazard(a, d, np.zeros_like(m), m)
                surv = np.where(np.isfinite(h), np.exp(-h), 0.0)
                if not np.any(surv > 0.0):
                    break
                for i in range(m.shape[1]):
                    acc += surv[:, i, None] * weights[start + i]
        return out

    def complete_quantiles(self, age, duration, probabilities):
        """Locates the year in which H crosses −log(1 − p), then solves within the year."""
        probs = as_float_array(probabilities)
        age = as_float_array(age)
        duration = np.broadcast_to(as_float_array(duration), age.shape)
        loc = self._locate(age, duration)
        r, j, f = loc.row, loc.index, loc.frac
        n_years = self.year_moments.shape[1]
        target = -np.log1p(-probs)[None, :]  # (1, P)
        with np.errstate(over="ignore", invalid="ignore"):
            h_first = self._year_hazard(r, j, f, np.ones_like(f))  # to the next whole age
        # cumulative hazard from the life to each whole age j+1, j+2, ...
        out = np.empty((age.size, probs.size))
        step = max(1, CHUNK_ELEMENTS // max((n_years + 1) * probs.size, 1))
        for lo in range(0, age.size, step):
            sl = slice(lo, lo + step)
            out[sl] = self._solve_chunk(r[sl], j[sl], f[sl], h_first[sl], target)
        return out

    def _solve_chunk(self, r, j, f, h_first, target):
        """Quantiles for a block of lives: target hazards (1, P) → t (n, P)."""
        n_years = self.year_moments.shape[1]
        lam_rows = self.lam[r]  # (n, L+1)
        base = lam_rows[np.arange(r.size), np.minimum(j + 1, n_years)]
        with np.errstate(invalid="ignore"):
            rel = lam_rows - base[:, None] + h_first[:, None]  # hazard from the life to age i
        idx = np.arange(n_years + 1)[None, :]
        rel = np.where(idx <= j[:, None], -np.inf, rel)
        rel = np.where(np.isnan(rel), np.inf, rel)
        # the first whole-age index at which the hazard reaches the target; the year is one less
        first = np.sum(rel[:, None, :] < target[:, :, None], axis=2)
        in_first = target <= h_first[:, None]
        year = np.where(in_first, j[:, None], np.clip(first - 1, (j + 1)[:, None], n_years - 1))
        start = np.where(in_first, f[:, None], 0.0)
        h_start = np.where(in_first, 0.0, np.take_along_axis(rel, year, axis=1))
        rows = np.broadcast_to(r[:, None], year.shape)
        s = self._invert_year(rows.ravel(), year.ravel(), start.ravel(),
                              np.broadcast_to(target - h_start, year.shape).ravel())
        s = s.reshape(year.shape)
        return (year - j[:, None]) + s - f[:, None]

    def _invert_year(self, row, index, f0, h):
        """The fraction s ≥ f0 in the year with −log(S(s)/S(f0)) = h (vectorised bisection,
        refined by the subclass when it has a closed form)."""
        lo = f0.copy()
        hi = np.ones_like(f0)
        for _ in range(60):
            mid = 0.5 * (lo + hi)
            with np.errstate(over="ignore", invalid="ignore"):
                hm = self._year_hazard(row, index, f0, mid)
            go_up = hm < h
            lo = np.where(go_up, mid, lo)
            hi = np.where(go_up, hi, mid)
        return 0.5 * (lo + hi)


#: a selection age within this of a whole age is that whole age (rounding in age − duration)
WHOLE_TOLERANCE = 1e-9


def place_on_select_rows(age, duration, rule: str):
    """(age, duration) with a whole selection age age − duration, by ``rule``."""
    if rule not in SELECTION_AGE_RULES:
        raise DomainError(
            "selection_age_rule",
            f"selection_age_rule must be one of {', '.join(SELECTION_AGE_RULES)} (got {rule!r})",
        )
    age = np.asarray(age, float)
    duration = np.broadcast_to(np.asarray(duration, float), age.shape)
    with np.errstate(invalid="ignore"):
        sel = age - duration
        nearest = np.rint(sel)
        whole = np.abs(sel - nearest) <= WHOLE_TOLERANCE
        if np.all(whole | ~np.isfinite(sel)):
            return age, duration
        if rule == "last-birthday":
            chosen = np.where(whole, nearest, np.floor(sel))
            return age, np.where(whole, duration, age - chosen)
        chosen = np.where(whole, nearest, np.floor(sel + 0.5))
        return np.where(whole, age, chosen + duration), duration


def check_horizon(n_years: int, kind: str) -> None:
    if n_years > MAX_HORIZON:
        raise ComputationLimitError(
            "",
            f"this {kind} keeps lives alive for more than {MAX_HORIZON:,} years, beyond what "
            f"the service computes; check its parameters",
        )


# variance.py reads this module's quadrature constants, so it is imported once they exist
# (here, not inside expectation_summary, where the import statement cost a microsecond a call)
from . import variance  # noqa: E402

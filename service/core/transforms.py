"""Basis transforms of one life: underwriting ratings and mortality improvement.

A rating (:func:`rated`) applies, in this order:

1. ``age_shift`` s: the life aged x is valued at age x + s (a set-back when s < 0);
2. ``q_multiplier`` m: q' = min(1, m q) at each whole age of the table (tables only);
3. ``force_multiplier`` m: μ' = m μ, so ₜp' = (ₜp)^m;
4. ``extra_q`` e: q' = min(1, q + e) at each whole age of the table (tables only), for the
   first ``extra_q_years`` n policy years when given (durations 0 to n after the life's
   valuation age x + s, whatever the fraction of x + s);
5. ``extra_force`` δ: μ' = μ + δ, for the first ``extra_force_years`` n policy years when
   given (durations 0 to n).

Both time-limited extras count years from the life's valuation point, the way underwriters
state them: an extra of 3 per mille for 5 years at age 29.9 covers durations 0 to 5.

Rates stay rates: a q multiplier or an extra q for all years builds a new table with the
same fractional-age assumption (a rate that reaches 1 closes its row there; the closing 1
stays 1). The force adjustments and the time-limited extras are :class:`GenericModel`s.
An age shift is exact delegation (every quantity of the base at age x + s).

Improvement (:func:`improved`) is generational: one table row per whole valuation age (a
cohort), row j holding q_{j+k}(base year) × Π_{y = base_year+1}^{valuation_year+k} (1 − r(j+k, y)).
A select table has one such row per selection age and whole valuation age within the select
period (the select rates, then the ultimate ones), and one per whole age of the ultimate rates.
"""

from __future__ import annotations

import copy
import math

import numpy as np

from .errors import ComputationLimitError, DomainError, fmt
from .generic import NEGLIGIBLE_HAZARD, GenericModel, check_single_life, negligible_horizon
from .lifetime import MAX_HORIZON, LifetimeModel, as_float_array
from .tables import SelectTable, TableSet

#: the order in which the parts of a rating are applied (echoed by GET /v1/laws)
RATING_ORDER = (
    "age_shift: the life aged x is valued at age x + s",
    "q_multiplier: q = min(1, m q) at each whole age of the table",
    "force_multiplier: μ = m μ",
    "extra_q: q = min(1, q + e) at each whole age of the table, for the first extra_q_years "
    "policy years (durations 0 to n after the life's age)",
    "extra_force: μ = μ + δ for the first extra_force_years policy years (durations 0 to n "
    "after the life's age)",
)

#: the longest table (rates) that can be improved: one row per cohort makes L² values
MAX_IMPROVED_RATES = 300
#: the most rates an improved table keeps in all (cohorts × the longest cohort's rates)
MAX_IMPROVED_VALUES = MAX_IMPROVED_RATES * MAX_IMPROVED_RATES


# ---- tables with modified rates -----------------------------------------------------------


def retabled(base: TableSet, q: np.ndarray) -> TableSet:
    """A copy of ``base`` (same rows, assumption and way of choosing rows) with rates ``q``
    (R, L); each row closes at its first rate of 1."""
    new = copy.copy(base)
    q = np.array(q, dtype=float)
    n_rows, length = q.shape
    idx = np.arange(length)[None, :]
    inside = idx < base.row_length[:, None]
    closed = (q >= 1.0) & inside
    row_length = np.where(closed.any(axis=1), np.argmax(closed, axis=1) + 1, base.row_length)
    q = np.where(idx >= row_length[:, None] - 1, 1.0, np.minimum(q, 1.0))
    length = int(row_length.max())  # no padding beyond the longest row, as a new table
    new._set_rates(q[:, :length], row_length)
    new.limiting_age = float(np.max(new.row_limit))
    new.max_age = new.limiting_age
    return new


def _table_of(model: LifetimeModel, field: str, suggestion: str) -> TableSet:
    if isinstance(model, TableSet):
        return model
    raise DomainError(
        field,
        f"{field} applies to the rates q of a table at whole ages, and this base is a "
        f"{model.kind}, not a table; {suggestion}",
    )


# ---- an age shift: exact delegation --------------------------------------------------------


class Shifted(LifetimeModel):
    """The base's lifetime of a life aged x + s, for a life aged x."""

    def __init__(self, base: LifetimeModel, shift: float):
        self.base = base
        self.shift = float(shift)
        self.kind = base.kind
        self.limiting_age = base.limiting_age - self.shift
        self.max_age = base.max_age - self.shift

    def _a(self, age):
        return np.asarray(age, float) + self.shift

    def check_lives(self, age, duration) -> None:
        age = as_float_array(age)
        valued = age + self.shift
        bad = np.flatnonzero(~(age >= 0))
        if bad.size:
            i = int(bad[0])
            raise DomainError(f"lives[{i}].age", f"age must be at least 0 (got {fmt(age[i])})")
        bad = np.flatnonzero(~(valued >= 0))
        if bad.size:
            i = int(bad[0])
            raise DomainError(
                f"lives[{i}].age",
                f"with age_shift {fmt(self.shift)} the life is valued at age "
                f"{fmt(valued[i])}, which must be at least 0 (got age {fmt(age[i])})",
            )
        try:
            self.base.check_lives(valued, duration)
        except DomainError as exc:
            raise DomainError(
                exc.field,
                f"{exc.message}; with age_shift {fmt(self.shift)} a life aged x is valued at "
                f"age x + {fmt(self.shift)}",
            ) from None

    def place_lives(self, age, duration, rule="last-birthday"):
        valued, duration = self.base.place_lives(self._a(age), duration, rule)
        return np.asarray(valued, float) - self.shift, duration

    def span_hazard(self, age, duration, t0, t1):
        return self.base.span_hazard(self._a(age), duration, t0, t1)

    def force(self, age, duration, t):
        return self.base.force(self._a(age), duration, t)

    def cumulative_hazard(self, age, duration, t):
        return self.base.cumulative_hazard(self._a(age), duration, t)

    def deferred_death(self, age, duration, deferral, period=1.0):
        return self.base.deferred_death(self._a(age), duration, deferral, period)

    def complete_moments(self, age, duration, orders, term=None):
        return self.base.complete_moments(self._a(age), duration, orders, term)

    def curtate_moments(self, age, duration, orders, term=None):
        return self.base.curtate_moments(self._a(age), duration, orders, term)

    def complete_quantiles(self, age, duration, probabilities):
        return self.base.complete_quantiles(self._a(age), duration, probabilities)

    def curtate_quantiles(self, age, duration, probabilities):
        return self.base.curtate_quantiles(self._a(age), duration, probabilities)

    def horizon(self, age, duration):
        return self.base.horizon(self._a(age), duration)

    def kink_phase(self, age, duration):
        return self.base.kink_phase(self._a(age), duration)


# ---- force adjustments ---------------------------------------------------------------------


def _sample_force_min(base: LifetimeModel, multiplier: float) -> tuple[float, float]:
    """The least m μ over the ages the base values (16 points a year, and just before each
    whole age), with the age where it is reached."""
    start = float(getattr(base, "row_start", np.zeros(1)).min()) if hasattr(base, "row_start") else 0.0
    top = base.max_age if math.isfinite(base.max_age) else start + 200.0
    top = min(top, start + MAX_HORIZON)
    grid = np.arange(start, top, 1.0 / 16.0)
    grid = np.concatenate([grid, np.floor(grid) + 1.0 - 1e-9])
    grid = grid[grid < top]
    if grid.size == 0:
        return math.inf, start
    with np.errstate(all="ignore"):
        mu = base.force(grid, np.zeros_like(grid), [0.0])[:, 0]
    mu = np.where(np.isfinite(mu), mu, np.inf)
    k = int(np.argmin(mu))
    return float(multiplier * mu[k]), float(grid[k])


class ForceAdjusted(GenericModel):
    """μ' = m μ + δ: H' = m H + δ t (a base's limiting age is kept even when m = 0)."""

    def __init__(self, base: LifetimeModel, multiplier: float = 1.0, extra: float = 0.0,
                 field: str = "extra_force"):
        self.base = base
        self.m = float(multiplier)
        self.delta = float(extra)
        self.kind = base.kind
        self.limiting_age = base.limiting_age
        self.max_age = base.max_age
        if self.m == 0.0 and self.delta == 0.0:
            raise DomainError(
                "force_multiplier",
                "a force multiplier of 0 with no extra force leaves no mortality at all, so "
                "no lifetime distribution exists; use a multiplier above 0",
            )
        if self.delta < 0.0:
            low, where = _sample_force_min(base, self.m)
            if low + self.delta < 0.0:
                raise DomainError(
                    field,
                    f"the extra force {fmt(self.delta)} would make the force of mortality "
                    f"negative: the rated force before it is {fmt(low)} at age {fmt(where)}; "
                    f"extra_force must be at least {fmt(-low)} here",
                )
        if math.isfinite(base.max_age) and base.max_age < base.limiting_age and self.m < 1.0:
            self.max_age = self._oldest_age()

    def _oldest_age(self) -> float:
        """Laws keep a grid of whole ages: the oldest age from which the adjusted survival to
        the end of the base's grid is still negligible."""
        # a search on 63 ages at once, 10 times: the bracket narrows 64-fold a round, as far
        # as 60 halvings would, in vectorised calls (a nested rating's horizon is itself a
        # search, so scalar bisection costs grow with the nesting)
        lo, hi = 0.0, float(self.base.max_age)
        steps = np.arange(1, 64, dtype=float) / 64.0
        for _ in range(10):
            ages = lo + (hi - lo) * steps
            h_end = self.base.horizon(ages, np.zeros_like(ages)) + 1.0
            with np.errstate(all="ignore"):
                h = self.span_hazard(ages[:, None], np.zeros((ages.size, 1)),
                                     np.zeros((ages.size, 1)), h_end[:, None])[:, 0]
            negligible = (h >= NEGLIGIBLE_HAZARD) | ~np.isfinite(h)
            below = np.flatnonzero(negligible)
            above = np.flatnonzero(~negligible)
            new_lo = float(ages[below[-1]]) if below.size else lo
            new_hi = float(ages[above[0]]) if above.size else hi
            if new_hi <= new_lo or (new_lo, new_hi) == (lo, hi):
                lo = new_lo
                break
            lo, hi = new_lo, new_hi
        if lo <= 0.0:
            raise ComputationLimitError(
                "force_multiplier",
                f"with force_multiplier {fmt(self.m)} this {self.base.kind} keeps lives alive "
                f"beyond the ages the service computes for it; use a larger multiplier",
            )
        return lo

    def place_lives(self, age, duration, rule="last-birthday"):
        return self.base.place_lives(age, duration, rule)

    def check_lives(self, age, duration) -> None:
        self.base.check_lives(age, duration)
        if self.max_age < self.base.max_age:
            age = as_float_array(age)
            bad = np.flatnonzero(~(age < self.max_age))
            if bad.size:
                i = int(bad[0])
                raise DomainError(f"lives[{i}].age", self._age_message(age[i]))

    def span_hazard(self, age, duration, t0, t1):
        with np.errstate(over="ignore", invalid="ignore"):
            h = self.base.span_hazard(age, duration, t0, t1)
            t0b, t1b = np.broadcast_arrays(np.asarray(t0, float), np.asarray(t1, float))
            out = self.m * h + self.delta * np.maximum(t1b - t0b, 0.0)
        return np.where(np.isinf(h), np.inf, out)

    def force(self, age, duration, t):
        return self.m * self.base.force(age, duration, t) + self.delta

    def kink_phase(self, age, duration):
        return self.base.kink_phase(age, duration)

    def horizon(self, age, duration):
        age, duration = self._lives(age, duration)
        guess = self.base.horizon(age, duration)
        if self.m >= 1.0 and self.delta >= 0.0:
            return guess
        a, d = self._columns(age, duration)
        return negligible_horizon(self, a, d, guess)


# ---- the first n years under one model, then another ---------------------------------------


def _point_force(model: LifetimeModel, age, duration) -> np.ndarray:
    """μ at the given ages (any shape), for lives with the given durations."""
    shape = np.shape(age)
    mu = model.force(np.ravel(age), np.ravel(duration), [0.0])[:, 0]
    return mu.reshape(shape)


class Spliced(GenericModel):
    """``first`` for the first n years (durations 0 to n), then ``then`` from age x + n
    (duration d + n)."""

    def __init__(self, first: LifetimeModel, then: LifetimeModel, years: float):
        self.first = first
        self.then = then
        self.years = float(years)
        self.kind = then.kind
        self.limiting_age = min(first.limiting_age, then.limiting_age)
        self.max_age = min(first.max_age, then.max_age)

    def _switch(self, age):
        return np.full(np.shape(age), self.years)

    def place_lives(self, age, duration, rule="last-birthday"):
        return self.then.place_lives(age, duration, rule)

    def check_lives(self, age, duration) -> None:
        self.first.check_lives(age, duration)
        self.then.check_lives(age, duration)

    def span_hazard(self, age, duration, t0, t1):
        age, duration, t0, t1 = np.broadcast_arrays(
            np.asarray(age, float), np.asarray(duration, float), np.asarray(t0, float),
            np.asarray(t1, float),
        )
        tau = self._switch(age)
        with np.errstate(over="ignore", invalid="ignore"):
            h1 = self.first.span_hazard(age, duration, np.minimum(t0, tau), np.minimum(t1, tau))
            late = t1 > tau
            h2 = np.where(
                late,
                self.then.span_hazard(
                    age + tau, duration + tau, np.maximum(t0 - tau, 0.0),
                    np.maximum(t1 - tau, 0.0),
                ),
                0.0,
            )
            out = h1 + h2
        return np.where(t1 <= t0, 0.0, np.where(np.isnan(out), np.inf, out))

    def force(self, age, duration, t):
        a, d = self._columns(age, duration)
        t = as_float_array(t)[None, :]
        a, d, t = np.broadcast_arrays(a, d, t)
        tau = self._switch(a)
        with np.errstate(all="ignore"):
            mu1 = _point_force(self.first, a + t, d + t)
            mu2 = _point_force(self.then, a + t, d + t)
            h = self.span_hazard(a, d, np.zeros_like(t), t)
        mu = np.where(t < tau, mu1, mu2)
        return np.where(np.isfinite(mu) & np.isfinite(h), mu, np.nan)

    def kink_phases(self, age, duration):
        age, duration = self._lives(age, duration)
        tau = self._switch(age)
        tau_phase = tau - np.ceil(tau) + 1.0
        return np.stack(
            [
                self.first.kink_phase(age, duration),
                self.then.kink_phase(age, duration),
                np.clip(tau_phase, 1e-300, 1.0),
            ],
            axis=1,
        )

    def kink_phase(self, age, duration):
        return self.kink_phases(age, duration).min(axis=1)

    def horizon(self, age, duration):
        age, duration = self._lives(age, duration)
        guess = np.maximum(self.first.horizon(age, duration), self.then.horizon(age, duration))
        a, d = self._columns(age, duration)
        return negligible_horizon(self, a, d, guess)


# ---- a rating ---------------------------------------------------------------------------------


def rated(
    base: LifetimeModel,
    *,
    age_shift: float | None = None,
    q_multiplier: float | None = None,
    force_multiplier: float | None = None,
    extra_q: float | None = None,
    extra_q_years: float | None = None,
    extra_force: float | None = None,
    extra_force_years: float | None = None,
) -> LifetimeModel:
    """The rated model, the parts applied in the order of ``RATING_ORDER``."""
    check_single_life(base, "base")
    given = [v for v in (age_shift, q_multiplier, force_multiplier, extra_q, extra_force)
             if v is not None]
    if not given:
        raise DomainError(
            "",
            "an adjusted basis needs at least one of age_shift, q_multiplier, "
            "force_multiplier, extra_q, extra_force",
        )
    for name, value in (("age_shift", age_shift), ("extra_force", extra_force)):
        if value is not None and not math.isfinite(value):
            raise DomainError(name, f"{name} must be a finite number (got {fmt(value)})")
    if extra_q_years is not None and extra_q is None:
        raise DomainError("extra_q_years", "extra_q_years needs extra_q")
    if extra_force_years is not None and extra_force is None:
        raise DomainError("extra_force_years", "extra_force_years needs extra_force")
    if extra_q is not None and force_multiplier is not None:
        raise DomainError(
            "extra_q",
            "extra_q (an addition to the rates of the table) cannot follow force_multiplier "
            "in one rating, because a multiplied force has no rates of the table's "
            "fractional-age form; nest two adjusted bases instead (extra_q inside, "
            "force_multiplier outside), or use extra_force",
        )
    inner = base.base if isinstance(base, Shifted) else base
    model = inner
    # 2. q multiplier (tables)
    if q_multiplier is not None:
        table = _table_of(model, "q_multiplier", "use force_multiplier for a law")
        model = retabled(table, np.minimum(1.0, q_multiplier * table.q))
    # 3. force multiplier
    if force_multiplier is not None and force_multiplier != 1.0:
        model = ForceAdjusted(model, force_multiplier, 0.0, field="force_multiplier")
    # 4. extra q (tables)
    if extra_q is not None:
        table = _table_of(model, "extra_q", "use extra_force for a law")
        loaded = retabled(table, np.minimum(1.0, table.q + extra_q))
        model = loaded if extra_q_years is None else Spliced(loaded, table, extra_q_years)
    # 5. extra force
    if extra_force is not None:
        loaded = ForceAdjusted(model, 1.0, extra_force)
        model = (
            loaded if extra_force_years is None else Spliced(loaded, model, extra_force_years)
        )
    shift = (base.shift if isinstance(base, Shifted) else 0.0) + (age_shift or 0.0)
    return Shifted(model, shift) if shift != 0.0 else model


# ---- improvement ----------------------------------------------------------------------------


class CohortTable(TableSet):
    """One row per whole valuation age: a life aged x uses the row of floor(x)."""

    kind = "improved table"

    def _row_of(self, age, duration):
        age = np.asarray(age, float)
        with np.errstate(invalid="ignore"):
            r = np.floor(np.nan_to_num(age, nan=0.0)) - self.first_age
        return np.clip(r, 0, self.row_start.size - 1).astype(np.int64)


class SelectCohortTable(TableSet):
    """An improved select table: one row per (selection age, whole valuation age in the select
    period), then one per whole valuation age of the ultimate rates.

    A life aged x with duration d < n since selection was selected at s = x − d (a whole age,
    as in the select table) and uses the row of (s, floor(x)); a life with d ≥ n uses the
    ultimate row of floor(x). Row (s, j) holds q_[s]+(j−s)+k (ultimate rates after the select
    period) for the cohort aged j in the valuation year; rows are checked and chosen exactly
    as the select table chooses its own.
    """

    kind = "improved select table"

    def _row_of(self, age, duration):
        base = self.select_base
        age = np.nan_to_num(np.asarray(age, float), nan=0.0)
        duration = np.broadcast_to(np.nan_to_num(np.asarray(duration, float), nan=0.0), age.shape)
        n, n_sel = base.select_period, base.n_select_rows
        sel = np.rint(age - duration) - base.start_age
        in_select = (duration < n) & (sel >= 0) & (sel < n_sel)
        whole = np.floor(age)
        select_row = np.clip(sel, 0, n_sel - 1) * n + np.clip(
            whole - (base.start_age + np.clip(sel, 0, n_sel - 1)), 0, n - 1
        )
        ultimate_row = n_sel * n + np.clip(
            whole - base.ultimate_start_age, 0, self.row_start.size - n_sel * n - 1
        )
        return np.where(in_select, select_row, ultimate_row).astype(np.int64)

    def _check_rows(self, age, duration) -> None:
        self.select_base._check_rows(age, duration)

    def place_lives(self, age, duration, rule="last-birthday"):
        return self.select_base.place_lives(age, duration, rule)


def _cohort_factors(
    first_age: int, n_ages: int, n_years: int, base_year: int, valuation_year: int, rate_of
) -> np.ndarray:
    """F[a, k] = Π_{y = base_year+1}^{valuation_year+k} (1 − r(first_age + a, y)): the factor
    of whole age first_age + a in calendar year valuation_year + k, one call of ``rate_of``
    per calendar year for every age at once, multiplied in year order."""
    ages = first_age + np.arange(n_ages)
    running = np.ones(n_ages)
    for year in range(base_year + 1, valuation_year + 1):
        running = running * (1.0 - rate_of(ages, year))
    out = np.empty((n_ages, max(n_years, 1)))
    out[:, 0] = running
    for k in range(1, n_years):
        running = running * (1.0 - rate_of(ages, valuation_year + k))
        out[:, k] = running
    return out


def _cohort_rows(base: TableSet, cohorts, base_year: int, valuation_year: int, rate_of):
    """The improved rates of each cohort ``(source row, first index)`` of ``base``: the rates
    of the source row from that index on, age by age × the cohort's factors; a closing rate
    of 1 stays 1, and a rate that negative improvement takes to 1 or above is 1 and closes
    the cohort's row there."""
    starts = [int(base.row_start[r]) + i for r, i in cohorts]
    lengths = [int(base.row_length[r]) - i for r, i in cohorts]
    first = min(starts)
    top = max(s + n for s, n in zip(starts, lengths))
    factors = _cohort_factors(
        first, top - first, max(lengths), base_year, valuation_year, rate_of
    )
    rows = []
    for (r, i), start, length in zip(cohorts, starts, lengths):
        k = np.arange(length)
        q = base.q[r, i : i + length]
        rates = np.minimum(np.where(q >= 1.0, 1.0, q * factors[start - first + k, k]), 1.0)
        rows.append((start, rates[: int(np.argmax(rates >= 1.0)) + 1]))
    return rows


def _check_improvement_size(base: TableSet, cohorts) -> None:
    """Each cohort is a row of its own, padded to the longest: bound the values kept."""
    longest = max(int(base.row_length[r]) - i for r, i in cohorts)
    values = len(cohorts) * longest
    if values > MAX_IMPROVED_VALUES:
        raise DomainError(
            "base",
            f"improvement keeps one row per cohort ({len(cohorts)} here, the longest holding "
            f"{longest} rates), so at most {MAX_IMPROVED_VALUES:,} rates in all "
            f"(this base needs {values:,}); use fewer selection ages or a shorter table",
        )


def improved(
    base: LifetimeModel,
    base_year: int,
    valuation_year: int,
    rate_of,
) -> TableSet:
    """The generational table: ``rate_of(ages, year)`` gives r for whole ages in a year.

    A life table gives a :class:`CohortTable`, a select table a :class:`SelectCohortTable`.
    """
    check_single_life(base, "base")
    select = isinstance(base, SelectTable)
    if not isinstance(base, TableSet) or not (select or base.row_start.size == 1):
        raise DomainError(
            "base",
            "improvement applies to the rates of a life table or a select table (type table "
            "or select-table, or a rating of one that keeps it a table); this base is a "
            f"{base.kind}",
        )
    if valuation_year < base_year:
        raise DomainError(
            "valuation_year",
            f"valuation_year must be at least base_year {base_year} (got {valuation_year})",
        )
    if not select:
        length = int(base.row_length[0])
        if length > MAX_IMPROVED_RATES:
            raise DomainError(
                "base",
                f"improvement keeps one row per cohort, so the base table may hold at most "
                f"{MAX_IMPROVED_RATES} rates (it holds {length})",
            )
        rows = _cohort_rows(base, [(0, i) for i in range(length)], base_year, valuation_year, rate_of)
        model: TableSet = CohortTable(rows, base.assumption)
        model.first_age = int(base.row_start[0])
        model.limiting_age = float(base.row_limit[0])
        model.max_age = model.limiting_age
        return model
    assert isinstance(base, SelectTable)
    n, n_sel = base.select_period, base.n_select_rows
    ultimate = n_sel  # the last row of a select table holds the ultimate rates
    # a select row that closes within the select period (a rated rate of 1) has fewer cohorts;
    # the rows kept stay at (s, j) = s·n + (j − s), so a short row repeats its last cohort
    cohorts = [
        (r, min(i, int(base.row_length[r]) - 1)) for r in range(n_sel) for i in range(n)
    ]
    cohorts += [(ultimate, i) for i in range(int(base.row_length[ultimate]))]
    _check_improvement_size(base, cohorts)
    rows = _cohort_rows(base, cohorts, base_year, valuation_year, rate_of)
    model = SelectCohortTable(rows, base.assumption)
    model.select_base = base
    model.limiting_age = float(np.max(model.row_limit))
    model.max_age = model.limiting_age
    return model


def selects_by_duration(model: LifetimeModel) -> bool:
    """Whether the duration since selection changes a life's mortality under ``model`` (a
    select table, improved or rated); a single-life model only."""
    if isinstance(model, (SelectTable, SelectCohortTable)):
        return True
    if isinstance(model, (Shifted, ForceAdjusted)):
        return selects_by_duration(model.base)
    if isinstance(model, Spliced):
        return selects_by_duration(model.first) or selects_by_duration(model.then)
    return False

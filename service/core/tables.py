"""Life tables and select-and-ultimate tables, with the three fractional-age assumptions.

Within a year of age j, with q = q_j and p = 1 − q, survival from age j to age j + s is

* uniform distribution of deaths (UDD): ₛp_j = 1 − s q, μ_{j+s} = q / (1 − s q);
* constant force:                       ₛp_j = pˢ, μ_{j+s} = −log p;
* Balducci:                              ₛp_j = p / (p + s q), μ_{j+s} = q / (p + s q).

Every per-year integral ∫₀ᵃ tⁱ ₛ₊ₜp_j / ₛp_j dt is computed in closed form (a polynomial, an
incomplete gamma function, or the integral of tⁱ / (1 + r t)), so there is no quadrature across
the kinks at whole ages.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np
from scipy.special import gammainc, gammaln

from .errors import DomainError, fmt
from .lifetime import MAX_HORIZON, N_MOM, Located, YearGridModel, place_on_select_rows

FRACTIONAL_AGES = ("udd", "constant-force", "balducci")

_I = np.arange(N_MOM)
# series coefficients: (−1)ⁿ / (i + 1 + n), rows n, columns i
_EXP_N = np.arange(30, dtype=float)
_EXP_FACT = np.exp(gammaln(_EXP_N + 1.0))
_EXP_SERIES = (-1.0) ** _EXP_N[:, None] / (_I[None, :] + 1.0 + _EXP_N[:, None])
_REC_N = np.arange(64, dtype=float)
_REC_SERIES = (-1.0) ** _REC_N[:, None] / (_I[None, :] + 1.0 + _REC_N[:, None])


# ---- closed forms for the per-year integrals -------------------------------------------------


def _rowwise(terms, coefficients):
    """terms (..., n) @ coefficients (n, k) by einsum, whose sums do not depend on how many
    rows there are (a BLAS matrix product may round a row differently in a larger batch)."""
    return np.einsum("...n,nk->...k", terms, coefficients)


def _poly_scaled(a, n_mom):
    """aⁱ⁺¹ for i < n_mom, shape (..., n_mom)."""
    return np.asarray(a, float)[..., None] ** (_I[:n_mom] + 1.0)


def udd_partial(q, f0, length, n_mom=N_MOM):
    """∫₀ᵃ tⁱ (1 − q′ t) dt with q′ = q / (1 − q f0), the UDD survival from j + f0."""
    q = np.asarray(q, float)
    qq = q / (1.0 - q * f0)
    i = _I[:n_mom]
    a = np.asarray(length, float)[..., None]
    return a ** (i + 1.0) / (i + 1.0) - qq[..., None] * a ** (i + 2.0) / (i + 2.0)


def _exp_moments_unit(z, n_mom):
    """φᵢ(z) = ∫₀¹ uⁱ e^(−z u) du for z ≥ 0 (z may be +inf).

    For z ≤ 1 the series Σₙ (−z)ⁿ / (n! (i + 1 + n)), whose terms fall fast; above, the
    regularised lower incomplete gamma function: φᵢ(z) = i! P(i + 1, z) / zⁱ⁺¹.
    """
    z = np.asarray(z, float)
    small = z <= 1.0
    zs = np.where(small, z, 0.0)
    series = _rowwise(zs[..., None] ** _EXP_N / _EXP_FACT, _EXP_SERIES[:, :n_mom])
    zl = np.where(small, 2.0, z)[..., None]
    i = _I[:n_mom]
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        large = np.exp(gammaln(i + 1.0) - (i + 1.0) * np.log(zl)) * gammainc(i + 1.0, zl)
    large = np.where(np.isinf(zl), 0.0, large)
    return np.where(small[..., None], series, large)


def constant_force_partial(q, f0, length, n_mom=N_MOM):
    """∫₀ᵃ tⁱ e^(−μ t) dt with μ = −log(1 − q)."""
    q = np.asarray(q, float)
    with np.errstate(divide="ignore"):
        mu = -np.log1p(-q)
    a = np.asarray(length, float)
    with np.errstate(invalid="ignore"):
        z = np.where(a > 0, mu * a, 0.0)
    return _poly_scaled(a, n_mom) * _exp_moments_unit(z, n_mom)


def _reciprocal_moments_unit(rho, n_mom):
    """χᵢ(ρ) = ∫₀¹ uⁱ / (1 + ρ u) du for ρ ≥ 0 (ρ may be +inf).

    For ρ ≤ 1/2 the series Σₙ (−ρ)ⁿ / (i + 1 + n); above, the upward recursion
    χ₀ = log(1 + ρ)/ρ, χᵢ = (1/i − χᵢ₋₁)/ρ, which loses at most a factor 2 a step.
    """
    rho = np.asarray(rho, float)
    small = rho <= 0.5
    rs = np.where(small, rho, 0.0)
    series = _rowwise(rs[..., None] ** _REC_N, _REC_SERIES[:, :n_mom])
    rl = np.where(small, 1.0, rho)
    out = np.empty(rho.shape + (n_mom,))
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        chi = np.log1p(rl) / rl
        out[..., 0] = chi
        for k in range(1, n_mom):
            chi = (1.0 / k - chi) / rl
            out[..., k] = chi
    out = np.where(np.isinf(rho)[..., None], 0.0, out)
    return np.where(small[..., None], series, out)


def balducci_partial(q, f0, length, n_mom=N_MOM):
    """∫₀ᵃ tⁱ / (1 + r t) dt with r = q / (p + q f0), the Balducci survival from j + f0."""
    q = np.asarray(q, float)
    with np.errstate(divide="ignore", invalid="ignore"):
        r = q / (1.0 - q + q * f0)
    a = np.asarray(length, float)
    with np.errstate(invalid="ignore"):
        rho = np.where(a > 0, r * a, 0.0)
    return _poly_scaled(a, n_mom) * _reciprocal_moments_unit(rho, n_mom)


def year_hazard(assumption, q, f0, f1, dt=None):
    """−log(ₛ₁p_j / ₛ₀p_j) for f0 ≤ f1 within the year (or over [f0, f0 + dt] given dt)."""
    q = np.asarray(q, float)
    dt = np.asarray(f1, float) - f0 if dt is None else np.asarray(dt, float)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        if assumption == "udd":
            h = -np.log1p(-q * dt / (1.0 - q * f0))
        elif assumption == "constant-force":
            h = -np.log1p(-q) * dt
        else:
            h = np.log1p(q * dt / (1.0 - q + q * f0))
    return np.where(dt <= 0.0, 0.0, h)


def year_force(assumption, q, f):
    q = np.asarray(q, float)
    with np.errstate(divide="ignore", invalid="ignore"):
        if assumption == "udd":
            return q / (1.0 - q * f)
        if assumption == "constant-force":
            return np.broadcast_to(-np.log1p(-q), np.broadcast(q, f).shape)
        return q / (1.0 - q + q * f)


def invert_year(assumption, q, f0, h):
    """The s ≥ f0 with −log(ₛp_j / f0p_j) = h, in closed form."""
    q = np.asarray(q, float)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        if assumption == "udd":
            ds = (1.0 - q * f0) * -np.expm1(-h) / q
        elif assumption == "constant-force":
            ds = h / -np.log1p(-q)
        else:
            ds = (1.0 - q + q * f0) * np.expm1(h) / q
    ds = np.where(np.isfinite(ds), ds, 0.0)
    return np.clip(f0 + ds, f0, 1.0)


_PARTIALS = {
    "udd": udd_partial,
    "constant-force": constant_force_partial,
    "balducci": balducci_partial,
}


# ---- validation --------------------------------------------------------------------------


def _check_assumption(value):
    if value not in FRACTIONAL_AGES:
        raise DomainError(
            "fractional_ages",
            f"fractional_ages must be one of {', '.join(FRACTIONAL_AGES)} (got {value!r})",
        )


def _check_whole_age(field, value):
    v = float(value)
    if not (math.isfinite(v) and v >= 0 and v == math.floor(v)):
        raise DomainError(field, f"{field} must be a whole age of at least 0 (got {fmt(v)})")
    if v > MAX_HORIZON:
        raise DomainError(field, f"{field} must be at most {MAX_HORIZON} (got {fmt(v)})")
    return int(v)


def check_rates(field, rates, closing: bool):
    """Rates in [0, 1]; when ``closing`` the last is 1 and no earlier one is."""
    arr = np.asarray(rates, dtype=float)
    if arr.ndim != 1 or arr.size == 0:
        raise DomainError(field, f"{field} must be a non-empty list of rates")
    if arr.size > MAX_HORIZON:
        raise DomainError(field, f"{field} may hold at most {MAX_HORIZON} rates (got {arr.size})")
    bad = np.flatnonzero(~((arr >= 0.0) & (arr <= 1.0)))
    if bad.size:
        i = int(bad[0])
        raise DomainError(
            f"{field}[{i}]", f"each rate must be between 0 and 1 (got {fmt(arr[i])})"
        )
    ones = np.flatnonzero(arr[:-1] == 1.0) if closing else np.flatnonzero(arr == 1.0)
    if ones.size:
        i = int(ones[0])
        where = "only the last rate may be 1" if closing else "select rates must be below 1"
        raise DomainError(
            f"{field}[{i}]",
            f"{where}: a rate of 1 ends the table there, so later rates would never apply",
        )
    if closing and arr[-1] != 1.0:
        raise DomainError(
            field,
            f"the table must close: its last rate must be 1, so that no one survives past its "
            f"last age (got {fmt(arr[-1])}); add the closing rate explicitly",
        )
    return arr


# ---- the models ---------------------------------------------------------------------------


class TableSet(YearGridModel):
    """One or more life tables ("rows"), each by whole age from its own first age."""

    kind = "table"

    def __init__(self, rows: Sequence[tuple[int, np.ndarray]], fractional_ages: str):
        _check_assumption(fractional_ages)
        self.assumption = fractional_ages
        self._partial = _PARTIALS[fractional_ages]
        n_rows = len(rows)
        length = max(len(q) for _, q in rows)
        q = np.ones((n_rows, length))
        for r, (_, rates) in enumerate(rows):
            q[r, : len(rates)] = rates
        self.row_start = np.array([float(start) for start, _ in rows])
        self._row_starts = self.row_start.tolist()
        self._set_rates(q, np.array([len(rates) for _, rates in rows]))

    def _set_rates(self, q: np.ndarray, row_length: np.ndarray) -> None:
        """Install the rates q (R, L), each row closing in its year row_length − 1, and
        precompute everything that follows from them."""
        n_rows, length = q.shape
        self.q = q
        self.row_length = row_length
        # the end of each row: UDD spreads the last year's deaths over it; constant force and
        # Balducci put them all at its start
        close_shift = 0.0 if self.assumption == "udd" else 1.0
        self.row_limit = self.row_start + row_length - close_shift
        with np.errstate(divide="ignore"):
            steps = -np.log1p(-q)
        lam = np.zeros((n_rows, length + 1))
        lam[:, 1:] = np.cumsum(steps, axis=1)
        self.lam = lam
        ym = self._partial(q, np.zeros_like(q), np.ones_like(q))
        valid = np.arange(length)[None, :] < row_length[:, None]
        self.year_moments = np.where(valid[..., None], ym, 0.0)
        self._finish_grid()

    # within-year primitives
    def _year_hazard(self, row, index, f0, f1):
        return year_hazard(self.assumption, self.q[row, index], f0, f1)

    def _year_span_hazard(self, row, index, f0, dt):
        return year_hazard(self.assumption, self.q[row, index], f0, None, dt=dt)

    def _year_partial(self, row, index, f0, length):
        return self._partial(self.q[row, index], f0, length)

    def _year_force(self, row, index, f):
        return year_force(self.assumption, self.q[row, index], f)

    def _invert_year(self, row, index, f0, h):
        return invert_year(self.assumption, self.q[row, index], f0, h)

    def _row_of(self, age, duration) -> np.ndarray:
        return np.zeros(np.shape(age), dtype=np.int64)

    def _row_of_one(self, age: float, duration: float) -> int:
        """``_row_of`` for one life, in plain numbers."""
        return int(self._row_of(np.array([age]), np.array([duration]))[0])

    def _locate(self, age, duration) -> Located:
        row = self._row_of(age, duration)
        y = age - self.row_start[row]
        j = np.floor(y)
        return Located(row, j.astype(np.int64), y - j)

    def _locate_one(self, age: float, duration: float) -> tuple[int, int, float]:
        row = self._row_of_one(age, duration)
        y = age - self._row_starts[row]
        j = math.floor(y)
        return row, j, y - j

    def check_lives(self, age, duration) -> None:
        age = np.asarray(age, float)
        duration = np.broadcast_to(np.asarray(duration, float), age.shape)
        bad = np.flatnonzero(~(duration >= 0))
        if bad.size:
            i = int(bad[0])
            raise DomainError(
                f"lives[{i}].duration", f"duration must be at least 0 (got {fmt(duration[i])})"
            )
        self._check_rows(age, duration)
        row = self._row_of(age, duration)
        start = self.row_start[row]
        limit = self.row_limit[row]
        bad = np.flatnonzero(~(age >= start))
        if bad.size:
            i = int(bad[0])
            raise DomainError(
                f"lives[{i}].age",
                f"age must be at least {fmt(start[i])}, the first age of the table "
                f"(got {fmt(age[i])})",
            )
        bad = np.flatnonzero(~(age < limit))
        if bad.size:
            i = int(bad[0])
            raise DomainError(
                f"lives[{i}].age",
                f"age must be below the limiting age {fmt(limit[i])} of the table "
                f"(got {fmt(age[i])})",
            )

    def _check_rows(self, age, duration) -> None:
        """Checks particular to how lives choose a row (select tables)."""


class LifeTable(TableSet):
    """q_x by whole age from ``start_age``, closing with q = 1."""

    def _row_of_one(self, age: float, duration: float) -> int:
        return 0

    def __init__(self, start_age: int, q: Sequence[float], fractional_ages: str = "udd"):
        start = _check_whole_age("start_age", start_age)
        rates = check_rates("q", q, closing=True)
        super().__init__([(start, rates)], fractional_ages)
        self.start_age = start
        self.limiting_age = float(self.row_limit[0])
        self.max_age = self.limiting_age


class SelectTable(TableSet):
    """Select rates q_[x]+k for k < n (one row per whole selection age), then ultimate rates.

    A life aged x with duration d since selection uses the row of its selection age x − d
    while d < n (x − d must then be a whole selection age of the table), and the ultimate
    rates once d ≥ n.
    """

    kind = "select table"

    def __init__(
        self,
        start_age: int,
        select: Sequence[Sequence[float]],
        ultimate_start_age: int,
        ultimate: Sequence[float],
        fractional_ages: str = "udd",
    ):
        start = _check_whole_age("start_age", start_age)
        ult_start = _check_whole_age("ultimate_start_age", ultimate_start_age)
        ult = check_rates("ultimate", ultimate, closing=True)
        if not isinstance(select, Sequence) or len(select) == 0:
            raise DomainError("select", "select must hold at least one row of select rates")
        n = len(select[0]) if isinstance(select[0], Sequence) else 0
        if n == 0:
            raise DomainError("select[0]", "each row must hold at least one select rate")
        rows_in = []
        for r, row in enumerate(select):
            if not isinstance(row, Sequence) or len(row) != n:
                got = len(row) if isinstance(row, Sequence) else "not a list"
                raise DomainError(
                    f"select[{r}]",
                    f"every row must hold the same number of select rates as select[0] "
                    f"({n}); got {got}",
                )
            rows_in.append(check_rates(f"select[{r}]", row, closing=False))
        if ult_start > start + n:
            raise DomainError(
                "ultimate_start_age",
                f"ultimate_start_age must be at most start_age + select period = {start + n}, "
                f"so that every select row continues into the ultimate rates "
                f"(got {ult_start})",
            )
        last_select_age = start + len(select) - 1
        ult_end = ult_start + ult.size  # the ultimate closes in the year from ult_end - 1
        if last_select_age + n > ult_end - 1:
            raise DomainError(
                "ultimate",
                f"the ultimate rates must run to at least age {last_select_age + n} so that the "
                f"last select row (selection age {last_select_age}) continues into them; they "
                f"end at age {ult_end - 1}",
            )
        rows = []
        for r, rates in enumerate(rows_in):
            s = start + r
            rows.append((s, np.concatenate([rates, ult[s + n - ult_start :]])))
        rows.append((ult_start, ult))
        super().__init__(rows, fractional_ages)
        self.start_age = start
        self.select_period = n
        self.n_select_rows = len(select)
        self.ultimate_start_age = ult_start
        self.limiting_age = float(self.row_limit[-1])
        self.max_age = self.limiting_age

    def place_lives(self, age, duration, rule="last-birthday"):
        return place_on_select_rows(age, duration, rule)

    def _row_of(self, age, duration):
        age = np.asarray(age, float)
        duration = np.broadcast_to(np.asarray(duration, float), age.shape)
        sel = np.rint(age - duration) - self.start_age
        in_select = (duration < self.select_period) & (sel >= 0) & (sel < self.n_select_rows)
        return np.where(in_select, sel, self.n_select_rows).astype(np.int64)

    def _row_of_one(self, age: float, duration: float) -> int:
        sel = round(age - duration) - self.start_age  # half to even, as np.rint
        if duration < self.select_period and 0 <= sel < self.n_select_rows:
            return sel
        return self.n_select_rows

    def _same_future(self, row, index):
        """A select row past its select period is the ultimate row at the same age."""
        ult = self.n_select_rows
        after = (row < ult) & (index >= self.select_period)
        start = self.row_start
        return (np.where(after, ult, row),
                np.where(after, (start[row] + index - start[ult]).astype(np.int64), index))

    def _valuable_years(self) -> np.ndarray:
        """A select row's lives are within the select period (after it they use the
        ultimate row), so only its first ``select_period`` years are expanded."""
        valid = super()._valuable_years()
        valid[: self.n_select_rows, self.select_period :] = False
        return valid

    def _check_rows(self, age, duration) -> None:
        sel_age = age - duration
        bad = np.flatnonzero(~(sel_age >= 0))
        if bad.size:
            i = int(bad[0])
            raise DomainError(
                f"lives[{i}].duration",
                f"duration must be at most the age: the life was selected at age − duration, "
                f"which cannot be negative (got age {fmt(age[i])}, duration {fmt(duration[i])})",
            )
        in_period = duration < self.select_period
        whole = np.abs(sel_age - np.rint(sel_age)) <= 1e-9
        sel_index = np.rint(sel_age) - self.start_age
        ok = ~in_period | (whole & (sel_index >= 0) & (sel_index < self.n_select_rows))
        bad = np.flatnonzero(~ok)
        if bad.size:
            i = int(bad[0])
            first, last = self.start_age, self.start_age + self.n_select_rows - 1
            # a life at selection (no duration) whose age is outside the selection ages:
            # its age is what is wrong; otherwise the duration that places it off the grid
            outside = not (0 <= sel_index[i] < self.n_select_rows)
            blamed = "age" if duration[i] == 0.0 and outside else "duration"
            raise DomainError(
                f"lives[{i}].{blamed}",
                f"within the {self.select_period}-year select period, age − duration is the age "
                f"at selection and must be a whole age from {first} to {last} "
                f"(got age {fmt(age[i])}, duration {fmt(duration[i])})",
            )
        ult = ~in_period & ~(age >= self.ultimate_start_age)
        bad = np.flatnonzero(ult)
        if bad.size:
            i = int(bad[0])
            raise DomainError(
                f"lives[{i}].age",
                f"after the select period the ultimate rates apply, which start at age "
                f"{self.ultimate_start_age} (got {fmt(age[i])})",
            )

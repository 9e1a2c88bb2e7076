"""Mortality laws: one small class per law, closed forms where they are exact.

A law gives its force of mortality μ_y and its cumulative hazard H_x(t) = ∫₀ᵗ μ_{x+r} dr.
Everything else comes from the year-grid machinery in :mod:`lifetime`, with per-year
integrals computed once per basis by fixed Gauss–Legendre panels. A law overrides a derived
quantity only with an exact closed form (tests compare each override with the generic path).
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np
from scipy.special import beta as beta_fn
from scipy.special import betainc, factorial, gammaln
from scipy.special import gamma as gamma_fn

from .errors import ComputationLimitError, DomainError, fmt
from .lifetime import (
    CHUNK_ELEMENTS,
    GL_NODES,
    GL_WEIGHTS,
    MAX_HORIZON,
    MAX_ORDER,
    N_MOM,
    LifetimeModel,
    Located,
    YearGridModel,
    _orders,
    _term,
    as_float_array,
)

#: the grid of whole ages runs until survival from birth falls below e^-LOG_SURVIVAL_FLOOR
LOG_SURVIVAL_FLOOR = 800.0
#: lives may be valued while survival to the end of the grid stays below e^-TAIL_NEGLIGIBLE
TAIL_NEGLIGIBLE = 46.0
MAX_PANELS = 512
#: the smallest constant force served (see ConstantForce)
MIN_CONSTANT_FORCE = 1e-30


def _positive(name: str, value: float, law: str) -> float:
    v = float(value)
    if not (math.isfinite(v) and v > 0):
        raise DomainError(name, f"{name} must be greater than 0 for a {law} (got {fmt(v)})")
    return v


def _non_negative(name: str, value: float, law: str) -> float:
    v = float(value)
    if not (math.isfinite(v) and v >= 0):
        raise DomainError(name, f"{name} must be at least 0 for a {law} (got {fmt(v)})")
    return v


def _above_one(name: str, value: float, law: str) -> float:
    v = float(value)
    if not (math.isfinite(v) and v > 1):
        raise DomainError(name, f"{name} must be greater than 1 for a {law} (got {fmt(v)})")
    return v


def _finite(name: str, value: float, law: str) -> float:
    v = float(value)
    if not math.isfinite(v):
        raise DomainError(name, f"{name} must be a finite number for a {law} (got {fmt(v)})")
    return v


class Law(YearGridModel):
    """A mortality law on a single row of whole ages from 0."""

    kind = "law"
    #: survival near age 0 is not smooth (e.g. Weibull with fractional n): grade the panels
    singular_at_zero = False

    # ---- what a law provides ---------------------------------------------------------------

    def force_at(self, y):  # pragma: no cover - abstract
        raise NotImplementedError

    def hazard(self, x, t):  # pragma: no cover - abstract
        """H_x(t), broadcasting x and t; t ≥ 0."""
        raise NotImplementedError

    # ---- compilation -----------------------------------------------------------------------

    def _compile(self) -> None:
        self.row_start = np.zeros(1)
        with np.errstate(over="ignore", invalid="ignore"):
            if math.isfinite(self.limiting_age):
                n_years = int(math.ceil(self.limiting_age))
                if n_years > MAX_HORIZON:
                    raise ComputationLimitError(
                        "omega",
                        f"omega must be at most {MAX_HORIZON:,} years for this service "
                        f"(got {fmt(self.limiting_age)})",
                    )
                self.max_age = self.limiting_age
            else:
                n_years = self._grid_end()
                self.max_age = self._oldest_age(n_years)
            ages = np.arange(n_years + 1, dtype=float)
            lam = self.hazard(np.zeros(1), ages)
        self.lam = np.where(np.isnan(lam), np.inf, lam)[None, :]
        self.row_length = np.array([n_years])
        self.row_limit = np.array([self.max_age])
        # panels per year: enough that the hazard rises by at most 1/2 across a panel
        d_lam = np.diff(self.lam[0])
        panels = np.clip(np.ceil(2.0 * np.nan_to_num(d_lam, posinf=MAX_PANELS)), 2, MAX_PANELS)
        self.year_panels = panels.astype(np.int64)
        years = np.arange(n_years)
        ym = np.zeros((n_years, N_MOM))
        for n_p in np.unique(self.year_panels):
            sel = years[self.year_panels == n_p]
            ym[sel] = self._gl_moments(sel.astype(float), np.zeros(sel.size), np.ones(sel.size),
                                       int(n_p), graded=False)
        if self.singular_at_zero and n_years > 0:
            ym[0] = self._gl_moments(np.zeros(1), np.zeros(1), np.ones(1), 0, graded=True)[0]
        self.year_moments = ym[None, :, :]
        self._finish_grid()

    def _grid_end(self) -> int:
        """The first whole age by which survival from birth is below e^-800."""
        n = 1
        while True:
            h = float(self.hazard(np.zeros(1), np.array([float(n)]))[0])
            if not h < LOG_SURVIVAL_FLOOR:
                break
            if n >= MAX_HORIZON:
                raise ComputationLimitError(
                    "",
                    f"under this {self.kind} lives survive beyond age {MAX_HORIZON:,} with "
                    f"probability above e^-{LOG_SURVIVAL_FLOOR:.0f}, beyond what the service "
                    f"computes; check the parameters",
                )
            n = min(2 * n, MAX_HORIZON)
        ages = np.arange(n + 1, dtype=float)
        h = self.hazard(np.zeros(1), ages)
        return int(np.argmax(~(h < LOG_SURVIVAL_FLOOR)))

    def _oldest_age(self, n_years: int) -> float:
        """The largest age x from which survival to the end of the grid is below e^-46."""
        lo, hi = 0.0, float(n_years)
        for _ in range(80):
            mid = 0.5 * (lo + hi)
            h = float(self.hazard(np.array([mid]), np.array([n_years - mid]))[0])
            if h >= TAIL_NEGLIGIBLE or not math.isfinite(h):
                lo = mid
            else:
                hi = mid
        if lo <= 0.0:
            raise ComputationLimitError(
                "", f"this {self.kind} leaves no age at which lives can be valued"
            )
        return lo

    def _gl_moments(self, start, f0, length, n_panels, graded=False):
        """∫₀ᵃ tⁱ exp(−H_{start+f0}(t)) dt by composite Gauss–Legendre: (N, N_MOM)."""
        start = np.asarray(start, float)
        f0 = np.asarray(f0, float)
        a = np.asarray(length, float)
        if graded:
            edges = np.concatenate([[0.0], 2.0 ** -np.arange(40, -1, -1.0)])
        else:
            edges = np.linspace(0.0, 1.0, n_panels + 1)
        lo, hi = edges[:-1], edges[1:]
        # nodes in units of a: (P, G)
        u = lo[:, None] + (hi - lo)[:, None] * GL_NODES[None, :]
        w = ((hi - lo)[:, None] * GL_WEIGHTS[None, :]).ravel()
        u = u.ravel()
        x_all = start + f0
        out = np.empty(a.shape + (N_MOM,))
        step = max(1, CHUNK_ELEMENTS // u.size)  # lives per block, to bound memory
        for first in range(0, a.size, step):
            sl = slice(first, first + step)
            t = a[sl, None] * u[None, :]
            with np.errstate(over="ignore", invalid="ignore"):
                s = np.exp(-self.hazard(x_all[sl, None], t))
            weighted = np.where(np.isfinite(s), s, 0.0) * w
            # ∫ tⁱ S: multiply by t once per order instead of raising to powers
            for i in range(N_MOM):
                out[sl, i] = weighted.sum(axis=1)
                if i + 1 < N_MOM:
                    weighted *= t
        return a[:, None] * out

    # ---- year-grid primitives ----------------------------------------------------------------

    def _locate(self, age, duration) -> Located:
        age = np.asarray(age, float)
        j = np.floor(age)
        return Located(np.zeros(age.shape, dtype=np.int64), j.astype(np.int64), age - j)

    def _locate_one(self, age: float, duration: float) -> tuple[int, int, float]:
        j = math.floor(age)
        return 0, j, age - j

    def _year_hazard(self, row, index, f0, f1):
        with np.errstate(over="ignore", invalid="ignore"):
            h = self.hazard(index + f0, np.maximum(f1 - f0, 0.0))
        return np.where(f1 <= f0, 0.0, h)

    def _year_force(self, row, index, f):
        return self.force_at(index + f)

    def _year_partial(self, row, index, f0, length):
        """Each life with the panels of its own year of age: lives are grouped by panel count,
        so a batch costs what its lives need, not what its oldest life needs."""
        index = np.asarray(index)
        f0 = np.broadcast_to(np.asarray(f0, float), index.shape)
        length = np.broadcast_to(np.asarray(length, float), index.shape)
        panels = self.year_panels[np.clip(index, 0, self.year_panels.size - 1)]
        graded = (index == 0) if self.singular_at_zero else np.zeros(index.shape, bool)
        groups = np.where(graded, 0, panels)
        first = int(groups.flat[0]) if index.size else 2
        if index.size == 0 or np.all(groups == first):
            return self._gl_moments(index, f0, length, first, graded=first == 0)
        out = np.empty(index.shape + (N_MOM,))
        for n_p in np.unique(groups):
            sel = groups == n_p
            out[sel] = self._gl_moments(index[sel], f0[sel], length[sel], int(n_p), graded=n_p == 0)
        return out

    # ---- exact overrides of the generic hot paths ---------------------------------------------

    def span_hazard(self, age, duration, t0, t1):
        age, t0, t1 = np.broadcast_arrays(
            np.asarray(age, float), np.asarray(t0, float), np.asarray(t1, float)
        )
        with np.errstate(over="ignore", invalid="ignore"):
            h = self.hazard(age + t0, np.maximum(t1 - t0, 0.0))
        h = np.where(np.isnan(h), np.inf, h)
        return np.where(t1 <= t0, 0.0, h)

    def force(self, age, duration, t):
        a = as_float_array(age)[:, None]
        y = a + as_float_array(t)[None, :]
        with np.errstate(over="ignore", invalid="ignore"):
            mu = self.force_at(y)
        mu = np.where(y < self.limiting_age, mu, np.nan)
        return np.where(np.isfinite(mu), mu, np.nan)

    def check_lives(self, age, duration) -> None:
        super().check_lives(age, duration)


# ---- the laws ---------------------------------------------------------------------------------


class ConstantForce(Law):
    """Constant force μ: T_x is exponential with mean 1/μ at every age."""

    kind = "constant-force law"

    def __init__(self, mu: float):
        self.mu = _positive("mu", mu, self.kind)
        if self.mu < MIN_CONSTANT_FORCE:
            # E[T^k] = k!/μᵏ up to k = 8, and the curtate sums, overflow a float below this
            raise ComputationLimitError(
                "mu",
                f"mu must be at least {MIN_CONSTANT_FORCE:g} for a {self.kind}: below it the "
                f"moments of the lifetime (k!/mu^k) overflow (got {fmt(self.mu)})",
            )
        self.limiting_age = math.inf
        self.max_age = math.inf

    def force_at(self, y):
        return np.full(np.shape(y), self.mu)

    def hazard(self, x, t):
        return np.broadcast_to(self.mu * np.asarray(t, float), np.broadcast(x, t).shape)

    def check_lives(self, age, duration) -> None:
        age = as_float_array(age)
        bad = np.flatnonzero(~((age >= 0) & np.isfinite(age)))
        if bad.size:
            i = int(bad[0])
            raise DomainError(f"lives[{i}].age", f"age must be at least 0 (got {fmt(age[i])})")

    def horizon(self, age, duration):
        from .laws import TAIL_NEGLIGIBLE as tail

        return np.full(as_float_array(age).shape, tail / self.mu)

    def complete_moments(self, age, duration, orders, term=None):
        """E[T^k] = k!/μᵏ; E[min(T, n)^k] = k!/μᵏ · P(k, μ n) (regularised lower gamma)."""
        from scipy.special import gammainc

        orders = _orders(orders)
        term = _term(term)
        age = as_float_array(age)
        base = factorial(orders) / self.mu**orders
        if term is not None:
            base = base * gammainc(orders.astype(float), self.mu * term)
        return np.broadcast_to(base, (age.size, orders.size)).copy()

    def curtate_moments(self, age, duration, orders, term=None):
        """K is geometric: E[K^k] = Σ_m (m^k − (m−1)^k) p^m, with p = e^(−μ); whole life by
        Eulerian polynomials, Σ_{m≥1} mᵏ pᵐ = p A_k(p)/(1 − p)^(k+1)."""
        orders = _orders(orders)
        term = _term(term)
        age = as_float_array(age)
        p = math.exp(-self.mu)
        if term is not None:
            m = np.arange(1, term + 1, dtype=float)
            w = m[:, None] ** orders - (m[:, None] - 1.0) ** orders
            vals = np.exp(-self.mu * m) @ w
        else:
            one_minus_p = -math.expm1(-self.mu)
            sums = {}
            for k in range(0, int(orders.max()) + 1):
                sums[k] = _power_series_sum(k, p, one_minus_p)
            # E[K^k] = (1 − p) Σ_{m≥0} m^k p^m
            vals = np.array([one_minus_p * sums[int(k)] for k in orders])
        return np.broadcast_to(vals, (age.size, orders.size)).copy()

    def complete_quantiles(self, age, duration, probabilities):
        probs = as_float_array(probabilities)
        age = as_float_array(age)
        return np.broadcast_to(-np.log1p(-probs) / self.mu, (age.size, probs.size)).copy()

    def curtate_quantiles(self, age, duration, probabilities):
        t = self.complete_quantiles(age, duration, probabilities)
        return np.maximum(np.ceil(t) - 1.0, 0.0)

    def _compile(self):  # nothing to precompute: every quantity is closed form
        pass

    def _moment_summary(self, age, duration, term=None):
        """From the closed-form moments: this law has no year grid to look up."""
        return LifetimeModel._moment_summary(self, age, duration, term)


def _stirling2(k: int) -> list[int]:
    """Stirling numbers of the second kind S(k, j), j = 0..k."""
    row = [1]
    for n in range(1, k + 1):
        new = [0] * (n + 1)
        for j in range(1, n + 1):
            new[j] = j * (row[j] if j < len(row) else 0) + row[j - 1]
        row = new
    return row


def _power_series_sum(k: int, p: float, one_minus_p: float) -> float:
    """Σ_{m≥0} m^k p^m = Σ_j j! S(k, j) p^j / (1 − p)^(j+1): a sum of positive terms."""
    if k == 0:
        return 1.0 / one_minus_p
    s2 = _stirling2(k)
    return sum(
        math.factorial(j) * s2[j] * p**j / one_minus_p ** (j + 1) for j in range(1, k + 1)
    )


class DeMoivre(Law):
    """De Moivre's law: T_x uniform on (0, ω − x)."""

    kind = "de Moivre law"
    alpha = 1.0

    def __init__(self, omega: float):
        self.omega = _positive("omega", omega, self.kind)
        self.limiting_age = self.omega
        self._compile()

    def force_at(self, y):
        y = np.asarray(y, float)
        with np.errstate(divide="ignore", invalid="ignore"):
            return self.alpha / (self.omega - y)

    def hazard(self, x, t):
        x = np.asarray(x, float)
        t = np.asarray(t, float)
        with np.errstate(divide="ignore", invalid="ignore"):
            ratio = np.minimum(t / (self.omega - x), 1.0)
            h = -self.alpha * np.log1p(-ratio)
        return np.where(t <= 0, 0.0, np.where(x >= self.omega, np.inf, h))

    def _year_partial(self, row, index, f0, length):
        # integrate only up to the limiting age, where survival reaches 0 with a kink
        stop = np.maximum(self.omega - (np.asarray(index) + f0), 0.0)
        return super()._year_partial(row, index, f0, np.minimum(length, stop))

    def _gl_moments(self, start, f0, length, n_panels, graded=False):
        """In closed form, not by panels (which converge slowly at the limiting age when α is
        not whole): ∫₀ᵃ tⁱ (1 − t/m)^α dt = m^(i+1) B(i+1, α+1) I_{a/m}(i+1, α+1),
        m = ω − (start + f0)."""
        m = self.omega - (np.asarray(start, float) + f0)
        a = np.minimum(np.asarray(length, float), np.maximum(m, 0.0))
        i = np.arange(N_MOM, dtype=float)
        with np.errstate(divide="ignore", invalid="ignore"):
            z = np.clip(np.where(m > 0, a / m, 0.0), 0.0, 1.0)
            out = (m[..., None] ** (i + 1.0)) * beta_fn(i + 1.0, self.alpha + 1.0) * betainc(
                i + 1.0, self.alpha + 1.0, z[..., None]
            )
        return np.where((m > 0)[..., None] & (a > 0)[..., None], out, 0.0)

    def _moment_summary(self, age, duration, term=None):
        """From the closed-form moments, so that every life takes the same route."""
        return LifetimeModel._moment_summary(self, age, duration, term)

    def complete_moments(self, age, duration, orders, term=None):
        """T_x/(ω − x) is Beta(1, α): E[T^k] = (ω − x)^k k! Γ(α + 1)/Γ(α + k + 1), the ratio
        of gamma functions as the product 1/((α + 1)…(α + k)), which stays finite for every α
        (a difference of log-gamma values is inf − inf once α is near the largest double).

        The temporary moments E[min(T, n)^k] come from the generic path."""
        if term is not None:
            return super().complete_moments(age, duration, orders, term)
        orders = _orders(orders)
        m = self.omega - as_float_array(age)
        log_rising = np.cumsum(np.log(self.alpha + np.arange(1.0, MAX_ORDER + 1.0)))
        log_coef = gammaln(orders + 1.0) - log_rising[orders - 1]
        return m[:, None] ** orders[None, :] * np.exp(log_coef)[None, :]

    def complete_quantiles(self, age, duration, probabilities):
        """ₜp_x = (1 − t/(ω − x))^α = 1 − p ⇒ t = (ω − x)(1 − (1 − p)^(1/α))."""
        probs = as_float_array(probabilities)
        m = self.omega - as_float_array(age)
        return m[:, None] * -np.expm1(np.log1p(-probs)[None, :] / self.alpha)


class GeneralisedDeMoivre(DeMoivre):
    """ₜp_x = (1 − t/(ω − x))^α: μ_y = α/(ω − y)."""

    kind = "generalised de Moivre law"

    def __init__(self, omega: float, alpha: float):
        self.alpha = _positive("alpha", alpha, self.kind)
        super().__init__(omega)


class Gompertz(Law):
    """Gompertz law, μ_y = B c^y."""

    kind = "Gompertz law"

    def __init__(self, B: float, c: float):
        self.B = _positive("B", B, self.kind)
        self.c = _above_one("c", c, self.kind)
        self.log_c = math.log(self.c)
        self._compile()

    def force_at(self, y):
        with np.errstate(over="ignore"):
            return self.B * np.exp(np.asarray(y, float) * self.log_c)

    def _gompertz_part(self, x, t):
        with np.errstate(over="ignore", invalid="ignore"):
            h = (self.B / self.log_c) * np.exp(np.asarray(x, float) * self.log_c) * np.expm1(
                np.asarray(t, float) * self.log_c
            )
        return np.where(np.asarray(t) <= 0, 0.0, h)

    def hazard(self, x, t):
        return self._gompertz_part(x, t)

    def _invert_year(self, row, index, f0, h):
        """H_{x}(s) = B c^x (c^s − 1)/ln c = h ⇒ s = log1p(h ln c/(B c^x))/ln c."""
        x = index + f0
        with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
            s = np.log1p(h * self.log_c / (self.B * np.exp(x * self.log_c))) / self.log_c
        s = np.where(np.isfinite(s), s, 0.0)
        return np.clip(f0 + s, f0, 1.0)


class Makeham(Gompertz):
    """Makeham law, μ_y = A + B c^y (A > −B keeps μ > 0 at every age)."""

    kind = "Makeham law"

    def __init__(self, A: float, B: float, c: float):
        self.A = _finite("A", A, self.kind)
        B = _positive("B", B, self.kind)
        if not self.A > -B:
            raise DomainError(
                "A",
                f"A must be greater than −B = {fmt(-B)} for a Makeham law, so that the force "
                f"of mortality stays positive at every age (got {fmt(self.A)})",
            )
        super().__init__(B, c)

    def force_at(self, y):
        return self.A + super().force_at(y)

    def hazard(self, x, t):
        t_arr = np.asarray(t, float)
        return self.A * t_arr + self._gompertz_part(x, t)

    def _invert_year(self, row, index, f0, h):
        return YearGridModel._invert_year(self, row, index, f0, h)


class Weibull(Law):
    """Weibull law, μ_y = k yⁿ: H_x(t) = k/(n+1) ((x + t)ⁿ⁺¹ − xⁿ⁺¹)."""

    kind = "Weibull law"

    def __init__(self, k: float, n: float):
        self.k = _positive("k", k, self.kind)
        self.n = _positive("n", n, self.kind)
        self.singular_at_zero = float(self.n) != math.floor(self.n)
        self._compile()

    def force_at(self, y):
        with np.errstate(over="ignore"):
            return self.k * np.asarray(y, float) ** self.n

    def hazard(self, x, t):
        x = np.asarray(x, float)
        t = np.asarray(t, float)
        m = self.n + 1.0
        with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
            # xᵐ((1 + t/x)ᵐ − 1) without cancellation for t ≪ x
            rel = x**m * np.expm1(m * np.log1p(t / np.where(x > 0, x, 1.0)))
            # for t ≥ x the direct difference loses at most a factor 2ᵐ/(2ᵐ − 1), and it stays
            # finite for tiny x > 0, where xᵐ underflows and (1 + t/x)ᵐ overflows
            h = (self.k / m) * np.where(x > t, rel, (x + t) ** m - x**m)
        return np.where(t <= 0, 0.0, h)

    def complete_moments(self, age, duration, orders, term=None):
        """At age 0, T is Weibull: E[T^k] = λ^(−k/m) Γ(1 + k/m), λ = k/m, m = n + 1."""
        age = as_float_array(age)
        if term is not None or np.any(age != 0.0):
            return super().complete_moments(age, duration, orders, term)
        orders = _orders(orders)
        m = self.n + 1.0
        lam = self.k / m
        vals = lam ** (-orders / m) * gamma_fn(1.0 + orders / m)
        return np.broadcast_to(vals, (age.size, orders.size)).copy()


class Perks(Law):
    """Perks (logistic) law, μ_y = (A + B c^y)/(1 + D c^y)."""

    kind = "Perks law"

    def __init__(self, A: float, B: float, c: float, D: float):
        self.A = _finite("A", A, self.kind)
        self.B = _positive("B", B, self.kind)
        self.c = _above_one("c", c, self.kind)
        self.D = _positive("D", D, self.kind)
        if not self.A > -self.B:
            raise DomainError(
                "A",
                f"A must be greater than −B = {fmt(-self.B)} for a Perks law, so that the force "
                f"of mortality stays positive at every age (got {fmt(self.A)})",
            )
        self.log_c = math.log(self.c)
        self._compile()

    def force_at(self, y):
        with np.errstate(over="ignore", invalid="ignore"):
            cy = np.exp(np.asarray(y, float) * self.log_c)
            mu = (self.A + self.B * cy) / (1.0 + self.D * cy)
        return np.where(np.isinf(cy), self.B / self.D, mu)

    def hazard(self, x, t):
        """H = A t + (B − A D)/(D ln c) · log((1 + D c^(x+t))/(1 + D c^x))."""
        x = np.asarray(x, float)
        t = np.asarray(t, float)
        with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
            dcx = self.D * np.exp(x * self.log_c)
            w = 1.0 / (1.0 + 1.0 / dcx)  # D c^x / (1 + D c^x), stable when c^x overflows
            log_ratio = np.log1p(w * np.expm1(t * self.log_c))
            # when c^(x+t) overflows, log ratio = log(D c^(x+t)) − log(1 + D c^x)
            big = ~np.isfinite(log_ratio)
            alt = np.log(self.D) + (x + t) * self.log_c - np.logaddexp(0.0, np.log(self.D) + x * self.log_c)
            log_ratio = np.where(big, alt, log_ratio)
            # D ln c may underflow to 0 (tiny D, c near 1): there log(ratio)/(D ln c) is
            # taken as log1p(z)/z · c^x/(1 + D c^x) · expm1(t ln c)/ln c, with z the argument
            # of log1p above, which needs no division by D
            z = w * np.expm1(t * self.log_c)
            scaled = (
                np.where(z > 0, np.log1p(z) / np.where(z > 0, z, 1.0), 1.0)
                * (np.exp(x * self.log_c) / (1.0 + dcx))
                * (np.expm1(t * self.log_c) / self.log_c)
            )
            plain = log_ratio / np.float64(self.D * self.log_c)
            scaled = np.where(big | ~np.isfinite(scaled), plain, scaled)
            h = self.A * t + (self.B - self.A * self.D) * scaled
        return np.where(t <= 0, 0.0, h)


class Siler(Law):
    """Siler law, μ_y = a1 e^(−b1 y) + a2 + a3 e^(b3 y): infant, constant and senescent hazards."""

    kind = "Siler law"

    def __init__(self, a1: float, b1: float, a2: float, a3: float, b3: float):
        self.a1 = _non_negative("a1", a1, self.kind)
        self.b1 = _positive("b1", b1, self.kind)
        self.a2 = _non_negative("a2", a2, self.kind)
        self.a3 = _positive("a3", a3, self.kind)
        self.b3 = _positive("b3", b3, self.kind)
        self._compile()

    def force_at(self, y):
        y = np.asarray(y, float)
        with np.errstate(over="ignore"):
            return self.a1 * np.exp(-self.b1 * y) + self.a2 + self.a3 * np.exp(self.b3 * y)

    def hazard(self, x, t):
        x = np.asarray(x, float)
        t = np.asarray(t, float)
        with np.errstate(over="ignore", invalid="ignore"):
            infant = (self.a1 / self.b1) * np.exp(-self.b1 * x) * -np.expm1(-self.b1 * t)
            senescent = (self.a3 / self.b3) * np.exp(self.b3 * x) * np.expm1(self.b3 * t)
            h = infant + self.a2 * t + senescent
        return np.where(t <= 0, 0.0, h)


class GompertzMakehamFamily(Law):
    """GM(r, s): μ_y = Σᵢ αᵢ yⁱ (i < r) + exp(Σⱼ βⱼ yʲ) (j < s).

    GM(0, 2) is Gompertz with B = e^β₀, c = e^β₁; GM(1, 2) is Makeham. The polynomial part
    and an exponent of degree at most 1 integrate in closed form; a higher-degree exponent is
    integrated by fixed Gauss–Legendre panels on whole years, computed once per basis.
    """

    kind = "Gompertz–Makeham GM(r, s) law"

    def __init__(self, alpha: Sequence[float], beta: Sequence[float]):
        self.alpha = np.array([_finite(f"alpha[{i}]", a, self.kind) for i, a in enumerate(alpha)])
        self.beta = np.array([_finite(f"beta[{j}]", b, self.kind) for j, b in enumerate(beta)])
        if self.alpha.size > 8 or self.beta.size > 8:
            raise DomainError("alpha", "alpha and beta may hold at most 8 coefficients each")
        if self.alpha.size + self.beta.size == 0:
            raise DomainError("beta", "a GM(r, s) law needs at least one coefficient")
        self._exp_cum = None
        if self.beta.size >= 3:
            self._build_exponent_table()
        self._check_positive()
        self._compile()

    # polynomial and exponent ---------------------------------------------------------------

    def _poly(self, y):
        y = np.asarray(y, float)
        out = np.zeros(y.shape)
        for a in self.alpha[::-1]:
            out = out * y + a
        return out

    def _exponent(self, y):
        y = np.asarray(y, float)
        out = np.zeros(y.shape)
        for b in self.beta[::-1]:
            out = out * y + b
        return out

    def force_at(self, y):
        with np.errstate(over="ignore"):
            exp_part = np.exp(self._exponent(y)) if self.beta.size else 0.0
        return self._poly(y) + exp_part

    def _poly_hazard(self, x, t):
        """Σ αᵢ ((x + t)ⁱ⁺¹ − xⁱ⁺¹)/(i + 1), expanded so that every term is non-negative."""
        x = np.asarray(x, float)
        t = np.asarray(t, float)
        out = np.zeros(np.broadcast(x, t).shape)
        for i, a in enumerate(self.alpha):
            m = i + 1
            acc = np.zeros_like(out)
            for kk in range(1, m + 1):
                acc = acc + math.comb(m, kk) * x ** (m - kk) * t**kk
            out = out + a * acc / m
        return out

    def _build_exponent_table(self):
        """∫₀ʲ exp(poly) at whole ages j, to the end of a generous range, by GL panels."""
        n = MAX_HORIZON
        # find where the exponential part alone has made survival negligible, in chunks
        self._exp_cum = np.zeros(1)
        cum = [0.0]
        panels = 8
        edges = np.linspace(0.0, 1.0, panels + 1)
        u = (edges[:-1, None] + (edges[1:] - edges[:-1])[:, None] * GL_NODES[None, :]).ravel()
        w = ((edges[1:] - edges[:-1])[:, None] * GL_WEIGHTS[None, :]).ravel()
        start = 0
        while start < n:
            ages = np.arange(start, min(start + 256, n), dtype=float)
            with np.errstate(over="ignore"):
                vals = np.exp(self._exponent(ages[:, None] + u[None, :])) @ w
            cum.extend((cum[-1] + np.cumsum(vals)).tolist())
            start += 256
            if not np.isfinite(cum[-1]) or cum[-1] > 10 * LOG_SURVIVAL_FLOOR:
                break
        self._exp_cum = np.array(cum)
        self._gl_u, self._gl_w = u, w

    def _exp_integral(self, a, b, span=None):
        """∫ₐᵇ exp(poly) for a ≤ b, short pieces by GL and whole years from the table.

        ``span`` (= b − a, unrounded) is the length of a piece within one year, when given."""
        a = np.asarray(a, float)
        b = np.asarray(b, float)
        a, b = np.broadcast_arrays(a, b)

        def piece(lo, hi, length=None):
            length = np.maximum(hi - lo, 0.0) if length is None else length
            y = lo[..., None] + length[..., None] * self._gl_u
            with np.errstate(over="ignore"):
                return length * np.einsum("...n,n->...", np.exp(self._exponent(y)), self._gl_w)

        ja = np.ceil(a)
        jb = np.floor(b)
        same = (jb < ja) | (np.floor(a) == jb)  # within one year (a may be a whole age)
        table = self._exp_cum
        last = table.size - 1
        ia = np.minimum(ja, last).astype(np.int64)
        ib = np.minimum(jb, last).astype(np.int64)
        # each element takes only its own pieces: one within a year, or the two ends of a
        # span that crosses whole ages (the exponent at 16 nodes per piece is the cost)
        out = np.empty(a.shape)
        inside = np.flatnonzero(same)
        across = np.flatnonzero(~same)
        a1, b1 = a.ravel(), b.ravel()
        with np.errstate(invalid="ignore"):
            if inside.size:
                length = None if span is None else np.broadcast_to(span, a.shape).ravel()[inside]
                out.flat[inside] = piece(a1[inside], b1[inside], length)
            if across.size:
                lo, hi = a1[across], b1[across]
                ja1, jb1 = ja.ravel()[across], jb.ravel()[across]
                whole = np.where(jb1 > last, np.inf,
                                 table[ib.ravel()[across]] - table[ia.ravel()[across]])
                out.flat[across] = (piece(lo, np.minimum(ja1, hi)) + whole
                                    + piece(np.maximum(jb1, lo), hi))
        return out

    def hazard(self, x, t):
        x = np.asarray(x, float)
        t = np.asarray(t, float)
        h = self._poly_hazard(x, t)
        nb = self.beta.size
        with np.errstate(over="ignore", invalid="ignore"):
            if nb == 1:
                h = h + np.exp(self.beta[0]) * t  # inf, not OverflowError, for a huge β₀
            elif nb == 2:
                b0, b1 = self.beta
                if b1 == 0.0:
                    h = h + np.exp(b0) * t
                else:
                    h = h + np.exp(b0 + b1 * x) * np.expm1(b1 * t) / b1
            elif nb >= 3:
                h = h + self._exp_integral(x, x + t, span=t)
        return np.where(t <= 0, 0.0, h)

    def _check_positive(self):
        """The force must be positive at every age the basis can reach."""
        ages = np.linspace(0.0, 400.0, 400 * 16 + 1)
        with np.errstate(over="ignore", invalid="ignore"):
            mu = self.force_at(ages)
            h = self.hazard(np.zeros(1), ages)
        reach = h < LOG_SURVIVAL_FLOOR
        bad = np.flatnonzero(reach & ~(mu > 0))
        if bad.size:
            y = ages[bad[0]]
            raise DomainError(
                "alpha",
                f"the force of mortality must stay positive at every age; with these "
                f"coefficients it is {fmt(float(mu[bad[0]]))} at age {fmt(float(y))}",
            )

"""High-precision reference values, computed with mpmath at 40 significant digits.

Nothing here calls the service's core: each basis is restated from its published definition
(force of mortality and cumulative hazard for a law; for a table, the fractional-age
assumption's own survival formula within each year of age), and every integral is an mpmath
quadrature (composite Gauss–Legendre at 40 digits on panels that break at whole ages, or
mpmath's tanh-sinh where survival has an endpoint singularity). Results are cached, because
30+ digit arithmetic is slow and several tests share the same lives.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass

import mpmath as mp

DPS = 40  # mpmath at 40 digits throughout
N_NODES = 24  # Gauss–Legendre nodes per panel
N_MOM = 8  # ∫ tⁱ ₜp_x dt for i = 0..7
NEGLIGIBLE_HAZARD = 150  # survival below e^-150: negligible at 30 digits for every moment

# The whole reference works at DPS digits, including what callers do with its results (such as
# 1 − ₜp_x); no other part of the test suite uses mpmath.
mp.mp.dps = DPS


def mpf(value) -> mp.mpf:
    """An exact conversion: a float is taken at its binary value, a string at its decimal."""
    return mp.mpf(value)


@functools.lru_cache(maxsize=None)
def _gl_unit(n: int):
    """Gauss–Legendre nodes and weights on [0, 1] at DPS digits."""
    with mp.workdps(DPS + 10):
        xs, ws = mp.gauss_quadrature(n, "legendre")
        return tuple((x + 1) / 2 for x in xs), tuple(w / 2 for w in ws)


# ---- bases, restated from their definitions -----------------------------------------------


@dataclass(frozen=True)
class RefLaw:
    """A law by name and parameters (floats or decimal strings), hashable for the caches."""

    name: str
    params: tuple

    def p(self):
        return [mpf(v) for v in self.params]

    limiting_age = None

    def force(self, y):
        y = mpf(y)
        n = self.name
        if n == "constant-force":
            (mu,) = self.p()
            return mu
        if n in ("gompertz", "makeham"):
            A, B, c = self.p() if n == "makeham" else [mp.mpf(0)] + self.p()
            return A + B * c**y
        if n == "weibull":
            k, e = self.p()
            return k * y**e
        if n == "perks":
            A, B, c, D = self.p()
            return (A + B * c**y) / (1 + D * c**y)
        if n == "siler":
            a1, b1, a2, a3, b3 = self.p()
            return a1 * mp.exp(-b1 * y) + a2 + a3 * mp.exp(b3 * y)
        if n == "gm":
            alpha, beta = self.params
            poly = sum(mpf(a) * y**i for i, a in enumerate(alpha))
            expo = mp.exp(sum(mpf(b) * y**j for j, b in enumerate(beta))) if beta else 0
            return poly + expo
        if n in ("de-moivre", "generalised-de-moivre"):
            omega, alpha = self._omega_alpha()
            return alpha / (omega - y)
        raise ValueError(n)

    def _omega_alpha(self):
        if self.name == "de-moivre":
            return mpf(self.params[0]), mp.mpf(1)
        return mpf(self.params[0]), mpf(self.params[1])

    @property
    def omega(self):
        if self.name in ("de-moivre", "generalised-de-moivre"):
            return self._omega_alpha()[0]
        return None

    def hazard(self, x, t):
        """H_x(t) = ∫₀ᵗ μ_{x+r} dr, each in closed form (textbook antiderivatives)."""
        x, t = mpf(x), mpf(t)
        if t <= 0:
            return mp.mpf(0)
        y = x + t
        n = self.name
        if n == "constant-force":
            return self.p()[0] * t
        if n in ("gompertz", "makeham"):
            A, B, c = self.p() if n == "makeham" else [mp.mpf(0)] + self.p()
            return A * t + B * (c**y - c**x) / mp.log(c)
        if n == "weibull":
            k, e = self.p()
            return k / (e + 1) * (y ** (e + 1) - x ** (e + 1))
        if n == "perks":
            A, B, c, D = self.p()
            return A * t + (B - A * D) / (D * mp.log(c)) * mp.log((1 + D * c**y) / (1 + D * c**x))
        if n == "siler":
            a1, b1, a2, a3, b3 = self.p()
            return (
                a1 / b1 * (mp.exp(-b1 * x) - mp.exp(-b1 * y))
                + a2 * t
                + a3 / b3 * (mp.exp(b3 * y) - mp.exp(b3 * x))
            )
        if n == "gm":
            alpha, beta = self.params
            h = sum(mpf(a) * (y ** (i + 1) - x ** (i + 1)) / (i + 1) for i, a in enumerate(alpha))
            return h + _gm_exp_integral(tuple(beta), x, y)
        if n in ("de-moivre", "generalised-de-moivre"):
            omega, alpha = self._omega_alpha()
            if y >= omega:
                return mp.inf
            return -alpha * mp.log((omega - y) / (omega - x))
        raise ValueError(n)

    def survival(self, x, t):
        h = self.hazard(x, t)
        return mp.mpf(0) if h == mp.inf else mp.exp(-h)

    def singular(self, x) -> bool:
        """Survival with an endpoint singularity: use tanh-sinh rather than Gauss–Legendre."""
        if self.name == "generalised-de-moivre":
            return True
        if self.name == "weibull":
            return mpf(x) == 0 and mpf(self.params[1]) != int(mpf(self.params[1]))
        return False

    def edges(self, x):
        """Panel edges in t for a life aged x: whole ages, then halved until H rises ≤ 1."""
        x = mpf(x)
        first = mp.ceil(x) - x
        if first == 0:
            first = mp.mpf(1)
        end = None if self.omega is None else self.omega - x
        edges = [mp.mpf(0)]
        t = first
        while True:
            if end is not None and t >= end:
                edges.append(end)
                break
            edges.append(t)
            if self.hazard(x, t) > NEGLIGIBLE_HAZARD:
                break
            t += 1
            if t > 20000:
                raise RuntimeError("reference horizon too long")
        fine = [edges[0]]
        for a, b in zip(edges[:-1], edges[1:]):
            fine.extend(_split(lambda s: self.hazard(x, s), a, b))
        return fine


def _split(hazard, a, b, depth=0):
    """[a, b] cut into panels over which the hazard rises by at most 1."""
    if depth < 12 and hazard(b) - hazard(a) > 1:
        m = (a + b) / 2
        return _split(hazard, a, m, depth + 1) + _split(hazard, m, b, depth + 1)
    return [b]


def _gm_exp_integral(beta, a, b):
    """∫ₐᵇ exp(β₀ + β₁ y + … ) dy: closed form for degree ≤ 2 (exponential; erf/erfi)."""
    beta = [mpf(v) for v in beta]
    if not beta:
        return mp.mpf(0)
    if len(beta) == 1:
        return mp.exp(beta[0]) * (b - a)
    if len(beta) == 2:
        b0, b1 = beta
        return mp.exp(b0) * (mp.exp(b1 * b) - mp.exp(b1 * a)) / b1
    if len(beta) == 3:
        b0, b1, b2 = beta
        # β₂ (y + β₁/(2β₂))² + β₀ − β₁²/(4β₂): Gaussian integrals (textbook closed form)
        shift = b1 / (2 * b2)
        const = mp.exp(b0 - b1**2 / (4 * b2))
        r = mp.sqrt(abs(b2))
        f = mp.erfi if b2 > 0 else mp.erf
        return const * mp.sqrt(mp.pi) / (2 * r) * (f(r * (b + shift)) - f(r * (a + shift)))
    return mp.quad(lambda y: mp.exp(sum(c * y**j for j, c in enumerate(beta))), [a, b])


@dataclass(frozen=True)
class RefTable:
    """q_j by whole age from ``start``; within a year, the assumption's own survival formula:
    UDD ₛp_j = 1 − s q_j, constant force ₛp_j = p_j^s, Balducci ₛp_j = p_j / (p_j + s q_j)."""

    start: int
    q: tuple
    assumption: str

    @property
    def omega(self):
        # UDD spreads the closing year's deaths over it; the other two end at its start
        return mp.mpf(self.start + len(self.q) - (0 if self.assumption == "udd" else 1))

    def _in_year(self, q, s):
        q, s = mpf(q), mpf(s)
        if s == 0:
            return mp.mpf(1)
        p = 1 - q
        if self.assumption == "udd":
            return 1 - s * q
        if self.assumption == "constant-force":
            return p**s if p > 0 else mp.mpf(0)
        return p / (p + s * q)

    def l(self, y):  # noqa: E743 (l_x, the actuarial notation)
        """Survival from the first age of the table to age y."""
        y = mpf(y) - self.start
        if y < 0:
            raise ValueError("before the table")
        j = int(mp.floor(y))
        out = mp.mpf(1)
        for i in range(min(j, len(self.q))):
            out *= 1 - mpf(self.q[i])
        if j >= len(self.q):
            return mp.mpf(0)
        return out * self._in_year(self.q[j], y - j)

    def survival(self, x, t):
        return self.l(mpf(x) + mpf(t)) / self.l(x)

    def hazard(self, x, t):
        s = self.survival(x, t)
        return mp.inf if s == 0 else -mp.log(s)

    def force(self, y):
        y = mpf(y) - self.start
        j = int(mp.floor(y))
        q, s = mpf(self.q[j]), y - j
        if self.assumption == "udd":
            return q / (1 - s * q)
        if self.assumption == "constant-force":
            return -mp.log(1 - q)
        return q / (1 - q + s * q)

    def singular(self, x):
        return False

    def edges(self, x):
        """Whole ages, each year graded (1/8, 1/4, 1/2, 1): the Balducci pole at s = −p/q
        stays far from each panel relative to its length."""
        x = mpf(x)
        end = self.omega - x
        whole = [mp.mpf(0)]
        t = mp.ceil(x) - x if mp.ceil(x) > x else mp.mpf(1)
        while t < end:
            whole.append(t)
            t += 1
        whole.append(end)
        out = [whole[0]]
        for a, b in zip(whole[:-1], whole[1:]):
            L = b - a
            out.extend([a + L / 8, a + L / 4, a + L / 2, b])
        return out


# ---- quantities -----------------------------------------------------------------------------


@functools.lru_cache(maxsize=None)
def integrals(basis, x, term=None):
    """(∫₀ⁿ tⁱ ₜp_x dt for i = 0..7), n = term or ∞, as mpf."""
    with mp.workdps(DPS):
        edges = basis.edges(x)
        if term is not None:
            n = mpf(term)
            if n < edges[-1]:  # (a term past the end of survival changes nothing)
                edges = [e for e in edges if e < n] + [n]
        xs, ws = _gl_unit(N_NODES)
        acc = [mp.mpf(0)] * N_MOM
        last = len(edges) - 2
        for panel, (a, b) in enumerate(zip(edges[:-1], edges[1:])):
            if basis.singular(x) and panel in (0, last):
                # an endpoint singularity (at age 0 or at ω): mpmath's tanh-sinh on this panel
                for i in range(N_MOM):
                    acc[i] += mp.quad(lambda t, i=i: t**i * basis.survival(x, t), [a, b])
                continue
            L = b - a
            for u, w in zip(xs, ws):
                t = a + L * u
                s = basis.survival(x, t) * w * L
                ti = mp.mpf(1)
                for i in range(N_MOM):
                    acc[i] += ti * s
                    ti *= t
        return tuple(acc)


def complete_moment(basis, x, k, term=None):
    """E[T_x^k] or E[min(T_x, n)^k] = k ∫₀ⁿ t^(k−1) ₜp_x dt (integration by parts)."""
    return k * integrals(basis, x, term)[k - 1]


def complete_variance(basis, x, term=None):
    with mp.workdps(DPS):
        return complete_moment(basis, x, 2, term) - complete_moment(basis, x, 1, term) ** 2


@functools.lru_cache(maxsize=None)
def curtate_distribution(basis, x, term=None):
    """[(k, P(min(K_x, n) = k))] from the survival function: P(K = k) = ₖp − ₖ₊₁p."""
    with mp.workdps(DPS):
        out = []
        k = 0
        s_k = mp.mpf(1)
        while True:
            if term is not None and k == term:
                out.append((k, s_k))
                break
            s_next = basis.survival(x, k + 1)
            out.append((k, s_k - s_next))
            if s_next == 0 or basis.hazard(x, k + 1) > NEGLIGIBLE_HAZARD:
                break
            s_k = s_next
            k += 1
        return tuple(out)


def curtate_moment(basis, x, k, term=None):
    """E[K^k] = Σ k'^k P(K = k') over the distribution of K (the definition)."""
    with mp.workdps(DPS):
        return sum(mp.mpf(kk) ** k * prob for kk, prob in curtate_distribution(basis, x, term))


def curtate_variance(basis, x, term=None):
    with mp.workdps(DPS):
        return curtate_moment(basis, x, 2, term) - curtate_moment(basis, x, 1, term) ** 2


@functools.lru_cache(maxsize=None)
def complete_quantile(basis, x, p):
    """t with ₜq_x = p, by bisection on the survival function at 40 digits."""
    with mp.workdps(DPS):
        target = 1 - mpf(p)
        lo, hi = mp.mpf(0), mp.mpf(1)
        end = basis.omega - mpf(x) if basis.omega is not None else None
        while basis.survival(x, hi) > target:
            lo, hi = hi, hi * 2
            if end is not None and hi > end:
                hi = end
                break
        for _ in range(110):
            mid = (lo + hi) / 2
            if basis.survival(x, mid) > target:
                lo = mid
            else:
                hi = mid
        return (lo + hi) / 2


def curtate_quantile(basis, x, p):
    """The least whole k with P(K_x ≤ k) = 1 − ₖ₊₁p_x ≥ p (the definition)."""
    with mp.workdps(DPS):
        k = 0
        while 1 - basis.survival(x, k + 1) < mpf(p):
            k += 1
        return k


def death(basis, x, t):
    """ₜq_x without cancellation: −expm1(−H) for a law, (l_x − l_{x+t})/l_x for a table."""
    if isinstance(basis, RefTable):
        lx = basis.l(x)
        return (lx - basis.l(mpf(x) + mpf(t))) / lx
    h = basis.hazard(x, t)
    return mp.mpf(1) if h == mp.inf else -mp.expm1(-h)


def rel_err(value, reference) -> float:
    """|value − reference| / |reference| as a float (reference nonzero)."""
    with mp.workdps(DPS):
        ref = mpf(reference)
        return float(abs(mpf(float(value)) - ref) / abs(ref))


def to_float(value) -> float:
    return float(value)


def isclose_rel(value, reference, tol) -> bool:
    err = rel_err(value, reference)
    return math.isfinite(err) and err <= tol

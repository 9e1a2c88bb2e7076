"""Present values at exact ages: the whole-life functions of a basis at one rate of interest,
expanded in the fraction of the age, so that a life at any exact age is a few lookups.

A life aged x = j + f (row r of a year-grid model) counts its policy years from x: payments
1/m-thly at x + k + s/m, and amounts that move at the anniversaries x + k (:mod:`.amounts`).
Each whole-life function F of the anchor age a = x + k used by the benefits (the annuity-due
or -immediate paying 1/m each 1/m year and the second moment of its present value, the
insurance paying at the end of the 1/m year of death and its second moment, the increasing
insurance and its second moments) satisfies a backward recursion over policy years at the
same fraction f:

    F(a) = (the policy year from a, from the fractional rule: m steps of 1/m) + vʸ p_a F(a + 1),

with p_a = S(a + 1)/S(a) and vʸ the discount for a year (times 1 + e for amounts escalating
at e). So one pass over the years of every row at fixed fractions gives the functions at those
fractions of every age: terms are positive, nothing cancels. Within a year of age each function
is smooth in f between the multiples of 1/m (at f = s/m a payment age crosses a whole age,
where the fractional rule has a kink), so every (row, year) keeps Chebyshev polynomials on the
m segments of its year (:mod:`.expansion`), each checked when it is built against the
recursion itself at points between the nodes. A life is then a lookup at x, x + u, x + u + g
and x + n and the exact survival between them, and temporary, deferred and guaranteed benefits
follow by the identities of the whole-age fast path (values.py).

The continuous annuity and the insurance at the moment of death take each policy year by
Gauss–Legendre quadrature in two panels, either side of the whole age the year crosses.
Policy values at a duration t take the payments of the policy year that t falls in directly,
and the rest from lookups at the next anniversary.

Tables are kept per (model, rate, frequency, escalation, kind) in one bounded cache, built on
first use. A cell that no polynomial reproduces (the steep last years of a table) has none,
and its lives take the general path, which is exact; nothing is answered from a polynomial
that failed its check.
"""

from __future__ import annotations

import math
import threading
import weakref
from collections import OrderedDict
from dataclasses import dataclass

import numpy as np

from . import expansion
from .lifetime import GL_NODES, GL_WEIGHTS, Located, YearGridModel
from .tables import SelectTable

#: the quantities each kind of table keeps (per unit, whole life from the anchor age)
KINDS = {
    "advance": ("annuity", "annuity_second"),
    "arrears": ("annuity", "annuity_second"),
    "continuous": ("annuity", "annuity_second"),
    "moment-of-death": ("insurance", "insurance_second"),
    "insurance": ("insurance", "insurance_second"),
    "increasing": ("insurance", "insurance_second", "increasing", "increasing_second",
                   "square_second"),
}
#: lives per block of a lookup, so that its working arrays stay in cache
LOOKUP_BLOCK = 4096
#: the kinds valued by quadrature within each policy year
CONTINUOUS = ("continuous", "moment-of-death")
#: the degree of the polynomials on each segment, and at most 2**MAX_LEVEL segments per 1/m
#: year: degree 8 reproduces a year of the usual bases to about 3e-15, degree 6 a twelfth of a
#: year as well (measured); the steep last years of a table take more segments
DEGREE = 8
DEGREE_WITHIN_YEAR = 6
MAX_LEVEL = 5
#: the most cell-segments (years of age × 1/m segments) a table may expand: at
#: SECONDS_PER_CELL_SEGMENT, at most about 0.6 s once; a larger basis keeps the general path
MAX_BUILD_COST = 12_000
#: the relative accuracy a value from the tables must keep: a difference of lookups (a term
#: insurance as A_x − vⁿ ₙp_x A_{x+n}) whose terms are larger than the difference by more
#: than ACCURACY / (their error bound) is valued by the general path instead
ACCURACY = 1e-12
#: the least relative error assumed of a lookup (a few units of rounding)
ROUNDING = 1e-15
#: a duration within this of a payment time or an anniversary is at it
EDGE = 1e-9
#: seconds to build one cell-segment (measured 10–50 µs on a shared 2-core machine)
SECONDS_PER_CELL_SEGMENT = 50e-6
#: the most bytes all kept tables may take (least recently used dropped)
CACHE_BYTES = 64 * 2**20
#: elements per block of the build, to bound its memory
BUILD_ELEMENTS = 4_000_000


@dataclass(frozen=True)
class TableKey:
    rate: float
    frequency: int
    escalation: float
    kind: str


class ExactTables:
    """The expansions of one kind of whole-life function at one rate, over every (row, year)."""

    def __init__(self, model: YearGridModel, key: TableKey, built: expansion.Expansion):
        self.key = key
        self.expansion = built
        self.quantities = list(range(len(KINDS[key.kind])))
        #: the payments of one policy year, certain: Σ_s v^(t_s) / m
        self.certain_year = _certain_year(key)
        self.year_discount = (1.0 + key.escalation) / (1.0 + key.rate)
        self._coef_by_order = np.ascontiguousarray(built.coef.transpose(1, 0, 2))
        self._blocks: dict = {}  # one life's coefficients per segment, as floats
        self.nbytes = built.nbytes + self._coef_by_order.nbytes

    def at(self, row, index, frac) -> tuple[np.ndarray, np.ndarray]:
        """The functions at the lives' anchor ages, (N, Q), NaN where no polynomial is kept,
        and each value's relative error bound (inf where none).

        The functions are left-continuous in the age (a payment due exactly at the age where
        survival drops to 0 is paid), so a fraction on a segment's edge takes the segment to
        its left, and a whole age j the end of year j − 1."""
        e = self.expansion
        if not e.count.size:  # no year has polynomials
            return (np.full((np.size(row), len(self.quantities)), np.nan),
                    np.full(np.size(row), np.inf))
        on_whole = frac == 0.0
        index = np.where(on_whole, index - 1, index)
        frac = np.where(on_whole, 1.0, frac)
        cell = e.cells(row, index)
        have = cell >= 0
        c = np.where(have, cell, 0)
        out = np.empty((cell.size, len(self.quantities)))
        for lo in range(0, cell.size, LOOKUP_BLOCK):
            sl = slice(lo, lo + LOOKUP_BLOCK)
            cs = c[sl]
            count = e.count[cs]
            scaled = frac[sl] * count
            k = np.ceil(scaled) - 1.0
            first = e.first[cs]
            # (D + 1, n, Q): one gather, each coefficient's values contiguous
            block = np.take(self._coef_by_order, first + k.astype(np.int64), axis=1,
                            mode="clip")
            u = ((scaled - k) * 2.0 - 1.0)[:, None]
            out[sl] = _clenshaw_in_place(block, e.degree, u)
        if not have.all():
            out[~have] = np.nan
        error = np.where(have, e.error[c], np.inf)
        return out, error

    def at_one(self, row: int, index: int, frac: float) -> tuple[list, float]:
        """``at`` for one life in plain floats: the same operations, so the same bits."""
        e = self.expansion
        if frac == 0.0:
            index, frac = index - 1, 1.0
        cell = e.cell_of_one(row, index)
        if cell < 0:
            return [math.nan] * len(self.quantities), math.inf
        count = e.count_list[cell]
        scaled = frac * count
        k = float(math.ceil(scaled)) - 1.0
        seg = e.first_list[cell] + int(k)
        block = self._blocks.get(seg)
        if block is None:
            block = self._coef_by_order[:, seg, :].tolist()
            if len(self._blocks) < expansion.MAX_CACHED_BLOCKS:
                self._blocks[seg] = block
        u = (scaled - k) * 2.0 - 1.0
        two_u = u + u
        b1, b2 = block[e.degree], [0.0] * len(block[0])
        for m in range(e.degree - 1, 0, -1):
            b1, b2 = [b * two_u - c + d for b, c, d in zip(b1, b2, block[m])], b1
        out = [b * u - c + d for b, c, d in zip(b1, b2, block[0])]
        return out, float(e.error[cell])


def _clenshaw_in_place(block: np.ndarray, degree: int, u: np.ndarray) -> np.ndarray:
    """expansion._clenshaw on coefficients ``block[m]`` (n, Q), reusing three buffers: the
    same operations in the same order (so the same bits as a one-life lookup), without a new
    array per step."""
    two_u = u + u
    b1 = block[degree].copy()
    b2 = np.zeros_like(b1)
    b0 = np.empty_like(b1)
    for m in range(degree - 1, 0, -1):
        np.multiply(b1, two_u, out=b0)
        b0 -= b2
        b0 += block[m]
        b2, b1, b0 = b1, b0, b2
    np.multiply(b1, u, out=b0)
    b0 -= b2
    b0 += block[0]
    return b0


# ---- building ----------------------------------------------------------------------------------


def _step_hazards(model, rows, years, f, m):
    """h[r, y, k, s]: the hazard over the s-th 1/m step of the policy year from age y + fₖ of
    each row, (R, Y, F, m); each step within one year of age, or across the next whole age."""
    n_years = model.lam.shape[1] - 1
    step = 1.0 / m
    rr = rows[:, None, None, None]
    yy = years[None, :, None, None]
    c0 = f[None, None, :, None] + np.arange(m)[None, None, None, :] * step
    rr, yy, c0 = (np.ascontiguousarray(a) for a in np.broadcast_arrays(rr, yy, c0))
    c1 = c0 + step
    h = np.empty(c0.shape)
    within = c1 <= 1.0
    after = ~within & (c0 >= 1.0)
    across = ~within & ~after
    beyond = (yy + 1) >= n_years
    after &= ~beyond
    across_in = across & ~beyond
    with np.errstate(invalid="ignore", over="ignore", divide="ignore"):
        h[within] = model._year_span_hazard(rr[within], yy[within], c0[within], step)
        h[after] = model._year_span_hazard(rr[after], yy[after] + 1, c0[after] - 1.0, step)
        r, y, c = rr[across_in], yy[across_in], c0[across_in]
        h[across_in] = model._year_hazard(r, y, c, np.ones(c.shape)) + model._year_hazard(
            r, y + 1, np.zeros(c.shape), np.minimum(c + step - 1.0, 1.0))
    h[~within & beyond] = np.inf
    return np.where(np.isnan(h), np.inf, h)


def _year_pieces(model, rows, years, f, key: TableKey):
    """The policy year from each anchor y + f: its survival p (R, Y, F) and the year's own
    part of each quantity (R, Y, F, Q)."""
    m = key.frequency
    v = 1.0 / (1.0 + key.rate)
    h = _step_hazards(model, rows, years, f, m)
    with np.errstate(invalid="ignore", over="ignore"):
        big_h = np.concatenate([np.zeros(h.shape[:-1] + (1,)), np.cumsum(h, axis=-1)], axis=-1)
        alive = np.exp(-big_h)  # S_s, s = 0..m: survival to each step from the anchor
        dies = alive[..., :-1] * -np.expm1(-h)  # death within each step
    dies = np.where(alive[..., :-1] > 0.0, np.nan_to_num(dies, nan=0.0, posinf=0.0), 0.0)
    times = np.arange(m + 1) / m
    vt = v**times
    if key.kind in ("advance", "arrears"):
        if key.kind == "advance":
            pay, live = vt[:-1] / m, alive[..., :-1]
        else:
            pay, live = vt[1:] / m, alive[..., 1:]
        before = np.cumsum(pay) - pay
        own = np.stack([live @ pay, live @ (pay * (pay + 2.0 * before))], axis=-1)
    else:
        paid = vt[1:]
        first, second = dies @ paid, dies @ (paid * paid)
        own = np.stack([first, second], axis=-1)
    return alive[..., -1], own


def _continuous_pieces(model, rows, years, f, key: TableKey):
    """``_year_pieces`` for a continuous annuity (rate 1 a year) or an insurance at the moment
    of death: the policy year from y + f in two Gauss–Legendre panels, up to the next whole
    age and after it (the fractional rule has its kink there), each smooth."""
    n_years = model.lam.shape[1] - 1
    v = 1.0 / (1.0 + key.rate)
    delta = math.log1p(key.rate)
    rr = rows[:, None, None, None]
    yy = years[None, :, None, None]
    ff = f[None, None, :, None]
    rr, yy, ff = np.broadcast_arrays(rr, yy, ff)
    x = GL_NODES[None, None, None, :]
    cross = 1.0 - ff  # time to the next whole age
    has_next = (yy + 1) < n_years
    y_next = np.minimum(yy + 1, n_years - 1)
    with np.errstate(invalid="ignore", over="ignore", divide="ignore"):
        s_a = cross * x
        h_a = model._year_hazard(rr, yy, ff, ff + s_a)
        mu_a = model._year_force(rr, yy, ff + s_a)
        h_cross = model._year_hazard(rr[..., :1], yy[..., :1], ff[..., :1],
                                     np.ones(ff[..., :1].shape))
        s_b = cross + ff * x
        h_b = h_cross + np.where(has_next, model._year_hazard(rr, y_next, np.zeros(ff.shape),
                                                              ff * x), np.inf)
        mu_b = np.where(has_next, model._year_force(rr, y_next, ff * x), 0.0)
        h_year = h_cross[..., 0] + np.where(has_next[..., 0], model._year_hazard(
            rr[..., 0], y_next[..., 0], np.zeros(ff[..., 0].shape), ff[..., 0]), np.inf)
        p = np.nan_to_num(np.exp(-h_year), nan=0.0)
        times = np.concatenate([s_a, s_b], axis=-1)
        alive = np.nan_to_num(np.exp(-np.concatenate([h_a, h_b], axis=-1)), nan=0.0)
        weight = np.concatenate([cross * GL_WEIGHTS, ff * GL_WEIGHTS], axis=-1)
        vt = v**times
        if key.kind == "continuous":
            paid = -np.expm1(-delta * times) / delta if delta > 0.0 else times  # ∫₀ˢ vʳ dr
            first = (weight * vt * alive).sum(axis=-1)
            second = 2.0 * (weight * vt * paid * alive).sum(axis=-1)
        else:
            mu = np.concatenate([mu_a, mu_b], axis=-1)
            dens = np.where(alive > 0.0, alive * np.nan_to_num(mu, nan=0.0, posinf=0.0), 0.0)
            first = (weight * vt * dens).sum(axis=-1)
            second = (weight * vt * vt * dens).sum(axis=-1)
    return p, np.stack([first, second], axis=-1)


def _recurse(p, own, key: TableKey, seed, certain: float):
    """The backward recursion over the years (axis 1) from ``seed`` at the last year's end."""
    v = 1.0 / (1.0 + key.rate)
    vy = v * (1.0 + key.escalation)
    out = np.empty(own.shape[:3] + (len(KINDS[key.kind]),))
    nxt = seed
    for y in range(p.shape[1] - 1, -1, -1):
        py = p[:, y]
        z1, z2 = own[:, y, :, 0], own[:, y, :, 1]
        cur = np.empty_like(nxt)
        if key.kind in ("advance", "arrears", "continuous"):
            cur[..., 0] = z1 + vy * py * nxt[..., 0]
            cur[..., 1] = z2 + py * (2.0 * vy * certain * nxt[..., 0] + vy * vy * nxt[..., 1])
        else:
            cur[..., 0] = z1 + vy * py * nxt[..., 0]
            cur[..., 1] = z2 + vy * vy * py * nxt[..., 1]
        if key.kind == "increasing":  # a death one year later pays one more: k → k + 1
            vv = v * v
            cur[..., 2] = z1 + v * py * (nxt[..., 2] + nxt[..., 0])
            cur[..., 3] = z2 + vv * py * (nxt[..., 3] + nxt[..., 1])
            cur[..., 4] = z2 + vv * py * (nxt[..., 4] + 2.0 * nxt[..., 3] + nxt[..., 1])
        out[:, y] = cur
        nxt = cur
    return out


def _rows_values(model, rows, first: int, last: int, f, key: TableKey, seed, certain: float):
    """The functions at ages y + f of the given rows, first ≤ y < last, from ``seed`` at
    y = last: (R, last − first, F, Q)."""
    q = len(KINDS[key.kind])
    years = np.arange(first, last)
    out = np.empty((rows.size, years.size, f.size, q))
    chunk = max(1, BUILD_ELEMENTS // max(1, years.size * f.size * (key.frequency + 1)))
    pieces = _continuous_pieces if key.kind in CONTINUOUS else _year_pieces
    for lo in range(0, rows.size, chunk):
        sl = slice(lo, lo + chunk)
        p, own = pieces(model, rows[sl], years, f, key)
        out[sl] = _recurse(p, own, key, seed[sl], certain)
    return out


def _exact_function(model, key: TableKey, certain: float):
    """exact(cells, fractions) for :func:`expansion.build`: the recursion's values, over the
    years from the youngest cell asked for to the end of the grid."""
    n_rows, n_years = model.lam.shape[0], model.lam.shape[1] - 1
    q = len(KINDS[key.kind])

    def exact(cells, fractions):
        f = np.asarray(fractions, float)
        row_of, year_of = np.divmod(cells, n_years)
        out = np.empty((cells.size, f.size, q))
        if type(model) is SelectTable:
            ult = n_rows - 1
            on_ult = row_of == ult
            sel = np.unique(row_of[~on_ult])
            n = model.select_period
            at = (model.row_start[sel] + n - model.row_start[ult]).astype(np.int64)
            first = int(min(year_of[on_ult].min(initial=n_years), at.min(initial=n_years)))
            first = min(first, n_years - 1)
            ult_values = _rows_values(model, np.array([ult]), first, n_years, f, key,
                                      np.zeros((1, f.size, q)), certain)[0]
            out[on_ult] = ult_values[year_of[on_ult] - first]
            if sel.size:
                seed = np.where((at < n_years)[:, None, None],
                                ult_values[np.clip(at - first, 0, n_years - 1 - first)], 0.0)
                lo = int(year_of[~on_ult].min())
                # the select years lo..n−1 of each select row, from the ultimate at its age
                values = _rows_values(model, sel, lo, n, f, key, seed, certain)
                where = np.searchsorted(sel, row_of[~on_ult])
                out[~on_ult] = values[where, year_of[~on_ult] - lo]
            return out
        rows = np.unique(row_of)
        first = int(year_of.min())
        values = _rows_values(model, rows, first, n_years, f, key,
                              np.zeros((rows.size, f.size, q)), certain)
        return values[np.searchsorted(rows, row_of), year_of - first]

    return exact


def _certain_year(key: TableKey) -> float:
    """Σ_s v^(t_s) / m over the m payment times t_s of one policy year (an annuity's kinds),
    or ∫₀¹ vˢ ds paid continuously."""
    if key.kind == "continuous":
        delta = math.log1p(key.rate)
        return -math.expm1(-delta) / delta if delta > 0.0 else 1.0
    m = key.frequency
    steps = np.arange(1, m + 1) if key.kind == "arrears" else np.arange(m)
    return float(np.sum((1.0 / (1.0 + key.rate)) ** (steps / m)) / m)


def build_tables(model: YearGridModel, key: TableKey) -> ExactTables:
    built = expansion.build(_exact_function(model, key, _certain_year(key)),
                            model._valuable_years(), segments=key.frequency,
                            degree=DEGREE if key.frequency == 1 else DEGREE_WITHIN_YEAR,
                            max_level=MAX_LEVEL, left_continuous=True)
    return ExactTables(model, key, built)


def build_seconds(model: YearGridModel, rate: float, benefits) -> float:
    """The estimated seconds of the table builds that valuing ``benefits`` (on the path)
    would start now."""
    keys = {TableKey(rate, m, e, kind) for b in benefits if on_path(b, rate)
            for kind, m, e in table_kinds(b)}
    return sum(build_cost(model, key) * SECONDS_PER_CELL_SEGMENT for key in keys
               if CACHE.will_build(model, key))


def build_cost(model: YearGridModel, key: TableKey) -> int:
    """Cell-segments to build: a bound on the work and the bytes of a table."""
    return int(model._valuable_years().sum()) * key.frequency


# ---- the cache ---------------------------------------------------------------------------------


class _Cache:
    """Tables by (model, key), least recently used dropped past CACHE_BYTES.

    A table is built on its first use, for one life as for many, so that which path values a
    life never depends on what was asked before: the build is deterministic, a rebuilt table
    gives the same bits, and a life has the same bits alone as in any batch."""

    def __init__(self):
        # re-entrant: a model's weak reference may call _drop_model from a collection that
        # runs while this thread holds the lock
        self._lock = threading.RLock()
        self._tables: OrderedDict = OrderedDict()
        self.nbytes = 0

    def _drop_model(self, ref):
        with self._lock:
            for k in [k for k in list(self._tables) if k[0] is ref]:
                gone = self._tables.pop(k, None)
                if gone is not None:
                    self.nbytes -= gone.nbytes

    def built(self, model, key: TableKey) -> bool:
        ref = _REFS.get(model)
        with self._lock:
            return ref is not None and (ref, key) in self._tables

    def will_build(self, model, key: TableKey) -> bool:
        """Whether asking for ``key`` would build its table now."""
        return not self.built(model, key) and build_cost(model, key) <= MAX_BUILD_COST

    def get(self, model, key: TableKey) -> ExactTables | None:
        """The tables, built now if need be; None for a basis too large to expand."""
        ref = _model_ref(model, self._drop_model)
        with self._lock:
            tables = self._tables.get((ref, key))
            if tables is not None:
                self._tables.move_to_end((ref, key))
                return tables
        if build_cost(model, key) > MAX_BUILD_COST:
            return None
        tables = build_tables(model, key)
        with self._lock:
            if (ref, key) not in self._tables:
                self._tables[(ref, key)] = tables
                self.nbytes += tables.nbytes
            while self.nbytes > CACHE_BYTES and len(self._tables) > 1:
                self.nbytes -= self._tables.popitem(last=False)[1].nbytes
        return tables


_REFS: weakref.WeakKeyDictionary = weakref.WeakKeyDictionary()
_REFS_LOCK = threading.Lock()


def _model_ref(model, on_drop):
    with _REFS_LOCK:
        ref = _REFS.get(model)
        if ref is None:
            ref = weakref.ref(model, on_drop)
            _REFS[model] = ref
        return ref


CACHE = _Cache()


# ---- valuing lives -----------------------------------------------------------------------------


def on_path(b, rate: float) -> bool:
    """Benefits whose terms, deferrals and guarantees are whole years, paid yearly or 1/m-thly
    (annuities in advance or in arrears, insurances at the end of the year or of the 1/m year
    of death), level, escalating (at a rate that keeps the yearly discount at most 1),
    increasing or decreasing insurances."""
    from .values import Endowment, LifeAnnuity, LifeInsurance, PureEndowment, escalated_rate

    def whole(x):
        return x is None or float(x) == math.floor(float(x))

    escalation = getattr(b, "escalation", 0.0)
    if rate < 0.0 or (escalation != 0.0 and escalated_rate(rate, escalation) < 0.0):
        return False
    if isinstance(b, LifeAnnuity):
        return (b.timing in ("advance", "arrears", "continuous") and not b.increasing
                and whole(b.term) and whole(b.deferral) and whole(b.guarantee))
    if isinstance(b, (LifeInsurance, Endowment)):
        level = not (getattr(b, "increasing", False) or getattr(b, "decreasing", False))
        return ((b.timing in ("end-of-year", "end-of-period")
                 or (b.timing == "moment-of-death" and level))
                and whole(b.term) and whole(getattr(b, "deferral", 0.0)))
    if isinstance(b, PureEndowment):
        return whole(b.term)
    return False


def _certain(vy: float, years: int, per_year: float) -> float:
    """Σ_{k<years} vyᵏ × per_year: the payments of ``years`` policy years, certain."""
    if years <= 0:
        return 0.0
    if vy == 1.0:
        return per_year * years
    return per_year * (1.0 - vy**years) / (1.0 - vy)


def _times(p, x):
    """p × x, 0 where p is 0 (a lookup past where survival ends has no value)."""
    if isinstance(p, float):
        return p * x if p > 0.0 else 0.0
    return np.where(p > 0.0, p * x, 0.0)


class ExactLives:
    """Lives at exact ages on a year-grid model at one rate: lookups and survival between
    anchor ages, shared by every benefit of a request.

    One life keeps plain floats (numpy's fixed cost per call would otherwise decide its
    speed): the same operations in the same order, and numpy's own ufuncs for exp, so the same
    bits as in a batch."""

    def __init__(self, model: YearGridModel, loc: Located, rate: float):
        self.model, self.rate = model, rate
        self.v = 1.0 / (1.0 + rate)
        self.loc = loc
        self.n = loc.row.size
        self.scalar = self.n == 1
        self._hazard: dict = {}
        self._lookups: dict = {}
        #: whether every life's survival to the end of its grid is negligible (values.py)
        self.converges: bool | None = None
        #: per life, the largest relative error of the lookups made for the benefit in hand
        self.error = 0.0 if self.scalar else np.zeros(self.n)

    def hazard(self, k: int):
        """The cumulative hazard from the row's first age to x + k."""
        h = self._hazard.get(k)
        if h is None:
            h = _hazard_at(self.model, self.loc, np.full((self.n, 1), k, dtype=np.int64))[:, 0]
            if self.scalar:
                h = float(h[0])
            self._hazard[k] = h
        return h

    def survival(self, a: int, b: int):
        """S(x + b)/S(x + a)."""
        if a == b:
            return 1.0 if self.scalar else np.ones(self.n)
        ha, hb = self.hazard(a), self.hazard(b)
        if self.scalar:
            if not math.isfinite(ha) or math.isinf(hb):
                return 0.0
            return float(np.exp(ha - hb))
        with np.errstate(invalid="ignore", over="ignore"):
            s = np.exp(ha - hb)
        return np.where(np.isfinite(ha), np.nan_to_num(s, nan=0.0), 0.0)

    def at(self, tables: ExactTables, k: int):
        """The tables' functions at x + k: (N, Q), or a list of Q floats for one life."""
        key = (tables.key, k)
        got = self._lookups.get(key)
        if got is None:
            loc = self.loc
            row, index = self.model._same_future(loc.row, loc.index + k)
            # where a life cannot be alive at x + k, its values there are 0, exactly
            alive = self.survival(0, k) > 0.0
            if self.scalar:
                got = (tables.at_one(int(row[0]), int(index[0]), float(loc.frac[0])) if alive
                       else ([0.0] * len(tables.quantities), 0.0))
            else:
                out, error = tables.at(row, index, loc.frac)
                if not alive.all():
                    out[~alive], error = 0.0, np.where(alive, error, 0.0)
                got = out, error
            self._lookups[key] = got
        out, error = got
        self.error = max(self.error, error) if self.scalar else np.maximum(self.error, error)
        return out


def _col(a, i: int):
    """Quantity i of a lookup (a column of lookups, or a float of one life's)."""
    return a[i] if isinstance(a, list) else a[:, i]


def exact_moments(lives: ExactLives, b, tables_for) -> tuple[np.ndarray, np.ndarray] | None:
    """E[PV], E[PV²] per unit; NaN for lives whose cells have no polynomials, or whose values
    are differences that would cancel more digits than ACCURACY allows (the general path
    values those); None when a basis is too large to expand. ``tables_for(kind, m, e)``
    gives the tables."""
    lives.error = 0.0 if lives.scalar else np.zeros(lives.n)  # of this benefit's lookups
    got = _moments(lives, b, tables_for, -1.0)
    if got is None:
        return None
    gross = _moments(lives, b, tables_for, 1.0)  # the same sums, every difference a sum
    # rounding in the lookups costs at most their error bound (twice that found at the check
    # points, and never less than a few units of rounding) times the gross size
    if lives.scalar:
        error = max(2.0 * lives.error, ROUNDING)
        out = [value if size * error <= ACCURACY * abs(value) else math.nan
               for value, size in zip(got, gross)]
        return np.array([out[0]]), np.array([out[1]])
    error = np.maximum(2.0 * lives.error, ROUNDING)
    out = []
    for value, size in zip(got, gross):
        with np.errstate(invalid="ignore"):
            ok = size * error <= ACCURACY * np.abs(value)
        out.append(np.where(ok, value, np.nan))
    return out[0], out[1]


def _frequency(b) -> int:
    """Payments (or periods of death) a year of a benefit on the path (1: continuous)."""
    if getattr(b, "timing", "") in ("end-of-year", "continuous", "moment-of-death"):
        return 1
    return int(getattr(b, "frequency", 1))


def table_kinds(b) -> list[tuple[str, int, float]]:
    """The tables (kind, frequency, escalation) a benefit on the path is valued from."""
    from .values import Endowment, LifeAnnuity, PureEndowment

    if isinstance(b, PureEndowment):
        return []
    insurance = "moment-of-death" if b.timing == "moment-of-death" else "insurance"
    if isinstance(b, Endowment):
        return [(insurance, _frequency(b), 0.0)]
    if isinstance(b, LifeAnnuity):
        return [(b.timing, _frequency(b), float(b.escalation))]
    if b.increasing or b.decreasing:
        return [("increasing", _frequency(b), 0.0)]
    return [(insurance, _frequency(b), float(b.escalation))]


def _moments(lives: ExactLives, b, tables_for, sign: float):
    """E[PV], E[PV²] with ``sign`` before every subtracted term (−1: the values; +1: their
    gross size, the bound on what rounding in the polynomials can cost)."""
    from .values import Endowment, LifeAnnuity, PureEndowment

    v = lives.v
    if isinstance(b, PureEndowment):
        n = int(b.term)
        p = lives.survival(0, n)
        return v**n * p, v ** (2 * n) * p
    tables = tables_for(*table_kinds(b)[0])
    if tables is None:
        return None
    if isinstance(b, Endowment):
        n = int(b.term)
        z1, z2 = _insurance(lives, tables, n, 0, sign)
        p = lives.survival(0, n)
        return z1 + v**n * p, z2 + v ** (2 * n) * p
    if isinstance(b, LifeAnnuity):
        return _annuity(lives, tables, b, sign)
    n = None if b.term is None else int(b.term)
    u = int(b.deferral)
    if b.increasing or b.decreasing:
        z1, z2 = _increasing(lives, tables, n, u, b.decreasing, sign)
    else:
        z1, z2 = _insurance(lives, tables, n, u, sign)
    if u:
        p = lives.survival(0, u)
        z1, z2 = _times(p, v**u * z1), _times(p, v ** (2 * u) * z2)
    return z1, z2


def _insurance(lives, tables, n, u: int, sign: float):
    a = lives.at(tables, u)
    z1, z2 = _col(a, 0), _col(a, 1)
    if n is not None:
        vy = tables.year_discount
        p = lives.survival(u, u + n)
        b = lives.at(tables, u + n)
        z1 = z1 + sign * _times(p, vy**n * _col(b, 0))
        z2 = z2 + sign * _times(p, vy ** (2 * n) * _col(b, 1))
    return z1, z2


def _increasing(lives, tables, n, u: int, decreasing: bool, sign: float):
    """(IA) (k + 1 in the k-th policy year) or, over a term n, the decreasing cover
    (n − k)/n; first and second moments (see values.py's whole-age identities)."""
    v = lives.v
    a = lives.at(tables, u)
    z1, z2, inc, inc2, sq2 = (_col(a, i) for i in range(5))
    if n is None:
        return inc, sq2
    p = lives.survival(u, u + n)
    b = lives.at(tables, u + n)
    e1, e2 = v**n, v ** (2 * n)
    b1, b2, b_inc, b_inc2, b_sq2 = (_col(b, i) for i in range(5))
    # after n years a death in year k of the rest pays n + k
    inc = inc + sign * _times(p, e1 * (b_inc + n * b1))
    inc2 = inc2 + sign * _times(p, e2 * (b_inc2 + n * b2))
    sq2 = sq2 + sign * _times(p, e2 * (b_sq2 + 2.0 * n * b_inc2 + n * n * b2))
    if not decreasing:
        return inc, sq2
    z1 = z1 + sign * _times(p, e1 * b1)
    z2 = z2 + sign * _times(p, e2 * b2)
    # (n − k)/n in policy year k = ((n + 1) − (k + 1))/n
    return (((n + 1) * z1 + sign * inc) / n,
            ((n + 1) ** 2 * z2 + sign * 2.0 * (n + 1) * inc2 + sq2) / (n * n))


def _annuity(lives, tables, b, sign: float):
    """Y = 1{T > u} vᵘ (c_g + 1{T > u + g} vʸᵍ Y'), Y' the annuity for n − g years from
    x + u + g, c_g the payments of the first g policy years, certain."""
    v = lives.v
    vy, per_year = tables.year_discount, tables.certain_year
    u, g = int(b.deferral), int(b.guarantee)
    n = None if b.term is None else int(b.term)
    certain = _certain(vy, g, per_year)
    rest = None if n is None else n - g
    if rest is not None and rest <= 0:
        y1 = certain if lives.scalar else np.full(lives.n, certain)
        y2 = y1 * certain
    else:
        s = u + g
        a = lives.at(tables, s)
        l1, l2 = _col(a, 0), _col(a, 1)
        if rest is not None:
            p = lives.survival(s, s + rest)
            tail = lives.at(tables, s + rest)
            t1, t2 = _col(tail, 0), _col(tail, 1)
            l2 = l2 + sign * _times(p, 2.0 * _certain(vy, rest, per_year) * vy**rest * t1
                                    + vy ** (2 * rest) * t2)
            l1 = l1 + sign * _times(p, vy**rest * t1)
        pg = lives.survival(u, s)
        y1 = certain + _times(pg, vy**g * l1)
        y2 = certain * certain + _times(pg, 2.0 * certain * vy**g * l1 + vy ** (2 * g) * l2)
    if u:
        p = lives.survival(0, u)
        y1, y2 = _times(p, v**u * y1), _times(p, v ** (2 * u) * y2)
    if sign < 0:
        y2 = max(y2, 0.0) if lives.scalar else np.maximum(y2, 0.0)
    return y1, y2


# ---- policy values: the payments still to come at any duration ---------------------------------


def _hazard_at(model, loc: Located, k: np.ndarray) -> np.ndarray:
    """The cumulative hazard from each life's row start to x + k (k whole, (N, D))."""
    n_years = model.lam.shape[1] - 1
    row = loc.row[:, None]
    frac = np.broadcast_to(loc.frac[:, None], k.shape)
    jk = loc.index[:, None] + k
    jc = np.minimum(jk, n_years - 1)
    with np.errstate(invalid="ignore", over="ignore"):
        within = model._year_hazard(np.broadcast_to(row, k.shape), jc, np.zeros(k.shape), frac)
        h = model.lam[row, np.minimum(jk, n_years)] + np.where(frac > 0.0, within, 0.0)
    h = np.where((jk < n_years) | ((jk == n_years) & (frac == 0.0)), h, np.inf)
    return np.where(np.isnan(h), np.inf, h)


def _grid_at(lives: ExactLives, tables: ExactTables, k: np.ndarray):
    """The tables' functions at x + k for every life and column of k, (N, D, Q), and their
    error bounds (N, D)."""
    loc = lives.loc
    row = np.broadcast_to(loc.row[:, None], k.shape).ravel()
    index = (loc.index[:, None] + k).ravel()
    frac = np.broadcast_to(loc.frac[:, None], k.shape).ravel()
    row, index = lives.model._same_future(row, index)
    out, error = tables.at(row, index, frac)
    return out.reshape(k.shape + (out.shape[-1],)), error.reshape(k.shape)


def future_values(lives: ExactLives, age, duration, b, t: np.ndarray, tables_for):
    """Σ over the payments (or periods of cover) of ``b`` still to come at each duration t,
    discounted to 0 and weighted by survival from x, (N, D): the payments of the policy year
    that t falls in directly, and those from the next anniversary A on from the tables at
    x + A (the remaining benefit there, its amounts moved on by A − u years). None when the
    benefit is off this path (a guarantee), a table is not built, or a life's lookup has no
    polynomial (the general path then values every duration)."""
    from .amounts import year_amounts
    from .values import Endowment, LifeAnnuity, PureEndowment

    if (isinstance(b, LifeAnnuity) and b.guarantee > 0) or getattr(b, "timing", "") in CONTINUOUS:
        return None
    model, loc, v = lives.model, lives.loc, lives.v
    n_lives = loc.row.size
    if isinstance(b, PureEndowment):
        n = int(b.term)
        return np.broadcast_to((v**n * _survival_array(lives, n))[:, None], (n_lives, t.size))
    tables = tables_for(*table_kinds(b)[0])
    if tables is None:
        return None
    u = int(getattr(b, "deferral", 0))
    n = None if b.term is None else int(b.term)
    end = None if n is None else u + n
    anniversary = np.maximum(np.ceil(t - EDGE), u).astype(np.int64)  # A, per duration
    if end is not None:
        anniversary = np.minimum(anniversary, end)
    # every anniversary used, and the end of cover, looked up once each
    wanted = set(anniversary.tolist()) | (set() if end is None else {end})
    points = np.array(sorted(wanted), dtype=np.int64)  # (np.unique hashes: slower here)
    col = np.searchsorted(points, anniversary)
    k = np.broadcast_to(points[None, :], (n_lives, points.size))
    h0 = np.atleast_1d(np.asarray(lives.hazard(0), float))[:, None]
    h_k = _hazard_at(model, loc, k)
    values, error = _grid_at(lives, tables, k)
    h_a, a_vals = h_k[:, col], values[:, col]
    with np.errstate(invalid="ignore", over="ignore"):
        s_a = np.where(np.isfinite(h_a), np.exp(h0 - h_a), 0.0)  # S(x + A)/S(x)
    j0 = (anniversary - u).astype(float)[None, :]  # years of payment (or cover) before A
    bound = error[:, col]  # the error bound of what each duration looks up
    if end is not None:
        e = points.size - 1  # the end of cover is the last point
        e_vals = values[:, e:e + 1]
        with np.errstate(invalid="ignore", over="ignore"):
            p_ae = np.where(np.isfinite(h_a), np.nan_to_num(np.exp(h_a - h_k[:, e:e + 1]),
                                                            nan=0.0), 0.0)
        bound = np.maximum(bound, np.where(p_ae > 0.0, error[:, e:e + 1], 0.0))
        left = (end - anniversary).astype(float)[None, :]  # n′, the years left from A
    vy = tables.year_discount
    if isinstance(b, (LifeAnnuity, Endowment)) or not (b.increasing or b.decreasing):
        rest = a_vals[..., 0]
        if end is not None:
            rest = rest - _times(p_ae, vy**left * e_vals[..., 0])
        factor = (1.0 + getattr(b, "escalation", 0.0)) ** j0
    else:
        z, inc = a_vals[..., 0], a_vals[..., 2]
        if end is not None:
            e1 = v**left
            inc = inc - _times(p_ae, e1 * (e_vals[..., 2] + left * e_vals[..., 0]))
            z = z - _times(p_ae, e1 * e_vals[..., 0])
        # the amount in policy year j0 + j′ is j0 + (j′ + 1), or (n − j0 + 1 − (j′ + 1))/n
        rest = j0 * z + inc if b.increasing else ((n - j0 + 1.0) * z - inc) / n
        factor = 1.0
    if end is not None:
        rest = np.where(anniversary[None, :] >= end, 0.0, rest)
    rest = np.where(np.isfinite(bound) | ~(s_a > 0.0), rest, np.nan)
    total = _times(s_a, v ** anniversary[None, :] * factor * rest)
    # the payments (or periods) of the policy year k0 = A − 1 still to come at t (t in
    # (k0, A]: an annuity in arrears pays that year's last payment at A itself)
    k0 = anniversary - 1
    partial = (t > k0 + EDGE) & (k0 >= u)
    m = _frequency(b)
    steps = np.arange(m)
    amount = year_amounts(b, np.maximum(k0 - u, 0))[:, None]
    stop = math.inf if end is None else end
    if isinstance(b, LifeAnnuity):
        arrears = b.timing == "arrears"
        times = k0[:, None] + (steps + (1.0 if arrears else 0.0))[None, :] / m
        last = (times <= stop + EDGE) if arrears else (times < stop - EDGE)
        due = partial[:, None] & (times >= t[:, None] - EDGE) & last
        at = np.where(due, times, 0.0)
        weight = np.where(due, amount / m * v**at, 0.0)
        with np.errstate(over="ignore"):
            alive = np.exp(-_span(model, age, duration, np.zeros_like(at), at))
        part = (alive * weight[None]).sum(axis=-1)
    else:
        lo = k0[:, None] + steps[None, :] / m
        hi = lo + 1.0 / m
        due = partial[:, None] & (hi > t[:, None] + EDGE) & (hi <= stop + EDGE)
        start = np.where(due, np.maximum(lo, t[:, None]), 0.0)
        hi = np.where(due, hi, 0.0)
        weight = np.where(due, amount * v**hi, 0.0)
        # S(x + start)/S(x) and the death within (start, hi], in one call
        h = _span(model, age, duration, np.concatenate([np.zeros_like(start), start], axis=-1),
                  np.concatenate([start, hi], axis=-1))
        with np.errstate(invalid="ignore", over="ignore"):
            died = np.exp(-h[..., :m]) * np.nan_to_num(-np.expm1(-h[..., m:]), nan=1.0)
        part = (died * weight[None]).sum(axis=-1)
    out = total + part
    if isinstance(b, Endowment):
        out = out + (v**n * _survival_array(lives, n))[:, None]
    if not np.all(np.isfinite(out)):
        return None
    return out


def _survival_array(lives: ExactLives, k: int) -> np.ndarray:
    """S(x + k)/S(x) as an array (one life's float too)."""
    return np.atleast_1d(np.asarray(lives.survival(0, k), float))


def _span(model, age, duration, t0: np.ndarray, t1: np.ndarray) -> np.ndarray:
    """The cumulative hazard between t0 and t1 of a (D, k) grid for every life: (N, D, k)."""
    shape = (age.size,) + t0.shape
    return model.span_hazard(np.broadcast_to(age.reshape(-1, 1, 1), shape),
                             np.broadcast_to(duration.reshape(-1, 1, 1), shape),
                             np.broadcast_to(t0[None], shape), np.broadcast_to(t1[None], shape))

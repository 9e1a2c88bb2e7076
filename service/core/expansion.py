"""Exact ages as lookups: piecewise polynomial expansions in the fraction of an age.

Inside a year of age j, the age functions of a basis (the survival to j + f from j, the
integrals ∫₀^∞ tⁱ ₜp dt and the curtate moments E[K^k] of a life aged j + f, scaled by that
survival) are smooth in the fraction f: polynomials for UDD, exponentials for constant force,
analytic for laws. So, once per basis, each year ("cell") gets a polynomial per quantity,
interpolated at Chebyshev points of the first kind (whose interpolant is near-best), on 2ᵏ equal
segments of the year, k the least for which the polynomial reproduces the direct computation
at check points between and beyond the nodes to ``CHECK_RTOL``. The polynomial is kept as
Chebyshev coefficients in the segment's own variable u ∈ [−1, 1] (the power basis would lose
three digits to cancellation at degree 12), so a lookup is a gather and Clenshaw's
recurrence: the same multiplications and additions for one life in plain floats as for a
batch in numpy, and so the same bits.

Beside it, a *lookup* (:class:`Lookup`) holds only what (e̊, e, Var T, Var K) need, at the
lowest degree the basis allows (chosen when it is built, each year checked on the answers
and on their variances): power series in u evaluated by Horner's rule, one multiplication
and one addition a step, on a (quantities × lives) layout. A UDD year's functions scaled by
the survival are polynomials of degree 3 in f, so a table's lookup is exact to rounding at
degree 3; a law's takes degree 4 or 5 on up to 16 segments. Power series lose digits at
high degree, so the full expansions keep Chebyshev coefficients and Clenshaw's recurrence.

A cell that no expansion reproduces (a Balducci year with q near 1, a law's year where the
hazard rises by hundreds) is left out: its lives take the direct computation, which is exact,
only slower. Nothing is ever answered from an expansion that failed its check.
"""

from __future__ import annotations

import functools
from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np
from numpy.polynomial import chebyshev

#: the degree of every polynomial (13 coefficients), enough for 1e-15 on the usual bases
DEGREE = 12
#: at most 2**MAX_LEVEL segments in a year
MAX_LEVEL = 3
#: the relative agreement every expanded value must reach at every check point
CHECK_RTOL = 2e-14
#: values below this are compared absolutely (survival that has underflowed to nothing)
TINY = 1e-290
#: where, as a fraction of a segment, a left-continuous expansion is checked inside its left
#: edge (the one-sided limit there)
LEFT_EDGE_INSIDE = 1e-9
#: segments whose coefficients one-life lookups keep as plain floats
MAX_CACHED_BLOCKS = 4096
#: lives per block when evaluating, so that the working arrays stay in cache
BLOCK = 16_384
#: the degrees a basis's lookup expansion (:class:`Lookup`) may take, cheapest first
LOOKUP_DEGREES = (3, 4, 5, 6)
#: at most 2**LOOKUP_MAX_LEVEL segments in a year of a lookup expansion
LOOKUP_MAX_LEVEL = 4
#: a lookup degree is taken once it covers this share of the years the full expansion covers
#: (lives in the other years take the full expansion, which is exact too, at about three
#: times the cost)
LOOKUP_SHARE = 0.85
#: the agreement of a lookup's variances E[X²] − E[X]² with the direct computation's: the
#: difference magnifies the moments' errors by E[X²]/Var X, so a year where the expanded
#: moments meet CHECK_RTOL but their variance would not is left to the full expansion
VARIANCE_RTOL = 1e-13
#: cells on which a basis's lookup degree is chosen (then every cell is fitted and checked)
LOOKUP_SAMPLE = 24
#: lives per block of a lookup: its working rows (quantities × lives) stay in the core's cache
LOOKUP_BLOCK = 8_192


def _nodes(degree: int) -> np.ndarray:
    """Chebyshev points of the first kind on [−1, 1], in increasing order."""
    k = np.arange(degree + 1)
    return np.sort(np.cos(np.pi * (k + 0.5) / (degree + 1)))


def _checks(degree: int) -> np.ndarray:
    """Check points on [−1, 1]: midway between nodes, and the two ends."""
    x = _nodes(degree)
    return np.concatenate([[-1.0], 0.5 * (x[:-1] + x[1:]), [1.0]])


@functools.cache
def _chebyshev_matrix(degree: int) -> np.ndarray:
    """M with (Chebyshev coefficients) = M @ (values at the nodes)."""
    return np.linalg.inv(chebyshev.chebvander(_nodes(degree), degree))


def _clenshaw(coef_at, degree: int, u):
    """Σₘ cₘ Tₘ(u) by Clenshaw's recurrence; ``coef_at(m)`` gives the coefficients cₘ.

    The one evaluation used everywhere (compile-time checks, batches, one life), so that the
    same operations give the same bits."""
    two_u = u + u
    b1 = coef_at(degree).copy()
    b2 = np.zeros_like(b1)
    for m in range(degree - 1, 0, -1):
        b0 = b1 * two_u
        b0 -= b2
        b0 += coef_at(m)
        b2, b1 = b1, b0
    out = b1 * u
    out -= b2
    out += coef_at(0)
    return out


@dataclass
class Expansion:
    """Polynomials per cell of a (rows × years) grid, for ``n_quantities`` quantities.

    ``cell_of[r, j]`` is the cell of year j of row r, or −1 where that year has none;
    ``first[c]`` its first segment and ``count[c]`` (a float) its number of segments;
    ``coef[s, m, q]`` the coefficient of Tₘ(u) for quantity q on segment s.
    """

    cell_of: np.ndarray
    first: np.ndarray
    count: np.ndarray
    coef: np.ndarray
    degree: int
    #: per cell, the largest relative error found at its check points
    error: np.ndarray | None = None
    _blocks: dict = field(default_factory=dict, repr=False)  # one life's lookups, as floats

    def __post_init__(self):
        self.count_list = self.count.tolist()
        self._cell_rows = self.cell_of.tolist()
        self._years = self.cell_of.shape[1]
        self.first_list = self.first.tolist()

    @property
    def nbytes(self) -> int:
        return int(self.cell_of.nbytes + self.first.nbytes + self.count.nbytes + self.coef.nbytes
                   + (0 if self.error is None else self.error.nbytes))

    def cells(self, row, index) -> np.ndarray:
        """The cell of each life (−1 where the year has no expansion)."""
        rows, years = self.cell_of.shape
        inside = (index >= 0) & (index < years)
        return np.where(inside, self.cell_of[row, np.clip(index, 0, years - 1)], -1)

    def cell_of_one(self, row: int, index: int) -> int:
        """``cells`` for one life, in plain numbers."""
        if not 0 <= index < self._years:
            return -1
        return self._cell_rows[row][index]

    def evaluate(self, cell, frac, quantities) -> np.ndarray:
        """The quantities (a list of their numbers) for lives in ``cell`` (all ≥ 0) at ``frac``:
        shape (N, len(quantities))."""
        cell = np.asarray(cell)
        frac = np.asarray(frac, float)
        coef = self.coef[:, :, quantities]
        out = np.empty((cell.size, len(quantities)))
        for lo in range(0, cell.size, BLOCK):
            sl = slice(lo, lo + BLOCK)
            c = cell[sl]
            scaled = frac[sl] * self.count[c]
            k = np.minimum(np.floor(scaled), self.count[c] - 1.0)
            seg = self.first[c] + k.astype(np.int64)
            u = ((scaled - k) * 2.0 - 1.0)[:, None]
            out[sl] = _clenshaw(lambda m, seg=seg: coef[seg, m], self.degree, u)
        return out

    def evaluate_one(self, cell: int, frac: float, quantities) -> list[float]:
        """``evaluate`` for one life in plain floats: the same operations, so the same bits."""
        count = self.count_list[cell]
        scaled = frac * count
        k = min(float(int(scaled)), count - 1.0)
        seg = self.first_list[cell] + int(k)
        u = (scaled - k) * 2.0 - 1.0
        key = (seg, tuple(quantities))
        block = self._blocks.get(key)
        if block is None:
            block = self.coef[seg][:, quantities].tolist()
            if len(self._blocks) < MAX_CACHED_BLOCKS:
                self._blocks[key] = block
        two_u = u + u
        b1 = block[self.degree]
        b2 = [0.0] * len(b1)
        for m in range(self.degree - 1, 0, -1):
            b1, b2 = [b * two_u - c + d for b, c, d in zip(b1, b2, block[m])], b1
        return [b * u - c + d for b, c, d in zip(b1, b2, block[0])]


Exact = Callable[[np.ndarray, np.ndarray], np.ndarray]
"""exact(cells, fractions) → (n_cells, n_fractions, Q): the direct values in the given cells."""


def _fractions(n_seg: int, degree: int, left_continuous: bool = False):
    """The fractions of a year at which ``n_seg`` segments of ``degree`` are fitted and
    checked: (segment numbers (S, 1), node fractions, check fractions, check points on one
    segment). ``left_continuous``: the functions may jump at the segments' edges, where they
    take the value from the left; each segment is then checked just inside its left edge and
    exactly at its right edge (see :func:`build`)."""
    nodes = (_nodes(degree) + 1.0) * 0.5
    checks = (_checks(degree) + 1.0) * 0.5
    seg = np.arange(n_seg, dtype=float)[:, None]
    f_nodes = ((seg + nodes[None, :]) / n_seg).ravel()
    if left_continuous:
        checks[0] = LEFT_EDGE_INSIDE
        f_checks = ((seg + checks[None, :]) / n_seg).ravel()
    else:
        f_checks = np.clip(((seg + checks[None, :]) / n_seg).ravel(), 1e-12, 1.0 - 1e-12)
    return seg, f_nodes, f_checks, checks


def _fit(exact: Exact, cells: np.ndarray, n_seg: int, degree: int,
         left_continuous: bool = False):
    """Fit every cell on ``n_seg`` equal segments: (coef (C, S, D+1, Q), ok (C,), and the
    largest relative error at the check points (C,))."""
    seg, f_nodes, f_checks, checks = _fractions(n_seg, degree, left_continuous)
    values = exact(cells, np.concatenate([f_nodes, f_checks]))  # (C, F, Q)
    n_q = values.shape[-1]
    at_nodes = values[:, : f_nodes.size].reshape(cells.size, n_seg, degree + 1, n_q)
    want = values[:, f_nodes.size :].reshape(cells.size, n_seg, checks.size, n_q)
    coef = np.einsum("mk,cskq->csmq", _chebyshev_matrix(degree), at_nodes)
    # evaluate at the check points by the same recurrence as a lookup
    u = ((f_checks.reshape(n_seg, -1) * n_seg - seg) * 2.0 - 1.0)[None, :, :, None]
    got = _clenshaw(lambda m: coef[:, :, None, m, :], degree, np.broadcast_to(u, want.shape))
    with np.errstate(invalid="ignore"):
        err = np.abs(got - want)
        bound = CHECK_RTOL * np.abs(want)
    good = np.isfinite(want) & np.isfinite(got) & ((err <= bound) | (np.abs(want) < TINY))
    good &= np.all(np.isfinite(at_nodes), axis=2)[:, :, None, :]
    ok = good.reshape(cells.size, -1).all(axis=1)
    with np.errstate(invalid="ignore", divide="ignore"):
        rel = np.where(np.abs(want) < TINY, 0.0, err / np.abs(want))
    worst = np.nan_to_num(rel, nan=np.inf).reshape(cells.size, -1).max(axis=1, initial=0.0)
    return coef, ok, worst


def build(exact: Exact, valid: np.ndarray, segments: int = 1, degree: int = DEGREE,
          max_level: int = MAX_LEVEL, left_continuous: bool = False) -> Expansion:
    """The expansions of every valid cell (a boolean (rows × years) grid), each checked.

    A cell is tried on ``segments`` × 2ᵏ equal segments, k = 0..max_level (``segments`` > 1
    when the functions have known kinks at multiples of 1/segments of the year).
    ``left_continuous``: the functions may jump at multiples of 1/segments, taking the value
    from the left there (a payment due exactly when survival drops); a lookup at an edge then
    evaluates the segment to its left (exact_values.py)."""
    cell_ids = np.flatnonzero(valid.ravel())
    pieces, errors, todo = {}, {}, cell_ids
    for level in range(max_level + 1):
        if todo.size == 0:
            break
        coef, ok, worst = _fit(exact, todo, segments * 2**level, degree, left_continuous)
        for i in np.flatnonzero(ok):
            pieces[int(todo[i])] = coef[i]
            errors[int(todo[i])] = float(worst[i])
        todo = todo[~ok]
    cell_of = np.full(valid.size, -1, dtype=np.int64)
    first, count, blocks = [], [], []
    n_seg = 0
    for c, cell in enumerate(sorted(pieces)):
        cell_of[cell] = c
        p = pieces[cell]
        first.append(n_seg)
        count.append(float(p.shape[0]))
        blocks.append(p)
        n_seg += p.shape[0]
    n_q = blocks[0].shape[-1] if blocks else 1
    coef = np.concatenate(blocks, axis=0) if blocks else np.zeros((0, degree + 1, n_q))
    return Expansion(
        cell_of=cell_of.reshape(valid.shape),
        first=np.array(first, dtype=np.int64),
        count=np.array(count, dtype=float),
        coef=np.ascontiguousarray(coef),
        degree=degree,
        error=np.array([errors[cell] for cell in sorted(pieces)], dtype=float),
    )


@functools.cache
def _power_matrix(degree: int) -> np.ndarray:
    """P with (power coefficients in u) = P.T @ (Chebyshev coefficients): P[m] holds Tₘ's."""
    p = np.zeros((degree + 1, degree + 1))
    for m in range(degree + 1):
        unit = np.zeros(degree + 1)
        unit[m] = 1.0
        powers = chebyshev.cheb2poly(unit)
        p[m, : powers.size] = powers
    return p


def _horner(coef_at, degree: int, u):
    """Σₘ aₘ uᵐ by Horner's rule, ``coef_at(m)`` giving aₘ: one multiplication and one addition
    a step. The one evaluation of lookups (checks, batches, one life), so the same bits."""
    out = coef_at(degree).copy()
    for m in range(degree - 1, -1, -1):
        out *= u
        out += coef_at(m)
    return out


def _answers(values: np.ndarray, scaled: bool) -> np.ndarray:
    """The served quantities from the expanded ones (last axis): divided by the first when the
    expansion holds them scaled by the survival."""
    if not scaled:
        return values
    return values[..., 1:] / values[..., :1]


def _agree(got, want, rtol):
    """Where ``got`` is ``want`` to ``rtol`` (or both tiny), for every quantity (last axis)."""
    good = np.isfinite(want) & np.isfinite(got)
    good &= (np.abs(got - want) <= rtol * np.abs(want)) | (np.abs(want) < TINY)
    return good.all(axis=-1)


def _variances(answers):
    """(Var T, Var K) from a lookup's (e̊, ½E[T²], e, E[K²]), as the summary forms them."""
    complete, half_second, curtate, curtate_second = np.moveaxis(answers, -1, 0)
    return np.stack([2.0 * half_second - complete * complete,
                     curtate_second - curtate * curtate], axis=-1)


def _fit_lookup(exact: Exact, cells: np.ndarray, level: int, degree: int, forms):
    """Fit every cell on 2**level segments as power series in u = f·a + b on each segment
    (a = 2·2**level, b = −(2k + 1) on segment k), checked through Horner's rule on the answers,
    in each form (scaled or not) of ``forms`` (form → mask of the cells to fit in it): from one
    evaluation of the direct values, {form: (coef (C, S, D+1, Q), ok (C,))}."""
    n_seg = 2**level
    seg, f_nodes, f_checks, checks = _fractions(2**level, degree)
    u = f_checks.reshape(n_seg, -1) * (2.0 * n_seg) - (2.0 * seg + 1.0)
    to_coef = np.einsum("mk,mp->kp", _chebyshev_matrix(degree), _power_matrix(degree))
    fits = {}
    with np.errstate(invalid="ignore", over="ignore", divide="ignore"):
        values = exact(cells, np.concatenate([f_nodes, f_checks]))  # (C, F, 5): s first
        for scaled, mask in forms.items():
            v = values[mask] if scaled else _answers(values[mask], True)
            n_c, n_q = v.shape[0], v.shape[-1]
            at_nodes = v[:, : f_nodes.size].reshape(n_c, n_seg, degree + 1, n_q)
            want = _answers(v[:, f_nodes.size :], scaled).reshape(n_c, n_seg, checks.size, -1)
            coef = np.einsum("kp,cskq->cspq", to_coef, at_nodes)
            uu = np.broadcast_to(u[None, :, :, None], (n_c, n_seg, checks.size, n_q))
            got = _answers(
                _horner(lambda m, c=coef, w=uu: np.broadcast_to(c[:, :, None, m, :], w.shape),
                        degree, uu),
                scaled,
            )
            good = _agree(got, want, CHECK_RTOL) & _agree(_variances(got), _variances(want),
                                                           VARIANCE_RTOL)
            good &= np.all(np.isfinite(at_nodes), axis=(2, 3))[:, :, None]
            fits[scaled] = (coef, good.reshape(n_c, -1).all(axis=1))
    return fits


@dataclass
class Lookup:
    """A few quantities per cell of a (rows × years) grid at the lowest degree the basis
    allows: the fast path for (e̊, e, Var T, Var K) at exact ages.

    A life in year j of row r at fraction f finds its segment in ``segment_of`` at
    ((r·L + j)·K + ⌊f·K⌋) (K = 2**level of the finest cell; −1 where the year has no
    lookup), its variable u = f·``scale``[s] + ``shift``[s] ∈ [−1, 1], and its values by
    Horner's rule on ``coef[m, q, s]``, the coefficient of uᵐ of quantity q on segment s
    (quantities along the middle axis and segments last, so that a block of lives gathers
    and computes on contiguous rows). When ``scaled``, the first quantity is the survival
    and the answers are the others divided by it.
    """

    segment_of: np.ndarray
    years: int
    fine: int
    scale: np.ndarray
    shift: np.ndarray
    coef: np.ndarray
    degree: int
    scaled: bool
    _blocks: dict = field(default_factory=dict, repr=False)  # one life's coefficients

    def __post_init__(self):
        self._segment_list = self.segment_of.tolist()
        self._scale_list = self.scale.tolist()
        self._shift_list = self.shift.tolist()

    @property
    def nbytes(self) -> int:
        return int(self.segment_of.nbytes + self.scale.nbytes + self.shift.nbytes
                   + self.coef.nbytes)

    def segments(self, row, index, frac):
        """(segment, u) of each life; segment −1 where its year has no lookup."""
        inside = np.asarray(index).astype(np.uint64) < self.years  # negative indices wrap
        at = row * self.years
        at += index
        at *= self.fine
        at += (frac * self.fine).astype(np.int64)
        everywhere = bool(np.all(inside))
        if not everywhere:
            at[~inside] = 0
        seg = self.segment_of.take(at)
        if not everywhere:
            seg[~inside] = -1
        u = frac * self.scale.take(seg)
        u += self.shift.take(seg)
        return seg, u

    def evaluate_lives(self, row, index, frac, finish=None, n_out: int = 0):
        """The answers of lives placed on the grid, block by block (the segments, u and the
        polynomials of a block stay in cache), or ``finish(answers, out)`` of them, which
        writes ``n_out`` rows: (values (Q or n_out, N), covered (N,)), the values
        meaningless where ``covered`` is False (the year has no lookup)."""
        n_q = self.coef.shape[1] - (1 if self.scaled else 0)
        out = np.empty((n_out if finish else n_q, frac.size))
        covered = np.empty(frac.size, dtype=bool)
        answers = np.empty((n_q, min(LOOKUP_BLOCK, frac.size)))
        for lo in range(0, frac.size, LOOKUP_BLOCK):
            sl = slice(lo, lo + LOOKUP_BLOCK)
            seg, u = self.segments(row[sl], index[sl], frac[sl])
            np.greater_equal(seg, 0, out=covered[sl])
            if finish is None:
                self._block(seg, u, out[:, sl])
            else:
                block = answers[:, : seg.size]
                self._block(seg, u, block)
                finish(block, out[:, sl])
        return out, covered

    def segment_one(self, row: int, index: int, frac: float) -> tuple[int, float]:
        """``segments`` for one life, in plain numbers."""
        if not 0 <= index < self.years:
            return -1, 0.0
        seg = self._segment_list[(row * self.years + index) * self.fine + int(frac * self.fine)]
        if seg < 0:
            return -1, 0.0
        return seg, frac * self._scale_list[seg] + self._shift_list[seg]

    def evaluate(self, seg, u) -> np.ndarray:
        """The answers for lives on segments ``seg`` (all ≥ 0) at ``u``: shape (Q, N)."""
        out = np.empty((self.coef.shape[1] - (1 if self.scaled else 0), seg.size))
        for lo in range(0, seg.size, LOOKUP_BLOCK):
            sl = slice(lo, lo + LOOKUP_BLOCK)
            self._block(seg[sl], u[sl], out[:, sl])
        return out

    def _block(self, seg, u, out) -> None:
        """One block of lives by Horner's rule into ``out`` (Q, n)."""
        coef = self.coef
        v = _horner(lambda m: coef[m].take(seg, axis=1), self.degree, u)
        if self.scaled:
            np.divide(v[1:], v[0], out=out)
        else:
            out[...] = v

    def evaluate_one(self, seg: int, u: float) -> list[float]:
        """``evaluate`` for one life in plain floats: the same operations, so the same bits."""
        rows = self._blocks.get(seg)
        if rows is None:  # each quantity's highest coefficient, then the others downwards
            rows = tuple((row[0], tuple(row[1:])) for row in self.coef[::-1, :, seg].T.tolist())
            if len(self._blocks) < MAX_CACHED_BLOCKS:
                self._blocks[seg] = rows
        values = []
        for b, lower in rows:
            for c in lower:
                b = b * u + c
            values.append(b)
        if self.scaled:
            s = values[0]
            return [v / s for v in values[1:]]
        return values


def _lookup_of(pieces: dict, shape: tuple, degree: int, scaled: bool) -> Lookup:
    """The lookup of the fitted cells ``pieces`` (cell → coef (S, D+1, Q))."""
    n_cells = int(np.prod(shape))
    finest = max((p.shape[0] for p in pieces.values()), default=1)
    segment_of = np.full(n_cells * finest, -1, dtype=np.int64)
    scale, shift, blocks = [], [], []
    n_seg = 0
    for cell in sorted(pieces):
        p = pieces[cell]
        count = p.shape[0]
        per = finest // count
        for k in range(count):
            lo = cell * finest + k * per
            segment_of[lo : lo + per] = n_seg + k
        scale.extend([2.0 * count] * count)
        shift.extend((-(2.0 * np.arange(count) + 1.0)).tolist())
        blocks.append(p)
        n_seg += count
    n_q = blocks[0].shape[-1] if blocks else 1
    coef = np.concatenate(blocks, axis=0) if blocks else np.zeros((0, degree + 1, n_q))
    return Lookup(
        segment_of=segment_of,
        years=int(shape[1]),
        fine=finest,
        scale=np.array(scale, dtype=float),
        shift=np.array(shift, dtype=float),
        coef=np.ascontiguousarray(coef.transpose(1, 2, 0)),
        degree=degree,
        scaled=scaled,
    )


def _fit_cells(exact: Exact, cells: np.ndarray, degree: int, forms) -> tuple[dict, bool]:
    """Each cell on the fewest segments that pass at ``degree``, in the form of ``forms``
    that passes more cells (the other is dropped once one has passed any, to spare its
    fits; the plain form on a tie, as it is cheaper): (cell → coef, form)."""
    pieces = {form: {} for form in forms}
    todo = {form: cells for form in forms}
    for level in range(LOOKUP_MAX_LEVEL + 1):
        union = np.unique(np.concatenate([todo[form] for form in todo]))
        if union.size == 0:
            break
        fits = _fit_lookup(exact, union, level, degree,
                           {form: np.isin(union, todo[form]) for form in todo})
        for form, (coef, ok) in fits.items():
            mine = todo[form]
            for i in np.flatnonzero(ok):
                pieces[form][int(mine[i])] = coef[i]
            todo[form] = mine[~ok]
        if len(todo) > 1 and any(pieces.values()):
            keep = max(sorted(todo), key=lambda form: len(pieces[form]))
            todo = {keep: todo[keep]}
    form = max(sorted(pieces), key=lambda form: len(pieces[form]))
    return pieces[form], form


def build_lookup(exact: Exact, valid: np.ndarray, covered: np.ndarray) -> Lookup:
    """The cheapest lookup of the valid cells that the full expansion covers (``covered``, a
    boolean grid): the least degree that reproduces the direct answers in ``LOOKUP_SHARE``
    of them, chosen on a sample of about ``LOOKUP_SAMPLE`` cells spread over the grid;
    then every cell at that degree, in the form that passed more of the sample (the
    quantities themselves, or scaled by the survival, which makes a UDD year's exactly
    polynomial), on the fewest segments that pass its own check. ``exact`` gives
    (s, s·∫T⁰, s·∫T¹, s·E[K], s·E[K²]) as the full expansion's functions do."""
    cell_ids = np.flatnonzero((valid & covered).ravel())  # a year no polynomial of degree 12
    sample = cell_ids[:: max(1, cell_ids.size // LOOKUP_SAMPLE)]  # follows is left out
    wanted = LOOKUP_SHARE * sample.size
    chosen = None
    for degree in LOOKUP_DEGREES:
        pieces, form = _fit_cells(exact, sample, degree, (False, True))
        if chosen is None or len(pieces) > chosen[2]:
            chosen = (degree, form, len(pieces))
        if len(pieces) >= wanted:
            break
    degree, form, _ = chosen
    pieces, _ = _fit_cells(exact, cell_ids, degree, (form,))
    return _lookup_of(pieces, valid.shape, degree, form)

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

A cell that no expansion reproduces (a Balducci year with q near 1, a law's year where the
hazard rises by hundreds) is left out: its lives take the direct computation, which is exact,
only slower. Nothing is ever answered from an expansion that failed its check.
"""

from __future__ import annotations

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


def _nodes(degree: int) -> np.ndarray:
    """Chebyshev points of the first kind on [−1, 1], in increasing order."""
    k = np.arange(degree + 1)
    return np.sort(np.cos(np.pi * (k + 0.5) / (degree + 1)))


def _checks(degree: int) -> np.ndarray:
    """Check points on [−1, 1]: midway between nodes, and the two ends."""
    x = _nodes(degree)
    return np.concatenate([[-1.0], 0.5 * (x[:-1] + x[1:]), [1.0]])


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


def _fit(exact: Exact, cells: np.ndarray, n_seg: int, degree: int,
         left_continuous: bool = False):
    """Fit every cell on ``n_seg`` equal segments: (coef (C, S, D+1, Q), ok (C,), and the
    largest relative error at the check points (C,)).

    ``left_continuous``: the functions may jump at the segments' edges, where they take the
    value from the left; each segment's polynomial is then checked just inside its left edge
    and exactly at its right edge (see :func:`build`)."""
    nodes = (_nodes(degree) + 1.0) * 0.5
    checks = (_checks(degree) + 1.0) * 0.5
    seg = np.arange(n_seg, dtype=float)[:, None]
    f_nodes = ((seg + nodes[None, :]) / n_seg).ravel()
    if left_continuous:
        checks[0] = LEFT_EDGE_INSIDE
        f_checks = ((seg + checks[None, :]) / n_seg).ravel()
    else:
        f_checks = np.clip(((seg + checks[None, :]) / n_seg).ravel(), 1e-12, 1.0 - 1e-12)
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

"""How much memory a compiled basis takes: measured after compiling, estimated before.

The cache of compiled inline bases is bounded in bytes (the ``cache_bytes`` setting), so every
compiled model is measured (:func:`compiled_bytes`: the numpy arrays it holds, each buffer
once, plus a little for the objects around them); and an inline basis whose compiled form
alone would pass the bound is refused before it is compiled (:func:`estimated_bytes`, from the
definition's sizes: a table keeps about ``FLOATS_PER_YEAR`` doubles for every year of every
row).
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np

from service.core.expansion import DEGREE
from service.core.lifetime import EXP_CURTATE, MAX_ORDER, N_MOM, REQUEST_EXPANSION_BUDGET
from service.core.transforms import MAX_IMPROVED_RATES, MAX_IMPROVED_VALUES

from . import definitions as d

#: doubles a compiled table keeps per row and year of age: q, the cumulative hazard, one-year
#: survival, the per-year moments, the tail moments, the curtate moments and the summary at
#: whole ages (e̊, E[T²], e, E[K²])
FLOATS_PER_YEAR = 3 + 2 * N_MOM + MAX_ORDER + 1 + 4
#: what a year's exact-age expansions take once built, reserved from the start (they are
#: built on demand, after the cache has measured the basis): every expanded quantity's
#: Chebyshev coefficients on two segments of the year, about what the compile-time checks
#: leave on average (most years need one segment, steep ones up to eight), and the lookup's
#: five quantities at most on sixteen segments of degree 6 with their index and scaling (a
#: table's: one of degree 3)
EXPANSION_BYTES_PER_YEAR = (2 * (DEGREE + 1) * (EXP_CURTATE + MAX_ORDER + 1)
                            + 16 * ((6 + 1) * 5 + 3)) * 8
#: a rough allowance for the Python objects of one model (not its arrays)
OBJECT_BYTES = 2_048
#: what a law's compiled year grid takes at most (its horizon is at most 10,000 years)
LAW_BYTES = 10_000 * FLOATS_PER_YEAR * 8


def compiled_bytes(model: object) -> int:
    """The memory held by a compiled model: its arrays' buffers (each once) and objects."""
    seen: set[int] = set()
    total = 0
    stack = [model]
    while stack:
        obj = stack.pop()
        if id(obj) in seen:
            continue
        seen.add(id(obj))
        if isinstance(obj, np.ndarray):
            owner = obj
            while isinstance(owner.base, np.ndarray):
                owner = owner.base
            if id(owner) not in seen or owner is obj:
                seen.add(id(owner))
                total += owner.nbytes
            continue
        if isinstance(obj, (list, tuple, set, frozenset)):
            stack.extend(obj)
        elif isinstance(obj, dict):
            stack.extend(obj.values())
        elif hasattr(obj, "__dict__") and not isinstance(obj, type):
            total += OBJECT_BYTES
            fields = vars(obj)
            if "_exact_ages" in fields and fields["_exact_ages"] is None:
                cost = obj._expansion_cost()  # (panel-)years: at least the years expanded
                if cost <= REQUEST_EXPANSION_BUDGET:  # what a request may build later
                    total += cost * EXPANSION_BYTES_PER_YEAR
            stack.extend(fields.values())
    return total


def _table_bytes(rows: int, years: int) -> int:
    return rows * (years + 1) * FLOATS_PER_YEAR * 8 + OBJECT_BYTES


def estimated_bytes(
    definition: d.BasisDefinition | str, stored_bytes: Callable[[str], int]
) -> int:
    """An upper estimate of the memory compiling ``definition`` allocates anew.

    A stored basis is compiled already: it counts only where a transform copies its rates
    (``stored_bytes`` gives its measured size).
    """
    if isinstance(definition, str):
        return 0
    if isinstance(definition, d.Table):
        return _table_bytes(1, len(definition.q))
    if isinstance(definition, d.SelectTable):
        period = len(definition.select[0]) if definition.select else 0
        return _table_bytes(len(definition.select) + 1, period + len(definition.ultimate))
    if isinstance(definition, d.Adjusted):
        copies = definition.q_multiplier is not None or definition.extra_q is not None
        return _copied(definition.base, stored_bytes, copies) + LAW_BYTES
    if isinstance(definition, d.Improved):
        # one row per cohort, as long as the longest cohort: at most the core's bound on the
        # rates an improved table keeps
        cohorts = MAX_IMPROVED_VALUES // MAX_IMPROVED_RATES
        return _copied(definition.base, stored_bytes, True) + _table_bytes(
            cohorts, MAX_IMPROVED_RATES
        )
    if isinstance(definition, (d.JointLife, d.LastSurvivor)):
        return sum(estimated_bytes(m, stored_bytes) for m in definition.members) + LAW_BYTES
    return LAW_BYTES


def _copied(base: d.BasisDefinition | str, stored_bytes: Callable[[str], int], copies: bool) -> int:
    own = estimated_bytes(base, stored_bytes)
    if isinstance(base, str):
        return stored_bytes(base) if copies else 0
    return own * 2 if copies else own

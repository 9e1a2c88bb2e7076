"""A catalogue of sample bases of every kind, shared by the core's tests.

The parameters are invented (or, for Makeham, those of the Standard Ultimate law); they span
young and very old ages, tiny and large parameters. Models are built once and cached.
"""

from __future__ import annotations

import functools

import numpy as np

from service.core import laws, tables

FRACTIONAL = ("udd", "constant-force", "balducci")

# an invented life table from age 30: rising rates, a high last rate, then the closing 1
TABLE_Q = [min(0.0008 * 1.12**i, 0.6) for i in range(45)] + [0.85, 1.0]

# an invented select table: 3-year select period, selection ages 40..44
SELECT_START = 40
SELECT_ROWS = [[0.002 + 0.0004 * r + 0.0015 * k for k in range(3)] for r in range(5)]
ULTIMATE_START = 42
ULTIMATE_Q = [min(0.004 * 1.1**i, 0.7) for i in range(50)] + [1.0]


BUILDERS = {
    "constant-force": lambda: laws.ConstantForce(0.02),
    "de-moivre": lambda: laws.DeMoivre(105.0),
    "generalised-de-moivre": lambda: laws.GeneralisedDeMoivre(100.0, 0.5),
    "generalised-de-moivre-steep": lambda: laws.GeneralisedDeMoivre(90.0, 3.7),
    "gompertz": lambda: laws.Gompertz(3e-5, 1.1),
    "gompertz-steep": lambda: laws.Gompertz(1e-3, 3.0),
    "makeham": lambda: laws.Makeham(0.00022, 2.7e-6, 1.124),
    "weibull": lambda: laws.Weibull(1e-6, 3.0),
    "weibull-fractional": lambda: laws.Weibull(2e-4, 1.5),
    "perks": lambda: laws.Perks(1e-4, 5e-5, 1.1, 1e-5),
    "siler": lambda: laws.Siler(0.05, 1.0, 1e-3, 3e-5, 0.1),
    "gm-2-2": lambda: laws.GompertzMakehamFamily([5e-4, 1e-6], [-10.0, 0.1]),
    "gm-1-3": lambda: laws.GompertzMakehamFamily([5e-4], [-10.0, 0.08, 1e-4]),
    **{
        f"table-{a}": (lambda a=a: tables.LifeTable(30, TABLE_Q, a))
        for a in FRACTIONAL
    },
    **{
        f"select-{a}": (
            lambda a=a: tables.SelectTable(
                SELECT_START, SELECT_ROWS, ULTIMATE_START, ULTIMATE_Q, a
            )
        )
        for a in FRACTIONAL
    },
}
NAMES = tuple(BUILDERS)


@functools.lru_cache(maxsize=None)
def model(name: str):
    return BUILDERS[name]()


def first_age(m) -> float:
    return float(getattr(m, "start_age", 0.0))


def last_age(m) -> float:
    """An old age the basis can still value, close to its end."""
    top = min(m.max_age, m.limiting_age)
    if not np.isfinite(top):
        return 150.0
    return float(top) - 0.25


def age_between(m, u: float) -> float:
    """The age a fraction u ∈ [0, 1) of the way from the first age to ``last_age``."""
    lo, hi = first_age(m), last_age(m)
    return lo + u * (hi - lo)


def is_select(name: str) -> bool:
    return name.startswith("select-")

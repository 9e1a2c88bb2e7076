"""From a basis definition (a Struct of ``definitions``) to a compiled model of the core.

This is the one place that knows which core constructor builds which kind. Each kind
registers one builder; a builder gets the definition and a ``resolve`` callback that compiles
a nested basis (an inline definition or the id of a stored basis), for kinds that wrap
another basis. Constructors of the core validate their parameters and raise ``DomainError``
with a field relative to the definition (``c``, ``q[5]``); the caller places it in the request.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any, TypeVar

import numpy as np

from service.core import laws, several, tables, transforms
from service.core.errors import DomainError
from service.core.generic import check_single_life
from service.core.lifetime import LifetimeModel

from . import definitions as d

Resolve = Callable[["d.BasisDefinition | str"], LifetimeModel]
Builder = Callable[[Any, Resolve], LifetimeModel]

_BUILDERS: dict[type[d.BasisDefinition], Builder] = {}

D = TypeVar("D", bound=type[d.BasisDefinition])


def builds(kind: type[d.BasisDefinition]) -> Callable[[Builder], Builder]:
    """Register the builder of one kind."""

    def register(builder: Builder) -> Builder:
        if kind in _BUILDERS:
            raise RuntimeError(f"a builder for {kind.__name__} is already registered")
        _BUILDERS[kind] = builder
        return builder

    return register


def _no_nested(reference: d.BasisDefinition | str) -> LifetimeModel:
    raise RuntimeError("this basis has no nested basis to resolve")


def build_model(definition: d.BasisDefinition, resolve: Resolve | None = None) -> LifetimeModel:
    """Compile one definition; raises the core's ``DomainError`` for impossible parameters."""
    builder = _BUILDERS.get(type(definition))
    if builder is None:  # a kind added to the union without a builder: a programming error
        raise LookupError(f"no builder registered for {type(definition).__name__}")
    return builder(definition, resolve or _no_nested)


def registered_kinds() -> tuple[type[d.BasisDefinition], ...]:
    return tuple(_BUILDERS)


@builds(d.ConstantForce)
def _constant_force(b: d.ConstantForce, resolve: Resolve) -> LifetimeModel:
    return laws.ConstantForce(mu=b.mu)


@builds(d.DeMoivre)
def _de_moivre(b: d.DeMoivre, resolve: Resolve) -> LifetimeModel:
    return laws.DeMoivre(omega=b.omega)


@builds(d.GeneralisedDeMoivre)
def _generalised_de_moivre(b: d.GeneralisedDeMoivre, resolve: Resolve) -> LifetimeModel:
    return laws.GeneralisedDeMoivre(omega=b.omega, alpha=b.alpha)


@builds(d.Gompertz)
def _gompertz(b: d.Gompertz, resolve: Resolve) -> LifetimeModel:
    return laws.Gompertz(B=b.B, c=b.c)


@builds(d.Makeham)
def _makeham(b: d.Makeham, resolve: Resolve) -> LifetimeModel:
    return laws.Makeham(A=b.A, B=b.B, c=b.c)


@builds(d.Weibull)
def _weibull(b: d.Weibull, resolve: Resolve) -> LifetimeModel:
    return laws.Weibull(k=b.k, n=b.n)


@builds(d.Perks)
def _perks(b: d.Perks, resolve: Resolve) -> LifetimeModel:
    return laws.Perks(A=b.A, B=b.B, c=b.c, D=b.D)


@builds(d.Siler)
def _siler(b: d.Siler, resolve: Resolve) -> LifetimeModel:
    return laws.Siler(a1=b.a1, b1=b.b1, a2=b.a2, a3=b.a3, b3=b.b3)


@builds(d.GompertzMakehamFamily)
def _gompertz_makeham_family(b: d.GompertzMakehamFamily, resolve: Resolve) -> LifetimeModel:
    return laws.GompertzMakehamFamily(alpha=list(b.alpha), beta=list(b.beta))


@builds(d.Table)
def _table(b: d.Table, resolve: Resolve) -> LifetimeModel:
    return tables.LifeTable(start_age=b.start_age, q=b.q, fractional_ages=b.fractional_ages)


@builds(d.SelectTable)
def _select_table(b: d.SelectTable, resolve: Resolve) -> LifetimeModel:
    return tables.SelectTable(
        start_age=b.start_age,
        select=b.select,
        ultimate_start_age=b.ultimate_start_age,
        ultimate=b.ultimate,
        fractional_ages=b.fractional_ages,
    )


# ---- transforms: bases built on other bases --------------------------------------------------


def nesting_depth(definition: d.BasisDefinition | str) -> int:
    """How many inline bases are nested in one another (a stored id counts as a leaf)."""
    if isinstance(definition, str):
        return 0
    inner: list[d.BasisDefinition | str] = []
    if isinstance(definition, (d.Adjusted, d.Improved)):
        inner = [definition.base]
    elif isinstance(definition, (d.JointLife, d.LastSurvivor)):
        inner = list(definition.members)
    return 1 + max((nesting_depth(b) for b in inner), default=0)


def _check_depth(definition: d.BasisDefinition) -> None:
    depth = nesting_depth(definition)
    if depth > d.MAX_NESTING:
        raise DomainError(
            "",
            f"bases may be nested at most {d.MAX_NESTING} deep (this one is {depth} deep)",
        )


def _nested(resolve: Resolve, reference: d.BasisDefinition | str, field: str) -> LifetimeModel:
    """Compile a nested basis; its errors are placed under ``field``."""
    try:
        return resolve(reference)
    except DomainError as exc:
        raise exc.within(field) from None


@builds(d.Adjusted)
def _adjusted(b: d.Adjusted, resolve: Resolve) -> LifetimeModel:
    _check_depth(b)
    base = _nested(resolve, b.base, "base")
    return transforms.rated(
        base,
        age_shift=b.age_shift,
        q_multiplier=b.q_multiplier,
        force_multiplier=b.force_multiplier,
        extra_q=b.extra_q,
        extra_q_years=b.extra_q_years,
        extra_force=b.extra_force,
        extra_force_years=b.extra_force_years,
    )


def _rates_by_age(r: d.RatesByAge):
    values = np.asarray(r.values, dtype=float)
    start = r.start_age

    def rate_of(ages, year):
        return values[np.clip(np.asarray(ages) - start, 0, values.size - 1).astype(np.int64)]

    return rate_of


def _rates_by_year(r: d.RatesByYear, base_year: int):
    width = len(r.grid[0])
    for i, row in enumerate(r.grid):
        if len(row) != width:
            raise DomainError(
                f"rates_by_year.grid[{i}]",
                f"every row of the grid must hold the same number of years as row 0 ({width}); "
                f"this one holds {len(row)}: the grid has a hole",
            )
    if r.start_year > base_year + 1:
        raise DomainError(
            "rates_by_year.start_year",
            f"the grid must cover every calendar year after base_year, so start_year must be "
            f"at most {base_year + 1} (got {r.start_year})",
        )
    grid = np.asarray(r.grid, dtype=float)
    start_age, start_year = r.start_age, r.start_year

    def rate_of(ages, year):
        rows = np.clip(np.asarray(ages) - start_age, 0, grid.shape[0] - 1).astype(np.int64)
        return grid[rows, min(year - start_year, width - 1)]

    return rate_of


@builds(d.Improved)
def _improved(b: d.Improved, resolve: Resolve) -> LifetimeModel:
    _check_depth(b)
    if (b.rates is None) == (b.rates_by_year is None):
        raise DomainError(
            "rates" if b.rates is None else "rates_by_year",
            "give exactly one of rates (by age) and rates_by_year (by age and calendar year)",
        )
    if b.rates is not None:
        rate_of = _rates_by_age(b.rates)
    else:
        assert b.rates_by_year is not None
        rate_of = _rates_by_year(b.rates_by_year, b.base_year)
    base = _nested(resolve, b.base, "base")
    return transforms.improved(base, b.base_year, b.valuation_year, rate_of)


def _status(b: d.JointLife | d.LastSurvivor, resolve: Resolve, joint: bool) -> LifetimeModel:
    _check_depth(b)
    members = []
    for i, reference in enumerate(b.members):
        member = _nested(resolve, reference, f"members[{i}]")
        check_single_life(member, f"members[{i}]")
        members.append(member)
    return several.SeveralLives(members, joint, b.common_shock_force)


@builds(d.JointLife)
def _joint_life(b: d.JointLife, resolve: Resolve) -> LifetimeModel:
    return _status(b, resolve, True)


@builds(d.LastSurvivor)
def _last_survivor(b: d.LastSurvivor, resolve: Resolve) -> LifetimeModel:
    return _status(b, resolve, False)

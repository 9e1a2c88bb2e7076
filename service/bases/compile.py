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

from service.core import laws, tables
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

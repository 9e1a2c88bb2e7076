"""What the request path needs to know of a compiled model, found once per model.

A request used to find these again each time: how many members the model has, which of them
select by duration (so that a duration since selection applies), and the work its lives ask
for. They depend on the model alone, so they are kept beside it (weakly: a compiled inline
basis dropped from the cache takes its facts with it).

The work estimates (``service.core.work``) grow with the number of lives and with the years
a life may live, so the youngest placed age a basis accepts (0) gives each estimate a bound
that is linear in the number of lives, ``fixed + per_life × lives``, found once per model.
A request whose bound stays under the threshold that matters (running on the event loop,
within the budget) is decided by the bound alone, without estimating its own work; any other
request is estimated exactly, as before. Both lead to the same decision.
"""

from __future__ import annotations

import weakref
from collections.abc import Callable
from typing import Any

import numpy as np

from service.core.transforms import selects_by_duration

#: one life and two lives at the youngest age a basis accepts, for the linear bounds
_YOUNGEST_ONE = np.zeros(1)
_YOUNGEST_TWO = np.zeros(2)


class ModelFacts:
    """The facts of one model (see the module docstring)."""

    __slots__ = ("members", "columns", "unselected", "_bounds", "__weakref__")

    def __init__(self, model: Any):
        self.members: int = getattr(model, "n_members", 1)
        #: the members as separate columns of the durations (None: a single-life model)
        self.columns: Any = getattr(model, "members", None)
        columns = [model] if self.columns is None else self.columns
        #: the columns (members) that have no select period
        self.unselected: tuple[int, ...] = tuple(
            j for j, member in enumerate(columns) if not selects_by_duration(member)
        )
        self._bounds: dict[Any, tuple[float, float]] = {}

    def bound(
        self, key: Any, estimate: Callable[[np.ndarray], float], lives: int
    ) -> float:
        """A bound on ``estimate(ages)`` for ``lives`` lives of any ages the model accepts:
        ``estimate`` (seconds for the lives aged ``ages``, growing with their number and
        falling with the youngest age) is evaluated once per ``key`` at age 0, for one life
        and for two."""
        found = self._bounds.get(key)
        if found is None:
            one, two = estimate(_YOUNGEST_ONE), estimate(_YOUNGEST_TWO)
            found = self._bounds[key] = (max(2.0 * one - two, 0.0), max(two - one, 0.0))
        fixed, per_life = found
        return fixed + per_life * lives


_FACTS: weakref.WeakKeyDictionary[Any, ModelFacts] = weakref.WeakKeyDictionary()


def facts(model: Any) -> ModelFacts:
    """The facts of ``model``, found on its first request."""
    found = _FACTS.get(model)
    if found is None:
        found = _FACTS[model] = ModelFacts(model)
    return found

"""How much work a calculation is, estimated from the model's structure before running it.

The unit is one *evaluation*: the cumulative hazard of one year-grid model (a table or a law)
at one duration for one life. A derived model evaluates its parts: a force rating its base
once more, a time-limited extra both its models, a status every member
(:func:`evaluation_cost`). Generic models integrate on 16 Gauss–Legendre nodes per panel,
one panel per year and kink family (:func:`kink_families`), and find their horizon by about
56 bisection steps (:func:`horizon_evaluations`); year-grid models answer most quantities by
lookups and short vectorised sums.

``seconds`` turns evaluations into an estimate of time on the machine the constants were
measured on (a shared 2-core machine, see ``SECONDS_PER_EVALUATION``); the HTTP layer offloads
and refuses requests by that estimate.
"""

from __future__ import annotations

import math

import numpy as np

from .generic import GenericModel
from .lifetime import MAX_HORIZON, LifetimeModel, YearGridModel
from .several import SeveralLives
from .transforms import ForceAdjusted, Shifted, Spliced

#: seconds per evaluation in a generic model's vectorised integrals (measured: an 8-member
#: last-survivor status of 150 lives, 1.1e7 evaluations in 6 s; a force-rated table of 10,000
#: lives, 1.3e7 in 5.6 s)
SECONDS_PER_EVALUATION = 5e-7
#: evaluations at scattered durations (payment times, survival at given t) cost more each:
#: measured 1.9e-6 s for a monthly annuity and an insurance on a force-rated table
POINTWISE_FACTOR = 8.0
#: seconds per evaluation on a year-grid model's own paths (measured: 10,000 lives of a
#: monthly annuity on a life table, 1.2e7 evaluations in 4.2 s)
SECONDS_PER_GRID_EVALUATION = 3.5e-7
#: the fixed cost of one vectorised evaluation of a year-grid model (some 25 numpy calls),
#: which dominates loops over few lives (a bisection step, measured 2e-4 s to 3e-4 s)
SECONDS_PER_CALL = 3e-4
#: writing one number of the answer as JSON (measured: 4e6 numbers in about 1.6 s)
SECONDS_PER_OUTPUT_VALUE = 4e-7
#: Gauss–Legendre nodes per panel and bisection steps of a horizon search
NODES = 16
HORIZON_STEPS = 56
QUANTILE_STEPS = 64


def evaluation_cost(model: LifetimeModel) -> float:
    """Year-grid evaluations behind one evaluation of ``model``."""
    if isinstance(model, Shifted):
        return evaluation_cost(model.base)
    if isinstance(model, ForceAdjusted):
        return 1.0 + evaluation_cost(model.base)
    if isinstance(model, Spliced):
        return 1.0 + evaluation_cost(model.first) + evaluation_cost(model.then)
    if isinstance(model, SeveralLives):
        # a last survivor's log ₜq of each member costs about one more evaluation
        per_member = 1.0 if model.joint else 2.0
        return 1.0 + per_member * sum(evaluation_cost(m) for m in model.members)
    return 1.0


def kink_families(model: LifetimeModel) -> int:
    """Families of kinks (one per year each) a generic model integrates between."""
    if isinstance(model, (Shifted, ForceAdjusted)):
        return kink_families(model.base)
    if isinstance(model, Spliced):
        return kink_families(model.first) + kink_families(model.then) + 1
    if isinstance(model, SeveralLives):
        return sum(kink_families(m) for m in model.members)
    return 1


def horizon_evaluations(model: LifetimeModel) -> float:
    """Evaluations per life of finding the model's horizon (0 for a year-grid model)."""
    if isinstance(model, Shifted):
        return horizon_evaluations(model.base)
    if isinstance(model, ForceAdjusted):
        own = 0.0 if model.m >= 1.0 and model.delta >= 0.0 else HORIZON_STEPS
        return horizon_evaluations(model.base) + own * evaluation_cost(model)
    if isinstance(model, Spliced):
        return (horizon_evaluations(model.first) + horizon_evaluations(model.then)
                + HORIZON_STEPS * evaluation_cost(model))
    if isinstance(model, SeveralLives):
        return sum(horizon_evaluations(m) for m in model.members)
    return 0.0


def grid_end(model: LifetimeModel) -> float:
    """An age beyond which no life of the model survives (or the service stops computing)."""
    if isinstance(model, YearGridModel):
        if not hasattr(model, "year_moments"):  # a law in closed form: its own horizon
            return float(model.horizon(np.zeros(1), np.zeros(1))[0])
        start = getattr(model, "row_start", None)
        first = float(np.max(start)) if start is not None else 0.0
        return first + float(model.year_moments.shape[1])
    if isinstance(model, Shifted):
        return grid_end(model.base) - model.shift
    if isinstance(model, ForceAdjusted):
        return grid_end(model.base)
    if isinstance(model, Spliced):
        return max(grid_end(model.first), grid_end(model.then))
    if isinstance(model, SeveralLives):
        return max(grid_end(m) for m in model.members)
    return float(MAX_HORIZON)


#: the years of work a law in closed form (no year grid) counts for, whatever its horizon
CLOSED_FORM_YEARS = 100.0


def years(model: LifetimeModel, youngest_age: float) -> float:
    """Years a life of the youngest age may live under the model (at least 1): the span of
    its per-year work."""
    if isinstance(model, YearGridModel) and not hasattr(model, "year_moments"):
        return CLOSED_FORM_YEARS
    end = grid_end(model)
    if not math.isfinite(end):
        return float(MAX_HORIZON)
    return min(max(end - youngest_age, 1.0), float(MAX_HORIZON))


def is_generic(model: LifetimeModel) -> bool:
    return isinstance(model, GenericModel) or (
        isinstance(model, Shifted) and is_generic(model.base)
    )


def seconds(model: LifetimeModel, lives: int, per_life: float, needs_horizon: bool = True,
            calls: int = 1, pointwise: bool = False, output_values: int = 0) -> float:
    """Estimated seconds for ``lives`` lives of ``per_life`` evaluations (of the model) each,
    in ``calls`` vectorised evaluations, writing ``output_values`` numbers."""
    cost = evaluation_cost(model)
    fixed = calls * cost * SECONDS_PER_CALL + output_values * SECONDS_PER_OUTPUT_VALUE
    if is_generic(model):
        evaluations = lives * per_life * cost * (POINTWISE_FACTOR if pointwise else 1.0)
        if needs_horizon:
            evaluations += lives * horizon_evaluations(model)
        return evaluations * SECONDS_PER_EVALUATION + fixed
    return lives * per_life * SECONDS_PER_GRID_EVALUATION + fixed


def integral_evaluations(model: LifetimeModel, years_: float) -> float:
    """Evaluations per life of the moments of T (panels) and K (direct sums) over ``years_``."""
    if is_generic(model):
        return kink_families(model) * years_ * NODES + years_
    return years_


def quantile_evaluations(model: LifetimeModel, years_: float, probabilities: int) -> float:
    if is_generic(model):
        return probabilities * (QUANTILE_STEPS + 4.0)
    return probabilities * 8.0 + years_


def quantile_calls(model: LifetimeModel) -> int:
    """Vectorised evaluations of one quantile request: a bisection for a generic model."""
    return 2 * QUANTILE_STEPS + 8 if is_generic(model) else 8

"""One product quote: every benefit's values and net premium, its policy values when asked,
and the sensitivities of the whole quote, on one basis at one interest.

Each figure comes from its own module (values, policy_values, sensitivities); this module
only runs them in order and places every DomainError under ``benefits[i]`` (interest and
sensitivity errors keep their own fields).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from . import values as pv
from .errors import DomainError
from .policy_values import policy_values
from .sensitivities import Sensitivities, Sensitivity, sensitivities


@dataclass(frozen=True)
class QuoteItem:
    """A benefit, its premiums (a PremiumPlan, or False for none) and policy-value durations."""

    benefit: object
    premiums: pv.PremiumPlan | bool = False
    durations: tuple[float, ...] | None = None


@dataclass
class Quote:
    values: list[pv.BenefitValues]
    policy_values: list[np.ndarray | None]
    sensitivities: Sensitivities | None


def _placed(exc: DomainError, i: int) -> DomainError:
    if exc.field.startswith(("interest", "sensitivities")):
        return exc
    return exc.within(f"benefits[{i}]")


def quote(model, age, duration, discount: pv.Discount, items: list[QuoteItem],
          ask: Sensitivity | None = None, fast: bool = True) -> Quote:
    valuation = pv.Valuation(model, age, duration, discount, fast)
    found, reserves = [], []
    for i, item in enumerate(items):
        try:
            values = valuation.values(item.benefit, item.premiums)
            reserve = None
            if item.durations is not None:
                if values.approximated:
                    raise DomainError(
                        "policy_value_durations",
                        "policy values are computed exactly, so they would not agree with the "
                        f"approximate {' and '.join(values.approximated)}: ask for the "
                        "approximation or for policy values, not both",
                    )
                plan = item.premiums if item.premiums is not False else None
                premium = values.net_premium if plan is not None else None
                reserve = policy_values(valuation, item.benefit, item.durations, premium, plan,
                                        valued=True)
        except DomainError as exc:
            raise _placed(exc, i) from None
        found.append(values)
        reserves.append(reserve)
    shocks = None
    if ask is not None:
        shocks = sensitivities(model, age, duration, discount, [it.benefit for it in items],
                               [v.value for v in found], ask)
    return Quote(found, reserves, shocks)

"""Sensitivities in one call: a mortality shock and an interest shift, by exact re-evaluation.

Mortality shocks (ε > −1):

* ``force``: μ' = μ (1 + ε) at every age, so ₜp' = (ₜp)^(1+ε) (any basis);
* ``q``: q' = min(1, q (1 + ε)) at each whole age of a table, its fractional-age rule kept
  (tables only: a law has no rates q to multiply).

The shocked basis is a rating of the basis (transforms.rated), member by member for a status
of several lives, and every benefit is valued on it the same way as on the basis itself.

Interest shift h > 0: the constant rate, or every spot rate, moved to i + h and to i − h, and
every benefit valued again. With V₀, V₊ and V₋ the values,

    effective duration D = (V₋ − V₊) / (2 h V₀),   convexity C = (V₊ + V₋ − 2 V₀) / (h² V₀),

the central differences of −V'/V and V''/V in the rate (null when V₀ = 0).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from . import values as pv
from .errors import DomainError, fmt
from .several import SeveralLives
from .transforms import rated

SHOCKS = ("force", "q")
#: the largest mortality shock accepted (ten times the force or the rates)
MAX_SHOCK = 9.0
#: the largest interest shift accepted (in rate, 0.01 = one percentage point)
MAX_SHIFT = 0.5


@dataclass(frozen=True)
class Sensitivity:
    """What to shock: a mortality shock of ``kind`` and ``size``, and an interest shift."""

    kind: str | None = None
    size: float = 0.0
    shift: float | None = None


def shocked_model(model, kind: str, size: float):
    """The basis with its mortality shocked (see the module docstring)."""
    field = "sensitivities.mortality"
    if kind not in SHOCKS:
        raise DomainError(f"{field}.kind", f"kind must be one of {', '.join(SHOCKS)}")
    if not (math.isfinite(size) and -1.0 < size <= MAX_SHOCK):
        raise DomainError(
            f"{field}.size",
            f"size must be a number greater than −1 and at most {fmt(MAX_SHOCK)} (got {fmt(size)})",
        )
    if isinstance(model, SeveralLives):
        members = [shocked_model(m, kind, size) for m in model.members]
        return SeveralLives(members, model.joint, model.lam)
    try:
        if kind == "force":
            return rated(model, force_multiplier=1.0 + size)
        return rated(model, q_multiplier=1.0 + size)
    except DomainError as exc:
        raise DomainError(
            f"{field}.kind",
            f"a shock to q multiplies the rates of a table, and this basis has none; use "
            f"kind force ({exc.message})",
        ) from None


def shifted_discount(discount: pv.Discount, shift: float) -> pv.Discount:
    """The discount function with the rate (or every spot rate) moved by ``shift``."""
    field = "sensitivities.interest_shift"
    try:
        if discount.rate is not None:
            return pv.Discount.constant(discount.rate + shift)
        # log v(k) = −k log(1 + sₖ) gives back the spot rates
        spots = np.expm1(-discount.log_v_whole[1:] / np.arange(1, discount.years + 1))
        return pv.Discount.spot(spots + shift)
    except DomainError as exc:
        raise DomainError(field, f"the shifted interest is impossible: {exc.message}") from None


@dataclass
class Sensitivities:
    """Per benefit (list) of arrays per life; None where not asked for."""

    mortality: list[np.ndarray] | None
    interest_up: list[np.ndarray] | None
    interest_down: list[np.ndarray] | None
    duration: list[np.ndarray] | None
    convexity: list[np.ndarray] | None


def sensitivities(model, age, duration, discount: pv.Discount, benefits, base_values,
                  ask: Sensitivity) -> Sensitivities:
    """Every benefit re-valued on the shocked basis and at the shifted rates.

    ``base_values``: each benefit's value on the basis (V₀), per life.
    """
    mortality = up = down = dur = conv = None
    if ask.kind is not None:
        shocked = shocked_model(model, ask.kind, ask.size)  # used once: no exact-age tables
        mortality = _values(shocked, age, duration, discount, benefits, tables=False)
    if ask.shift is not None:
        h = ask.shift
        if not (math.isfinite(h) and 0.0 < h <= MAX_SHIFT):
            raise DomainError(
                "sensitivities.interest_shift",
                f"interest_shift must be more than 0 and at most {fmt(MAX_SHIFT)} (got {fmt(h)})",
            )
        up = _values(model, age, duration, shifted_discount(discount, h), benefits)
        down = _values(model, age, duration, shifted_discount(discount, -h), benefits)
        dur, conv = [], []
        for v0, vu, vd in zip(base_values, up, down):
            with np.errstate(divide="ignore", invalid="ignore"):
                dur.append(np.where(v0 != 0.0, (vd - vu) / (2.0 * h * v0), np.nan))
                conv.append(np.where(v0 != 0.0, (vu + vd - 2.0 * v0) / (h * h * v0), np.nan))
    return Sensitivities(mortality, up, down, dur, conv)


def _values(model, age, duration, discount, benefits, tables: bool = True) -> list[np.ndarray]:
    valuation = pv.Valuation(model, age, duration, discount, tables=tables)
    out = []
    for i, b in enumerate(benefits):
        try:
            out.append(valuation.values(b).value)
        except DomainError as exc:
            if exc.field.startswith("interest"):
                raise DomainError("sensitivities.interest_shift",
                                  f"at the shifted interest: {exc.message}") from None
            raise exc.within(f"benefits[{i}]") from None
    return out

"""POST /v1/present-values: life annuities, insurances, pure endowments and endowments at
interest, with the second moment and standard deviation of each present value, and net level
premiums by the equivalence principle.

``interest`` is chosen by which field it carries: ``{"rate": i}`` (a constant annual
effective rate) or ``{"spot_rates": [s₁, s₂, …]}`` (annual effective spot rates by whole year,
the last continuing; the forward force is constant within each year). ``benefits`` is a tagged
union on ``type``. The handler follows the calculation endpoints: decode strictly, resolve the
basis, check the lives, one call on the core, build the answer.
"""

from __future__ import annotations

from typing import Any

import msgspec
import numpy as np
from litestar import Request, post

from service.bases.catalogue import Catalogue
from service.core import values as pv
from service.core import work as cost
from service.core.errors import DomainError
from service.settings import Settings
from service.version import __version__

from .body import decode, read_body
from .calculations import CALCULATION_TAG, ERROR_RESPONSES, Calculations, _echo_columns, _reference
from .problems import bad_field, domain_problem
from .value_schemas import (
    MAX_WORK,
    BenefitRequest,
    BenefitResult,
    Interest,
    LifeAnnuityBenefit,
    LifeInsuranceBenefit,
    PresentValuesRequest,
    PresentValuesResponse,
    PresentValuesResult,
    PureEndowmentBenefit,
)

_DECODER = msgspec.json.Decoder(PresentValuesRequest)


def _continuous(b: pv.Benefit) -> bool:
    """A benefit valued by quadrature (continuous annuity, moment-of-death insurance)."""
    return getattr(b, "timing", "") in ("continuous", "moment-of-death")


def _discount(interest: Interest) -> pv.Discount:
    given = [name for name in ("rate", "spot_rates") if getattr(interest, name) is not None]
    if len(given) != 1:
        message = (
            "give exactly one of rate and spot_rates"
            + (" (got both)" if len(given) == 2 else " (got neither)")
        )
        raise bad_field("$.interest", message)
    try:
        if interest.rate is not None:
            return pv.Discount.constant(interest.rate)
        return pv.Discount.spot(interest.spot_rates or [])
    except DomainError as exc:
        raise domain_problem(exc) from None


def _core_benefit(b: BenefitRequest) -> pv.Benefit:
    if isinstance(b, LifeAnnuityBenefit):
        return pv.LifeAnnuity(b.timing, b.frequency, b.term, b.deferral, b.guarantee,
                              b.increasing, b.approximation)
    if isinstance(b, LifeInsuranceBenefit):
        return pv.LifeInsurance(b.timing, b.frequency, b.term, b.deferral, b.increasing)
    if isinstance(b, PureEndowmentBenefit):
        return pv.PureEndowment(b.term)
    return pv.Endowment(b.term, b.timing, b.frequency)


def _premium_term(b: BenefitRequest):
    return False if b.net_premium is None else b.net_premium.premium_term


def _finite(x: float) -> float | None:
    return x if x == x and x not in (float("inf"), float("-inf")) else None


def present_value_handlers(settings: Settings, catalogue: Catalogue) -> list[Any]:
    calc = Calculations(settings, catalogue)

    @post("/v1/present-values", operation_id="presentValues",
          summary="Present values of annuities and insurances, their variances and premiums",
          status_code=200, tags=[CALCULATION_TAG], responses=ERROR_RESPONSES)
    async def present_values(request: Request[Any, Any, Any]) -> PresentValuesResponse:
        """For each life and benefit: E[PV], E[PV²] and the standard deviation per unit, and
        the net level annual premium when asked for."""
        req: PresentValuesRequest = decode(
            _DECODER, await read_body(request, settings.max_body_bytes)
        )
        discount = _discount(req.interest)
        basis = await calc.basis(request, req.basis)
        age, duration = calc.lives(req.lives, basis)
        benefits = [_core_benefit(b) for b in req.benefits]
        premiums = [_premium_term(b) for b in req.benefits]
        model = basis.model
        # an upper bound on the horizon from the structure (the horizon itself may need a
        # search, which is work for the worker thread)
        horizon = min(cost.years(model, float(np.min(age)) if age.size else 0.0),
                      discount.negligible_after())
        payments = sum(pv.payment_count(b, horizon) for b in benefits)
        work = age.shape[0] * payments
        if work > MAX_WORK:
            raise bad_field(
                "$.benefits",
                f"lives times payment times would be about {work:,}; at most {MAX_WORK:,} are "
                "computed in one request, so split it",
            )
        # discrete payments are evaluations at scattered times; continuous benefits are
        # integrals on panels, like the moments
        discrete = sum(pv.payment_count(b, horizon) for b in benefits if not _continuous(b))
        continuous = sum(
            pv.payment_count(b, horizon) * cost.NODES * cost.kink_families(model) / 2.0
            for b in benefits if _continuous(b)
        ) + cost.integral_evaluations(model, horizon) * sum(p is not False for p in premiums)
        lives = len(req.lives)
        estimate = cost.seconds(
            model, lives, discrete, calls=4 * len(benefits), pointwise=True,
            output_values=3 * age.shape[0] * len(benefits),
        ) + cost.seconds(model, lives, continuous, needs_horizon=False, calls=0)
        found = await calc.run(
            lambda: pv.present_values(model, age, duration, discount, benefits, premiums),
            estimate,
            lives,
        )
        per_benefit = [
            (r.value.tolist(), r.second_moment.tolist(), r.standard_deviation.tolist(),
             None if r.net_premium is None else r.net_premium.tolist(), r.approximation)
            for r in found
        ]
        results = []
        for i, (a, d, aa, dd) in enumerate(zip(*_echo_columns(age, duration))):
            items = [
                BenefitResult(
                    value=_finite(v[i]), second_moment=_finite(m2[i]),
                    standard_deviation=_finite(sd[i]),
                    net_premium=None if p is None else _finite(p[i]),
                    approximation=appr,
                )
                for v, m2, sd, p, appr in per_benefit
            ]
            results.append(
                PresentValuesResult(age=a, duration=d, ages=aa, durations=dd, benefits=items)
            )
        return PresentValuesResponse(_reference(basis), __version__, results)

    return [present_values]

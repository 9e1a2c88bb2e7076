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
from service.core.errors import DomainError
from service.settings import Settings

from .body import decode, read_body
from .calculations import CALCULATION_ROUTE, Calculations, _echo_columns
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
          **CALCULATION_ROUTE)
    async def present_values(request: Request[Any, Any, Any]) -> PresentValuesResponse:
        """For each life and benefit: E[PV], E[PV²] and the standard deviation per unit, and
        the net level annual premium when asked for."""
        req: PresentValuesRequest = decode(
            _DECODER, await read_body(request, settings.max_body_bytes)
        )
        discount = _discount(req.interest)
        basis = await calc.basis(request, req.basis)
        age, duration = calc.lives(req.lives, basis, req.selection_age_rule)
        benefits = [_core_benefit(b) for b in req.benefits]
        premiums = [_premium_term(b) for b in req.benefits]
        horizon = float(np.max(basis.model.horizon(age, duration)))
        horizon = min(horizon, discount.negligible_after())
        work = age.shape[0] * sum(pv.payment_count(b, horizon) for b in benefits)
        if work > MAX_WORK:
            raise bad_field(
                "$.benefits",
                f"lives times payment times would be about {work:,}; at most {MAX_WORK:,} are "
                "computed in one request, so split it",
            )
        model = basis.model
        found = await calc.run(
            lambda: pv.present_values(model, age, duration, discount, benefits, premiums),
            work // 20,
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
        answer = PresentValuesResponse(results=results, **calc.stamp(request, req, basis))
        return calc.respond(request, answer, "benefit", range(len(req.benefits)))

    return [present_values]

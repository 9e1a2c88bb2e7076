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

from typing import Annotated, Any, Literal, Union

import msgspec
import numpy as np
from litestar import Request, post
from msgspec import Meta

from service.bases.catalogue import Catalogue
from service.core import values as pv
from service.core.errors import DomainError
from service.settings import Settings
from service.version import __version__

from . import schemas as s
from .body import decode, read_body
from .calculations import CALCULATION_TAG, ERROR_RESPONSES, Calculations, _echo, _reference
from .problems import bad_field, domain_problem

MAX_BENEFITS = 50
#: lives × payment times (summed over benefits) above which a request is refused
MAX_WORK = 50_000_000

Rate = Annotated[
    float, Meta(gt=-1, le=100, description="annual effective rate, greater than −1")
]
Years = Annotated[float, Meta(gt=0, le=10_000)]
Frequency = Annotated[
    int,
    Meta(ge=1, le=10_000, description="payments (or periods) per year: 1, 2, 4, 12, …"),
]


class Interest(msgspec.Struct, frozen=True, forbid_unknown_fields=True):
    """Give exactly one: `rate` (constant annual effective rate i > −1) or `spot_rates`
    (annual effective spot rate for each whole year 1, 2, …, K; the last continues beyond K;
    between whole years the forward force of interest is constant, so v(t) is continuous)."""

    rate: Union[Rate, None] = None
    spot_rates: Union[
        Annotated[
            list[Rate],
            Meta(min_length=1, max_length=pv.MAX_SPOT_RATES,
                 description="spot rate for years 1, 2, …, K, with no holes"),
        ],
        None,
    ] = None


InterestField = Annotated[
    Interest,
    Meta(extra_json_schema={"oneOf": [{"required": ["rate"]}, {"required": ["spot_rates"]}]}),
]


class NetPremium(msgspec.Struct, frozen=True, forbid_unknown_fields=True):
    """Ask for the net level annual premium, payable in advance while the status survives."""

    premium_term: Union[
        Annotated[int, Meta(ge=1, le=10_000, description="years of premiums; whole life when absent")],
        None,
    ] = None


Term = Annotated[float, Meta(gt=0, le=10_000, description="years of cover (or payments)")]
Deferral = Annotated[float, Meta(ge=0, le=10_000, description="years before cover starts")]
NetPremiumField = Union[NetPremium, None]


class LifeAnnuityBenefit(msgspec.Struct, frozen=True, forbid_unknown_fields=True, tag_field="type",
                         tag="life-annuity", kw_only=True):
    """1 a year (1/m each 1/m year, or continuously) while the status survives."""

    timing: Literal["advance", "arrears", "continuous"] = "advance"
    frequency: Frequency = 1
    term: Union[Term, None] = None
    deferral: Deferral = 0.0
    guarantee: Annotated[
        float, Meta(ge=0, le=10_000, description="years of payments certain once payments start")
    ] = 0.0
    increasing: Annotated[
        bool, Meta(description="payments rise by 1 a year: k + 1 in the k-th year of payment")
    ] = False
    approximation: Annotated[
        Literal["exact", "udd", "woolhouse"],
        Meta(description="value a 1/m-thly annuity from annual values (UDD, or Woolhouse with "
             "two terms) instead of exactly; the second moment stays exact"),
    ] = "exact"
    net_premium: NetPremiumField = None


class LifeInsuranceBenefit(msgspec.Struct, frozen=True, forbid_unknown_fields=True,
                           tag_field="type", tag="life-insurance", kw_only=True):
    """1 on death (k + 1 on death in the k-th year of cover when increasing)."""

    timing: Literal["end-of-year", "end-of-period", "moment-of-death"] = "end-of-year"
    frequency: Frequency = 1
    term: Union[Term, None] = None
    deferral: Deferral = 0.0
    increasing: bool = False
    net_premium: NetPremiumField = None


class PureEndowmentBenefit(msgspec.Struct, frozen=True, forbid_unknown_fields=True,
                           tag_field="type", tag="pure-endowment", kw_only=True):
    """1 at the end of the term if the status survives (ₙE_x)."""

    term: Term
    net_premium: NetPremiumField = None


class EndowmentBenefit(msgspec.Struct, frozen=True, forbid_unknown_fields=True, tag_field="type",
                       tag="endowment", kw_only=True):
    """1 on death within the term, or 1 at its end on survival."""

    term: Term
    timing: Literal["end-of-year", "end-of-period", "moment-of-death"] = "end-of-year"
    frequency: Frequency = 1
    net_premium: NetPremiumField = None


BenefitRequest = Union[
    LifeAnnuityBenefit, LifeInsuranceBenefit, PureEndowmentBenefit, EndowmentBenefit
]


class PresentValuesRequest(msgspec.Struct, frozen=True, forbid_unknown_fields=True):
    """Expected present values, second moments and net premiums of benefits at interest."""

    basis: s.BasisField
    lives: s.Lives
    interest: InterestField
    benefits: Annotated[
        list[BenefitRequest],
        Meta(min_length=1, max_length=MAX_BENEFITS,
             description=f"1 to {MAX_BENEFITS} benefits, tagged by type"),
    ]


class BenefitResult(msgspec.Struct, frozen=True, omit_defaults=True):
    value: Annotated[s.Value, Meta(description="expected present value per unit of benefit")]
    second_moment: Annotated[s.Value, Meta(description="E[PV²]")]
    standard_deviation: Annotated[s.Value, Meta(description="standard deviation of the PV")]
    net_premium: Annotated[
        Union[float, None],
        Meta(description="net level annual premium in advance (when asked for)"),
    ] = None
    approximation: Annotated[
        Union[str, None], Meta(description="the approximation used for value, when not exact")
    ] = None


class PresentValuesResult(msgspec.Struct, frozen=True, kw_only=True, omit_defaults=True):
    age: s.AgeEcho = None
    duration: s.DurationEcho = None
    ages: s.AgesEcho = None
    durations: s.AgesEcho = None
    benefits: Annotated[list[BenefitResult], Meta(description="aligned with the request's")]


class PresentValuesResponse(msgspec.Struct, frozen=True):
    basis: s.BasisReference
    service_version: s.ServiceVersion
    results: list[PresentValuesResult]


REQUEST_TYPES: dict[str, type[msgspec.Struct]] = {"/v1/present-values": PresentValuesRequest}

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
        for i, (a, d) in enumerate(zip(age.tolist(), duration.tolist())):
            items = [
                BenefitResult(
                    value=_finite(v[i]), second_moment=_finite(m2[i]),
                    standard_deviation=_finite(sd[i]),
                    net_premium=None if p is None else _finite(p[i]),
                    approximation=appr,
                )
                for v, m2, sd, p, appr in per_benefit
            ]
            results.append(PresentValuesResult(**_echo(a, d), benefits=items))
        return PresentValuesResponse(_reference(basis), __version__, results)

    return [present_values]

"""Request and response Structs of POST /v1/present-values.

They import only msgspec and the shared schemas, so the Python client uses them too.
"""

from __future__ import annotations

from typing import Annotated, Literal, Union

import msgspec
from msgspec import Meta

from service.bases.validation import allow, literal_choices

from . import schemas as s

#: most spot rates in a term structure (the core's service.core.values.MAX_SPOT_RATES)
MAX_SPOT_RATES = 1_000

MAX_BENEFITS = 50
#: lives × payment times (summed over benefits) above which a request is refused
MAX_WORK = 50_000_000

#: the domain of an annual effective rate (the core's service.core.values.MIN_RATE, MAX_RATE)
MIN_RATE, MAX_RATE = -0.05, 1.0
Rate = Annotated[
    float,
    Meta(ge=MIN_RATE, le=MAX_RATE,
         description="annual effective rate, from −0.05 to 1 (−5% to 100% a year)"),
]
Years = Annotated[float, Meta(gt=0, le=10_000)]
Frequency = Annotated[
    int,
    Meta(ge=1, le=10_000, description="payments (or periods) per year: 1, 2, 4, 12, …"),
]


class Interest(msgspec.Struct, frozen=True, forbid_unknown_fields=True):
    """Give exactly one: `rate` (constant annual effective rate i, −0.05 ≤ i ≤ 1) or `spot_rates`
    (annual effective spot rate for each whole year 1, 2, …, K; the last continues beyond K;
    between whole years the forward force of interest is constant, so v(t) is continuous)."""

    rate: Union[Rate, None] = None
    spot_rates: Union[
        Annotated[
            list[Rate],
            Meta(min_length=1, max_length=MAX_SPOT_RATES,
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


class PresentValuesResult(s.LifeEcho, frozen=True, kw_only=True, omit_defaults=True):
    benefits: Annotated[list[BenefitResult], Meta(description="aligned with the request's")]


class PresentValuesResponse(msgspec.Struct, frozen=True):
    basis: s.BasisReference
    service_version: s.ServiceVersion
    results: list[PresentValuesResult]


REQUEST_TYPES: dict[str, type[msgspec.Struct]] = {"/v1/present-values": PresentValuesRequest}


def _name_the_choices() -> None:
    """Errors for an unknown benefit type or an invalid choice list the allowed values."""
    kinds = (LifeAnnuityBenefit, LifeInsuranceBenefit, PureEndowmentBenefit, EndowmentBenefit)
    allow(r"\.benefits\[\d+\]\.type$", ", ".join(str(k.__struct_config__.tag) for k in kinds))
    for name, allowed in literal_choices(kinds).items():
        allow(rf"\.benefits\[\d+\]\.{name}$", allowed)


_name_the_choices()

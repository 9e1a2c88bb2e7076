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
    """Ask for the net level premium by the equivalence principle: an annual amount, paid in
    `frequency` instalments of 1/m of it each 1/m year in advance while the status survives.

    Without `premium_term`, premiums stop when the benefit can no longer become payable or
    when its payments start: over the term of a term insurance, an endowment or a pure
    endowment (after any deferral), over the deferral of a deferred annuity, over the term
    of an immediate temporary annuity or of a two-life benefit, and for life for whole-life
    cover and immediate whole-life annuities. `"whole-life"` asks for premiums for life
    whatever the benefit. The result echoes the premium term used."""

    premium_term: Union[
        Annotated[float, Meta(gt=0, le=10_000, description=(
            "years of premiums, a whole number of premium periods (1/frequency year); "
            "the benefit's own rule when absent (see NetPremium)"))],
        Literal["whole-life"],
        None,
    ] = None
    frequency: Annotated[Frequency, Meta(description="premiums a year (1, 2, 4, 12, …)")] = 1
    approximation: Annotated[
        Literal["exact", "udd", "woolhouse"],
        Meta(description="value the premiums' annuity exactly (from the basis's fractional-age "
             "survival) or with the named approximation from annual values"),
    ] = "exact"


Term = Annotated[float, Meta(gt=0, le=10_000, description="years of cover (or payments)")]
Deferral = Annotated[float, Meta(ge=0, le=10_000, description="years before cover starts")]
NetPremiumField = Union[NetPremium, None]
Escalation = Annotated[
    float,
    Meta(gt=-1, le=1, description=(
        "compound rate a year by which the amount grows (pension increases): (1 + e)^(k − 1) "
        "in the k-th year of payment or cover; greater than −1, at most 1 (100 % a year)")),
]
PolicyValueDurations = Union[
    Annotated[
        list[Annotated[float, Meta(ge=0, le=10_000)]],
        Meta(min_length=1, max_length=1_000, description=(
            "durations t (whole or fractional, from 0 to the end of cover) at which to give the "
            "prospective net premium policy value ₜV: the value at t of the benefits still to "
            "come less that of the net premiums still to come, for a status in force at t, "
            "just before any payment due at t")),
    ],
    None,
]


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
        bool, Meta(description="payments rise by 1 a year: 1 a year in the first year of "
                   "payment, 2 in the second, k in the k-th (the standard (Iä))")
    ] = False
    approximation: Annotated[
        Literal["exact", "udd", "woolhouse"],
        Meta(description="value a level 1/m-thly annuity from annual values (UDD, or Woolhouse "
             "with two terms) instead of exactly; the result then gives the exact value "
             "beside it (exact_value), keeps second_moment and standard_deviation exact, and "
             "lists the figures that carry the approximation (approximated)"),
    ] = "exact"
    escalation: Escalation = 0.0
    net_premium: NetPremiumField = None
    policy_value_durations: PolicyValueDurations = None


class LifeInsuranceBenefit(msgspec.Struct, frozen=True, forbid_unknown_fields=True,
                           tag_field="type", tag="life-insurance", kw_only=True):
    """1 on death, or on death in the k-th year of cover: k when increasing (the standard
    (IA)), (n − k + 1)/n when decreasing over a term of n years (falling linearly to zero by
    the end of the term, in yearly steps), (1 + e)^(k − 1) when escalating at e."""

    timing: Literal["end-of-year", "end-of-period", "moment-of-death"] = "end-of-year"
    frequency: Frequency = 1
    term: Union[Term, None] = None
    deferral: Deferral = 0.0
    increasing: Annotated[bool, Meta(description="k in the k-th year of cover")] = False
    decreasing: Annotated[
        bool, Meta(description="(n − k + 1)/n in the k-th year of a term of n years (needs term)")
    ] = False
    escalation: Escalation = 0.0
    net_premium: NetPremiumField = None
    policy_value_durations: PolicyValueDurations = None


class PureEndowmentBenefit(msgspec.Struct, frozen=True, forbid_unknown_fields=True,
                           tag_field="type", tag="pure-endowment", kw_only=True):
    """1 at the end of the term if the status survives (ₙE_x)."""

    term: Term
    net_premium: NetPremiumField = None
    policy_value_durations: PolicyValueDurations = None


class EndowmentBenefit(msgspec.Struct, frozen=True, forbid_unknown_fields=True, tag_field="type",
                       tag="endowment", kw_only=True):
    """1 on death within the term, or 1 at its end on survival."""

    term: Term
    timing: Literal["end-of-year", "end-of-period", "moment-of-death"] = "end-of-year"
    frequency: Frequency = 1
    net_premium: NetPremiumField = None
    policy_value_durations: PolicyValueDurations = None


MemberIndex = Annotated[
    int, Meta(ge=0, le=1, description="the member x whose death the benefit is about (0 or 1); "
              "the other member is y")
]


class ReversionaryAnnuityBenefit(msgspec.Struct, frozen=True, forbid_unknown_fields=True,
                                 tag_field="type", tag="reversionary-annuity", kw_only=True):
    """On a basis of two lives (joint-life or last-survivor with two members, lives given by
    `ages`): `proportion` a year, in payments of 1/m each 1/m year, to y while y lives after
    the death of x (a_{x|y} = a_y − a_xy); for `term` years from now when given."""

    timing: Literal["advance", "arrears"] = "advance"
    frequency: Frequency = 1
    term: Union[Term, None] = None
    proportion: Annotated[
        float, Meta(gt=0, le=1_000_000, description="the spouse's proportion: the amount a year "
                    "paid to y, per unit")
    ] = 1.0
    life: MemberIndex = 0
    net_premium: NetPremiumField = None


class ContingentInsuranceBenefit(msgspec.Struct, frozen=True, forbid_unknown_fields=True,
                                 tag_field="type", tag="contingent-insurance", kw_only=True):
    """On a basis of two lives: 1 on the death of x if x dies before y (`order` first, A¹_xy)
    or after y (`order` second, A²_xy); within `term` years when given."""

    timing: Literal["end-of-year", "end-of-period", "moment-of-death"] = "end-of-year"
    frequency: Frequency = 1
    term: Union[Term, None] = None
    order: Literal["first", "second"] = "first"
    life: MemberIndex = 0
    net_premium: NetPremiumField = None


BenefitRequest = Union[
    LifeAnnuityBenefit, LifeInsuranceBenefit, PureEndowmentBenefit, EndowmentBenefit,
    ReversionaryAnnuityBenefit, ContingentInsuranceBenefit,
]


class MortalityShock(msgspec.Struct, frozen=True, forbid_unknown_fields=True):
    """`force`: μ × (1 + size) at every age (any basis); `q`: q × (1 + size) at each whole age
    of a table, capped at 1 (tables only). A status's members are shocked alike."""

    kind: Literal["force", "q"]
    size: Annotated[float, Meta(gt=-1, le=9, description="ε: greater than −1, at most 9")]


class SensitivitiesRequest(msgspec.Struct, frozen=True, forbid_unknown_fields=True):
    """Re-value every benefit exactly on a shocked basis and at shifted interest."""

    mortality: Union[MortalityShock, None] = None
    interest_shift: Union[
        Annotated[float, Meta(gt=0, le=0.5, description=(
            "h: the rate (or every spot rate) moved to i + h and to i − h; the effective "
            "duration (V₋ − V₊)/(2 h V) and convexity (V₊ + V₋ − 2V)/(h² V) follow"))],
        None,
    ] = None


class _BenefitsRequest(s.Dated, frozen=True, forbid_unknown_fields=True):
    """What the present-value and cash-flow requests share: lives on a basis, interest and
    benefits."""

    basis: s.BasisField
    lives: s.Lives
    interest: InterestField
    benefits: Annotated[
        list[BenefitRequest],
        Meta(min_length=1, max_length=MAX_BENEFITS,
             description=f"1 to {MAX_BENEFITS} benefits, tagged by type"),
    ]
    selection_age_rule: s.SelectionAgeRule = "last-birthday"


class PresentValuesRequest(_BenefitsRequest, frozen=True, forbid_unknown_fields=True):
    """Expected present values, second moments and net premiums of benefits at interest."""

    sensitivities: Union[SensitivitiesRequest, None] = None


class BenefitSensitivities(msgspec.Struct, frozen=True, omit_defaults=True):
    mortality_shocked_value: Annotated[
        s.Value, Meta(description="value on the basis with the mortality shock")] = None
    interest_up_value: Annotated[s.Value, Meta(description="value at i + h")] = None
    interest_down_value: Annotated[s.Value, Meta(description="value at i − h")] = None
    effective_duration: Annotated[
        s.Value, Meta(description="(V₋ − V₊)/(2 h V); null when V = 0")] = None
    convexity: Annotated[s.Value, Meta(description="(V₊ + V₋ − 2V)/(h² V); null when V = 0")] = None


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
    exact_value: Annotated[
        s.Value, Meta(description="the exact expected present value, beside an approximate "
                      "value: standard_deviation² = second_moment − exact_value²")
    ] = None
    approximated: Annotated[
        Union[list[str], None],
        Meta(description="the figures of this result that carry an approximation (value, "
             "net_premium); every other figure is exact"),
    ] = None
    premium_term: Annotated[
        Union[float, str, None],
        Meta(description="the premium term used for net_premium: years, or whole-life"),
    ] = None
    policy_values: Annotated[
        Union[s.Values, None], Meta(description="ₜV at policy_value_durations, aligned")
    ] = None
    sensitivities: Union[BenefitSensitivities, None] = None


class PresentValuesResult(s.LifeEcho, frozen=True, kw_only=True, omit_defaults=True):
    benefits: Annotated[list[BenefitResult], Meta(description="aligned with the request's")]


class PresentValuesResponse(s.DatedAnswer, frozen=True):
    basis: s.BasisReference
    service_version: s.ServiceVersion
    results: list[PresentValuesResult]
    calculation_fingerprint: s.CalculationFingerprint


class CashFlowsRequest(_BenefitsRequest, frozen=True, forbid_unknown_fields=True):
    """Expected cash flows per period of benefits (and of their net premiums, when asked), for
    benefits on one status (not reversionary-annuity or contingent-insurance); the interest
    sets the net premiums."""

    periods_per_year: Annotated[
        int, Meta(ge=1, le=365, description="periods of 1/m year (1: years, 12: months)")
    ] = 1


class BenefitCashFlows(msgspec.Struct, frozen=True, omit_defaults=True):
    benefit_outgo: Annotated[s.Values, Meta(description=(
        "expected benefit payments in each period per unit (undiscounted): payments in advance "
        "in the period they open, in arrears and death benefits in the period they close"))]
    premium_income: Annotated[
        Union[s.Values, None],
        Meta(description="expected net premium income in each period (with net_premium)"),
    ] = None


class CashFlowsResult(s.LifeEcho, frozen=True, kw_only=True, omit_defaults=True):
    in_force: Annotated[
        s.Values, Meta(description="probability that the status is in force at each period start")
    ]
    benefits: Annotated[list[BenefitCashFlows], Meta(description="aligned with the request's")]


class CashFlowsTotal(msgspec.Struct, frozen=True):
    in_force: Annotated[
        s.Values, Meta(description="expected number of the request's lives in force at each "
                       "period start")
    ]
    benefits: Annotated[
        list[BenefitCashFlows], Meta(description="each benefit's cash flows summed over the lives")
    ]


class CashFlowsResponse(s.DatedAnswer, frozen=True):
    basis: s.BasisReference
    service_version: s.ServiceVersion
    period_start: Annotated[list[float], Meta(description="the start of each period, in years")]
    period_end: Annotated[list[float], Meta(description="the end of each period, in years")]
    results: list[CashFlowsResult]
    total: CashFlowsTotal
    calculation_fingerprint: s.CalculationFingerprint


REQUEST_TYPES: dict[str, type[msgspec.Struct]] = {
    "/v1/present-values": PresentValuesRequest,
    "/v1/cash-flows": CashFlowsRequest,
}


def _name_the_choices() -> None:
    """Errors for an unknown benefit type or an invalid choice list the allowed values."""
    kinds = (LifeAnnuityBenefit, LifeInsuranceBenefit, PureEndowmentBenefit, EndowmentBenefit,
             ReversionaryAnnuityBenefit, ContingentInsuranceBenefit)
    allow(r"\.benefits\[\d+\]\.type$", ", ".join(str(k.__struct_config__.tag) for k in kinds))
    for name, allowed in literal_choices(kinds).items():
        allow(rf"\.benefits\[\d+\]\.{name}$", allowed)


_name_the_choices()

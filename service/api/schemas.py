"""The request and response bodies of the HTTP API, as msgspec Structs.

The Basis tagged union itself lives in ``service.bases.definitions`` (the stored-basis loader
needs it too); it is re-exported here. Constraints are ``Meta`` annotations, so they are
checked while decoding and appear in the OpenAPI document. Limits that come from settings
(most lives, most durations) are checked after decoding and answered with 422.

Every number in an answer that may not exist (the force of mortality at or past a limiting
age, say) is typed ``float | None``: the value is sent as ``null``. msgspec writes NaN and
±Infinity as ``null`` too, so no answer can carry them.
"""

from __future__ import annotations

from datetime import date
from typing import Annotated, Literal, Union

import msgspec
from msgspec import Meta

from service.bases.definitions import BASIS_DESCRIPTION, BASIS_KINDS, Basis, BasisDefinition
from service.bases.validation import allow
from service.selection import AGE_CONVENTIONS, SELECTION_AGE_RULES

__all__ = ["Basis", "BasisDefinition"]

NonNegative = Annotated[float, Meta(ge=0)]
Positive = Annotated[float, Meta(gt=0)]
Value = Union[float, None]
Values = list[Value]

StoredId = Annotated[
    str,
    Meta(min_length=1, max_length=200, description="the id of a stored basis (GET /v1/bases)"),
]
BasisField = Annotated[
    Union[(StoredId, *BASIS_KINDS)],  # type: ignore[valid-type]
    Meta(
        description="The mortality basis: the id of a stored basis (a string), or an inline "
        "basis (an object). " + BASIS_DESCRIPTION
    ),
]

MAX_TERM = 10_000
MAX_ORDER = 8
MAX_PROBABILITIES = 100

Term = Annotated[
    int,
    Meta(
        ge=1,
        le=MAX_TERM,
        description="a whole number of years n: the quantities are then of min(T_x, n) and "
        "min(K_x, n) (temporary); leave out for whole life",
    ),
]


class Life(msgspec.Struct, frozen=True, forbid_unknown_fields=True):
    """One life: its age (or date of birth) and, for select bases, the years since selection
    (or the date of entry). For a joint-life or last-survivor basis, `ages` or
    `dates_of_birth` (one per member) instead of `age`. Dates need the request's
    `calculation_date`; the request's `age_convention` counts them."""

    age: Union[Annotated[float, Meta(ge=0, description="age in years, at least 0")], None] = None
    duration: Annotated[
        float,
        Meta(
            ge=0,
            description="years since selection (only select bases use it), at least 0",
        ),
    ] = 0.0
    ages: Union[
        Annotated[
            list[NonNegative],
            Meta(
                min_length=2,
                max_length=8,
                description="for a joint-life or last-survivor basis (instead of age): the "
                "age of each member, in the order of the basis's members",
            ),
        ],
        None,
    ] = None
    durations: Union[
        Annotated[
            list[NonNegative],
            Meta(
                min_length=2,
                max_length=8,
                description="with ages: years since selection of each member (default 0)",
            ),
        ],
        None,
    ] = None
    date_of_birth: Union[
        Annotated[date, Meta(description="instead of age: the date of birth (ISO 8601, "
                             "YYYY-MM-DD); the age is counted to calculation_date by "
                             "age_convention")],
        None,
    ] = None
    date_of_entry: Union[
        Annotated[date, Meta(description="instead of duration (select bases): the date of "
                             "selection, at or before calculation_date and not before the "
                             "date of birth; counted like the age")],
        None,
    ] = None
    dates_of_birth: Union[
        Annotated[list[date], Meta(min_length=2, max_length=8, description="instead of ages: "
                                   "each member's date of birth")],
        None,
    ] = None
    dates_of_entry: Union[
        Annotated[list[date], Meta(min_length=2, max_length=8, description="instead of "
                                   "durations: each member's date of entry")],
        None,
    ] = None


Lives = Annotated[
    list[Life],
    Meta(
        min_length=1,
        description="the lives, 1 to max_lives (a setting, default 10000); results follow "
        "their order",
    ),
]


def _durations(what: str) -> object:
    return Annotated[
        list[NonNegative],
        Meta(
            min_length=1,
            description=f"{what}, each at least 0; 1 to max_durations (a setting, default 1000)",
        ),
    ]


CalculationDate = Annotated[
    Union[date, None],
    Meta(description="the date at which ages and durations given by date are counted (ISO "
         "8601, YYYY-MM-DD); required when any life gives a date, and never taken as today"),
]
AgeConvention = Annotated[
    Literal[tuple(AGE_CONVENTIONS)],  # type: ignore[misc]
    Meta(description="How an age (and a duration) is counted from a date to calculation_date; "
         "ages and durations given as numbers are used as given. Completed years are the "
         "birthdays passed, a 29 February birthday falling on 28 February in common years. "
         + "; ".join(f"`{k}`: {v}" for k, v in AGE_CONVENTIONS.items()) + "."),
]


allow(r"^\$\.age_convention$", ", ".join(AGE_CONVENTIONS))


class Dated(msgspec.Struct, frozen=True, forbid_unknown_fields=True, kw_only=True):
    """The fields every request with lives takes for lives given by date."""

    calculation_date: CalculationDate = None
    age_convention: AgeConvention = "exact"


SelectionAgeRule = Annotated[
    Literal["last-birthday", "nearest-birthday"],
    Meta(
        description="How a select table places a life whose age at selection (age − duration) "
        "is not a whole age; bases that are not select tables ignore it. "
        + "; ".join(f"`{k}`: {v}" for k, v in SELECTION_AGE_RULES.items())
        + ". Each result echoes the age and duration actually used."
    ),
]


class SurvivalRequest(Dated, frozen=True, forbid_unknown_fields=True):
    """Survival and death probabilities, force of mortality and density at durations t."""

    basis: BasisField
    lives: Lives
    t: _durations("durations t in years")  # type: ignore[valid-type]
    selection_age_rule: SelectionAgeRule = "last-birthday"


class DeferredDeathRequest(Dated, frozen=True, forbid_unknown_fields=True):
    """Deferred death probabilities u|ₜq_x = P(u < T_x ≤ u + t) for each deferral u."""

    basis: BasisField
    lives: Lives
    deferral: _durations("deferral periods u in years")  # type: ignore[valid-type]
    period: Annotated[
        float, Meta(gt=0, description="the period t in years over which death is counted")
    ] = 1.0
    selection_age_rule: SelectionAgeRule = "last-birthday"


class ExpectationRequest(Dated, frozen=True, forbid_unknown_fields=True):
    """Complete and curtate expectations of life and their variances."""

    basis: BasisField
    lives: Lives
    term: Union[Term, None] = None
    selection_age_rule: SelectionAgeRule = "last-birthday"


class MomentsRequest(Dated, frozen=True, forbid_unknown_fields=True):
    """Raw moments E[T_x^k] and E[K_x^k] for the orders k asked for."""

    basis: BasisField
    lives: Lives
    orders: Annotated[
        list[Annotated[int, Meta(ge=1, le=MAX_ORDER)]],
        Meta(
            min_length=1,
            max_length=MAX_ORDER,
            extra_json_schema={"uniqueItems": True},
            description=f"the orders k: 1 to {MAX_ORDER} distinct whole numbers from 1 to "
            f"{MAX_ORDER}",
        ),
    ]
    term: Union[Term, None] = None
    selection_age_rule: SelectionAgeRule = "last-birthday"


class QuantilesRequest(Dated, frozen=True, forbid_unknown_fields=True):
    """Quantiles of T_x and K_x for the probabilities asked for."""

    basis: BasisField
    lives: Lives
    probabilities: Annotated[
        list[Annotated[float, Meta(gt=0, lt=1)]],
        Meta(
            min_length=1,
            max_length=MAX_PROBABILITIES,
            description=f"the probabilities p: 1 to {MAX_PROBABILITIES} numbers strictly "
            "between 0 and 1",
        ),
    ]
    selection_age_rule: SelectionAgeRule = "last-birthday"


class LifeTableRequest(msgspec.Struct, frozen=True, forbid_unknown_fields=True, kw_only=True):
    """A life table derived from the basis for one life, from start_age to end_age; for a
    joint-life or last-survivor basis, for the status of lives aged start_ages."""

    basis: BasisField
    start_age: Union[
        Annotated[
            float,
            Meta(ge=0, description="the first age of the table (single-life bases; required "
                 "for them)"),
        ],
        None,
    ] = None
    end_age: Annotated[
        float,
        Meta(
            ge=0,
            description="the last age: rows run at start_age, start_age + 1, … up to end_age "
            "(at most max_durations rows); with start_ages, the first member's age at the "
            "last row",
        ),
    ]
    radix: Annotated[float, Meta(gt=0, description="l at start_age")] = 100_000.0
    duration: Annotated[
        float,
        Meta(ge=0, description="years since selection of the life aged start_age (select bases)"),
    ] = 0.0
    start_ages: Union[
        Annotated[
            list[NonNegative],
            Meta(
                min_length=2,
                max_length=8,
                description="for a joint-life or last-survivor basis (instead of start_age, "
                "and required for it): the age of each member at the first row, in the order "
                "of the basis's members; row k is the status of the members aged "
                "start_ages + k",
            ),
        ],
        None,
    ] = None
    durations: Union[
        Annotated[
            list[NonNegative],
            Meta(
                min_length=2,
                max_length=8,
                description="with start_ages: years since selection of each member at the "
                "first row (default 0)",
            ),
        ],
        None,
    ] = None


# ---- answers ---------------------------------------------------------------------------------
    selection_age_rule: SelectionAgeRule = "last-birthday"


class BasisReference(msgspec.Struct, frozen=True):
    """Which basis answered: its stored id (null when sent inline) and its fingerprint."""

    id: Union[str, None]
    fingerprint: Annotated[
        str,
        Meta(
            pattern="^sha256:[0-9a-f]{64}$",
            description="SHA-256 of the basis definition's canonical JSON",
        ),
    ]


AgeEcho = Annotated[Union[float, None], Meta(description="the life's age (single-life bases)")]
DurationEcho = Annotated[Union[float, None], Meta(description="the life's duration (single-life bases)")]
AgesEcho = Annotated[
    Union[list[float], None],
    Meta(description="for a joint-life or last-survivor basis: each member's age (duration)"),
]


class LifeEcho(msgspec.Struct, frozen=True, kw_only=True, omit_defaults=True):
    """The start of every result: its life's age and duration, or, for a status of several
    lives, each member's (the unused pair is omitted)."""

    age: AgeEcho = None
    duration: DurationEcho = None
    ages: AgesEcho = None
    durations: AgesEcho = None


class SurvivalResult(LifeEcho, frozen=True, kw_only=True, omit_defaults=True):
    survival: Annotated[Values, Meta(description="ₜp_x for each t")]
    death: Annotated[Values, Meta(description="ₜq_x for each t")]
    force: Annotated[Values, Meta(description="μ_{x+t} for each t; null where it does not exist")]
    density: Annotated[Values, Meta(description="f_x(t) = ₜp_x μ_{x+t} for each t")]


class DeferredDeathResult(LifeEcho, frozen=True, kw_only=True, omit_defaults=True):
    probability: Annotated[Values, Meta(description="u|ₜq_x for each deferral u")]


class ExpectationResult(LifeEcho, frozen=True, kw_only=True, omit_defaults=True):
    complete: Annotated[Value, Meta(description="e̊_x, or e̊_{x:n} = E[min(T_x, n)]")]
    curtate: Annotated[Value, Meta(description="e_x, or e_{x:n} = E[min(K_x, n)]")]
    complete_variance: Annotated[Value, Meta(description="Var T_x or Var min(T_x, n)")]
    curtate_variance: Annotated[Value, Meta(description="Var K_x or Var min(K_x, n)")]


class MomentsResult(LifeEcho, frozen=True, kw_only=True, omit_defaults=True):
    complete: Annotated[Values, Meta(description="E[T_x^k] (or of min(T_x, n)) for each order")]
    curtate: Annotated[Values, Meta(description="E[K_x^k] (or of min(K_x, n)) for each order")]


class QuantilesResult(LifeEcho, frozen=True, kw_only=True, omit_defaults=True):
    complete: Annotated[Values, Meta(description="t with ₜq_x = p, for each p")]
    curtate: Annotated[
        Values, Meta(description="the least whole k with P(K_x ≤ k) ≥ p, for each p")
    ]


class LifeTableResult(msgspec.Struct, frozen=True, kw_only=True, omit_defaults=True):
    """One life's table (start_age, duration, age), or a status's (start_ages, durations,
    ages): then the rows follow the status from its start, l = radix × ₖp of the status,
    q, e̊ and e are conditional on the status being alive at row k, and d = l q."""

    start_age: Annotated[Union[float, None], Meta(description="the life's first age (single-life bases)")] = None
    duration: DurationEcho = None
    start_ages: Annotated[
        Union[list[float], None],
        Meta(description="for a joint-life or last-survivor basis: each member's first age"),
    ] = None
    durations: AgesEcho = None
    age: Annotated[
        Union[list[float], None],
        Meta(description="ages start_age, start_age + 1, … (single-life bases)"),
    ] = None
    ages: Annotated[
        Union[list[list[float]], None],
        Meta(description="for a joint-life or last-survivor basis: at each row k, the members' "
             "ages start_ages + k"),
    ] = None
    l: Annotated[Values, Meta(description="l_x, with l at start_age equal to the radix")]  # noqa: E741
    d: Annotated[Values, Meta(description="d_x = l_x q_x (= l_x − l_{x+1} for one life)")]
    q: Annotated[Values, Meta(description="q_x")]
    complete: Annotated[Values, Meta(description="e̊_x")]
    curtate: Annotated[Values, Meta(description="e_x")]


ServiceVersion = Annotated[
    str,
    Meta(
        description="the build of the service that answered: its version and, where built "
        "from a checkout, the commit (0.1.0+g<12 hex digits>, .dirty when it had uncommitted "
        "changes)"
    ),
]
CalculationFingerprint = Annotated[
    str,
    Meta(
        pattern="^sha256:[0-9a-f]{64}$",
        description="SHA-256 of the whole calculation: the endpoint, every argument (defaults "
        "filled in), the basis fingerprint and the service version, as canonical JSON (see "
        "the README); equal fingerprints mean the same question answered by the same build",
    ),
]


class DatedAnswer(msgspec.Struct, frozen=True, kw_only=True, omit_defaults=True):
    """What an answer to a request with calculation_date says of it (omitted otherwise)."""

    calculation_date: Annotated[
        Union[date, None], Meta(description="the request's calculation_date, when given")
    ] = None
    age_convention: Annotated[
        Union[str, None],
        Meta(description="the convention that counted the ages and durations given by date "
             "(with calculation_date); the results echo the values it gave"),
    ] = None


class SurvivalResponse(DatedAnswer, frozen=True):
    basis: BasisReference
    service_version: ServiceVersion
    results: list[SurvivalResult]
    calculation_fingerprint: CalculationFingerprint


class DeferredDeathResponse(DatedAnswer, frozen=True):
    basis: BasisReference
    service_version: ServiceVersion
    results: list[DeferredDeathResult]
    calculation_fingerprint: CalculationFingerprint


class ExpectationResponse(DatedAnswer, frozen=True):
    basis: BasisReference
    service_version: ServiceVersion
    results: list[ExpectationResult]
    calculation_fingerprint: CalculationFingerprint


class MomentsResponse(DatedAnswer, frozen=True):
    basis: BasisReference
    service_version: ServiceVersion
    results: list[MomentsResult]
    calculation_fingerprint: CalculationFingerprint


class QuantilesResponse(DatedAnswer, frozen=True):
    basis: BasisReference
    service_version: ServiceVersion
    results: list[QuantilesResult]
    calculation_fingerprint: CalculationFingerprint


class LifeTableResponse(msgspec.Struct, frozen=True):
    basis: BasisReference
    service_version: ServiceVersion
    results: list[LifeTableResult]
    calculation_fingerprint: CalculationFingerprint


# ---- reading bases -------------------------------------------------------------------------


class StoredBasisSummary(msgspec.Struct, frozen=True):
    id: str
    title: str
    type: str
    source: str
    fingerprint: str


class StoredBasesResponse(msgspec.Struct, frozen=True):
    bases: list[StoredBasisSummary]


class StoredBasisDetail(msgspec.Struct, frozen=True):
    id: str
    title: str
    type: str
    description: str
    source: str
    version: str
    fingerprint: str
    definition: Annotated[
        Basis,
        Meta(description="the definition in exactly the inline form: send it as `basis`"),
    ]


class BasisVersion(msgspec.Struct, frozen=True):
    version: str
    title: str
    fingerprint: Annotated[str, Meta(description="fetch it at /v1/bases/{id}/versions/{fingerprint}")]
    current: Annotated[bool, Meta(description="whether this is the version in use")]


class BasisVersionsResponse(msgspec.Struct, frozen=True):
    id: str
    versions: Annotated[
        list[BasisVersion],
        Meta(description="the current version first, then the earlier ones kept beside it"),
    ]


class LawParameter(msgspec.Struct, frozen=True):
    name: str
    domain: Annotated[str, Meta(description="the values allowed")]
    description: str


class LawDescription(msgspec.Struct, frozen=True):
    type: str
    definition: Annotated[str, Meta(description="a one-line definition")]
    parameters: list[LawParameter]
    rules: Annotated[
        list[str], Meta(description="conditions tying several parameters together")
    ]


class LawsResponse(msgspec.Struct, frozen=True):
    laws: list[LawDescription]


# ---- operations and errors -------------------------------------------------------------------


class HealthResponse(msgspec.Struct, frozen=True):
    status: str


class ReadyResponse(msgspec.Struct, frozen=True):
    status: str
    stored_bases: int


class FieldProblem(msgspec.Struct, frozen=True):
    field: Annotated[str, Meta(description="JSON path of the field, e.g. $.basis.c or $.lives[3].age")]
    message: Annotated[str, Meta(description="what is wrong and what is allowed")]


class ProblemDocument(msgspec.Struct, frozen=True, omit_defaults=True):
    """An error (RFC 9457 problem details, media type application/problem+json)."""

    type: str
    title: str
    status: int
    detail: str
    errors: Annotated[
        list[FieldProblem], Meta(description="for bad input: each field at fault")
    ] = []

"""What a basis is, as data: the inline basis kinds, a tagged union on ``"type"``.

These Structs are the one description of a basis definition. The HTTP layer decodes inline
bases into them, the stored-basis loader decodes the ``definition`` of each stored file into
them, the fingerprint is computed from them, and ``compile.build_model`` turns them into
models of the numeric core. Their constraints (``Meta``) are checked while decoding and show
in the OpenAPI document; rules that tie several fields together (Makeham's A > −B, a table
closing with 1) are checked by the core and answered as domain errors (422).

To add a kind: write one Struct here (subclass ``BasisDefinition`` with a ``tag``), add it to
``BASIS_KINDS``, and register its builder in ``compile.py``. A kind that wraps another basis
(a rating, an improvement, several lives) can take a field typed ``"Basis | str"`` - an inline
basis or the id of a stored one - and its builder resolves it through the ``resolve``
callback it is given.
"""

from __future__ import annotations

from typing import Annotated, Literal, Union

import msgspec
from msgspec import Meta

#: Longest list of rates in a table (whole ages), and most select rows.
MAX_TABLE_RATES = 1000
#: Longest select period, in years.
MAX_SELECT_PERIOD = 100
#: Highest whole age a table may start at.
MAX_START_AGE = 1000
#: Most coefficients in each polynomial of the Gompertz–Makeham family.
MAX_FAMILY_TERMS = 8

Positive = Annotated[float, Meta(gt=0)]
NonNegative = Annotated[float, Meta(ge=0)]
AboveOne = Annotated[float, Meta(gt=1)]
AnyNumber = float
Rate = Annotated[float, Meta(ge=0, le=1)]
WholeAge = Annotated[int, Meta(ge=0, le=MAX_START_AGE)]


def described(kind: object, text: str) -> object:
    """``kind`` with a description (shown in OpenAPI and by GET /v1/laws)."""
    return Annotated[kind, Meta(description=text)]

ClosingRates = Annotated[
    list[Rate],
    Meta(
        min_length=1,
        max_length=MAX_TABLE_RATES,
        description="q by whole age from the first age, each from 0 to 1; the last must be 1 "
        "and no earlier one may be",
    ),
]
SelectRow = Annotated[
    list[Rate],
    Meta(
        min_length=1,
        max_length=MAX_SELECT_PERIOD,
        description="the select rates q_[x], q_[x]+1, …, q_[x]+n−1 of one selection age x",
    ),
]
FractionalAges = Annotated[
    Literal["udd", "constant-force", "balducci"],
    Meta(
        description="how deaths fall within a year of age: uniformly (udd), at a constant "
        "force (constant-force), or by the Balducci assumption (balducci)"
    ),
]


class BasisDefinition(
    msgspec.Struct, frozen=True, forbid_unknown_fields=True, tag_field="type", kw_only=True
):
    """Common base of every inline basis kind; never sent as itself."""


class ConstantForce(BasisDefinition, tag="constant-force"):
    """Constant force of mortality: μ_x = mu at every age (an exponential lifetime)."""

    mu: described(Positive, "the force of mortality, the same at every age")  # type: ignore[valid-type]


class DeMoivre(BasisDefinition, tag="de-moivre"):
    """De Moivre's law: deaths uniform up to the limiting age ω; ₜp_x = (ω − x − t)/(ω − x)."""

    omega: described(Positive, "the limiting age ω")  # type: ignore[valid-type]


class GeneralisedDeMoivre(BasisDefinition, tag="generalised-de-moivre"):
    """Generalised de Moivre law: ₜp_x = ((ω − x − t)/(ω − x))^α, μ_x = α/(ω − x)."""

    omega: described(Positive, "the limiting age ω")  # type: ignore[valid-type]
    alpha: described(Positive, "the power α (α = 1 is de Moivre's law)")  # type: ignore[valid-type]


class Gompertz(BasisDefinition, tag="gompertz"):
    """Gompertz law: μ_x = B c^x."""

    B: described(Positive, "the force of mortality at age 0")  # type: ignore[valid-type]
    c: described(AboveOne, "the yearly growth factor of the force")  # type: ignore[valid-type]


class Makeham(BasisDefinition, tag="makeham"):
    """Makeham law: μ_x = A + B c^x, with A > −B so that μ stays positive at every age."""

    A: described(AnyNumber, "the part of the force that does not depend on age")  # type: ignore[valid-type]
    B: described(Positive, "the age-dependent part of the force at age 0")  # type: ignore[valid-type]
    c: described(AboveOne, "the yearly growth factor of the age-dependent part")  # type: ignore[valid-type]


class Weibull(BasisDefinition, tag="weibull"):
    """Weibull law: μ_x = k x^n."""

    k: described(Positive, "the scale k")  # type: ignore[valid-type]
    n: described(Positive, "the power n of age")  # type: ignore[valid-type]


class Perks(BasisDefinition, tag="perks"):
    """Perks law: μ_x = (A + B c^x)/(1 + D c^x), with A > −B."""

    A: described(AnyNumber, "the constant part of the numerator")  # type: ignore[valid-type]
    B: described(Positive, "the age-dependent part of the numerator at age 0")  # type: ignore[valid-type]
    c: described(AboveOne, "the yearly growth factor")  # type: ignore[valid-type]
    D: described(Positive, "the age-dependent part of the denominator at age 0")  # type: ignore[valid-type]


class Siler(BasisDefinition, tag="siler"):
    """Siler law: μ_x = a1 e^(−b1 x) + a2 + a3 e^(b3 x) (childhood, constant and ageing parts)."""

    a1: described(NonNegative, "the childhood force at age 0")  # type: ignore[valid-type]
    b1: described(Positive, "the rate at which the childhood force falls away")  # type: ignore[valid-type]
    a2: described(NonNegative, "the constant force")  # type: ignore[valid-type]
    a3: described(Positive, "the ageing force at age 0")  # type: ignore[valid-type]
    b3: described(Positive, "the rate at which the ageing force grows")  # type: ignore[valid-type]


class GompertzMakehamFamily(BasisDefinition, tag="gompertz-makeham-family"):
    """Gompertz–Makeham family GM(r, s): μ_x = Σ alpha_i x^i + exp(Σ beta_j x^j), i, j from 0."""

    alpha: Annotated[
        list[AnyNumber],
        Meta(
            max_length=MAX_FAMILY_TERMS,
            description=f"0 to {MAX_FAMILY_TERMS} coefficients of the polynomial part, "
            "constant term first",
        ),
    ]
    beta: Annotated[
        list[AnyNumber],
        Meta(
            min_length=1,
            max_length=MAX_FAMILY_TERMS,
            description=f"1 to {MAX_FAMILY_TERMS} coefficients of the polynomial in the "
            "exponent, constant term first",
        ),
    ]


class Table(BasisDefinition, tag="table"):
    """Life table: q_x by whole age from start_age, closing with q = 1."""

    start_age: described(WholeAge, "the age of the first rate")  # type: ignore[valid-type]
    q: ClosingRates
    fractional_ages: FractionalAges


class SelectTable(BasisDefinition, tag="select-table"):
    """Select-and-ultimate table: select rates for n years after selection, then ultimate rates."""

    start_age: described(WholeAge, "the first selection age")  # type: ignore[valid-type]
    select: Annotated[
        list[SelectRow],
        Meta(
            min_length=1,
            max_length=MAX_TABLE_RATES,
            description="one row per selection age from start_age; every row holds the same "
            f"number n of select rates (the select period, 1 to {MAX_SELECT_PERIOD} years)",
        ),
    ]
    ultimate_start_age: described(WholeAge, "the age of the first ultimate rate")  # type: ignore[valid-type]
    ultimate: ClosingRates
    fractional_ages: FractionalAges


#: Deepest nesting of transforms (a basis inside a basis inside …).
MAX_NESTING = 8
#: Most members of a status of several lives.
MAX_MEMBERS = 8

#: A nested basis: an inline basis or the id of a stored one.
NestedBasis = Annotated[
    Union["StoredReference", "Basis"],
    Meta(description="the basis this one is built on: an inline basis (an object) or the id "
         "of a stored basis (a string)"),
]
StoredReference = Annotated[
    str,
    Meta(min_length=1, max_length=200, description="the id of a stored basis (GET /v1/bases)"),
]
Years = Annotated[float, Meta(gt=0, le=1000)]
ImprovementRate = Annotated[float, Meta(gt=-1, lt=1)]
CalendarYear = Annotated[int, Meta(ge=1000, le=9999)]


class Adjusted(BasisDefinition, tag="adjusted"):
    """A rated basis: age shift, then multipliers (q, then force), then additions (q, then force)."""

    base: NestedBasis
    age_shift: Union[described(AnyNumber, "years added to the age: the life aged x is valued at x + s (negative for a set-back)"), None] = None  # type: ignore[valid-type]
    q_multiplier: Union[described(NonNegative, "q' = min(1, m q) at each whole age; tables only"), None] = None  # type: ignore[valid-type]
    force_multiplier: Union[described(NonNegative, "μ' = m μ, so ₜp' = (ₜp)^m; any basis"), None] = None  # type: ignore[valid-type]
    extra_q: Union[described(Rate, "q' = min(1, q + e) at each whole age; tables only"), None] = None  # type: ignore[valid-type]
    extra_q_years: Union[described(Years, "policy years the extra_q applies to, counted from the life's age (durations 0 to n; all years when absent)"), None] = None  # type: ignore[valid-type]
    extra_force: Union[described(AnyNumber, "μ' = μ + δ (negative allowed while μ' stays ≥ 0)"), None] = None  # type: ignore[valid-type]
    extra_force_years: Union[described(Years, "policy years the extra_force applies to, counted from the life's age (durations 0 to n; all years when absent)"), None] = None  # type: ignore[valid-type]


class RatesByAge(msgspec.Struct, frozen=True, forbid_unknown_fields=True, kw_only=True):
    """Improvement rates by age alone."""

    start_age: described(WholeAge, "the age of the first rate; younger ages take the first, older the last")  # type: ignore[valid-type]
    values: Annotated[list[ImprovementRate], Meta(min_length=1, max_length=MAX_TABLE_RATES, description="yearly improvement rates r by whole age")]


class RatesByYear(msgspec.Struct, frozen=True, forbid_unknown_fields=True, kw_only=True):
    """Improvement rates by age (rows) and calendar year (columns)."""

    start_age: described(WholeAge, "the age of the first row; younger ages take the first row, older the last")  # type: ignore[valid-type]
    start_year: described(CalendarYear, "the calendar year of the first column; at most base_year + 1")  # type: ignore[valid-type]
    grid: Annotated[
        list[Annotated[list[ImprovementRate], Meta(min_length=1, max_length=200)]],
        Meta(min_length=1, max_length=MAX_TABLE_RATES, description="one row per whole age, one column per calendar year, all rows of one length; years after the last column take the last column"),
    ]


class Improved(BasisDefinition, tag="improved"):
    """Generational mortality improvement: q_{x+k} × Π_{y=base_year+1}^{valuation_year+k} (1 − r)."""

    base: NestedBasis
    base_year: described(CalendarYear, "the calendar year of the base table's rates")  # type: ignore[valid-type]
    valuation_year: described(CalendarYear, "the calendar year in which the lives have the ages given (≥ base_year)")  # type: ignore[valid-type]
    rates: Union[RatesByAge, None] = None
    rates_by_year: Union[RatesByYear, None] = None


Members = Annotated[
    list[NestedBasis],
    Meta(min_length=2, max_length=MAX_MEMBERS, description=f"2 to {MAX_MEMBERS} single-life bases, one per member; lives give one age per member in `ages`"),
]
CommonShock = Annotated[
    float, Meta(ge=0, description="λ: every member's survival is multiplied by e^(−λt) (common shock); 0 for independent lives")
]


class JointLife(BasisDefinition, tag="joint-life"):
    """Joint-life status (until the first death): ₜp = e^(−λt) Π ₜp of each member."""

    members: Members
    common_shock_force: CommonShock = 0.0


class LastSurvivor(BasisDefinition, tag="last-survivor"):
    """Last-survivor status (until the last death): ₜp = e^(−λt) (1 − Π ₜq of each member)."""

    members: Members
    common_shock_force: CommonShock = 0.0


#: Every inline kind, in the order they are documented.
BASIS_KINDS: tuple[type[BasisDefinition], ...] = (
    ConstantForce,
    DeMoivre,
    GeneralisedDeMoivre,
    Gompertz,
    Makeham,
    Weibull,
    Perks,
    Siler,
    GompertzMakehamFamily,
    Table,
    SelectTable,
    Adjusted,
    Improved,
    JointLife,
    LastSurvivor,
)

#: The union as a type (decoded by msgspec using the "type" tag).
Basis = Union[BASIS_KINDS]  # type: ignore[valid-type]

#: Conditions that tie several fields together, checked by the core (422 when broken).
CROSS_FIELD_RULES: dict[str, tuple[str, ...]] = {
    "makeham": ("A > −B, so that μ stays positive at every age",),
    "perks": ("A > −B, so that μ stays positive at every age",),
    "table": ("the last rate of q is 1 and no earlier one is, so the table closes",),
    "select-table": (
        "every row of select holds the same number n of rates (the select period)",
        "select rates are below 1",
        "ultimate_start_age ≤ start_age + n",
        "the ultimate rates run at least to the last selection age + n",
        "the last rate of ultimate is 1 and no earlier one is, so the table closes",
    ),
    "adjusted": (
        "at least one of age_shift, q_multiplier, force_multiplier, extra_q, extra_force",
        "order of application: 1. age_shift (the life aged x is valued at x + s); "
        "2. q_multiplier; 3. force_multiplier; 4. extra_q; 5. extra_force",
        "q_multiplier and extra_q need a table as base; extra_q cannot follow "
        "force_multiplier in one rating (nest two adjusted bases)",
        "extra_q_years and extra_force_years count policy years from the life's age (durations 0 to n)",
        "extra_force keeps the force at least 0 at every age of the base",
        "force_multiplier 0 needs an extra_force",
        f"nesting depth at most {MAX_NESTING}",
    ),
    "improved": (
        "exactly one of rates and rates_by_year",
        "base is a life table or a select table (type table or select-table, or a rating "
        "that keeps it a table)",
        "valuation_year ≥ base_year; rates_by_year.start_year ≤ base_year + 1",
        "every row of rates_by_year.grid has the same length",
        "a life aged x in valuation_year uses the cohort of whole age floor(x); on a select "
        "table, within the select period, the cohort of its selection age x − d and floor(x)",
        "a rate that reaches 1 (negative rates) is 1 and ends the cohort there",
    ),
    "joint-life": (
        "members are single-life bases; each life gives ages (one per member), not age",
        "λ = common_shock_force ≥ 0",
    ),
    "last-survivor": (
        "members are single-life bases; each life gives ages (one per member), not age",
        "λ = common_shock_force ≥ 0",
    ),
}

BASIS_DESCRIPTION = (
    "An inline mortality basis, chosen by its `type`: a law of mortality given by its "
    "parameters (constant-force, de-moivre, generalised-de-moivre, gompertz, makeham, weibull, "
    "perks, siler, gompertz-makeham-family), a table of rates (table, select-table), or a "
    "transform of other bases (adjusted: ratings; improved: generational mortality "
    "improvement; joint-life and last-survivor: statuses of several lives, whose lives give "
    "`ages`, one per member). A transform's `base` or `members` are inline bases or ids of "
    "stored bases, nested at most 8 deep. "
    "Parameter names are the published ones. GET /v1/laws lists every type with its "
    "parameters, their domains and a one-line definition."
)


def kind_of(definition: BasisDefinition) -> str:
    """The ``type`` tag of a definition."""
    return definition.__struct_config__.tag  # type: ignore[return-value]

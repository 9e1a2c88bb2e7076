"""The quote desk of Thistlemoor Mutual, a fictional insurer: price a day's batch of invented
applicants through the Lifetime Service and write a report and charts.

EVERYTHING HERE IS INVENTED: the insurer, its bases, every applicant and every pricing
assumption below. Nothing describes a real person, population or product.

    python -m demo.quote_desk                 # start a service on a free 127.0.0.1 port
    python -m demo.quote_desk --url http://127.0.0.1:8000   # use a running one
    python -m demo.quote_desk --quick --out some/folder     # a few applicants (CI)

Products (with the desk's invented assumptions, shown again in the report):

* term protection: a level sum assured paid at the end of the year of death within the term,
  level yearly premiums in advance over the term; basis the stored table for the applicant's
  sex, q × SMOKER_TERM_LOADING for smokers, and the underwriter's rating (+N% multiplies q;
  +Npm/Ty adds N per mille to q for T years);
* single-life annuity: monthly in advance for life, the first GUARANTEE_YEARS years certain;
  basis the stored annuitants' law, women valued FEMALE_AGE_SHIFT years younger, smokers
  (enhanced terms) at force × SMOKER_ANNUITY_FORCE;
* last-survivor annuity for couples: monthly in advance while either lives, each member on
  the annuitants' basis as above; the value of a joint-life annuity (paid while both live) is
  shown beside it for comparison.

Each distinct basis and product term is one batch: one request per endpoint for all its lives.
Every answer is decoded into the service's response Structs by the client and its shape is
checked (one result per life, one value per duration or benefit); a change of shape stops
the run with an error.
"""

from __future__ import annotations

import argparse
import csv
import itertools
import json
import math
import os
import re
import sys
import time
from collections import defaultdict
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Union

if __package__ in (None, ""):  # run as a script: python demo/quote_desk.py
    sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

import msgspec

from service.bases import definitions as d
from service.client import LifetimeClient, LifetimeServiceError
from service.launch import LocalService

HERE = Path(__file__).resolve().parent
APPLICANTS = HERE / "applicants.csv"
DEFAULT_OUT = HERE / "out"

# ---- the desk's invented assumptions -------------------------------------------------------

INTEREST_RATE = 0.03
SMOKER_TERM_LOADING = 1.6
SMOKER_ANNUITY_FORCE = 1.5
FEMALE_AGE_SHIFT = -3.0
GUARANTEE_YEARS = 5.0
ANNUITY_FREQUENCY = 12

#: the report's value columns say which annuity they value, per 1 a year paid monthly in
#: advance (ä⁽¹²⁾, the annual amount 1 paid as twelve instalments of 1/12)
ANNUITY_VALUE_COLUMN = (
    f"ä⁽¹²⁾ per 1 a year, {GUARANTEE_YEARS:g} years certain then for life"
)
LAST_SURVIVOR_COLUMN = "ä⁽¹²⁾ per 1 a year while either lives (last survivor)"
JOINT_LIFE_COLUMN = "ä⁽¹²⁾ per 1 a year while both live (joint life, for comparison)"
ANNUITY_HORIZONS = [5.0, 10.0, 15.0, 20.0, 25.0, 30.0]
TABLE_BY_SEX = {"male": "thistlemoor-2024-male", "female": "thistlemoor-2024-female"}
ANNUITANTS = "thistlemoor-2024-annuitants"
QUICK_APPLICANTS = 8

#: for the chart of the effect of improvement (invented flat yearly rates)
IMPROVEMENT_BASE_YEAR = 2024
IMPROVEMENT_RATES = (0.01, 0.02)


class AnswerShapeError(RuntimeError):
    """The service answered, but not in the shape this desk was written against."""


# ---- applicants -------------------------------------------------------------------------------


@dataclass(frozen=True)
class Applicant:
    id: str
    sex: str
    age: float
    smoker: bool
    rating: str
    product: str
    term_years: Union[int, None]
    amount: float
    partner_sex: Union[str, None]
    partner_age: Union[float, None]


def read_applicants(path: Path = APPLICANTS) -> list[Applicant]:
    """The applicants of a CSV file (lines starting with # are comments). Every row must be
    marked invented."""
    lines = [line for line in path.read_text().splitlines() if not line.startswith("#")]
    applicants = []
    for row in csv.DictReader(lines):
        if row["invented"] != "yes":
            raise ValueError(f"{path.name}: applicant {row['id']} is not marked invented")
        if row["product"] not in ("term", "annuity", "last-survivor-annuity"):
            raise ValueError(f"{path.name}: {row['id']}: unknown product {row['product']!r}")
        applicants.append(
            Applicant(
                id=row["id"],
                sex=row["sex"],
                age=float(row["age"]),
                smoker=row["smoker"] == "yes",
                rating=row["rating"],
                product=row["product"],
                term_years=int(row["term_years"]) if row["term_years"] else None,
                amount=float(row["amount"]),
                partner_sex=row["partner_sex"] or None,
                partner_age=float(row["partner_age"]) if row["partner_age"] else None,
            )
        )
    return applicants


_PERCENT = re.compile(r"^\+(\d+(?:\.\d+)?)%$")
_PER_MILLE = re.compile(r"^\+(\d+(?:\.\d+)?)pm/(\d+(?:\.\d+)?)y$")


def parse_rating(rating: str) -> tuple[float, float, Union[float, None]]:
    """(q multiplier, extra q, years of the extra q) of an underwriter's rating."""
    if not rating:
        return 1.0, 0.0, None
    if match := _PERCENT.match(rating):
        return 1.0 + float(match.group(1)) / 100.0, 0.0, None
    if match := _PER_MILLE.match(rating):
        return 1.0, float(match.group(1)) / 1000.0, float(match.group(2))
    raise ValueError(f"unknown rating {rating!r} (expected +N% or +Npm/Ty)")


# ---- bases and requests ---------------------------------------------------------------------

BasisArg = Union[str, d.BasisDefinition]


def term_basis(applicant: Applicant) -> BasisArg:
    multiplier, extra_q, years = parse_rating(applicant.rating)
    if applicant.smoker:
        multiplier *= SMOKER_TERM_LOADING
    base = TABLE_BY_SEX[applicant.sex]
    if multiplier == 1.0 and extra_q == 0.0:
        return base
    return d.Adjusted(
        base=base,
        q_multiplier=multiplier if multiplier != 1.0 else None,
        extra_q=extra_q or None,
        extra_q_years=years,
    )


def annuitant_basis(sex: str, smoker: bool) -> BasisArg:
    shift = FEMALE_AGE_SHIFT if sex == "female" else None
    force = SMOKER_ANNUITY_FORCE if smoker else None
    if shift is None and force is None:
        return ANNUITANTS
    return d.Adjusted(base=ANNUITANTS, age_shift=shift, force_multiplier=force)


@dataclass(frozen=True)
class Plan:
    """What to ask for one applicant."""

    basis: BasisArg
    life: dict
    horizons: tuple[float, ...]
    benefits: tuple[tuple[str, dict], ...]  # (label, benefit request)
    joint_basis: Union[BasisArg, None] = None  # couples: the status while both live


def plan(applicant: Applicant) -> Plan:
    if applicant.product == "term":
        n = applicant.term_years
        if n is None:
            raise ValueError(f"{applicant.id}: a term product needs term_years")
        horizons = tuple(sorted({*range(5, n, 5), n}))
        cover = {"type": "life-insurance", "timing": "end-of-year", "term": n,
                 "net_premium": {"premium_term": n}}
        return Plan(term_basis(applicant), {"age": applicant.age},
                    tuple(float(h) for h in horizons), (("term cover", cover),))
    annuity = {"type": "life-annuity", "timing": "advance", "frequency": ANNUITY_FREQUENCY}
    if applicant.product == "annuity":
        guaranteed = {**annuity, "guarantee": GUARANTEE_YEARS}
        return Plan(annuitant_basis(applicant.sex, applicant.smoker), {"age": applicant.age},
                    tuple(ANNUITY_HORIZONS), (("annuity", guaranteed),))
    if applicant.partner_sex is None or applicant.partner_age is None:
        raise ValueError(f"{applicant.id}: a last-survivor annuity needs the partner's sex and age")
    members = [
        annuitant_basis(applicant.sex, applicant.smoker),
        annuitant_basis(applicant.partner_sex, False),
    ]
    return Plan(
        d.LastSurvivor(members=members),
        {"ages": [applicant.age, applicant.partner_age]},
        tuple(ANNUITY_HORIZONS),
        (("while either lives", annuity),),
        joint_basis=d.JointLife(members=members),
    )


def describe(basis: Any) -> str:
    """A short label of a basis for the report."""
    if isinstance(basis, str):
        return basis
    if isinstance(basis, d.Adjusted):
        parts = []
        if basis.age_shift is not None:
            parts.append(f"valued {abs(basis.age_shift):g} years "
                         + ("younger" if basis.age_shift < 0 else "older"))
        if basis.q_multiplier is not None:
            parts.append(f"q × {basis.q_multiplier:g}")
        if basis.force_multiplier is not None:
            parts.append(f"μ × {basis.force_multiplier:g}")
        if basis.extra_q is not None:
            years = f" for {basis.extra_q_years:g} y" if basis.extra_q_years else ""
            parts.append(f"q + {basis.extra_q * 1000:g}‰{years}")
        return f"{describe(basis.base)} ({', '.join(parts)})"
    if isinstance(basis, (d.LastSurvivor, d.JointLife)):
        kind = "last survivor" if isinstance(basis, d.LastSurvivor) else "joint life"
        return f"{kind} of [" + "; ".join(describe(m) for m in basis.members) + "]"
    return d.kind_of(basis)


# ---- pricing ----------------------------------------------------------------------------------


@dataclass
class Quote:
    applicant: Applicant
    basis: str
    basis_id: Union[str, None]
    fingerprint: str
    complete_expectation: float
    survival: list[tuple[float, float]]
    values: dict[str, dict[str, Any]] = field(default_factory=dict)


def _check(condition: bool, what: str) -> None:
    if not condition:
        raise AnswerShapeError(what)


def _check_results(answer: Any, lives: int, endpoint: str) -> None:
    _check(re.fullmatch(r"sha256:[0-9a-f]{64}", answer.basis.fingerprint) is not None,
           f"{endpoint}: fingerprint {answer.basis.fingerprint!r} is not sha256:<64 hex>")
    _check(len(answer.results) == lives,
           f"{endpoint}: {len(answer.results)} results for {lives} lives")


def _finite(value: Any, what: str) -> float:
    _check(isinstance(value, float) and math.isfinite(value), f"{what} is {value!r}, not a number")
    return value


def price(client: LifetimeClient, applicants: Sequence[Applicant]) -> tuple[list[Quote], int]:
    """Quotes for ``applicants`` in their order, and the number of requests made."""
    plans = [plan(a) for a in applicants]
    groups: dict[bytes, list[int]] = defaultdict(list)
    for i, p in enumerate(plans):
        key = msgspec.json.encode([p.basis, p.horizons, p.benefits, p.joint_basis])
        groups[key].append(i)

    quotes: list[Union[Quote, None]] = [None] * len(plans)
    requests = 0
    for members in groups.values():
        first = plans[members[0]]
        lives = [plans[i].life for i in members]
        n = len(lives)
        survival = client.survival(basis=first.basis, lives=lives, t=list(first.horizons))
        expectation = client.expectation(basis=first.basis, lives=lives)
        benefits = [b for _, b in first.benefits]
        values = client.present_values(
            basis=first.basis, lives=lives, interest={"rate": INTEREST_RATE}, benefits=benefits
        )
        requests += 3
        for answer, endpoint in ((survival, "survival"), (expectation, "expectation"),
                                 (values, "present-values")):
            _check_results(answer, n, endpoint)
        _check(survival.basis == expectation.basis == values.basis,
               "the three answers name different bases for one basis")
        joint = None
        if first.joint_basis is not None:
            joint = client.present_values(
                basis=first.joint_basis, lives=lives, interest={"rate": INTEREST_RATE},
                benefits=benefits,
            )
            requests += 1
            _check_results(joint, n, "present-values (joint life)")

        for k, i in enumerate(members):
            applicant = applicants[i]
            s_result = survival.results[k]
            _check(len(s_result.survival) == len(first.horizons),
                   f"survival: {len(s_result.survival)} values for {len(first.horizons)} durations")
            v_result = values.results[k]
            _check(len(v_result.benefits) == len(benefits),
                   f"present-values: {len(v_result.benefits)} values for {len(benefits)} benefits")
            quote = Quote(
                applicant=applicant,
                basis=describe(first.basis),
                basis_id=survival.basis.id,
                fingerprint=survival.basis.fingerprint,
                complete_expectation=_finite(expectation.results[k].complete,
                                             f"{applicant.id}: e̊"),
                survival=[
                    (t, _finite(p, f"{applicant.id}: survival"))
                    for t, p in zip(first.horizons, s_result.survival)
                ],
            )
            for (label, benefit), value in zip(first.benefits, v_result.benefits):
                quote.values[label] = _priced(applicant, benefit, value)
            if joint is not None:
                quote.values["while both live"] = _priced(
                    applicant, benefits[0], joint.results[k].benefits[0]
                )
                quote.values["while both live"]["fingerprint"] = joint.basis.fingerprint
            quotes[i] = quote
    return [q for q in quotes if q is not None], requests


def _priced(applicant: Applicant, benefit: dict, value: Any) -> dict[str, Any]:
    per_unit = _finite(value.value, f"{applicant.id}: present value")
    out: dict[str, Any] = {
        "per_unit": per_unit,
        "standard_deviation": _finite(value.standard_deviation, f"{applicant.id}: sd"),
    }
    if benefit["type"] == "life-insurance":
        premium = _finite(value.net_premium, f"{applicant.id}: net premium")
        out["single_premium"] = per_unit * applicant.amount
        out["yearly_premium"] = premium * applicant.amount
    else:
        out["single_premium"] = per_unit * applicant.amount
    return out


# ---- the report ---------------------------------------------------------------------------------


def _money(x: float) -> str:
    return f"{x:,.0f}"


def _short(fingerprint: str) -> str:
    return fingerprint[: len("sha256:") + 12] + "…"


def _survival_text(points: Iterable[tuple[float, float]]) -> str:
    return ", ".join(f"{t:g} y: {p:.4f}" for t, p in points)


def write_report(
    out: Path,
    quotes: Sequence[Quote],
    stored: Any,
    charts: Sequence[tuple[str, str]],
    service_version: str,
    url: str,
) -> Path:
    lines = [
        "# Thistlemoor Mutual quote desk: the day's batch",
        "",
        "> **INVENTED.** Thistlemoor Mutual is a fictional insurer. Its bases, every applicant "
        "and every assumption in this report are invented for the Lifetime Service demo; none "
        "describes a real person, population or product. Not actuarial advice.",
        "",
        f"Priced by Lifetime Service {service_version} at {url} on "
        f"{time.strftime('%Y-%m-%d %H:%M UTC', time.gmtime())}: {len(quotes)} applicants.",
        "",
        "## The desk's assumptions (invented)",
        "",
        f"- Interest: {INTEREST_RATE:.0%} a year effective.",
        f"- Term protection: the stored table for the applicant's sex "
        f"(`{TABLE_BY_SEX['male']}`, `{TABLE_BY_SEX['female']}`); smokers q × "
        f"{SMOKER_TERM_LOADING:g}; ratings +N% multiply q, +Npm/Ty add N per mille to q for "
        "T years. Sum assured at the end of the year of death within the term; level net "
        "premiums yearly in advance over the term.",
        f"- Annuities: `{ANNUITANTS}`, women {abs(FEMALE_AGE_SHIFT):g} years younger, smokers "
        f"on enhanced terms (force of mortality × {SMOKER_ANNUITY_FORCE:g}). Paid monthly in "
        f"advance; single-life annuities guaranteed for {GUARANTEE_YEARS:g} years; couples "
        "buy last-survivor annuities, paid while either lives (the joint-life value, paid "
        "while both live, is shown for comparison).",
        "- Single premiums below are net: no expenses, no profit margin.",
        "",
    ]
    by_product = defaultdict(list)
    for q in quotes:
        by_product[q.applicant.product].append(q)

    if by_product["term"]:
        lines += [
            "## Term protection",
            "",
            "| applicant | sex | age | smoker | rating | term | sum assured | basis | fingerprint "
            "| e̊_x (years) | survival ₜp_x over the term | A¹ per unit | net yearly premium |",
            "| --- | --- | ---: | --- | --- | ---: | ---: | --- | --- | ---: | --- | ---: | ---: |",
        ]
        for q in by_product["term"]:
            a, v = q.applicant, q.values["term cover"]
            lines.append(
                f"| {a.id} | {a.sex} | {a.age:g} | {'yes' if a.smoker else 'no'} | "
                f"{a.rating or 'standard'} | {a.term_years} | {_money(a.amount)} | {q.basis} | "
                f"`{_short(q.fingerprint)}` | {q.complete_expectation:.2f} | "
                f"{_survival_text(q.survival)} | {v['per_unit']:.5f} | "
                f"{v['yearly_premium']:,.2f} |"
            )
        lines.append("")

    if by_product["annuity"]:
        lines += [
            "## Single-life annuities",
            "",
            "| applicant | sex | age | smoker | yearly amount | basis | fingerprint | e̊_x (years) "
            f"| survival ₜp_x | {ANNUITY_VALUE_COLUMN} | single premium | sd of PV |",
            "| --- | --- | ---: | --- | ---: | --- | --- | ---: | --- | ---: | ---: | ---: |",
        ]
        for q in by_product["annuity"]:
            a, v = q.applicant, q.values["annuity"]
            lines.append(
                f"| {a.id} | {a.sex} | {a.age:g} | {'yes' if a.smoker else 'no'} | "
                f"{_money(a.amount)} | {q.basis} | `{_short(q.fingerprint)}` | "
                f"{q.complete_expectation:.2f} | {_survival_text(q.survival)} | "
                f"{v['per_unit']:.4f} | {_money(v['single_premium'])} | "
                f"{_money(v['standard_deviation'] * a.amount)} |"
            )
        lines.append("")

    if by_product["last-survivor-annuity"]:
        lines += [
            "## Last-survivor annuities (couples)",
            "",
            "| applicant | first life | second life | yearly amount | basis (last survivor) | "
            "fingerprint | e̊ of the last survivor (years) | survival of either | "
            f"{LAST_SURVIVOR_COLUMN} | single premium | {JOINT_LIFE_COLUMN} |",
            "| --- | --- | --- | ---: | --- | --- | ---: | --- | ---: | ---: | ---: |",
        ]
        for q in by_product["last-survivor-annuity"]:
            a = q.applicant
            either, both = q.values["while either lives"], q.values["while both live"]
            lines.append(
                f"| {a.id} | {a.sex} {a.age:g}{' smoker' if a.smoker else ''} | "
                f"{a.partner_sex} {a.partner_age:g} | {_money(a.amount)} | {q.basis} | "
                f"`{_short(q.fingerprint)}` | {q.complete_expectation:.2f} | "
                f"{_survival_text(q.survival)} | {either['per_unit']:.4f} | "
                f"{_money(either['single_premium'])} | {both['per_unit']:.4f} |"
            )
        lines.append("")

    lines += ["## Bases and their fingerprints", "",
              "Every answer names its basis's fingerprint: the same definition gives the same "
              "fingerprint, so a quote can be reproduced later.", "",
              "| basis | fingerprint |", "| --- | --- |"]
    seen: dict[str, str] = {}
    for q in quotes:
        seen.setdefault(q.fingerprint, q.basis)
    for fingerprint, label in seen.items():
        lines.append(f"| {label} | `{fingerprint}` |")
    lines += ["", "Stored bases of the service:", "",
              "| id | title | fingerprint |", "| --- | --- | --- |"]
    for b in stored.bases:
        lines.append(f"| `{b.id}` | {b.title} | `{b.fingerprint}` |")
    lines += ["", "## Charts", ""]
    for filename, caption in charts:
        lines += [f"### {caption}", "", f"![{caption}]({filename})", ""]
    path = out / "report.md"
    path.write_text("\n".join(lines))
    return path


# ---- charts -------------------------------------------------------------------------------------

#: each series of a chart gets its own line style and marker, so none hides another
LINE_STYLES = ("-", "--", "-.", ":", (0, (5, 1, 1, 1, 1, 1)))
MARKERS = ("o", "s", "^", "D", "v")
#: where a curve counts as having reached the bottom of its chart
VISIBLE_SURVIVAL = 1e-3
VISIBLE_PROBABILITY = 1e-4
#: the widest title line, in characters, at the charts' size and font
TITLE_WIDTH = 95


def last_visible(x: Sequence[float], y: Sequence[float], floor: float) -> float:
    """The last x whose y is still visible above ``floor`` (the axis ends just after it)."""
    return max((a for a, b in zip(x, y) if b == b and b > floor), default=x[-1])


def title_lines(prefix: str, basis: Any) -> list[str]:
    """A basis for a chart title, in lines of at most TITLE_WIDTH characters that never break
    inside brackets or parentheses: a status of several lives gets one line per member."""
    if isinstance(basis, (d.LastSurvivor, d.JointLife)):
        kind = "last survivor" if isinstance(basis, d.LastSurvivor) else "joint life"
        return [f"{prefix}{kind} of {len(basis.members)} lives:", *(f"{i}. {describe(m)}"
                                        for i, m in enumerate(basis.members, 1))]
    return wrap_outside_brackets(f"{prefix}{describe(basis)}", TITLE_WIDTH)


def wrap_outside_brackets(text: str, width: int) -> list[str]:
    """``text`` in lines of about ``width`` characters, broken only at spaces outside any
    brackets or parentheses (a bracketed group longer than a line stays whole)."""
    groups: list[str] = []
    depth = 0
    for word in text.split(" "):
        if depth > 0 and groups:
            groups[-1] += " " + word
        else:
            groups.append(word)
        depth += sum(word.count(c) for c in "([") - sum(word.count(c) for c in ")]")
    lines = [""]
    for group in groups:
        if lines[-1] and len(lines[-1]) + 1 + len(group) > width:
            lines.append(group)
        else:
            lines[-1] = f"{lines[-1]} {group}" if lines[-1] else group
    return lines


def draw_charts(
    client: LifetimeClient, out: Path, quotes: Sequence[Quote], stored: Any, chosen: str,
    quick: bool,
) -> list[tuple[str, str]]:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    charts = []
    step = 1.0 if quick else 0.5

    # 1. survival curves of the stored bases, from age 20
    start = 20.0
    x = f"{start:g}"
    t = [i * step for i in range(int(100 / step) + 1)]
    fig, ax = plt.subplots(figsize=(8, 5), constrained_layout=True)
    styles = itertools.cycle(LINE_STYLES)
    last_age = 0.0
    for b in stored.bases:
        answer = client.survival(basis=b.id, lives=[{"age": start}], t=t)
        _check_results(answer, 1, "survival")
        p = [math.nan if v is None else v for v in answer.results[0].survival]
        _check(len(p) == len(t), "survival: one value per duration")
        ax.plot([start + x for x in t], p, label=f"{b.id}", linestyle=next(styles),
                linewidth=1.8)
        last_age = max(last_age, last_visible(t, p, VISIBLE_SURVIVAL))
    ax.set_title(f"Survival from age {start:g} on the stored bases (Thistlemoor bases INVENTED)")
    ax.set_xlabel(f"age {x} + t (years)")
    ax.set_ylabel(rf"${{}}_{{t}}p_{{{x}}} = P(T_{{{x}}} > t)$, survival from age {x}")
    # the axis ends where the last curve reaches the bottom of the chart, not at 100 years
    ax.set_xlim(start, start + last_age)
    ax.set_ylim(0, 1.02)
    ax.grid(True, alpha=0.3)
    ax.legend(title="stored basis", fontsize=8)
    fig.savefig(out / "survival_curves.png", dpi=110)
    plt.close(fig)
    charts.append(("survival_curves.png", "Survival curves of the stored bases"))

    # 2. the curtate distribution P(K_x = k) of the chosen applicant
    quote = next((q for q in quotes if q.applicant.id == chosen), quotes[0])
    a = quote.applicant
    basis = plan(a).basis
    life = plan(a).life
    k = list(range(0, 101))
    answer = client.deferred_death(basis=basis, lives=[life], deferral=[float(x) for x in k],
                                   period=1)
    _check_results(answer, 1, "deferred-death")
    probability = [0.0 if v is None else v for v in answer.results[0].probability]
    _check(len(probability) == len(k), "deferred-death: one value per deferral")
    _check(0.999 < sum(probability) <= 1 + 1e-9,
           f"deferred-death: P(K = k) over k = 0..{k[-1]} sums to {sum(probability)}, not 1")
    expectation = client.expectation(basis=basis, lives=[life]).results[0]
    fig, ax = plt.subplots(figsize=(8, 5), constrained_layout=True)
    ax.bar(k, probability, width=0.85, color="tab:blue", label="P(K = k)")
    ax.axvline(expectation.curtate, color="tab:red", linestyle="--",
               label=f"e = E[K] = {expectation.curtate:.2f} years")
    who = (f"{a.id}: {a.sex} {a.age:g}" if a.partner_age is None
           else f"{a.id}: couple {a.sex} {a.age:g} and {a.partner_sex} {a.partner_age:g}, "
                "last-survivor annuity")
    ax.set_title("\n".join([f"Curtate future lifetime K, {who} (INVENTED)",
                            *title_lines("basis: ", basis)]), fontsize=10)
    ax.set_xlabel("k (whole years lived before death)")
    ax.set_ylabel("P(K = k)")
    ax.set_xlim(-1, last_visible(k, probability, VISIBLE_PROBABILITY) + 1)
    ax.grid(True, axis="y", alpha=0.3)
    ax.legend()
    fig.savefig(out / "curtate_distribution.png", dpi=110)
    plt.close(fig)
    charts.append(("curtate_distribution.png", f"Curtate distribution P(K = k) for {a.id}"))

    # 3. the effect of a rating and of improvement on e̊_x
    base = TABLE_BY_SEX["male"]
    ages = [float(x) for x in range(20, 101, 10 if quick else 2)]
    lives = [{"age": x} for x in ages]
    ratings: list[tuple[str, BasisArg]] = [
        ("standard", base),
        ("+50%", d.Adjusted(base=base, q_multiplier=1.5)),
        ("+100%", d.Adjusted(base=base, q_multiplier=2.0)),
        ("+5‰ for 5 years", d.Adjusted(base=base, extra_q=0.005, extra_q_years=5)),
    ]
    improvements: list[tuple[str, BasisArg]] = [("no improvement", base)] + [
        (
            f"{r:.0%} a year",
            d.Improved(base=base, base_year=IMPROVEMENT_BASE_YEAR,
                       valuation_year=IMPROVEMENT_BASE_YEAR,
                       rates=d.RatesByAge(start_age=0, values=[r])),
        )
        for r in IMPROVEMENT_RATES
    ]
    fig, (left, right) = plt.subplots(1, 2, figsize=(11, 4.8), sharey=True,
                                      constrained_layout=True)
    for ax, series, title in (
        (left, ratings, "Ratings"),
        (right, improvements, f"Generational improvement, valuation year {IMPROVEMENT_BASE_YEAR}\n"
         "(q falls by r a year at every age from the next year on)"),
    ):
        every = max(1, len(ages) // 9)
        for i, ((label, b), style, marker) in enumerate(zip(series, LINE_STYLES, MARKERS)):
            answer = client.expectation(basis=b, lives=lives)
            _check_results(answer, len(lives), "expectation")
            _check(all(isinstance(r.complete, float) for r in answer.results),
                   "expectation: e̊ is not a number")
            # a line style and a marker of its own: where two series nearly agree (a
            # rating for five years only, improvement at old ages) both stay visible
            ax.plot(ages, [r.complete for r in answer.results], label=label, linestyle=style,
                    # markers at staggered ages, so coinciding series show each marker
                    marker=marker, markevery=(i % every, every), markersize=5,
                    linewidth=1.6, alpha=0.9)
        ax.set_title(title)
        ax.set_xlabel("age x (years)")
        ax.grid(True, alpha=0.3)
        ax.legend(fontsize=9)
    left.set_ylabel("e̊ₓ, complete expectation of life (years)")
    fig.suptitle(f"Effect of a rating and of improvement on e̊ₓ, {base} (INVENTED)")
    fig.savefig(out / "rating_and_improvement.png", dpi=110)
    plt.close(fig)
    charts.append(("rating_and_improvement.png", "Effect of a rating and of improvement on e̊_x"))
    return charts


# ---- the command ------------------------------------------------------------------------------


def run(
    url: Union[str, None], out: Path, quick: bool, applicants_path: Path = APPLICANTS,
    chosen: Union[str, None] = None, token: Union[str, None] = None,
) -> dict[str, Any]:
    out.mkdir(parents=True, exist_ok=True)
    applicants = read_applicants(applicants_path)
    if quick:
        applicants = applicants[:QUICK_APPLICANTS]
    if chosen is None:
        chosen = next((a.id for a in applicants if a.product == "annuity"), applicants[0].id)
    local = None
    if url is None:
        local = LocalService(log_path=out / "service.log").start()
        url = local.url
    try:
        with LifetimeClient(url, token=token, timeout=60.0) as client:
            client.wait_until_ready(timeout=60.0)
            stored = client.bases()
            quotes, requests = price(client, applicants)
            charts = draw_charts(client, out, quotes, stored, chosen, quick)
            version = client.expectation(basis=ANNUITANTS, lives=[{"age": 65}]).service_version
    finally:
        if local is not None:
            local.stop()
    report = write_report(out, quotes, stored, charts, version, url)
    summary = {
        "invented": True,
        "insurer": "Thistlemoor Mutual (fictional)",
        "service_version": version,
        "applicants": len(quotes),
        "requests": requests,
        "report": report.name,
        "charts": [name for name, _ in charts],
        "quotes": [
            {
                "id": q.applicant.id,
                "product": q.applicant.product,
                "basis": q.basis,
                "basis_id": q.basis_id,
                "fingerprint": q.fingerprint,
                "complete_expectation": q.complete_expectation,
                "survival": [{"t": t, "p": p} for t, p in q.survival],
                "values": q.values,
            }
            for q in quotes
        ],
    }
    (out / "quotes.json").write_text(json.dumps(summary, indent=2, ensure_ascii=False))
    return summary


def main(argv: Union[Sequence[str], None] = None) -> int:
    parser = argparse.ArgumentParser(
        prog="python -m demo.quote_desk",
        description="Price the invented applicants of Thistlemoor Mutual (a fictional insurer) "
        "through the Lifetime Service; write a report and charts.",
    )
    parser.add_argument("--url", help="a running service (default: start one on 127.0.0.1)")
    parser.add_argument("--out", type=Path, default=DEFAULT_OUT,
                        help="folder for report.md, quotes.json and the charts (default demo/out)")
    parser.add_argument("--quick", action="store_true",
                        help=f"the first {QUICK_APPLICANTS} applicants and coarser charts")
    parser.add_argument("--applicants", type=Path, default=APPLICANTS,
                        help="the applicants' CSV (default demo/applicants.csv)")
    parser.add_argument("--chosen", help="applicant id for the P(K = k) chart "
                        "(default: the first single-life annuity)")
    args = parser.parse_args(argv)
    try:
        summary = run(args.url, args.out, args.quick, args.applicants, args.chosen,
                      token=os.environ.get("LIFETIME_AUTH_TOKEN") if args.url else None)
    except (LifetimeServiceError, AnswerShapeError, RuntimeError, ValueError) as exc:
        print(f"quote desk: FAILED: {type(exc).__name__}: {exc}", file=sys.stderr)
        return 1
    print(
        f"quote desk (INVENTED data, fictional insurer): priced {summary['applicants']} "
        f"applicants in {summary['requests']} requests; wrote {args.out / 'report.md'} and "
        f"{len(summary['charts'])} charts"
    )
    return 0


if __name__ == "__main__":
    sys.exit(main())

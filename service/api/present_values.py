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
from service.core.quote import QuoteItem, quote
from service.core.sensitivities import Sensitivity
from service.core.two_lives import ContingentInsurance, ReversionaryAnnuity
from service.settings import Settings

from .body import decode, read_body
from .calculations import CALCULATION_ROUTE, Calculations, _echo_columns
from .problems import bad_field, domain_problem
from .value_schemas import (
    MAX_WORK,
    BenefitRequest,
    BenefitResult,
    BenefitSensitivities,
    ContingentInsuranceBenefit,
    Interest,
    LifeAnnuityBenefit,
    LifeInsuranceBenefit,
    PresentValuesRequest,
    PresentValuesResponse,
    PresentValuesResult,
    PureEndowmentBenefit,
    ReversionaryAnnuityBenefit,
)

_DECODER = msgspec.json.Decoder(PresentValuesRequest)


def discount_of(interest: Interest) -> pv.Discount:
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


def _core_benefit(b: BenefitRequest):
    if isinstance(b, LifeAnnuityBenefit):
        return pv.LifeAnnuity(b.timing, b.frequency, b.term, b.deferral, b.guarantee,
                              b.increasing, b.approximation, b.escalation)
    if isinstance(b, LifeInsuranceBenefit):
        return pv.LifeInsurance(b.timing, b.frequency, b.term, b.deferral, b.increasing,
                                b.decreasing, b.escalation)
    if isinstance(b, PureEndowmentBenefit):
        return pv.PureEndowment(b.term)
    if isinstance(b, ReversionaryAnnuityBenefit):
        return ReversionaryAnnuity(b.timing, b.frequency, b.term, b.proportion, b.life)
    if isinstance(b, ContingentInsuranceBenefit):
        return ContingentInsurance(b.timing, b.frequency, b.term, b.order, b.life)
    return pv.Endowment(b.term, b.timing, b.frequency)


def _premium_plan(b: BenefitRequest, core_benefit) -> pv.PremiumPlan | bool:
    """The premiums asked for: False for none; the term by the benefit's rule when absent."""
    premium = b.net_premium
    if premium is None:
        return False
    if premium.premium_term == "whole-life":
        term = None
    elif premium.premium_term is None:
        term = pv.default_premium_term(core_benefit)
    else:
        term = premium.premium_term
    return pv.PremiumPlan(term, premium.frequency, premium.approximation)


def quote_items(req) -> list[QuoteItem]:
    items = []
    for b in req.benefits:
        core = _core_benefit(b)
        durations = getattr(b, "policy_value_durations", None)
        items.append(QuoteItem(core, _premium_plan(b, core),
                               None if durations is None else tuple(durations)))
    return items


def _sensitivity(req: PresentValuesRequest) -> Sensitivity | None:
    ask = req.sensitivities
    if ask is None or (ask.mortality is None and ask.interest_shift is None):
        return None
    shock = ask.mortality
    return Sensitivity(None if shock is None else shock.kind,
                       0.0 if shock is None else shock.size, ask.interest_shift)


def _finite(x: float) -> float | None:
    return x if x == x and x not in (float("inf"), float("-inf")) else None


def _finite_list(values) -> list | None:
    return None if values is None else [_finite(v) for v in values]


#: evaluations per life of a benefit the exact-age tables value: lookups at a few ages and the
#: survival between them (measured: about as much as ten scattered survival evaluations)
TABLE_EVALUATIONS = 10


def check_work(age: np.ndarray, basis, discount: pv.Discount, items: list[QuoteItem],
               repeats: int = 1) -> float:
    """The estimated seconds of valuing ``items`` for these lives ``repeats`` times
    (service.core.work); a 422 when lives × payment times exceed MAX_WORK.

    The horizon is bounded from the model's structure, not searched for: a search is work
    for the worker thread, and this runs before deciding whether to offload."""
    model = basis.model
    horizon = min(cost.years(model, float(np.min(age)) if age.size else 0.0),
                  discount.negligible_after())
    lives = age.shape[0]
    # a policy value at each duration is one more valuation of what remains of the benefit
    counts = [(pv.payment_count(it.benefit, horizon), 1 + len(it.durations or ()), it)
              for it in items]
    work = lives * sum(n + v - 1 for n, v, _ in counts) * repeats
    if work > MAX_WORK:
        raise bad_field(
            "$.benefits",
            f"lives times payment times would be about {work:,}; at most {MAX_WORK:,} are "
            "computed in one request, so split it",
        )
    # discrete payments are evaluations at scattered times, or a few lookups where the
    # exact-age tables value them; continuous benefits are integrals on panels, like the
    # moments; a net premium adds the premium annuity
    tables = pv.exact_tables_apply(model, discount)
    on_tables = [tables and pv.exact_values.on_path(it.benefit, discount.rate) for it in items]
    discrete = sum(
        (TABLE_EVALUATIONS if fast else n) * v
        for (n, v, it), fast in zip(counts, on_tables)
        if fast or not pv.is_continuous(it.benefit))
    continuous = sum(
        n * v * cost.NODES * cost.kink_families(model) / 2.0
        for (n, v, it), fast in zip(counts, on_tables)
        if pv.is_continuous(it.benefit) and not fast
    ) + cost.integral_evaluations(model, horizon) * sum(
        it.premiums is not False and not fast for it, fast in zip(items, on_tables))
    # a benefit on the tables is about one vectorised evaluation's fixed cost, others four
    once = cost.seconds(
        model, lives, discrete, calls=sum(1 if fast else 4 for fast in on_tables),
        pointwise=True, output_values=3 * lives * len(items),
    ) + cost.seconds(model, lives, continuous, needs_horizon=False, calls=0)
    # the exact-age tables a first valuation at this rate builds (once, then kept)
    benefits = [it.benefit for it in items] + [
        it.premiums.annuity() for it in items if isinstance(it.premiums, pv.PremiumPlan)]
    return once * repeats + pv.exact_build_seconds(model, discount, benefits)


def _sensitivity_result(shocks, k: int, i: int) -> BenefitSensitivities | None:
    if shocks is None:
        return None

    def pick(arrays):
        return None if arrays is None else _finite(float(arrays[k][i]))

    return BenefitSensitivities(
        mortality_shocked_value=pick(shocks.mortality),
        interest_up_value=pick(shocks.interest_up),
        interest_down_value=pick(shocks.interest_down),
        effective_duration=pick(shocks.duration),
        convexity=pick(shocks.convexity),
    )


def _premium_echo(item: QuoteItem):
    if item.premiums is False:
        return None
    return "whole-life" if item.premiums.term is None else item.premiums.term


def present_value_handlers(settings: Settings, catalogue: Catalogue) -> list[Any]:
    calc = Calculations(settings, catalogue)

    @post("/v1/present-values", operation_id="presentValues",
          summary="Present values, variances, net premiums, policy values and sensitivities",
          **CALCULATION_ROUTE)
    async def present_values(request: Request[Any, Any, Any]) -> PresentValuesResponse:
        """For each life and benefit: E[PV], E[PV²] and the standard deviation per unit; the
        net level premium when asked for (paid m times a year, over the benefit's own premium
        term unless one is given); the prospective policy values ₜV at the durations asked
        for; and, with `sensitivities`, the values on a shocked basis and at shifted interest
        with the effective duration and convexity. Benefits may escalate, increase or
        decrease; on a basis of two lives, reversionary annuities and contingent insurances
        depend on the order of the deaths."""
        req: PresentValuesRequest = decode(
            _DECODER, await read_body(request, settings.max_body_bytes)
        )
        discount = discount_of(req.interest)
        basis = await calc.basis(request, req.basis)
        age, duration = calc.lives(req, basis)
        items = quote_items(req)
        ask = _sensitivity(req)
        repeats = 1 if ask is None else 1 + (ask.kind is not None) + 2 * (ask.shift is not None)
        estimate = check_work(age, basis, discount, items, repeats)
        model = basis.model
        found = await calc.run(
            lambda: quote(model, age, duration, discount, items, ask), estimate, age.shape[0]
        )
        per_benefit = [
            (r.value.tolist(), r.second_moment.tolist(), r.standard_deviation.tolist(),
             None if r.net_premium is None else r.net_premium.tolist(), r.approximation,
             None if r.exact_value is None else r.exact_value.tolist(),
             list(r.approximated) or None, _premium_echo(item),
             None if reserve is None else reserve.tolist())
            for r, item, reserve in zip(found.values, items, found.policy_values)
        ]
        shocks = found.sensitivities
        results = []
        for i, (a, d, aa, dd) in enumerate(zip(*_echo_columns(age, duration))):
            items_out = [
                BenefitResult(
                    value=_finite(v[i]), second_moment=_finite(m2[i]),
                    standard_deviation=_finite(sd[i]),
                    net_premium=None if p is None else _finite(p[i]),
                    approximation=appr,
                    exact_value=None if ev is None else _finite(ev[i]),
                    approximated=which, premium_term=term,
                    policy_values=None if res is None else _finite_list(res[i]),
                    sensitivities=_sensitivity_result(shocks, k, i),
                )
                for k, (v, m2, sd, p, appr, ev, which, term, res) in enumerate(per_benefit)
            ]
            results.append(
                PresentValuesResult(age=a, duration=d, ages=aa, durations=dd, benefits=items_out)
            )
        answer = PresentValuesResponse(results=results, **calc.stamp(request, req, basis))
        return calc.respond(request, answer, "benefit", range(len(req.benefits)))

    return [present_values]

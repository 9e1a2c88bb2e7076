"""POST /v1/cash-flows: expected cash flows per period of benefits and their net premiums.

The request is that of /v1/present-values (basis, lives, interest, benefits) with
``periods_per_year``; the interest only sets the net premiums. Every benefit shares one
period grid (to the latest end of cover, premiums or horizon). JSON by default; ``Accept:
text/csv`` gives one row per life (and a row ``all`` for the sums), benefit and period.
"""

from __future__ import annotations

import csv
import io
from typing import Any

import msgspec
from litestar import Request, Response, post

from service.bases.catalogue import Catalogue
from service.core import values as pv
from service.core.cash_flows import cash_flow_end, cash_flows
from service.core.errors import DomainError
from service.settings import Settings

from .body import decode, read_body
from .calculations import CALCULATION_ROUTE, Calculations, _echo_columns
from .conventions import chosen_media_type
from .present_values import check_work, discount_of, quote_items
from .tabular import CSV_MEDIA_TYPE
from .value_schemas import (
    BenefitCashFlows,
    CashFlowsRequest,
    CashFlowsResponse,
    CashFlowsResult,
    CashFlowsTotal,
)

_DECODER = msgspec.json.Decoder(CashFlowsRequest)
CSV_COLUMNS = ("life", "benefit", "period_start", "period_end", "in_force", "benefit_outgo",
               "premium_income")


def _flows(model, age, duration, discount, items, frequency):
    """Per benefit: CashFlows on one common grid; DomainError fields under benefits[i]."""
    valuation = pv.Valuation(model, age, duration, discount)
    premiums = []
    for i, item in enumerate(items):
        try:
            premium = None
            if item.premiums is not False:
                premium = valuation.values(item.benefit, item.premiums).net_premium
            premiums.append(premium)
        except DomainError as exc:
            raise exc.within(f"benefits[{i}]") from None
    until = max(
        cash_flow_end(valuation, it.benefit, it.premiums if it.premiums is not False else None)
        for it in items
    )
    out = []
    for i, (item, premium) in enumerate(zip(items, premiums)):
        plan = item.premiums if item.premiums is not False else None
        try:
            out.append(cash_flows(valuation, item.benefit, frequency, premium, plan, until))
        except DomainError as exc:
            if exc.field.startswith("cash_flows"):  # the period grid
                raise DomainError("periods_per_year", exc.message) from None
            raise exc.within(f"benefits[{i}]") from None
    return out


def _csv(start, end, age_rows) -> bytes:
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow(CSV_COLUMNS)

    def cell(x):
        return "" if x is None or x != x or x in (float("inf"), float("-inf")) else repr(x)

    for life, in_force, per_benefit in age_rows:
        for k, (outgo, income) in enumerate(per_benefit):
            for j in range(len(start)):
                writer.writerow([life, k, repr(start[j]), repr(end[j]), cell(in_force[j]),
                                 cell(outgo[j]), "" if income is None else cell(income[j])])
    return out.getvalue().encode("utf-8")


def cash_flow_handlers(settings: Settings, catalogue: Catalogue) -> list[Any]:
    calc = Calculations(settings, catalogue)

    @post("/v1/cash-flows", operation_id="cashFlows",
          summary="Expected cash flows per period: benefit outgo, premium income, in force",
          **CALCULATION_ROUTE)
    async def expected_cash_flows(request: Request[Any, Any, Any]) -> Response[CashFlowsResponse]:
        """For each life and benefit, per period of 1/`periods_per_year` year: the expected
        benefit outgo per unit (undiscounted), the expected net premium income (with
        `net_premium`), and the probability that the status is in force at the period's
        start; `total` sums them over the lives. Send `Accept: text/csv` for CSV."""
        req: CashFlowsRequest = decode(_DECODER, await read_body(request, settings.max_body_bytes))
        discount = discount_of(req.interest)
        basis = await calc.basis(request, req.basis)
        age, duration = calc.lives(req, basis)
        items = quote_items(req)
        estimate = check_work(age, basis, discount, items, 2)
        model, m = basis.model, req.periods_per_year
        found = await calc.run(lambda: _flows(model, age, duration, discount, items, m),
                               estimate, age.shape[0])
        calc.check_size(age.shape[0] * found[0].start.size * len(items), "$.periods_per_year")
        start, end = found[0].start.tolist(), found[0].end.tolist()
        in_force = found[0].in_force
        columns = [(f.benefit, f.premium) for f in found]
        per_life = [
            [(o[i].tolist(), None if p is None else p[i].tolist()) for o, p in columns]
            for i in range(age.shape[0])
        ]
        totals = [(o.sum(axis=0).tolist(), None if p is None else p.sum(axis=0).tolist())
                  for o, p in columns]
        stamp = calc.stamp(request, req, basis)
        if chosen_media_type(request) == CSV_MEDIA_TYPE:
            rows = [(i, in_force[i].tolist(), per_life[i]) for i in range(age.shape[0])]
            rows.append(("all", in_force.sum(axis=0).tolist(), totals))
            return Response(content=_csv(start, end, rows), media_type=CSV_MEDIA_TYPE,
                            headers={"X-Basis-Fingerprint": basis.fingerprint})
        results = [
            CashFlowsResult(
                age=a, duration=d, ages=aa, durations=dd, in_force=in_force[i].tolist(),
                benefits=[BenefitCashFlows(o, p) for o, p in per_life[i]],
            )
            for i, (a, d, aa, dd) in enumerate(zip(*_echo_columns(age, duration)))
        ]
        total = CashFlowsTotal(in_force.sum(axis=0).tolist(),
                               [BenefitCashFlows(o, p) for o, p in totals])
        return Response(CashFlowsResponse(period_start=start, period_end=end, results=results,
                                          total=total, **stamp))

    return [expected_cash_flows]


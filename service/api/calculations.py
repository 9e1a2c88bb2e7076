"""The calculation endpoints: POST /v1/survival, /v1/deferred-death, /v1/expectation,
/v1/moments, /v1/quantiles and /v1/life-table.

Each handler takes one straight path: read and decode the body (strict msgspec), resolve the
basis (a stored model, or a cached or freshly compiled inline one), check the lives, make one
vectorised call per quantity on the core, and build the answer Struct.

Handlers are ``async`` because they read the body themselves. Before computing, each handler
estimates its work from the model's structure (``service.core.work``: lives × durations,
years, members, nested ratings, benefits). A request estimated above the
``max_request_seconds`` setting is refused up front (422, saying how many lives to send at
once); one above ``OFFLOAD_SECONDS`` runs in a worker thread, as does every compilation of a
new inline basis, so that the event loop keeps answering other requests (``/health`` among
them); small requests compute on the event loop, where a thread hop would cost more than
the numpy calls.
"""

from __future__ import annotations

import csv
import io
from collections.abc import Callable, Iterable
from itertools import repeat
from typing import Any, TypeVar

import anyio.to_thread
import msgspec
import numpy as np
from litestar import Request, Response, post
from litestar.openapi.datastructures import ResponseSpec

from service.bases.catalogue import Catalogue, ResolvedBasis
from service.core import work as cost
from service.core.errors import DomainError, fmt
from service.settings import Settings
from service.version import service_version

from . import audit
from . import schemas as s
from .body import decode, read_body
from .conventions import chosen_media_type
from .lives import dated_lives, gives_any, several_lives
from .model_facts import ModelFacts, facts
from .problems import PROBLEM_MEDIA_TYPE, Problem, bad_field, domain_problem
from .tabular import CSV_MEDIA_TYPE, cell, results_csv

T = TypeVar("T")

#: estimated seconds above which the computation runs in a worker thread
OFFLOAD_SECONDS = 0.002

CALCULATION_TAG = "calculations"

#: the media types every calculation answers with, JSON first (the default)
CALCULATION_TYPES = ["application/json", CSV_MEDIA_TYPE]

_DECODERS = {
    cls: msgspec.json.Decoder(cls)
    for cls in (
        s.SurvivalRequest,
        s.DeferredDeathRequest,
        s.ExpectationRequest,
        s.MomentsRequest,
        s.QuantilesRequest,
        s.LifeTableRequest,
    )
}

#: path -> request Struct; the OpenAPI document takes the request bodies from here
REQUEST_TYPES: dict[str, type[msgspec.Struct]] = {
    "/v1/survival": s.SurvivalRequest,
    "/v1/deferred-death": s.DeferredDeathRequest,
    "/v1/expectation": s.ExpectationRequest,
    "/v1/moments": s.MomentsRequest,
    "/v1/quantiles": s.QuantilesRequest,
    "/v1/life-table": s.LifeTableRequest,
}


def _error_response(description: str) -> ResponseSpec:
    return ResponseSpec(
        data_container=s.ProblemDocument,
        media_type=PROBLEM_MEDIA_TYPE,
        description=description,
        generate_examples=False,
    )


ERROR_RESPONSES = {
    400: _error_response(
        "The body is not JSON or does not fit the schema, or the Accept header is not valid."
    ),
    404: _error_response("`basis` names no stored basis."),
    406: _error_response("The Accept header rules out both application/json and text/csv."),
    413: _error_response("The body is larger than max_body_bytes."),
    415: _error_response("The body is not application/json."),
    422: _error_response(
        "Well formed but impossible: a parameter outside its domain or its documented bounds, "
        "an age at or past the limiting age, a table that does not close, too many lives or "
        "durations, or more work than one request may ask for."
    ),
    503: _error_response("The service is still loading its stored bases."),
}


CALCULATION_ROUTE: dict[str, Any] = {
    "status_code": 200,
    "tags": [CALCULATION_TAG],
    "responses": ERROR_RESPONSES,
    "opt": {"produces": CALCULATION_TYPES},
}


def _values(array: np.ndarray) -> list:
    """A float array as (nested) lists; NaN and ±inf are written as null by msgspec."""
    return array.tolist()


class Calculations:
    """The shared steps of every calculation handler."""

    def __init__(self, settings: Settings, catalogue: Catalogue):
        self.settings = settings
        self.catalogue = catalogue
        #: an estimate at most this is computed on the event loop, within the budget
        self.inline_seconds = min(OFFLOAD_SECONDS, settings.max_request_seconds)

    async def read(self, request: Request[Any, Any, Any], request_type: type[T]) -> T:
        body = await read_body(request, self.settings.max_body_bytes)
        return decode(_DECODERS[request_type], body)

    async def basis(
        self, request: Request[Any, Any, Any], basis: str | s.BasisDefinition
    ) -> ResolvedBasis:
        found = self.catalogue.lookup(basis)
        if not isinstance(found, ResolvedBasis):
            definition: Any = basis
            try:
                found = await anyio.to_thread.run_sync(
                    self.catalogue.compile_inline, definition, found
                )
            except DomainError as exc:
                raise domain_problem(exc, "basis") from None
        request.scope["state"]["basis_fingerprint"] = found.fingerprint
        return found

    def lives(self, req: Any, basis: ResolvedBasis) -> tuple[np.ndarray, np.ndarray]:
        """The ages and durations of the request's lives (dates counted to its
        calculation_date), checked and placed on the basis."""
        lives: list[s.Life] = req.lives
        n = len(lives)
        if n > self.settings.max_lives:
            raise bad_field(
                "$.lives",
                f"at most {self.settings.max_lives} lives in one request (got {n})",
            )
        model = basis.model
        known = facts(model)
        any_duration = True  # unknown: checked on the arrays
        if req.calculation_date is not None or gives_any(lives):
            found = dated_lives(lives, known.members, req.calculation_date, req.age_convention)
            age, duration = found if isinstance(found, tuple) else _numbers(found, known.members)[:2]
        else:
            age, duration, any_duration = _numbers(lives, known.members)
        if known.unselected and any_duration:
            _check_durations_apply(known, duration)
        age, duration = model.place_lives(age, duration, req.selection_age_rule)
        model.check_lives(age, duration)  # DomainError fields are "lives[i].age" …
        return age, duration

    def durations(self, values: list[float], field: str, lives: int) -> np.ndarray:
        if len(values) > self.settings.max_durations:
            raise bad_field(
                field,
                f"at most {self.settings.max_durations} values in one request "
                f"(got {len(values)})",
            )
        self.check_size(lives * len(values), field)
        return np.asarray(values, dtype=float)

    def check_size(self, count: int, field: str) -> None:
        if count > self.settings.max_values:
            raise bad_field(
                field,
                f"lives times values would give {count} numbers in one answer; at most "
                f"{self.settings.max_values} are allowed, so split the request",
            )

    @staticmethod
    def stamp(request: Request[Any, Any, Any], req: Any, basis: ResolvedBasis) -> dict[str, Any]:
        """The fields every calculation answer starts with: the basis, the service version
        and the calculation fingerprint (see audit.py); with a calculation_date, it and the
        age convention."""
        stamp = {
            "basis": _reference(basis),
            "service_version": service_version(),
            "calculation_fingerprint": audit.record(
                request.scope, request.scope["path"], req, basis.fingerprint
            ),
        }
        if getattr(req, "calculation_date", None) is not None:
            stamp["calculation_date"] = req.calculation_date
            stamp["age_convention"] = req.age_convention
        return stamp

    @staticmethod
    def respond(
        request: Request[Any, Any, Any],
        answer: Any,
        along: str | None = None,
        along_values: Iterable[Any] = (),
    ) -> Any:
        """``answer`` as JSON, or as CSV (tabular.py) when the request asked for it."""
        if chosen_media_type(request) == CSV_MEDIA_TYPE:
            return Response(
                content=results_csv(answer.results, along, list(along_values)),
                media_type=CSV_MEDIA_TYPE,
                headers={"X-Basis-Fingerprint": answer.basis.fingerprint},
            )
        return answer

    def check_budget(self, estimate: float, lives: int) -> None:
        """422 when a request's estimated work is more than one request may take."""
        budget = self.settings.max_request_seconds
        if estimate <= budget:
            return
        fitting = int(0.9 * lives * budget / estimate)  # with room for the fixed costs
        if fitting >= 1:
            raise bad_field(
                "$.lives",
                f"this request is estimated at about {estimate:.3g} s of computation, more "
                f"than the {budget:g} s one request may take (the max_request_seconds "
                f"setting); split it into requests of at most {fitting} lives on this basis",
            )
        raise bad_field(
            "$.basis",
            f"even one life is estimated at about {estimate / max(lives, 1):.3g} s of "
            f"computation on this basis, more than the {budget:g} s one request may take (the "
            f"max_request_seconds setting); use fewer nested ratings with limited years, "
            f"fewer members, fewer benefits or durations, or a term",
        )

    def moments_seconds(self, model: Any, age: np.ndarray, term: int | None, calls: int) -> float:
        """The estimated seconds of moments over the lives aged ``age`` (``_moments_seconds``),
        or the model's bound on it when that alone decides to compute on the event loop
        (model_facts.py)."""
        bound = facts(model).bound(
            ("moments", calls), lambda ages: _moments_seconds(model, ages, None, calls),
            age.shape[0],
        )
        if bound <= self.inline_seconds:
            return bound
        return _moments_seconds(model, age, term, calls)

    async def run(self, work: Callable[[], T], estimate: float, lives: int) -> T:
        """``work`` within the budget: refused above it, in a worker thread above
        ``OFFLOAD_SECONDS``, on the event loop below."""
        self.check_budget(estimate, lives)
        if estimate > OFFLOAD_SECONDS:
            return await anyio.to_thread.run_sync(work)
        return work()


def _numbers(lives: list[s.Life], members: int) -> tuple[np.ndarray, np.ndarray, bool]:
    """The ages and durations the lives give as numbers (several_lives checks the rest), and
    whether any duration is not 0 (True when only the arrays tell)."""
    ages = [life.age for life in lives]
    n = len(lives)
    if (
        members > 1
        or None in ages
        or [life.ages for life in lives].count(None) != n
        or [life.durations for life in lives].count(None) != n
    ):
        return (*several_lives(lives, members), True)
    durations = [life.duration for life in lives]
    return np.array(ages, dtype=float), np.array(durations, dtype=float), any(durations)


def _check_durations_apply(known: ModelFacts, duration: np.ndarray) -> None:
    """A duration since selection on a basis (or a member) without a select period would be
    silently ignored: a 422 instead, naming the first such duration."""
    single = known.columns is None
    for j in known.unselected:
        given = duration if single else duration[:, j]
        bad = np.flatnonzero(given != 0.0)
        if bad.size:
            i = int(bad[0])
            where = f"$.lives[{i}].duration" if single else f"$.lives[{i}].durations[{j}]"
            whose = "this basis" if single else f"member {j} of this basis"
            raise bad_field(
                where,
                f"{whose} has no select period, so a duration since selection does not apply "
                f"(got {fmt(given[i])}); leave duration out or use a select table",
            )


def _youngest(age: np.ndarray) -> float:
    """The youngest age of the lives (the first member's, for a status)."""
    return float(age.min()) if age.size else 0.0


def _moments_seconds(model: Any, age: np.ndarray, term: int | None, calls: int) -> float:
    span = cost.years(model, _youngest(age))
    if term is not None:
        span = min(span, float(term))
    per_life = cost.integral_evaluations(model, span)
    return cost.seconds(model, age.shape[0], per_life, calls=calls,
                        output_values=4 * age.shape[0])


def _echo_columns(age: np.ndarray, duration: np.ndarray) -> tuple[Iterable, ...]:
    """The echo of each life as four columns, (age, duration, ages, durations): a single life
    fills the first two and leaves the others None (omitted from the answer), a status of
    several lives the other way round. Results are built with these as plain keywords, which
    costs a fraction of unpacking a dict per life."""
    if age.ndim == 1:
        return age.tolist(), duration.tolist(), repeat(None), repeat(None)
    return repeat(None), repeat(None), age.tolist(), duration.tolist()


def _reference(basis: ResolvedBasis) -> s.BasisReference:
    return s.BasisReference(id=basis.id, fingerprint=basis.fingerprint)


def calculation_handlers(settings: Settings, catalogue: Catalogue) -> list[Any]:
    calc = Calculations(settings, catalogue)
    common: dict[str, Any] = CALCULATION_ROUTE

    @post("/v1/survival", operation_id="survival", summary="Survival, death, force and density at durations t", **common)
    async def survival(request: Request[Any, Any, Any]) -> s.SurvivalResponse:
        """For each life aged x and each t: ₜp_x, ₜq_x, μ_{x+t} and f_x(t) = ₜp_x μ_{x+t}."""
        req = await calc.read(request, s.SurvivalRequest)
        basis = await calc.basis(request, req.basis)
        age, duration = calc.lives(req, basis)
        t = calc.durations(req.t, "$.t", age.size)
        model = basis.model

        def work():
            return model.survival_summary(age, duration, t)

        estimate = cost.seconds(model, len(req.lives), 3.0 * t.size, needs_horizon=False,
                                pointwise=True, output_values=4 * age.shape[0] * t.size)
        surv, death, force, density = await calc.run(work, estimate, len(req.lives))
        results = [
            s.SurvivalResult(
                age=a, duration=d, ages=aa, durations=dd,
                survival=p, death=q, force=f, density=g,
            )
            for a, d, aa, dd, p, q, f, g in zip(
                *_echo_columns(age, duration),
                _values(surv),
                _values(death),
                _values(force),
                _values(density),
            )
        ]
        answer = s.SurvivalResponse(results=results, **calc.stamp(request, req, basis))
        return calc.respond(request, answer, "t", req.t)

    @post("/v1/deferred-death", operation_id="deferredDeath", summary="Deferred death probabilities u|ₜq_x", **common)
    async def deferred_death(request: Request[Any, Any, Any]) -> s.DeferredDeathResponse:
        """For each life and each deferral u: u|ₜq_x = P(u < T_x ≤ u + t), t = `period`.

        With period 1 and a whole deferral k this is P(K_x = k).
        """
        req = await calc.read(request, s.DeferredDeathRequest)
        basis = await calc.basis(request, req.basis)
        age, duration = calc.lives(req, basis)
        u = calc.durations(req.deferral, "$.deferral", age.size)
        model, period = basis.model, req.period
        estimate = cost.seconds(model, len(req.lives), 2.0 * u.size, needs_horizon=False,
                                pointwise=True, output_values=age.shape[0] * u.size)
        values = await calc.run(
            lambda: model.deferred_death(age, duration, u, period), estimate, len(req.lives)
        )
        results = [
            s.DeferredDeathResult(age=a, duration=d, ages=aa, durations=dd, probability=p)
            for a, d, aa, dd, p in zip(*_echo_columns(age, duration), _values(values))
        ]
        answer = s.DeferredDeathResponse(results=results, **calc.stamp(request, req, basis))
        return calc.respond(request, answer, "deferral", req.deferral)

    @post("/v1/expectation", operation_id="expectation", summary="Expectations of life and their variances", **common)
    async def expectation(request: Request[Any, Any, Any]) -> s.ExpectationResponse:
        """e̊_x and e_x (or, with `term` n, E[min(T_x, n)] and E[min(K_x, n)]) and variances."""
        req = await calc.read(request, s.ExpectationRequest)
        basis = await calc.basis(request, req.basis)
        age, duration = calc.lives(req, basis)
        model, term = basis.model, req.term

        def work():
            return model.expectation_summary(age, duration, term)

        estimate = calc.moments_seconds(model, age, term, 2)
        complete, curtate, complete_var, curtate_var = await calc.run(
            work, estimate, len(req.lives)
        )
        results = [
            s.ExpectationResult(
                age=a,
                duration=d,
                ages=aa,
                durations=dd,
                complete=e1,
                curtate=e2,
                complete_variance=v1,
                curtate_variance=v2,
            )
            for a, d, aa, dd, e1, e2, v1, v2 in zip(
                *_echo_columns(age, duration),
                _values(complete),
                _values(curtate),
                _values(complete_var),
                _values(curtate_var),
            )
        ]
        answer = s.ExpectationResponse(results=results, **calc.stamp(request, req, basis))
        return calc.respond(request, answer)

    @post("/v1/moments", operation_id="moments", summary="Raw moments of T_x and K_x", **common)
    async def moments(request: Request[Any, Any, Any]) -> s.MomentsResponse:
        """E[T_x^k] and E[K_x^k] for each order k (of min(T_x, n), min(K_x, n) with `term`)."""
        req = await calc.read(request, s.MomentsRequest)
        orders = req.orders
        seen: set[int] = set()
        for i, k in enumerate(orders):
            if k in seen:
                raise bad_field(
                    f"$.orders[{i}]", f"order {k} appears twice; the orders must be distinct"
                )
            seen.add(k)
        basis = await calc.basis(request, req.basis)
        age, duration = calc.lives(req, basis)
        model, term = basis.model, req.term

        def work():
            return (
                model.complete_moments(age, duration, orders, term),
                model.curtate_moments(age, duration, orders, term),
            )

        estimate = calc.moments_seconds(model, age, term, 2)
        complete, curtate = await calc.run(work, estimate, len(req.lives))
        results = [
            s.MomentsResult(age=a, duration=d, ages=aa, durations=dd, complete=c1, curtate=c2)
            for a, d, aa, dd, c1, c2 in zip(
                *_echo_columns(age, duration), _values(complete), _values(curtate)
            )
        ]
        answer = s.MomentsResponse(results=results, **calc.stamp(request, req, basis))
        return calc.respond(request, answer, "order", orders)

    @post("/v1/quantiles", operation_id="quantiles", summary="Quantiles of T_x and K_x", **common)
    async def quantiles(request: Request[Any, Any, Any]) -> s.QuantilesResponse:
        """For each p: the t with ₜq_x = p, and the least whole k with P(K_x ≤ k) ≥ p."""
        req = await calc.read(request, s.QuantilesRequest)
        basis = await calc.basis(request, req.basis)
        age, duration = calc.lives(req, basis)
        p = np.asarray(req.probabilities, dtype=float)
        calc.check_size(age.size * p.size, "$.probabilities")
        model = basis.model

        def work():
            return (
                model.complete_quantiles(age, duration, p),
                model.curtate_quantiles(age, duration, p),
            )

        per_life = cost.quantile_evaluations(model, cost.years(model, _youngest(age)), p.size)
        estimate = cost.seconds(model, len(req.lives), per_life, calls=cost.quantile_calls(model),
                                output_values=2 * age.shape[0] * p.size)
        complete, curtate = await calc.run(work, estimate, len(req.lives))
        results = [
            s.QuantilesResult(age=a, duration=d, ages=aa, durations=dd, complete=c1, curtate=c2)
            for a, d, aa, dd, c1, c2 in zip(
                *_echo_columns(age, duration), _values(complete), _values(curtate)
            )
        ]
        answer = s.QuantilesResponse(results=results, **calc.stamp(request, req, basis))
        return calc.respond(request, answer, "probability", req.probabilities)

    @post(
        "/v1/life-table",
        operation_id="lifeTable",
        summary="A life table derived from the basis",
        **common,
    )
    async def life_table(request: Request[Any, Any, Any]) -> Response[s.LifeTableResponse]:
        """Columns age, l, d, q, e̊ (complete) and e (curtate) for one life aged `start_age`,
        at ages start_age, start_age + 1, … up to end_age. For a joint-life or last-survivor
        basis, give `start_ages` (one per member) instead: row k is the status of the members
        aged start_ages + k (column `ages`), up to the first member's age end_age.
        Send `Accept: text/csv` for CSV.
        """
        req = await calc.read(request, s.LifeTableRequest)
        basis = await calc.basis(request, req.basis)
        start, duration = _life_table_start(req, getattr(basis.model, "n_members", 1))
        several = isinstance(start, list)
        if not several and start is not None:
            placed_age, placed_duration = basis.model.place_lives(
                np.array([start]), np.array([duration]), req.selection_age_rule
            )
            start, duration = float(placed_age[0]), float(placed_duration[0])
        first = start[0] if several else start
        rows = int(max(req.end_age - first, 0.0) + 1e-9) + 1
        if rows > settings.max_durations:
            raise bad_field(
                "$.end_age",
                f"a life table may have at most {settings.max_durations} rows "
                f"({'start_ages[0]' if several else 'start_age'} {first} to end_age "
                f"{req.end_age} gives {rows})",
            )
        model = basis.model
        # a status's rows come from quadrature across its members once; a single life's rows
        # are one life each
        span = cost.years(model, first)
        estimate = cost.seconds(
            model, 1 if several else rows, cost.integral_evaluations(model, span), calls=4
        )
        try:
            table = await calc.run(
                lambda: model.life_table(start, req.end_age, req.radix, duration), estimate,
                1 if several else rows,
            )
        except DomainError as exc:
            raise _life_table_problem(exc) from None
        stamp = calc.stamp(request, req, basis)
        if chosen_media_type(request) == CSV_MEDIA_TYPE:
            return Response(
                content=_csv(table),
                media_type=CSV_MEDIA_TYPE,
                headers={"X-Basis-Fingerprint": basis.fingerprint},
            )
        result = s.LifeTableResult(
            start_age=None if several else start,
            duration=None if several else duration,
            start_ages=start if several else None,
            durations=duration if several else None,
            age=None if several else table["age"].tolist(),
            ages=table["age"].tolist() if several else None,
            l=_values(table["l"]),
            d=_values(table["d"]),
            q=_values(table["q"]),
            complete=_values(table["complete"]),
            curtate=_values(table["curtate"]),
        )
        return Response(s.LifeTableResponse(results=[result], **stamp))

    return [survival, deferred_death, expectation, moments, quantiles, life_table]


LIFE_TABLE_COLUMNS = ("age", "l", "d", "q", "complete", "curtate")
_LIFE_TABLE_MEDIA = ("application/json", "text/csv")

_LIFE_FIELDS = {"lives[0].age": "start_age", "lives[0].duration": "duration"}


def _life_table_start(req: s.LifeTableRequest, members: int) -> tuple[Any, Any]:
    """(start_age, duration) of one life, or (start_ages, durations) as lists for a status of
    ``members`` lives; giving the wrong one, both, or a wrong count is a 422 naming the field."""
    if req.start_age is not None and req.start_ages is not None:
        raise bad_field(
            "$.start_ages",
            "give start_age (one life) or start_ages (a status of several lives), not both",
        )
    if members == 1:
        for name in ("start_ages", "durations"):
            if getattr(req, name) is not None:
                raise bad_field(
                    f"$.{name}",
                    f"this basis is of a single life: give start_age (and duration), not {name}",
                )
        if req.start_age is None:
            raise bad_field("$.start_age", "required field is missing")
        return req.start_age, req.duration
    if req.start_age is not None:
        raise bad_field(
            "$.start_age",
            f"this basis is a status of {members} lives: give start_ages (one per member), "
            f"not start_age",
        )
    if req.duration != 0.0:
        raise bad_field(
            "$.duration",
            "this basis is a status of several lives: give durations (one per member), "
            "not duration",
        )
    if req.start_ages is None:
        raise bad_field(
            "$.start_ages",
            f"required field is missing: start_ages, one age for each of the {members} members",
        )
    if len(req.start_ages) != members:
        raise bad_field(
            "$.start_ages",
            f"must hold {members} ages, one per member of the basis (got {len(req.start_ages)})",
        )
    durations = [0.0] * members if req.durations is None else list(req.durations)
    if len(durations) != members:
        raise bad_field(
            "$.durations",
            f"must hold {members} durations, one per member (got {len(durations)})",
        )
    return list(req.start_ages), durations


def _life_table_problem(exc: DomainError) -> Problem:
    """The life table's single life is given by start_age and duration: name those."""
    field = _LIFE_FIELDS.get(exc.field, exc.field)
    return domain_problem(DomainError(field, exc.message))


def _csv(table: dict[str, np.ndarray]) -> bytes:
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    header: list[str] = list(LIFE_TABLE_COLUMNS)
    columns = [table[name].tolist() for name in LIFE_TABLE_COLUMNS[1:]]
    ages = table["age"]
    if ages.ndim == 2:  # a status: one age column per member, age_0, age_1, …
        header[:1] = [f"age_{i}" for i in range(ages.shape[1])]
    columns[:0] = ages.reshape(ages.shape[0], -1).T.tolist()
    writer.writerow(header)
    for row in zip(*columns):
        writer.writerow([cell(v) for v in row])
    return out.getvalue().encode("utf-8")

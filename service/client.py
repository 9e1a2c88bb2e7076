"""A typed Python client for the Lifetime Service, sync (`LifetimeClient`) and async
(`AsyncLifetimeClient`), on httpx.

It needs only httpx and msgspec: ``pip install lifetime-service`` (without the ``server``
extra) installs the client alone, and importing it imports neither litestar nor numpy nor the
numeric core. Requests and answers are the service's own msgspec Structs
(``service.api.schemas``, ``service.api.value_schemas``, ``service.bases.definitions``, which
import only msgspec).

One method per endpoint, with the request's fields as explicit, typed parameters. ``basis`` is
a stored id, an inline basis Struct of ``service.bases.definitions`` or a dict with a
``"type"``; lives, interest and benefits may be Structs or plain dicts. Before anything is
sent, the request is encoded and decoded exactly as the service decodes it, so a request off
the schema (an unknown field anywhere, a wrong type, a value outside its bounds) raises the
error the service would answer, in the service's words, without a round trip. An answer is
decoded into its response Struct, so a change in the shape of the service's answers fails
loudly here. ``send(request)`` sends a request Struct built beforehand.

Every failure raises one exception type, `LifetimeServiceError`: a problem+json answer (its
``status``, ``title``, ``detail`` and field ``errors``, as the service words them), a
non-problem error answer, a request refused before sending, or a service that could not be
reached after the retries.

Retries: only when no connection could be made (``httpx.ConnectError`` or
``httpx.ConnectTimeout``), so nothing is ever sent twice; never on an answer, whatever its
status. At most ``retries`` retries, waiting ``backoff × 2^k`` seconds (capped at
``max_backoff``) before retry k.

    from service.client import LifetimeClient

    with LifetimeClient("http://127.0.0.1:8000", timeout=10.0, retries=3) as client:
        answer = client.expectation(basis="standard-ultimate", lives=[{"age": 60}])
        print(answer.basis.fingerprint, answer.results[0].complete)
"""

from __future__ import annotations

import asyncio
import time
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from datetime import date
from typing import Any, Literal, Never, Union
from urllib.parse import quote

import httpx
import msgspec

from service.api import schemas as s
from service.api.schemas import (
    BasisDefinition,
    DeferredDeathRequest,
    DeferredDeathResponse,
    ExpectationRequest,
    ExpectationResponse,
    HealthResponse,
    LawsResponse,
    Life,
    LifeTableRequest,
    LifeTableResponse,
    MomentsRequest,
    MomentsResponse,
    QuantilesRequest,
    QuantilesResponse,
    ReadyResponse,
    StoredBasesResponse,
    StoredBasisDetail,
    SurvivalRequest,
    SurvivalResponse,
)
from service.api.value_schemas import (
    BenefitRequest,
    BenefitResult,
    CashFlowsRequest,
    CashFlowsResponse,
    Interest,
    PresentValuesRequest,
    PresentValuesResponse,
    PresentValuesResult,
)
from service.bases.validation import field_error, outside_domain

__all__ = [
    "AsyncLifetimeClient",
    "BenefitResult",
    "CashFlowsResponse",
    "LifetimeClient",
    "LifetimeServiceError",
    "PresentValuesResponse",
    "PresentValuesResult",
]


DEFAULT_TIMEOUT = 10.0
DEFAULT_CONNECT_TIMEOUT = 5.0
DEFAULT_RETRIES = 3
DEFAULT_BACKOFF = 0.1
DEFAULT_MAX_BACKOFF = 2.0

#: connection errors after which a request is retried: nothing reached the service
RETRIED_ERRORS: tuple[type[Exception], ...] = (httpx.ConnectError, httpx.ConnectTimeout)


# ---- the one exception -----------------------------------------------------------------------


@dataclass
class LifetimeServiceError(Exception):
    """A request the service refused, or could not be asked.

    ``status`` is the HTTP status of the answer (``None`` when no answer came: the service
    could not be reached, or the request was refused by the client's own schema check before
    sending, in which case ``sent`` is False). ``errors`` is a list of ``(field, message)``
    pairs, fields as JSON paths like ``$.lives[0].age``.
    """

    status: Union[int, None]
    title: str
    detail: str
    errors: list[tuple[str, str]] = field(default_factory=list)
    type: str = "about:blank"
    sent: bool = True
    request_id: Union[str, None] = None

    def __post_init__(self) -> None:
        super().__init__(str(self))

    def __str__(self) -> str:
        head = f"{self.status} {self.title}" if self.status is not None else self.title
        text = f"{head}: {self.detail}"
        if self.errors and not (len(self.errors) == 1 and self.errors[0][1] in self.detail):
            text += " [" + "; ".join(f"{f}: {m}" for f, m in self.errors) + "]"
        return text


_PROBLEM = msgspec.json.Decoder(s.ProblemDocument)


def _from_answer(response: httpx.Response) -> LifetimeServiceError:
    request_id = response.headers.get("x-request-id")
    if response.headers.get("content-type", "").startswith("application/problem+json"):
        try:
            problem = _PROBLEM.decode(response.content)
        except msgspec.DecodeError:
            pass
        else:
            return LifetimeServiceError(
                status=problem.status,
                title=problem.title,
                detail=problem.detail,
                errors=[(e.field, e.message) for e in problem.errors],
                type=problem.type,
                request_id=request_id,
            )
    return LifetimeServiceError(
        status=response.status_code,
        title=response.reason_phrase or "HTTP error",
        detail=response.text[:500],
        request_id=request_id,
    )


#: the service's title for a request off the schema (its problem kind "invalid-request")
INVALID_REQUEST_TITLE = "Request does not fit the schema"
#: the service's title for a value of the right type outside its bounds ("outside-domain")
OUTSIDE_DOMAIN_TITLE = "Outside the domain"


def _unfit(exc: msgspec.ValidationError) -> LifetimeServiceError:
    """The service's own answer to this request, made without sending it: the same field
    path, message, title and type (``service.bases.validation.field_error`` words both)."""
    where, message = field_error(str(exc))
    bound = outside_domain(str(exc))  # the service's one rule: bounds 422, the schema 400
    return LifetimeServiceError(
        status=None,
        title=OUTSIDE_DOMAIN_TITLE if bound else INVALID_REQUEST_TITLE,
        detail=f"{where}: {message}",
        errors=[(where, message)],
        type="/problems/outside-domain" if bound else "/problems/invalid-request",
        sent=False,
    )


def _failed(exc: Exception) -> LifetimeServiceError:
    return LifetimeServiceError(
        status=None, title="Request failed", detail=f"{type(exc).__name__}: {exc}",
        type="client/transport-error",
    )


def _unreachable(url: str, attempts: int, exc: Exception) -> LifetimeServiceError:
    return LifetimeServiceError(
        status=None,
        title="Service unreachable",
        detail=f"no connection to {url} after {attempts} attempt(s): {exc}",
        type="client/unreachable",
    )


# ---- what every call needs, shared by both clients ---------------------------------------

#: what a parameter takes besides the Struct itself: the same fields as a dict
BasisArgument = Union[str, BasisDefinition, Mapping[str, Any]]
LifeArgument = Union[Life, Mapping[str, Any]]
InterestArgument = Union[Interest, Mapping[str, Any]]
BenefitArgument = Union[BenefitRequest, Mapping[str, Any]]

#: calculation_date: a date, or its ISO 8601 text ("2024-10-17"); age_convention: one of
#: service.selection.AGE_CONVENTIONS. They count the ages and durations of lives given by
#: date (``{"date_of_birth": "1979-04-17"}``)
DateArgument = Union[date, str, None]
AgeConventionArgument = Literal["exact", "last-birthday", "nearest-birthday", "next-birthday"]

DEFAULT_URL = "http://127.0.0.1:8000"


@dataclass(frozen=True)
class _Call:
    method: str
    path: str
    answer: Any  # a response Struct type, or str for text answers
    body: Union[bytes, None] = None
    accept: str = "application/json"


_ENCODER = msgspec.json.Encoder()
_DECODERS: dict[Any, msgspec.json.Decoder] = {}

#: request Struct -> (path, response Struct)
ENDPOINTS: dict[type, tuple[str, type]] = {
    SurvivalRequest: ("/v1/survival", SurvivalResponse),
    DeferredDeathRequest: ("/v1/deferred-death", DeferredDeathResponse),
    ExpectationRequest: ("/v1/expectation", ExpectationResponse),
    MomentsRequest: ("/v1/moments", MomentsResponse),
    QuantilesRequest: ("/v1/quantiles", QuantilesResponse),
    LifeTableRequest: ("/v1/life-table", LifeTableResponse),
    PresentValuesRequest: ("/v1/present-values", PresentValuesResponse),
    CashFlowsRequest: ("/v1/cash-flows", CashFlowsResponse),
}


def _decoder(kind: Any) -> msgspec.json.Decoder:
    if kind not in _DECODERS:
        _DECODERS[kind] = msgspec.json.Decoder(kind)
    return _DECODERS[kind]


def _checked(request_type: type, fields: Mapping[str, Any]) -> bytes:
    """The body of a request, checked as the service checks it: encoded, then decoded
    strictly into its Struct (so every message is the service's)."""
    try:
        body = _ENCODER.encode(fields)
    except (TypeError, msgspec.EncodeError) as exc:
        raise LifetimeServiceError(
            status=None, title="Request cannot be written as JSON", detail=str(exc),
            type="client/unencodable-request", sent=False,
        ) from None
    try:
        _decoder(request_type).decode(body)
    except msgspec.ValidationError as exc:
        raise _unfit(exc) from None
    except msgspec.DecodeError as exc:  # NaN or infinity written as null, say
        raise _unfit(msgspec.ValidationError(str(exc))) from None
    return body


def _post(request_type: type, fields: Mapping[str, Any], accept: str = "application/json") -> _Call:
    path, answer = ENDPOINTS[request_type]
    return _Call("POST", path, str if accept != "application/json" else answer,
                 _checked(request_type, fields), accept)


def _cash_flow_fields(basis, lives, interest, benefits, periods_per_year, dated,
                      unknown) -> dict:
    return {"basis": basis, "lives": lives, "interest": interest, "benefits": benefits,
            "periods_per_year": periods_per_year, **dated, **unknown}


def _dated(calculation_date: DateArgument, age_convention: AgeConventionArgument) -> dict:
    """The request fields for lives given by date (``date_of_birth``, ``date_of_entry``, …)."""
    return {"calculation_date": calculation_date, "age_convention": age_convention}


def _prepared(request: msgspec.Struct) -> _Call:
    """A request Struct built beforehand (``send``)."""
    if type(request) not in ENDPOINTS:
        names = ", ".join(k.__name__ for k in ENDPOINTS)
        raise TypeError(f"send() takes one of {names} (got {type(request).__name__})")
    return _post(type(request), msgspec.to_builtins(request))


def _decode(call: _Call, response: httpx.Response) -> Any:
    if response.status_code >= 400:
        raise _from_answer(response)
    if call.answer is str:
        return response.text
    try:
        return _decoder(call.answer).decode(response.content)
    except (msgspec.ValidationError, msgspec.DecodeError) as exc:
        raise LifetimeServiceError(
            status=response.status_code,
            title="Unexpected answer",
            detail=f"the answer to {call.method} {call.path} does not have the expected shape "
            f"({call.answer.__name__}): {exc}",
            type="client/unexpected-answer",
            request_id=response.headers.get("x-request-id"),
        ) from exc


def _life_table_fields(basis, end_age, start_age, radix, duration, start_ages, durations,
                       unknown) -> dict[str, Any]:
    return {"basis": basis, "end_age": end_age, "start_age": start_age, "radix": radix,
            "duration": duration, "start_ages": start_ages, "durations": durations, **unknown}


class _Base:
    def __init__(
        self,
        base_url: str = DEFAULT_URL,
        *,
        timeout: float = DEFAULT_TIMEOUT,
        connect_timeout: float = DEFAULT_CONNECT_TIMEOUT,
        retries: int = DEFAULT_RETRIES,
        backoff: float = DEFAULT_BACKOFF,
        max_backoff: float = DEFAULT_MAX_BACKOFF,
        token: Union[str, None] = None,
        headers: Union[Mapping[str, str], None] = None,
        transport: Any = None,
    ):
        """``timeout``: seconds to wait for each read or write of an answer (a long batch may
        need more); ``connect_timeout``: seconds to wait for a connection; ``retries``: how
        many times a refused connection is tried again (0: never), waiting ``backoff × 2^k``
        seconds, at most ``max_backoff``; ``token``: the bearer token when the service
        requires one; ``transport``: an httpx transport (for tests)."""
        if retries < 0:
            raise ValueError("retries must be at least 0")
        if timeout <= 0 or connect_timeout <= 0:
            raise ValueError("timeout and connect_timeout must be greater than 0 seconds")
        self.base_url = base_url.rstrip("/")
        self.retries = retries
        self.backoff = backoff
        self.max_backoff = max_backoff
        self._headers = {"User-Agent": "lifetime-service-client", **(headers or {})}
        if token is not None:
            self._headers["Authorization"] = f"Bearer {token}"
        self._timeout = httpx.Timeout(timeout, connect=connect_timeout)
        self._http = self._open(transport)

    def _open(self, transport: Any) -> Any:
        raise NotImplementedError

    def _delay(self, retry: int) -> float:
        return min(self.backoff * 2**retry, self.max_backoff)

    def _request_args(self, call: _Call) -> dict[str, Any]:
        headers = {"Accept": call.accept}
        if call.body is not None:
            headers["Content-Type"] = "application/json"
        return {"method": call.method, "url": call.path, "content": call.body, "headers": headers}

    @staticmethod
    def _stored_basis(basis_id: str) -> _Call:
        return _Call("GET", "/v1/bases/" + quote(basis_id, safe=""), StoredBasisDetail)

    @staticmethod
    def _basis_version(basis_id: str, fingerprint: str) -> _Call:
        return _Call(
            "GET",
            f"/v1/bases/{quote(basis_id, safe='')}/versions/{quote(fingerprint, safe=':')}",
            StoredBasisDetail,
        )

    _BASES = _Call("GET", "/v1/bases", StoredBasesResponse)
    _LAWS = _Call("GET", "/v1/laws", LawsResponse)
    _HEALTH = _Call("GET", "/health", HealthResponse)
    _READY = _Call("GET", "/ready", ReadyResponse)
    _METRICS = _Call("GET", "/metrics", str, accept="text/plain")


class LifetimeClient(_Base):
    """Synchronous client. Use as a context manager, or call ``close()``."""

    def _open(self, transport: Any) -> httpx.Client:
        return httpx.Client(base_url=self.base_url, timeout=self._timeout,
                            headers=self._headers, transport=transport)

    def __enter__(self) -> LifetimeClient:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def close(self) -> None:
        self._http.close()

    def _send(self, call: _Call) -> Any:
        args = self._request_args(call)
        for attempt in range(self.retries + 1):
            try:
                response = self._http.request(**args)
                break
            except RETRIED_ERRORS as exc:
                if attempt == self.retries:
                    raise _unreachable(self.base_url, attempt + 1, exc) from exc
                time.sleep(self._delay(attempt))
            except httpx.TransportError as exc:  # a timeout after sending, say: not retried
                raise _failed(exc) from exc
        return _decode(call, response)

    # calculations

    def survival(self, basis: BasisArgument, lives: Sequence[LifeArgument],
                 t: Sequence[float],
                 calculation_date: DateArgument = None,
                 age_convention: AgeConventionArgument = "exact",
                 **unknown: Never) -> SurvivalResponse:
        """POST /v1/survival: ₜp_x, ₜq_x, μ_{x+t} and f_x(t) at each duration ``t``."""
        return self._send(_post(SurvivalRequest, {"basis": basis, "lives": lives, "t": t,
            **_dated(calculation_date, age_convention), **unknown}))

    def deferred_death(self, basis: BasisArgument, lives: Sequence[LifeArgument],
                       deferral: Sequence[float], period: float = 1.0,
                       calculation_date: DateArgument = None,
                       age_convention: AgeConventionArgument = "exact",
                       **unknown: Never) -> DeferredDeathResponse:
        """POST /v1/deferred-death: u|ₜq_x for each ``deferral`` u (t = ``period``)."""
        return self._send(_post(DeferredDeathRequest, {
            "basis": basis, "lives": lives, "deferral": deferral, "period": period,
            **_dated(calculation_date, age_convention), **unknown}))

    def expectation(self, basis: BasisArgument, lives: Sequence[LifeArgument],
                    term: Union[int, None] = None,
                    calculation_date: DateArgument = None,
                    age_convention: AgeConventionArgument = "exact",
                    **unknown: Never) -> ExpectationResponse:
        """POST /v1/expectation: e̊_x, e_x and their variances (of min(T, n) with ``term`` n)."""
        return self._send(_post(ExpectationRequest, {
            "basis": basis, "lives": lives, "term": term,
            **_dated(calculation_date, age_convention), **unknown}))

    def moments(self, basis: BasisArgument, lives: Sequence[LifeArgument], orders: Sequence[int],
                term: Union[int, None] = None,
                calculation_date: DateArgument = None,
                age_convention: AgeConventionArgument = "exact",
                **unknown: Never) -> MomentsResponse:
        """POST /v1/moments: E[T_x^k] and E[K_x^k] for each of the ``orders`` k."""
        return self._send(_post(MomentsRequest, {
            "basis": basis, "lives": lives, "orders": orders, "term": term,
            **_dated(calculation_date, age_convention), **unknown}))

    def quantiles(self, basis: BasisArgument, lives: Sequence[LifeArgument],
                  probabilities: Sequence[float],
                  calculation_date: DateArgument = None,
                  age_convention: AgeConventionArgument = "exact",
                  **unknown: Never) -> QuantilesResponse:
        """POST /v1/quantiles: quantiles of T_x and K_x for each of the ``probabilities``."""
        return self._send(_post(QuantilesRequest, {
            "basis": basis, "lives": lives, "probabilities": probabilities,
            **_dated(calculation_date, age_convention), **unknown}))

    def life_table(self, basis: BasisArgument, end_age: float, start_age: Union[float, None] = None,
                   radix: float = 100_000.0, duration: float = 0.0,
                   start_ages: Union[Sequence[float], None] = None,
                   durations: Union[Sequence[float], None] = None,
                   **unknown: Never) -> LifeTableResponse:
        """POST /v1/life-table: a derived life table from ``start_age`` (or, for a status of
        several lives, ``start_ages``) to ``end_age``."""
        return self._send(_post(LifeTableRequest, _life_table_fields(
            basis, end_age, start_age, radix, duration, start_ages, durations, unknown)))

    def life_table_csv(self, basis: BasisArgument, end_age: float,
                       start_age: Union[float, None] = None, radix: float = 100_000.0,
                       duration: float = 0.0, start_ages: Union[Sequence[float], None] = None,
                       durations: Union[Sequence[float], None] = None,
                       **unknown: Never) -> str:
        """POST /v1/life-table with ``Accept: text/csv``: the table as CSV text."""
        return self._send(_post(LifeTableRequest, _life_table_fields(
            basis, end_age, start_age, radix, duration, start_ages, durations, unknown),
            accept="text/csv"))

    def present_values(self, basis: BasisArgument, lives: Sequence[LifeArgument],
                       interest: InterestArgument, benefits: Sequence[BenefitArgument],
                       calculation_date: DateArgument = None,
                       age_convention: AgeConventionArgument = "exact",
                       **unknown: Never) -> PresentValuesResponse:
        """POST /v1/present-values: per benefit, the expected present value, its second moment
        and standard deviation, and the net premium when asked for."""
        return self._send(_post(PresentValuesRequest, {
            "basis": basis, "lives": lives, "interest": interest, "benefits": benefits,
            **_dated(calculation_date, age_convention), **unknown}))

    def send(self, request: msgspec.Struct) -> Any:
        """Send a request Struct built beforehand (a SurvivalRequest, …); its response Struct."""
        return self._send(_prepared(request))

    def cash_flows(self, basis: BasisArgument, lives: Sequence[LifeArgument],
                   interest: InterestArgument, benefits: Sequence[BenefitArgument],
                   periods_per_year: int = 1,
                   calculation_date: DateArgument = None,
                   age_convention: AgeConventionArgument = "exact",
                   **unknown: Never) -> CashFlowsResponse:
        """POST /v1/cash-flows: expected benefit outgo, premium income and probability in
        force per period, per life and summed."""
        return self._send(_post(CashFlowsRequest, _cash_flow_fields(
            basis, lives, interest, benefits, periods_per_year,
            _dated(calculation_date, age_convention), unknown)))

    def cash_flows_csv(self, basis: BasisArgument, lives: Sequence[LifeArgument],
                       interest: InterestArgument, benefits: Sequence[BenefitArgument],
                       periods_per_year: int = 1,
                       calculation_date: DateArgument = None,
                       age_convention: AgeConventionArgument = "exact",
                       **unknown: Never) -> str:
        """POST /v1/cash-flows with ``Accept: text/csv``: the cash flows as CSV text."""
        return self._send(_post(CashFlowsRequest, _cash_flow_fields(
            basis, lives, interest, benefits, periods_per_year,
            _dated(calculation_date, age_convention), unknown), accept="text/csv"))

    # reading bases, operations

    def bases(self) -> StoredBasesResponse:
        """GET /v1/bases: the stored bases with their fingerprints."""
        return self._send(self._BASES)

    def basis(self, basis_id: str) -> StoredBasisDetail:
        """GET /v1/bases/{id}: one stored basis with its definition in the inline form."""
        return self._send(self._stored_basis(basis_id))

    def basis_version(self, basis_id: str, fingerprint: str) -> StoredBasisDetail:
        """GET /v1/bases/{id}/versions/{fingerprint}: the version of a stored basis that had
        this fingerprint, the current one or an earlier one kept beside it."""
        return self._send(self._basis_version(basis_id, fingerprint))

    def laws(self) -> LawsResponse:
        """GET /v1/laws: every inline basis type with its parameters."""
        return self._send(self._LAWS)

    def health(self) -> HealthResponse:
        return self._send(self._HEALTH)

    def ready(self) -> ReadyResponse:
        """GET /ready: raises LifetimeServiceError (503) while stored bases are loading."""
        return self._send(self._READY)

    def metrics(self) -> str:
        return self._send(self._METRICS)

    def wait_until_ready(self, timeout: float = 30.0, interval: float = 0.2) -> ReadyResponse:
        """Poll GET /ready until it answers 200, for at most ``timeout`` seconds."""
        deadline = time.monotonic() + timeout
        while True:
            try:
                return self.ready()
            except LifetimeServiceError as exc:
                if exc.status not in (None, 503) or time.monotonic() + interval > deadline:
                    raise
            time.sleep(interval)


class AsyncLifetimeClient(_Base):
    """Asynchronous client: the same methods as `LifetimeClient`, as coroutines. Use as an
    async context manager, or await ``aclose()``."""

    def _open(self, transport: Any) -> httpx.AsyncClient:
        return httpx.AsyncClient(base_url=self.base_url, timeout=self._timeout,
                                 headers=self._headers, transport=transport)

    async def __aenter__(self) -> AsyncLifetimeClient:
        return self

    async def __aexit__(self, *exc: object) -> None:
        await self.aclose()

    async def aclose(self) -> None:
        await self._http.aclose()

    async def _send(self, call: _Call) -> Any:
        args = self._request_args(call)
        for attempt in range(self.retries + 1):
            try:
                response = await self._http.request(**args)
                break
            except RETRIED_ERRORS as exc:
                if attempt == self.retries:
                    raise _unreachable(self.base_url, attempt + 1, exc) from exc
                await asyncio.sleep(self._delay(attempt))
            except httpx.TransportError as exc:
                raise _failed(exc) from exc
        return _decode(call, response)

    async def survival(self, basis: BasisArgument, lives: Sequence[LifeArgument],
                       t: Sequence[float],
                       calculation_date: DateArgument = None,
                       age_convention: AgeConventionArgument = "exact",
                       **unknown: Never) -> SurvivalResponse:
        return await self._send(_post(SurvivalRequest, {
            "basis": basis, "lives": lives, "t": t,
            **_dated(calculation_date, age_convention), **unknown}))

    async def deferred_death(self, basis: BasisArgument, lives: Sequence[LifeArgument],
                             deferral: Sequence[float], period: float = 1.0,
                             calculation_date: DateArgument = None,
                             age_convention: AgeConventionArgument = "exact",
                             **unknown: Never) -> DeferredDeathResponse:
        return await self._send(_post(DeferredDeathRequest, {
            "basis": basis, "lives": lives, "deferral": deferral, "period": period,
            **_dated(calculation_date, age_convention), **unknown}))

    async def expectation(self, basis: BasisArgument, lives: Sequence[LifeArgument],
                          term: Union[int, None] = None,
                          calculation_date: DateArgument = None,
                          age_convention: AgeConventionArgument = "exact",
                          **unknown: Never) -> ExpectationResponse:
        return await self._send(_post(ExpectationRequest, {
            "basis": basis, "lives": lives, "term": term,
            **_dated(calculation_date, age_convention), **unknown}))

    async def moments(self, basis: BasisArgument, lives: Sequence[LifeArgument],
                      orders: Sequence[int], term: Union[int, None] = None,
                      calculation_date: DateArgument = None,
                      age_convention: AgeConventionArgument = "exact",
                      **unknown: Never) -> MomentsResponse:
        return await self._send(_post(MomentsRequest, {
            "basis": basis, "lives": lives, "orders": orders, "term": term,
            **_dated(calculation_date, age_convention), **unknown}))

    async def quantiles(self, basis: BasisArgument, lives: Sequence[LifeArgument],
                        probabilities: Sequence[float],
                        calculation_date: DateArgument = None,
                        age_convention: AgeConventionArgument = "exact",
                        **unknown: Never) -> QuantilesResponse:
        return await self._send(_post(QuantilesRequest, {
            "basis": basis, "lives": lives, "probabilities": probabilities,
            **_dated(calculation_date, age_convention), **unknown}))

    async def life_table(self, basis: BasisArgument, end_age: float,
                         start_age: Union[float, None] = None, radix: float = 100_000.0,
                         duration: float = 0.0, start_ages: Union[Sequence[float], None] = None,
                         durations: Union[Sequence[float], None] = None,
                         **unknown: Never) -> LifeTableResponse:
        return await self._send(_post(LifeTableRequest, _life_table_fields(
            basis, end_age, start_age, radix, duration, start_ages, durations, unknown)))

    async def life_table_csv(self, basis: BasisArgument, end_age: float,
                             start_age: Union[float, None] = None, radix: float = 100_000.0,
                             duration: float = 0.0,
                             start_ages: Union[Sequence[float], None] = None,
                             durations: Union[Sequence[float], None] = None,
                             **unknown: Never) -> str:
        return await self._send(_post(LifeTableRequest, _life_table_fields(
            basis, end_age, start_age, radix, duration, start_ages, durations, unknown),
            accept="text/csv"))

    async def present_values(self, basis: BasisArgument, lives: Sequence[LifeArgument],
                             interest: InterestArgument, benefits: Sequence[BenefitArgument],
                             calculation_date: DateArgument = None,
                             age_convention: AgeConventionArgument = "exact",
                             **unknown: Never) -> PresentValuesResponse:
        return await self._send(_post(PresentValuesRequest, {
            "basis": basis, "lives": lives, "interest": interest, "benefits": benefits,
            **_dated(calculation_date, age_convention), **unknown}))

    async def send(self, request: msgspec.Struct) -> Any:
        return await self._send(_prepared(request))

    async def cash_flows(self, basis: BasisArgument, lives: Sequence[LifeArgument],
                         interest: InterestArgument, benefits: Sequence[BenefitArgument],
                         periods_per_year: int = 1,
                         calculation_date: DateArgument = None,
                         age_convention: AgeConventionArgument = "exact",
                         **unknown: Never) -> CashFlowsResponse:
        return await self._send(_post(CashFlowsRequest, _cash_flow_fields(
            basis, lives, interest, benefits, periods_per_year,
            _dated(calculation_date, age_convention), unknown)))

    async def cash_flows_csv(self, basis: BasisArgument, lives: Sequence[LifeArgument],
                             interest: InterestArgument, benefits: Sequence[BenefitArgument],
                             periods_per_year: int = 1,
                             calculation_date: DateArgument = None,
                             age_convention: AgeConventionArgument = "exact",
                             **unknown: Never) -> str:
        return await self._send(_post(CashFlowsRequest, _cash_flow_fields(
            basis, lives, interest, benefits, periods_per_year,
            _dated(calculation_date, age_convention), unknown), accept="text/csv"))

    async def bases(self) -> StoredBasesResponse:
        return await self._send(self._BASES)

    async def basis(self, basis_id: str) -> StoredBasisDetail:
        return await self._send(self._stored_basis(basis_id))

    async def basis_version(self, basis_id: str, fingerprint: str) -> StoredBasisDetail:
        return await self._send(self._basis_version(basis_id, fingerprint))

    async def laws(self) -> LawsResponse:
        return await self._send(self._LAWS)

    async def health(self) -> HealthResponse:
        return await self._send(self._HEALTH)

    async def ready(self) -> ReadyResponse:
        return await self._send(self._READY)

    async def metrics(self) -> str:
        return await self._send(self._METRICS)

    async def wait_until_ready(
        self, timeout: float = 30.0, interval: float = 0.2
    ) -> ReadyResponse:
        deadline = time.monotonic() + timeout
        while True:
            try:
                return await self.ready()
            except LifetimeServiceError as exc:
                if exc.status not in (None, 503) or time.monotonic() + interval > deadline:
                    raise
            await asyncio.sleep(interval)

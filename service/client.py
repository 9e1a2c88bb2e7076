"""A typed Python client for the Lifetime Service, sync (`LifetimeClient`) and async
(`AsyncLifetimeClient`), on httpx.

One method per endpoint. A calculation method takes either the request Struct of
``service.api.schemas`` or the request's fields as keyword arguments (plain dicts and lists
are fine: ``basis`` may be a stored id, an inline basis Struct of
``service.bases.definitions``, or a dict with a ``"type"``). Keyword arguments are checked
against the request Struct before anything is sent; an answer is decoded into the response
Struct of the same module, so a change in the shape of the service's answers fails loudly
here. Only msgspec, httpx and the schema modules are imported: the client works without
litestar, numpy or the numeric core.

Every failure raises one exception type, `LifetimeServiceError`: a problem+json answer (its
``status``, ``title``, ``detail`` and field ``errors``), a non-problem error answer, a request
that does not fit the schema before it is sent, or a service that could not be reached after
the retries.

Retries: only when no connection could be made (``httpx.ConnectError`` or
``httpx.ConnectTimeout``), so nothing is ever sent twice; never on an answer, whatever its
status. At most ``retries`` retries, waiting ``backoff × 2^k`` seconds (capped at
``max_backoff``) before retry k.

    from service.client import LifetimeClient

    with LifetimeClient("http://127.0.0.1:8000") as client:
        answer = client.expectation(basis="standard-ultimate", lives=[{"age": 60}])
        print(answer.basis.fingerprint, answer.results[0].complete)
"""

from __future__ import annotations

import asyncio
import re
import time
from dataclasses import dataclass, field
from typing import Any, Union
from urllib.parse import quote

import httpx
import msgspec

from service.api import schemas as s
from service.api.schemas import (
    DeferredDeathRequest,
    DeferredDeathResponse,
    ExpectationRequest,
    ExpectationResponse,
    HealthResponse,
    LawsResponse,
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
    BenefitResult,
    CashFlowsRequest,
    CashFlowsResponse,
    PresentValuesRequest,
    PresentValuesResponse,
    PresentValuesResult,
)

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
_AT_PATH = re.compile(r"^(?P<message>.*?)(?: - at `(?P<field>[^`]*)`)?$", re.DOTALL)


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


def _unfit(exc: msgspec.ValidationError) -> LifetimeServiceError:
    match = _AT_PATH.match(str(exc))
    message = match.group("message") if match else str(exc)
    where = (match.group("field") if match else None) or "$"
    return LifetimeServiceError(
        status=None,
        title="Request does not fit the schema (checked before sending)",
        detail=f"{where}: {message}",
        errors=[(where, message)],
        type="client/invalid-request",
        sent=False,
    )


def _unreachable(url: str, attempts: int, exc: Exception) -> LifetimeServiceError:
    return LifetimeServiceError(
        status=None,
        title="Service unreachable",
        detail=f"no connection to {url} after {attempts} attempt(s): {exc}",
        type="client/unreachable",
    )


# ---- what every call needs, shared by both clients ---------------------------------------


@dataclass(frozen=True)
class _Call:
    method: str
    path: str
    answer: Any  # a response Struct type, or str for text answers
    body: Union[bytes, None] = None
    accept: str = "application/json"


_ENCODER = msgspec.json.Encoder()
_DECODERS: dict[Any, msgspec.json.Decoder] = {}


def _decoder(kind: Any) -> msgspec.json.Decoder:
    if kind not in _DECODERS:
        _DECODERS[kind] = msgspec.json.Decoder(kind)
    return _DECODERS[kind]


def _post(path: str, request_type: Any, answer: Any, request: Any, fields: dict) -> _Call:
    """A POST call with the request given as a Struct, or as fields checked against
    ``request_type`` (``None``: sent as given, unchecked)."""
    if request is not None and fields:
        raise TypeError("give the request Struct or keyword arguments, not both")
    if request is None:
        if request_type is None:
            request = fields
        else:
            try:
                request = msgspec.convert(fields, request_type)
            except msgspec.ValidationError as exc:
                raise _unfit(exc) from None
    elif request_type is not None and not isinstance(request, (request_type, dict)):
        raise TypeError(f"expected a {request_type.__name__}, got {type(request).__name__}")
    return _Call("POST", path, answer, _ENCODER.encode(request))


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


class _Base:
    def __init__(
        self,
        base_url: str = "http://127.0.0.1:8000",
        *,
        timeout: float = DEFAULT_TIMEOUT,
        retries: int = DEFAULT_RETRIES,
        backoff: float = DEFAULT_BACKOFF,
        max_backoff: float = DEFAULT_MAX_BACKOFF,
        token: Union[str, None] = None,
        headers: Union[dict[str, str], None] = None,
    ):
        if retries < 0:
            raise ValueError("retries must be at least 0")
        self.base_url = base_url.rstrip("/")
        self.retries = retries
        self.backoff = backoff
        self.max_backoff = max_backoff
        self._headers = {"User-Agent": "lifetime-service-client", **(headers or {})}
        if token is not None:
            self._headers["Authorization"] = f"Bearer {token}"
        self._timeout = httpx.Timeout(timeout)

    def _delay(self, retry: int) -> float:
        return min(self.backoff * 2**retry, self.max_backoff)

    def _request_args(self, call: _Call) -> dict[str, Any]:
        headers = {"Accept": call.accept}
        if call.body is not None:
            headers["Content-Type"] = "application/json"
        return {"method": call.method, "url": call.path, "content": call.body, "headers": headers}

    # the calls, built once for both clients

    @staticmethod
    def _survival(request: Any, fields: dict) -> _Call:
        return _post("/v1/survival", SurvivalRequest, SurvivalResponse, request, fields)

    @staticmethod
    def _deferred_death(request: Any, fields: dict) -> _Call:
        return _post(
            "/v1/deferred-death", DeferredDeathRequest, DeferredDeathResponse, request, fields
        )

    @staticmethod
    def _expectation(request: Any, fields: dict) -> _Call:
        return _post("/v1/expectation", ExpectationRequest, ExpectationResponse, request, fields)

    @staticmethod
    def _moments(request: Any, fields: dict) -> _Call:
        return _post("/v1/moments", MomentsRequest, MomentsResponse, request, fields)

    @staticmethod
    def _quantiles(request: Any, fields: dict) -> _Call:
        return _post("/v1/quantiles", QuantilesRequest, QuantilesResponse, request, fields)

    @staticmethod
    def _life_table(request: Any, fields: dict, csv: bool) -> _Call:
        call = _post(
            "/v1/life-table", LifeTableRequest, str if csv else LifeTableResponse, request, fields
        )
        if csv:
            call = _Call(call.method, call.path, str, call.body, "text/csv")
        return call

    @staticmethod
    def _present_values(request: Any, fields: dict) -> _Call:
        return _post("/v1/present-values", PresentValuesRequest, PresentValuesResponse, request, fields)

    @staticmethod
    def _cash_flows(request: Any, fields: dict, csv: bool) -> _Call:
        call = _post("/v1/cash-flows", CashFlowsRequest, str if csv else CashFlowsResponse,
                     request, fields)
        if csv:
            call = _Call(call.method, call.path, str, call.body, "text/csv")
        return call

    @staticmethod
    def _stored_basis(basis_id: str) -> _Call:
        return _Call("GET", "/v1/bases/" + quote(basis_id, safe=""), StoredBasisDetail)

    _BASES = _Call("GET", "/v1/bases", StoredBasesResponse)
    _LAWS = _Call("GET", "/v1/laws", LawsResponse)
    _HEALTH = _Call("GET", "/health", HealthResponse)
    _READY = _Call("GET", "/ready", ReadyResponse)
    _METRICS = _Call("GET", "/metrics", str, accept="text/plain")


class LifetimeClient(_Base):
    """Synchronous client. Use as a context manager, or call ``close()``."""

    def __init__(self, base_url: str = "http://127.0.0.1:8000", **options: Any):
        transport = options.pop("transport", None)
        super().__init__(base_url, **options)
        self._http = httpx.Client(
            base_url=self.base_url, timeout=self._timeout, headers=self._headers,
            transport=transport,
        )

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
                raise LifetimeServiceError(
                    status=None, title="Request failed", detail=f"{type(exc).__name__}: {exc}",
                    type="client/transport-error",
                ) from exc
        return _decode(call, response)

    # calculations

    def survival(self, request: Union[SurvivalRequest, None] = None, **fields: Any) -> SurvivalResponse:
        """POST /v1/survival: ₜp_x, ₜq_x, μ_{x+t} and f_x(t) at the durations ``t``."""
        return self._send(self._survival(request, fields))

    def deferred_death(
        self, request: Union[DeferredDeathRequest, None] = None, **fields: Any
    ) -> DeferredDeathResponse:
        """POST /v1/deferred-death: u|ₜq_x for each ``deferral`` u (``period`` t)."""
        return self._send(self._deferred_death(request, fields))

    def expectation(
        self, request: Union[ExpectationRequest, None] = None, **fields: Any
    ) -> ExpectationResponse:
        """POST /v1/expectation: e̊_x, e_x and their variances (temporary with ``term``)."""
        return self._send(self._expectation(request, fields))

    def moments(self, request: Union[MomentsRequest, None] = None, **fields: Any) -> MomentsResponse:
        """POST /v1/moments: E[T_x^k] and E[K_x^k] for the ``orders`` k."""
        return self._send(self._moments(request, fields))

    def quantiles(
        self, request: Union[QuantilesRequest, None] = None, **fields: Any
    ) -> QuantilesResponse:
        """POST /v1/quantiles: quantiles of T_x and K_x for the ``probabilities``."""
        return self._send(self._quantiles(request, fields))

    def life_table(
        self, request: Union[LifeTableRequest, None] = None, **fields: Any
    ) -> LifeTableResponse:
        """POST /v1/life-table: a derived life table for one life."""
        return self._send(self._life_table(request, fields, csv=False))

    def life_table_csv(self, request: Union[LifeTableRequest, None] = None, **fields: Any) -> str:
        """POST /v1/life-table with ``Accept: text/csv``: the table as CSV text."""
        return self._send(self._life_table(request, fields, csv=True))

    def present_values(self, request: Any = None, **fields: Any) -> PresentValuesResponse:
        """POST /v1/present-values: present values, their second moments and standard
        deviations, and net premiums. The request (PresentValuesRequest or keyword arguments)
        is checked before sending, like every calculation."""
        return self._send(self._present_values(request, fields))

    def cash_flows(self, request: Any = None, **fields: Any) -> CashFlowsResponse:
        """POST /v1/cash-flows: expected benefit outgo, premium income and probability in
        force per period, per life and summed."""
        return self._send(self._cash_flows(request, fields, csv=False))

    def cash_flows_csv(self, request: Any = None, **fields: Any) -> str:
        """POST /v1/cash-flows with ``Accept: text/csv``: the cash flows as CSV text."""
        return self._send(self._cash_flows(request, fields, csv=True))

    # reading bases, operations

    def bases(self) -> StoredBasesResponse:
        """GET /v1/bases: the stored bases with their fingerprints."""
        return self._send(self._BASES)

    def basis(self, basis_id: str) -> StoredBasisDetail:
        """GET /v1/bases/{id}: one stored basis with its definition in the inline form."""
        return self._send(self._stored_basis(basis_id))

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

    def __init__(self, base_url: str = "http://127.0.0.1:8000", **options: Any):
        transport = options.pop("transport", None)
        super().__init__(base_url, **options)
        self._http = httpx.AsyncClient(
            base_url=self.base_url, timeout=self._timeout, headers=self._headers,
            transport=transport,
        )

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
                raise LifetimeServiceError(
                    status=None, title="Request failed", detail=f"{type(exc).__name__}: {exc}",
                    type="client/transport-error",
                ) from exc
        return _decode(call, response)

    async def survival(
        self, request: Union[SurvivalRequest, None] = None, **fields: Any
    ) -> SurvivalResponse:
        return await self._send(self._survival(request, fields))

    async def deferred_death(
        self, request: Union[DeferredDeathRequest, None] = None, **fields: Any
    ) -> DeferredDeathResponse:
        return await self._send(self._deferred_death(request, fields))

    async def expectation(
        self, request: Union[ExpectationRequest, None] = None, **fields: Any
    ) -> ExpectationResponse:
        return await self._send(self._expectation(request, fields))

    async def moments(
        self, request: Union[MomentsRequest, None] = None, **fields: Any
    ) -> MomentsResponse:
        return await self._send(self._moments(request, fields))

    async def quantiles(
        self, request: Union[QuantilesRequest, None] = None, **fields: Any
    ) -> QuantilesResponse:
        return await self._send(self._quantiles(request, fields))

    async def life_table(
        self, request: Union[LifeTableRequest, None] = None, **fields: Any
    ) -> LifeTableResponse:
        return await self._send(self._life_table(request, fields, csv=False))

    async def life_table_csv(
        self, request: Union[LifeTableRequest, None] = None, **fields: Any
    ) -> str:
        return await self._send(self._life_table(request, fields, csv=True))

    async def present_values(self, request: Any = None, **fields: Any) -> PresentValuesResponse:
        return await self._send(self._present_values(request, fields))

    async def cash_flows(self, request: Any = None, **fields: Any) -> CashFlowsResponse:
        return await self._send(self._cash_flows(request, fields, csv=False))

    async def cash_flows_csv(self, request: Any = None, **fields: Any) -> str:
        return await self._send(self._cash_flows(request, fields, csv=True))

    async def bases(self) -> StoredBasesResponse:
        return await self._send(self._BASES)

    async def basis(self, basis_id: str) -> StoredBasisDetail:
        return await self._send(self._stored_basis(basis_id))

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

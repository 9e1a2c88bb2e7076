"""A bare litestar app for the load benchmark's baseline: one POST of the same request and
answer shape as a one-life ``/v1/expectation`` (a stored basis id and lives in; the basis
reference, the version, one result per life with four numbers and the calculation
fingerprint out), decoded and encoded by litestar with msgspec, and nothing else: no access
log, metrics, request ids, security headers, body limit, basis or computation."""

from __future__ import annotations

import msgspec
from litestar import Litestar, post


class Life(msgspec.Struct, forbid_unknown_fields=True):
    age: float
    duration: float = 0.0


class Body(msgspec.Struct, forbid_unknown_fields=True):
    basis: str
    lives: list[Life]


class Reference(msgspec.Struct):
    id: str
    fingerprint: str


class Result(msgspec.Struct):
    age: float
    duration: float
    complete: float
    curtate: float
    complete_variance: float
    curtate_variance: float


class Answer(msgspec.Struct):
    basis: Reference
    service_version: str
    results: list[Result]
    calculation_fingerprint: str


FINGERPRINT = "sha256:" + "0" * 64


@post("/bare", status_code=200, sync_to_thread=False)
def bare(data: Body) -> Answer:
    return Answer(
        basis=Reference(id=data.basis, fingerprint=FINGERPRINT),
        service_version="0.0.0",
        results=[
            Result(
                age=life.age, duration=life.duration, complete=1.0, curtate=0.5,
                complete_variance=0.25, curtate_variance=0.25,
            )
            for life in data.lives
        ],
        calculation_fingerprint=FINGERPRINT,
    )


app = Litestar([bare], openapi_config=None)

"""A bare litestar app for the load benchmark's baseline: one POST that decodes a small
msgspec body and returns a small object, with the same server configuration as the service."""

from __future__ import annotations

import msgspec
from litestar import Litestar, post


class Life(msgspec.Struct):
    age: float
    duration: float = 0.0


class Body(msgspec.Struct):
    basis: str
    lives: list[Life]


class Answer(msgspec.Struct):
    basis: str
    ages: list[float]


@post("/bare", status_code=200, sync_to_thread=False)
def bare(data: Body) -> Answer:
    return Answer(basis=data.basis, ages=[life.age for life in data.lives])


app = Litestar([bare], openapi_config=None)

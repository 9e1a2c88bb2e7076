"""Benchmarks (measurements, not timed tests): a one-life, five-benefit quote against one
expectation call, through the core and through the application.

Run with ``python -m pytest tests/benchmarks/test_values_speed.py -p no:cacheprovider``;
pytest-benchmark prints the figures. Nothing here asserts on time.
"""

from __future__ import annotations

import numpy as np
import pytest
from litestar.testing import TestClient
from shared_bases import I5, SULT

from service.api.app import create_app
from service.core.values import (
    Endowment,
    LifeAnnuity,
    LifeInsurance,
    PureEndowment,
    present_values,
)
from service.settings import Settings

AGE, DUR = np.array([60.37]), np.zeros(1)  # an exact age, as quote systems send
QUOTE = [LifeAnnuity(), LifeInsurance(term=20), PureEndowment(term=10), Endowment(term=20),
         LifeAnnuity(deferral=5, guarantee=5)]
PREMIUMS = [False, None, False, 20, False]
QUOTE_JSON = [
    {"type": "life-annuity"},
    {"type": "life-insurance", "term": 20, "net_premium": {}},
    {"type": "pure-endowment", "term": 10},
    {"type": "endowment", "term": 20, "net_premium": {"premium_term": 20}},
    {"type": "life-annuity", "deferral": 5, "guarantee": 5},
]
LIFE = [{"age": 60.37}]


@pytest.fixture(scope="module")
def client():
    with TestClient(create_app(Settings())) as c:
        yield c


def test_core_expectation(benchmark):
    benchmark(SULT.complete_expectation, AGE, DUR)


def test_core_quote_fast_path(benchmark):
    present_values(SULT, AGE, DUR, I5, QUOTE, PREMIUMS)  # tables built once
    benchmark(present_values, SULT, AGE, DUR, I5, QUOTE, PREMIUMS)


def test_core_quote_general_path(benchmark):
    benchmark(present_values, SULT, AGE, DUR, I5, QUOTE, PREMIUMS, fast=False)


def test_core_monthly_and_continuous_quote(benchmark):
    quote = [LifeAnnuity(frequency=12, guarantee=5), LifeAnnuity(timing="continuous"),
             LifeInsurance(timing="moment-of-death"), LifeInsurance(timing="end-of-period", frequency=12, term=20),
             Endowment(term=20, timing="moment-of-death")]
    benchmark(present_values, SULT, AGE, DUR, I5, quote)


def test_core_quote_batch_of_10000_lives(benchmark):
    ages = np.linspace(20.0, 90.0, 10_000).round()
    benchmark(present_values, SULT, ages, np.zeros(ages.size), I5, QUOTE, PREMIUMS)


def test_app_expectation(benchmark, client):
    body = {"basis": "standard-ultimate", "lives": LIFE}
    benchmark(client.post, "/v1/expectation", json=body)


def test_app_quote(benchmark, client):
    body = {"basis": "standard-ultimate", "lives": LIFE, "interest": {"rate": 0.05}, "benefits": QUOTE_JSON}
    assert client.post("/v1/present-values", json=body).status_code == 200
    benchmark(client.post, "/v1/present-values", json=body)

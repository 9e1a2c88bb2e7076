"""The request path's shortcuts give what the long way gives: the work bounds found once per
model, the access-log record made from a template, and the JSON log line written without
decoding the access message again."""

from __future__ import annotations

import json
import logging

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from service.api import calculations as calc_module
from service.api.calculations import Calculations, _moments_seconds
from service.api.model_facts import facts
from service.api.observability import JsonLineFormatter, access_log, access_record
from service.bases.catalogue import Catalogue
from service.bases.definitions import Adjusted, Gompertz, JointLife, Table
from service.settings import Settings

CATALOGUE = Catalogue()
CATALOGUE.load()


def _compiled(definition):
    found = CATALOGUE.lookup(definition)
    return found.model if not isinstance(found, str) else CATALOGUE.compile_inline(
        definition, found).model


MODELS = [b.model for b in CATALOGUE.stored()] + [
    _compiled(Gompertz(B=0.0003, c=1.07)),
    _compiled(Table(start_age=20, q=[0.01] * 60 + [1.0], fractional_ages="udd")),
    _compiled(Adjusted(base="standard-ultimate", force_multiplier=1.5, extra_force=0.001,
                       extra_force_years=5)),
    _compiled(JointLife(members=["thistlemoor-2024-male", "thistlemoor-2024-female"])),
]


@settings(max_examples=200, deadline=None)
@given(
    which=st.integers(0, len(MODELS) - 1),
    ages=st.lists(st.floats(0.0, 99.0), min_size=1, max_size=50),
    term=st.one_of(st.none(), st.integers(1, 120)),
    calls=st.integers(1, 3),
)
def test_the_bound_of_a_model_is_at_least_the_estimate_of_any_lives(which, ages, term, calls):
    model = MODELS[which]
    age = np.array(ages)
    if getattr(model, "n_members", 1) > 1:
        age = np.column_stack([age, age[::-1]])
    exact = _moments_seconds(model, age, term, calls)
    bound = facts(model).bound(
        ("moments", calls), lambda a: _moments_seconds(model, a, None, calls), age.shape[0]
    )
    assert exact <= bound * (1 + 1e-12)


def test_the_bound_decides_only_what_the_estimate_would_decide(monkeypatch):
    """Below the threshold the bound answers; above it the exact estimate does."""
    calc = Calculations(Settings(), CATALOGUE)
    model = CATALOGUE.get("standard-ultimate").model
    one = np.array([47.63])
    assert calc.moments_seconds(model, one, None, 2) <= calc.inline_seconds
    many = np.full(5000, 47.63)
    assert calc.moments_seconds(model, many, 10, 2) == _moments_seconds(model, many, 10, 2)
    # a budget below the bound: the exact estimate, so the refusal names the real figure
    tight = Calculations(Settings(max_request_seconds=1e-6), CATALOGUE)
    assert tight.moments_seconds(model, one, None, 2) == _moments_seconds(model, one, None, 2)
    assert calc_module.OFFLOAD_SECONDS >= calc.inline_seconds


def test_facts_name_the_columns_without_a_select_period():
    select = facts(CATALOGUE.get("thistlemoor-2024-select").model)
    law = facts(CATALOGUE.get("standard-ultimate").model)
    assert select.unselected == () and select.members == 1
    assert law.unselected == (0,) and law.columns is None


def test_an_access_record_has_every_field_of_a_standard_one():
    standard = logging.LogRecord(access_log.name, logging.INFO, __file__, 1, "{}", (), None)
    made = access_record('{"event":"request"}')
    assert set(vars(made)) == set(vars(standard))
    assert made.getMessage() == '{"event":"request"}'
    assert made.levelname == "INFO" and made.name == "service.access"
    assert abs(made.created - standard.created) < 60
    assert 0 <= made.msecs < 1000


def test_the_access_line_is_the_message_merged_after_time_level_and_logger():
    formatter = JsonLineFormatter()
    message = json.dumps({"event": "request", "status": 200, "path": "/v1/expectation"},
                         separators=(",", ":"))
    line = formatter.format(access_record(message))
    decoded = json.loads(line)
    assert list(decoded)[:3] == ["time", "level", "logger"]
    assert decoded["level"] == "info" and decoded["logger"] == "service.access"
    assert decoded["status"] == 200 and decoded["path"] == "/v1/expectation"
    assert decoded["time"].endswith("Z") and len(decoded["time"]) == len("2026-01-01T00:00:00.000Z")
    # a record of another logger keeps its message as a field
    other = logging.LogRecord("service", logging.WARNING, __file__, 1, "{not json", (), None)
    assert json.loads(formatter.format(other))["message"] == "{not json"

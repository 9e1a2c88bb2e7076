"""The bad-input catalogue: hand-written bad requests, each with its status and field path.

Every answer must be problem+json with the expected status and ``errors[].field`` path (when
one is given), a message that says what is allowed, and no NaN or Infinity anywhere; no
request answers 500.
"""

from __future__ import annotations

import json
import re

import pytest

from service.settings import Settings

SU = "standard-ultimate"
ONE = [{"age": 60}]
GOMPERTZ = {"type": "gompertz", "B": 0.0001, "c": 1.1}
TABLE = {"type": "table", "start_age": 100, "q": [0.3, 0.5, 1.0], "fractional_ages": "udd"}
SELECT = {
    "type": "select-table",
    "start_age": 60,
    "select": [[0.01, 0.02], [0.011, 0.021]],
    "ultimate_start_age": 62,
    "ultimate": [0.03, 0.05, 0.1, 1.0],
    "fractional_ages": "udd",
}


def survival(basis, lives=ONE, **extra):
    return {"basis": basis, "lives": lives, "t": [1.0], **extra}


def nested(depth: int) -> dict:
    basis: dict = {"type": "gompertz", "B": 0.0001, "c": 1.1}
    for _ in range(depth):
        basis = {"type": "adjusted", "base": basis}
    return basis


def _raw(text: str) -> bytes:
    return text.encode()


# (id, path, body (dict = JSON, bytes = raw), headers, status, field or None, words in the message)
CASES: list[tuple] = [
    # ---- malformed JSON and media types
    ("empty body", "/v1/survival", b"", None, 400, "$", None),
    ("truncated JSON", "/v1/survival", _raw('{"basis": "standard-ultimate", "lives": ['), None, 400, "$", None),
    ("not JSON", "/v1/survival", _raw("basis=standard-ultimate"), None, 400, "$", None),
    ("JSON array body", "/v1/survival", _raw("[1, 2]"), None, 400, "$", "object"),
    ("JSON string body", "/v1/expectation", _raw('"hello"'), None, 400, "$", "object"),
    ("trailing garbage", "/v1/survival", _raw('{"basis": "standard-ultimate"} x'), None, 400, "$", None),
    ("invalid UTF-8", "/v1/survival", b'{"basis": "\xff\xfe"}', None, 400, "$", None),
    ("NaN literal", "/v1/survival", _raw('{"basis": "standard-ultimate", "lives": [{"age": NaN}], "t": [1]}'), None, 400, "$", None),
    ("Infinity literal", "/v1/survival", _raw('{"basis": "standard-ultimate", "lives": [{"age": Infinity}], "t": [1]}'), None, 400, "$", None),
    ("-Infinity literal", "/v1/survival", _raw('{"basis": "standard-ultimate", "lives": [{"age": 60}], "t": [-Infinity]}'), None, 400, "$", None),
    ("number overflowing a double", "/v1/survival", _raw('{"basis": "standard-ultimate", "lives": [{"age": 1e999}], "t": [1]}'), None, 400, "$.lives[0].age", "finite"),
    ("text/plain", "/v1/survival", survival(SU), {"content-type": "text/plain"}, 415, None, "application/json"),
    ("form encoded", "/v1/expectation", survival(SU), {"content-type": "application/x-www-form-urlencoded"}, 415, None, "application/json"),
    ("no content type", "/v1/expectation", b'{"basis": "standard-ultimate", "lives": [{"age": 60}]}', {"content-type": ""}, 415, None, "application/json"),
    ("latin-1 charset", "/v1/expectation", survival(SU), {"content-type": "application/json; charset=latin-1"}, 415, None, "application/json"),
    # ---- schema: missing, unknown, wrong types
    ("missing basis", "/v1/expectation", {"lives": ONE}, None, 400, "$.basis", "required"),
    ("missing lives", "/v1/expectation", {"basis": SU}, None, 400, "$.lives", "required"),
    ("missing t", "/v1/survival", {"basis": SU, "lives": ONE}, None, 400, "$.t", "required"),
    ("unknown top-level field", "/v1/expectation", {"basis": SU, "lives": ONE, "rate": 0.03}, None, 400, "$.rate", "unknown field"),
    ("unknown life field", "/v1/expectation", {"basis": SU, "lives": [{"age": 60, "sex": "F"}]}, None, 400, "$.lives[0].sex", "unknown field"),
    ("unknown basis field", "/v1/expectation", {"basis": {**GOMPERTZ, "A": 0.001}, "lives": ONE}, None, 400, "$.basis.A", "unknown field"),
    ("age as string", "/v1/expectation", {"basis": SU, "lives": [{"age": "60"}]}, None, 400, "$.lives[0].age", "number"),
    ("age NaN as string", "/v1/expectation", {"basis": SU, "lives": [{"age": "NaN"}]}, None, 400, "$.lives[0].age", "number"),
    ("t Infinity as string", "/v1/survival", {"basis": SU, "lives": ONE, "t": ["Infinity"]}, None, 400, "$.t[0]", "number"),
    ("c NaN as string", "/v1/expectation", {"basis": {"type": "gompertz", "B": 0.0001, "c": "NaN"}, "lives": ONE}, None, 400, "$.basis.c", "number"),
    ("age as bool", "/v1/expectation", {"basis": SU, "lives": [{"age": True}]}, None, 400, "$.lives[0].age", "number"),
    ("age null", "/v1/expectation", {"basis": SU, "lives": [{"age": None}]}, None, (400, 422), "$.lives[0]", None),
    ("lives as object", "/v1/expectation", {"basis": SU, "lives": {"age": 60}}, None, 400, "$.lives", "list"),
    ("basis as number", "/v1/expectation", {"basis": 42, "lives": ONE}, None, 400, "$.basis", "stored basis"),
    ("basis as list", "/v1/expectation", {"basis": [SU], "lives": ONE}, None, 400, "$.basis", "stored basis"),
    ("term as float", "/v1/expectation", {"basis": SU, "lives": ONE, "term": 2.5}, None, 400, "$.term", "whole number"),
    ("orders as strings", "/v1/moments", {"basis": SU, "lives": ONE, "orders": ["1"]}, None, 400, "$.orders[0]", "whole number"),
    # ---- empty, huge and negative
    ("empty lives", "/v1/expectation", {"basis": SU, "lives": []}, None, 422, "$.lives", "at least 1"),
    ("empty t", "/v1/survival", {"basis": SU, "lives": ONE, "t": []}, None, 422, "$.t", "at least 1"),
    ("empty orders", "/v1/moments", {"basis": SU, "lives": ONE, "orders": []}, None, 422, "$.orders", "at least 1"),
    ("empty probabilities", "/v1/quantiles", {"basis": SU, "lives": ONE, "probabilities": []}, None, 422, "$.probabilities", "at least 1"),
    ("too many lives", "/v1/expectation", {"basis": SU, "lives": [{"age": 60}] * 10_001}, None, 422, "$.lives", "at most 10000"),
    ("too many durations", "/v1/survival", {"basis": SU, "lives": ONE, "t": [1.0] * 1001}, None, 422, "$.t", "at most 1000"),
    ("too many values", "/v1/survival", {"basis": SU, "lives": [{"age": 60}] * 2000, "t": [1.0] * 600}, None, 422, "$.t", "at most"),
    ("too many probabilities", "/v1/quantiles", {"basis": SU, "lives": ONE, "probabilities": [0.5] * 101}, None, 422, "$.probabilities", "at most 100"),
    ("too many orders", "/v1/moments", {"basis": SU, "lives": ONE, "orders": list(range(1, 10))}, None, 422, "$.orders[8]", "at most 8"),
    ("repeated order", "/v1/moments", {"basis": SU, "lives": ONE, "orders": [1, 1]}, None, 422, "$.orders[1]", "distinct"),
    ("order 9", "/v1/moments", {"basis": SU, "lives": ONE, "orders": [9]}, None, 422, "$.orders[0]", "at most 8"),
    ("negative age", "/v1/expectation", {"basis": SU, "lives": [{"age": -1}]}, None, 422, "$.lives[0].age", "at least 0"),
    ("negative duration", "/v1/expectation", {"basis": SU, "lives": [{"age": 60, "duration": -0.5}]}, None, 422, "$.lives[0].duration", "at least 0"),
    ("negative t", "/v1/survival", {"basis": SU, "lives": ONE, "t": [-1]}, None, 422, "$.t[0]", "at least 0"),
    ("negative deferral", "/v1/deferred-death", {"basis": SU, "lives": ONE, "deferral": [-1]}, None, 422, "$.deferral[0]", "at least 0"),
    ("zero period", "/v1/deferred-death", {"basis": SU, "lives": ONE, "deferral": [1], "period": 0}, None, 422, "$.period", "greater than 0"),
    ("probability 0", "/v1/quantiles", {"basis": SU, "lives": ONE, "probabilities": [0]}, None, 422, "$.probabilities[0]", "greater than 0"),
    ("probability 1", "/v1/quantiles", {"basis": SU, "lives": ONE, "probabilities": [1]}, None, 422, "$.probabilities[0]", "less than 1"),
    ("term 0", "/v1/expectation", {"basis": SU, "lives": ONE, "term": 0}, None, 422, "$.term", "at least 1"),
    ("term huge", "/v1/expectation", {"basis": SU, "lives": ONE, "term": 10**12}, None, 422, "$.term", "at most"),
    ("huge age", "/v1/expectation", {"basis": SU, "lives": [{"age": 1e300}]}, None, 422, "$.lives[0].age", "below"),
    ("zero radix", "/v1/life-table", {"basis": SU, "start_age": 60, "end_age": 70, "radix": 0}, None, 422, "$.radix", "greater than 0"),
    ("life table too long", "/v1/life-table", {"basis": {"type": "constant-force", "mu": 0.01}, "start_age": 0, "end_age": 5000}, None, 422, "$.end_age", "at most 1000 rows"),
    # ---- bases: unknown types, stored ids, nesting
    ("unknown basis type", "/v1/expectation", {"basis": {"type": "lognormal", "mu": 1}, "lives": ONE}, None, 400, "$.basis.type", "allowed"),
    ("basis without type", "/v1/expectation", {"basis": {"B": 0.0001, "c": 1.1}, "lives": ONE}, None, 400, "$.basis.type", "one of"),
    ("unknown stored id", "/v1/expectation", {"basis": "no-such-basis", "lives": ONE}, None, 404, "$.basis", "unknown stored basis"),
    ("path as stored id", "/v1/expectation", {"basis": "../../etc/passwd", "lives": ONE}, None, 404, "$.basis", "unknown stored basis"),
    ("file name as stored id", "/v1/expectation", {"basis": "standard-ultimate.json", "lives": ONE}, None, 404, "$.basis", "unknown stored basis"),
    ("empty stored id", "/v1/expectation", {"basis": "", "lives": ONE}, None, 422, "$.basis", None),
    ("huge stored id", "/v1/expectation", {"basis": "x" * 5000, "lives": ONE}, None, 422, "$.basis", None),
    ("deeply nested basis", "/v1/expectation", {"basis": nested(40), "lives": ONE}, None, (400, 422), "$.basis", None),
    # ---- domain edges of every law
    ("constant force mu 0", "/v1/expectation", {"basis": {"type": "constant-force", "mu": 0}, "lives": ONE}, None, 422, "$.basis.mu", "greater than 0"),
    ("constant force mu tiny", "/v1/expectation", {"basis": {"type": "constant-force", "mu": 5e-324}, "lives": ONE}, None, 422, "$.basis.mu", "at least"),
    ("de Moivre omega 0", "/v1/expectation", {"basis": {"type": "de-moivre", "omega": 0}, "lives": ONE}, None, 422, "$.basis.omega", "greater than 0"),
    ("de Moivre omega huge", "/v1/expectation", {"basis": {"type": "de-moivre", "omega": 1e9}, "lives": ONE}, None, 422, "$.basis.omega", "at most"),
    ("de Moivre age at omega", "/v1/expectation", {"basis": {"type": "de-moivre", "omega": 100}, "lives": [{"age": 100}]}, None, 422, "$.lives[0].age", "below"),
    ("de Moivre age past omega", "/v1/expectation", {"basis": {"type": "de-moivre", "omega": 100}, "lives": [{"age": 150}]}, None, 422, "$.lives[0].age", "below"),
    ("generalised alpha 0", "/v1/expectation", {"basis": {"type": "generalised-de-moivre", "omega": 100, "alpha": 0}, "lives": ONE}, None, 422, "$.basis.alpha", "greater than 0"),
    ("Gompertz c 1", "/v1/expectation", {"basis": {"type": "gompertz", "B": 0.0001, "c": 1}, "lives": ONE}, None, 422, "$.basis.c", "greater than 1"),
    ("Gompertz c below 1", "/v1/expectation", {"basis": {"type": "gompertz", "B": 0.0001, "c": 0.98}, "lives": ONE}, None, 422, "$.basis.c", "greater than 1"),
    ("Gompertz B negative", "/v1/expectation", {"basis": {"type": "gompertz", "B": -0.0001, "c": 1.1}, "lives": ONE}, None, 422, "$.basis.B", "greater than 0"),
    ("Gompertz immortal", "/v1/expectation", {"basis": {"type": "gompertz", "B": 1e-300, "c": 1.0000001}, "lives": ONE}, None, 422, "$.basis", "10,000"),
    ("Makeham A at -B", "/v1/expectation", {"basis": {"type": "makeham", "A": -0.0001, "B": 0.0001, "c": 1.1}, "lives": ONE}, None, 422, "$.basis.A", "greater than"),
    ("Weibull n 0", "/v1/expectation", {"basis": {"type": "weibull", "k": 0.001, "n": 0}, "lives": ONE}, None, 422, "$.basis.n", "greater than 0"),
    ("Perks D 0", "/v1/expectation", {"basis": {"type": "perks", "A": 0, "B": 0.0001, "c": 1.1, "D": 0}, "lives": ONE}, None, 422, "$.basis.D", "greater than 0"),
    ("Perks A below -B", "/v1/expectation", {"basis": {"type": "perks", "A": -1, "B": 0.0001, "c": 1.1, "D": 0.001}, "lives": ONE}, None, 422, "$.basis.A", "greater than"),
    ("Siler a1 negative", "/v1/expectation", {"basis": {"type": "siler", "a1": -1, "b1": 1, "a2": 0, "a3": 0.0001, "b3": 0.1}, "lives": ONE}, None, 422, "$.basis.a1", "at least 0"),
    ("GM family no beta", "/v1/expectation", {"basis": {"type": "gompertz-makeham-family", "alpha": [0.001], "beta": []}, "lives": ONE}, None, 422, "$.basis.beta", "at least 1"),
    ("GM family too many terms", "/v1/expectation", {"basis": {"type": "gompertz-makeham-family", "alpha": [0.0] * 9, "beta": [-9, 0.1]}, "lives": ONE}, None, 422, "$.basis.alpha", "at most 8"),
    ("GM family negative force", "/v1/expectation", {"basis": {"type": "gompertz-makeham-family", "alpha": [-1.0], "beta": [-9, 0.1]}, "lives": ONE}, None, 422, "$.basis.alpha", "positive"),
    # ---- tables
    ("table does not close", "/v1/expectation", {"basis": {**TABLE, "q": [0.3, 0.5, 0.9]}, "lives": [{"age": 100}]}, None, 422, "$.basis.q", "must close"),
    ("table rate above 1", "/v1/expectation", {"basis": {**TABLE, "q": [0.3, 1.5, 1.0]}, "lives": [{"age": 100}]}, None, 422, "$.basis.q[1]", "at most 1"),
    ("table rate negative", "/v1/expectation", {"basis": {**TABLE, "q": [-0.1, 0.5, 1.0]}, "lives": [{"age": 100}]}, None, 422, "$.basis.q[0]", "at least 0"),
    ("table closes early", "/v1/expectation", {"basis": {**TABLE, "q": [1.0, 0.5, 1.0]}, "lives": [{"age": 100}]}, None, 422, "$.basis.q[0]", "only the last"),
    ("table empty", "/v1/expectation", {"basis": {**TABLE, "q": []}, "lives": [{"age": 100}]}, None, 422, "$.basis.q", "at least 1"),
    ("table too long", "/v1/expectation", {"basis": {**TABLE, "q": [0.01] * 1000 + [1.0]}, "lives": [{"age": 100}]}, None, 422, "$.basis.q", "at most 1000"),
    ("table start age fractional", "/v1/expectation", {"basis": {**TABLE, "start_age": 100.5}, "lives": [{"age": 100.5}]}, None, 400, "$.basis.start_age", "whole number"),
    ("table bad fractional ages", "/v1/expectation", {"basis": {**TABLE, "fractional_ages": "linear"}, "lives": [{"age": 100}]}, None, 400, "$.basis.fractional_ages", "udd"),
    ("age below table", "/v1/expectation", {"basis": TABLE, "lives": [{"age": 99}]}, None, 422, "$.lives[0].age", "at least 100"),
    ("age at table end", "/v1/expectation", {"basis": TABLE, "lives": [{"age": 103}]}, None, 422, "$.lives[0].age", "below the limiting age"),
    ("select ragged", "/v1/expectation", {"basis": {**SELECT, "select": [[0.01, 0.02], [0.011]]}, "lives": [{"age": 60}]}, None, 422, "$.basis.select[1]", "same number"),
    ("select rate 1", "/v1/expectation", {"basis": {**SELECT, "select": [[0.01, 1.0], [0.011, 0.021]]}, "lives": [{"age": 60}]}, None, 422, "$.basis.select[0][1]", "below 1"),
    ("select ultimate too short", "/v1/expectation", {"basis": {**SELECT, "ultimate": [1.0]}, "lives": [{"age": 60}]}, None, 422, "$.basis.ultimate", "run to at least"),
    ("select ultimate starts late", "/v1/expectation", {"basis": {**SELECT, "ultimate_start_age": 70}, "lives": [{"age": 60}]}, None, 422, "$.basis.ultimate_start_age", "at most"),
    ("select rule unknown", "/v1/expectation", {"basis": SELECT, "lives": [{"age": 60.5, "duration": 0}], "selection_age_rule": "youngest"}, None, 400, "$.selection_age_rule", "invalid value"),
    ("select age before selection", "/v1/expectation", {"basis": SELECT, "lives": [{"age": 70, "duration": 1}]}, None, 422, "$.lives[0].duration", "whole age"),
    # ---- reading bases
    ("unknown stored basis GET", "/v1/bases/no-such-basis", None, None, 404, None, "GET /v1/bases"),
    ("unknown path", "/v1/nothing-here", None, None, 404, None, "nothing at"),
    ("wrong method", "/v1/survival", "GET", None, 405, None, "not allowed"),
    # ---- size
    ("body over the limit", "/v1/survival", b'{"basis": "' + b"x" * 1_100_000 + b'"}', None, 413, None, "larger than"),
    ("declared length over the limit", "/v1/survival", b"{}", {"content-length": "99999999"}, 413, None, "larger than"),
]


def _send(client, path, body, headers):
    headers = dict(headers or {})
    if body is None:
        return client.get(path)
    if body == "GET":
        return client.get(path)
    if isinstance(body, dict):
        content = json.dumps(body).encode()
    else:
        content = body
    headers.setdefault("content-type", "application/json")
    if headers.get("content-type") == "":
        del headers["content-type"]
    return client.post(path, content=content, headers=headers)


_NON_FINITE = re.compile(r"\b(NaN|-?Infinity)\b")


def test_the_catalogue_is_large_enough():
    assert len(CASES) >= 60
    assert len({c[0] for c in CASES}) == len(CASES), "case names must be unique"


@pytest.mark.parametrize(
    "path, body, headers, status, field, words", [c[1:] for c in CASES], ids=[c[0] for c in CASES]
)
def test_bad_request(client, path, body, headers, status, field, words):
    assert Settings().max_body_bytes == 1_048_576
    response = _send(client, path, body, headers)
    statuses = status if isinstance(status, tuple) else (status,)
    assert response.status_code in statuses, response.text[:2000]
    assert response.headers["content-type"].startswith("application/problem+json")
    assert response.headers["cache-control"] == "no-store"
    assert response.headers["x-content-type-options"] == "nosniff"
    text = response.text
    assert not _NON_FINITE.search(text), text
    problem = response.json()
    assert problem["status"] == response.status_code
    assert problem["detail"]
    if field is not None:
        fields = [e["field"] for e in problem["errors"]]
        assert fields[0] == field or fields[0].startswith(field + "."), problem
        message = problem["errors"][0]["message"]
        assert len(message) > 10, message
    if words is not None:
        assert words.lower() in text.lower(), problem

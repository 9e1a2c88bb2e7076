"""The project's own fuzzer: seeded, bounded, and aimed at the families of inputs that a
generic schema fuzzer rarely reaches.

Each case is a request (path, body as bytes, headers) built from a valid request of one of the
calculation endpoints by one mutation from a family:

* ``huge-number``: a numeric field (durations, ages, parameters, terms, rates) set to one of
  the extreme numbers below (the largest doubles, 2⁶³ and 2⁶⁴, subnormals, 1e400 written out);
* ``deep-nesting``: arrays or objects nested hundreds to thousands deep, at the top, inside a
  field that is skipped, or as a basis nested inside rating after rating;
* ``accept``: Accept headers with odd quality values (inf, nan, 1e400, −1, 0, too many digits);
* ``domain-edge``: interest rates and parameters just inside and just outside their domain;
* ``high-age``: lives just below the oldest age every basis kind can value, with long
  durations and deferrals.

``check`` holds every answer to the service's promises: no 500; JSON answers parse as strict
JSON (no NaN or Infinity); errors are problem+json naming a field; and ``null`` only where a
value truly does not exist (never for a survival or death probability, a density, a deferred
probability, an expectation, a life table's l, d or q, or a present value).
"""

from __future__ import annotations

import json
import random
from collections.abc import Iterator
from dataclasses import dataclass

from .test_bad_inputs import GOMPERTZ, SELECT, TABLE

FAMILIES = ("huge-number", "deep-nesting", "accept", "domain-edge", "high-age")

HUGE_NUMBERS: tuple[str, ...] = (
    "1e308",
    "1.7976931348623157e308",
    "-1.7976931348623157e308",
    "9223372036854775807",
    "9223372036854775808",
    "18446744073709551616",
    "1e19",
    "5e-324",
    "2.2250738585072014e-308",
    "-0.0",
    "1e400",
    "123456789012345678901234567890",
    "0.99999999999999989",
    "1.0000000000000002",
)

ACCEPT_VALUES: tuple[str, ...] = (
    "text/csv;q=inf",
    "text/csv;q=-inf",
    "text/csv;q=nan",
    "text/csv;q=1e400",
    "text/csv;q=-1",
    "text/csv;q=0",
    "text/csv;q=0.0001",
    "text/csv;q=1.0000",
    "text/csv;q=1.5",
    "text/csv;q=",
    "text/csv;q",
    "text/csv;;;q=0.5",
    "text/csv; q=0.5, application/json; q=0.9",
    "application/json;q=0, text/csv",
    "*/*;q=0.1, text/csv;q=0",
    "text/*",
    "text/csv;" + "x=1;" * 200,
    "text/csv, " * 200,
    "q=1",
    ";",
    "",
)

SMALL_TABLE = TABLE
IMPROVEMENT = {"start_age": 0, "values": [0.015]}

#: (basis, a life of it, the oldest age it can value, how far below that the fuzzer goes)
BASES: tuple[tuple[object, dict, float], ...] = (
    ("standard-ultimate", {"age": 60}, 130.0),
    ("thistlemoor-2024-male", {"age": 60}, 121.0),
    ("thistlemoor-2024-female", {"age": 60}, 121.0),
    ("thistlemoor-2024-select", {"age": 60, "duration": 1}, 121.0),
    ("thistlemoor-2024-annuitants", {"age": 60}, 121.0),
    (GOMPERTZ, {"age": 60}, 200.0),
    ({"type": "makeham", "A": 0.0005, "B": 0.00007, "c": 1.1}, {"age": 60}, 150.0),
    ({"type": "weibull", "k": 1e-9, "n": 4.5}, {"age": 60}, 200.0),
    ({"type": "de-moivre", "omega": 100}, {"age": 60}, 100.0),
    ({"type": "generalised-de-moivre", "omega": 100, "alpha": 2.5}, {"age": 60}, 100.0),
    ({"type": "constant-force", "mu": 0.02}, {"age": 60}, 1000.0),
    ({**SMALL_TABLE, "fractional_ages": "constant-force"}, {"age": 100}, 102.0),
    (SMALL_TABLE, {"age": 100}, 103.0),
    (SELECT, {"age": 60}, 65.0),
    ({"type": "adjusted", "base": "thistlemoor-2024-male", "q_multiplier": 1.7}, {"age": 60}, 121.0),
    ({"type": "adjusted", "base": "thistlemoor-2024-select", "q_multiplier": 3.0}, {"age": 60}, 121.0),
    ({"type": "adjusted", "base": GOMPERTZ, "force_multiplier": 1.3, "age_shift": 2}, {"age": 60}, 190.0),
    (
        {"type": "improved", "base": "thistlemoor-2024-male", "base_year": 2024,
         "valuation_year": 2030, "rates": IMPROVEMENT},
        {"age": 60},
        121.0,
    ),
    (
        {"type": "improved", "base": "thistlemoor-2024-select", "base_year": 2024,
         "valuation_year": 2026, "rates": IMPROVEMENT},
        {"age": 60},
        121.0,
    ),
    (
        {"type": "joint-life", "members": ["thistlemoor-2024-male", GOMPERTZ]},
        {"ages": [60, 58]},
        121.0,
    ),
    (
        {"type": "last-survivor", "members": ["thistlemoor-2024-male", "thistlemoor-2024-female"]},
        {"ages": [60, 58]},
        121.0,
    ),
    (
        {"type": "adjusted", "base": {"type": "adjusted", "base": SMALL_TABLE, "extra_q": 0.01},
         "force_multiplier": 0.5},
        {"age": 100},
        103.0,
    ),
)

#: result fields (of each endpoint) that exist for every life the basis accepts
MUST_EXIST = {
    "/v1/survival": ("survival", "death", "density"),
    "/v1/deferred-death": ("probability",),
    "/v1/expectation": ("complete", "curtate"),
    "/v1/life-table": ("l", "d", "q"),
    "/v1/present-values": (),
}


@dataclass(frozen=True)
class Case:
    family: str
    path: str
    body: bytes
    headers: dict[str, str]
    description: str


def _valid(rng: random.Random, basis: object, life: dict) -> tuple[str, dict]:
    path = rng.choice(
        ["/v1/survival", "/v1/deferred-death", "/v1/expectation", "/v1/moments",
         "/v1/quantiles", "/v1/present-values"]
    )
    body: dict = {"basis": basis, "lives": [dict(life)]}
    if path == "/v1/survival":
        body["t"] = [0.0, 0.5, 1.0, 10.0]
    elif path == "/v1/deferred-death":
        body["deferral"] = [0.0, 2.5, 10.0]
        body["period"] = 1.5
    elif path == "/v1/expectation":
        if rng.random() < 0.5:
            body["term"] = rng.choice([1, 2, 10, 40])
    elif path == "/v1/moments":
        body["orders"] = [1, 2, 3]
    elif path == "/v1/quantiles":
        body["probabilities"] = [0.1, 0.5, 0.9]
    else:
        body["interest"] = {"rate": 0.03}
        body["benefits"] = [
            {"type": "life-annuity", "timing": "advance", "term": 20},
            {"type": "endowment", "term": 10},
        ]
    return path, body


def _numeric_paths(value: object, path: tuple = ()) -> Iterator[tuple]:
    if isinstance(value, bool):
        return
    if isinstance(value, (int, float)):
        yield path
    elif isinstance(value, dict):
        for key, item in value.items():
            yield from _numeric_paths(item, path + (key,))
    elif isinstance(value, list):
        for i, item in enumerate(value):
            yield from _numeric_paths(item, path + (i,))


_MARK = "\u0000NUMBER\u0000"


def _with_raw_number(body: dict, path: tuple, text: str) -> bytes:
    """``body`` as JSON with the number at ``path`` replaced by the literal ``text`` (which
    may be one JSON cannot hold as a double, like 1e400)."""
    copy = json.loads(json.dumps(body))
    target = copy
    for key in path[:-1]:
        target = target[key]
    target[path[-1]] = _MARK
    return json.dumps(copy).replace(json.dumps(_MARK), text).encode()


def _huge_number(rng: random.Random) -> Case:
    basis, life, _ = rng.choice(BASES)
    path, body = _valid(rng, basis, life)
    where = rng.choice(list(_numeric_paths(body)))
    text = rng.choice(HUGE_NUMBERS)
    return Case("huge-number", path, _with_raw_number(body, where, text), {},
                f"{path} {'.'.join(map(str, where))} = {text}")


def _deep_nesting(rng: random.Random) -> Case:
    depth = rng.choice([100, 330, 500, 975, 976, 1200, 5000, 20000])
    opener, closer = rng.choice([("[", "]"), ('{"a":', "}")])
    deep = opener * depth + "1" + closer * depth
    where = rng.choice(["top", "skipped", "life", "basis", "nested-basis"])
    body: bytes
    if where == "top":
        body = deep.encode()
    elif where == "skipped":
        # an unknown field the decoder must skip, placed before the fields it looks for
        body = ('{"zz": ' + deep + ', "basis": "standard-ultimate", "lives": [{"age": 60}], '
                '"t": [1]}').encode()
    elif where == "life":
        body = ('{"basis": "standard-ultimate", "lives": [{"age": ' + deep + '}], "t": [1]}').encode()
    elif where == "basis":
        # inside the basis object, before its "type" tag, so the tag search must skip it
        body = ('{"basis": {"zz": ' + deep + ', "type": "gompertz", "B": 0.0001, "c": 1.1}, '
                '"lives": [{"age": 60}], "t": [1]}').encode()
    else:
        levels = min(depth, 2000)
        basis = '{"type": "adjusted", "force_multiplier": 1.1, "base": ' * levels
        basis += json.dumps(GOMPERTZ) + "}" * levels
        body = ('{"basis": ' + basis + ', "lives": [{"age": 60}], "t": [1]}').encode()
    return Case("deep-nesting", "/v1/survival", body, {}, f"{where} depth {depth}")


def _accept(rng: random.Random) -> Case:
    basis = rng.choice(["standard-ultimate", "thistlemoor-2024-male", SELECT])
    start = 60
    body = {"basis": basis, "start_age": start, "end_age": start + rng.choice([0, 3])}
    accept = rng.choice(ACCEPT_VALUES)
    return Case("accept", "/v1/life-table", json.dumps(body).encode(), {"accept": accept},
                f"Accept: {accept[:60]}")


EDGE_RATES = (-0.99, -0.999999, -1.0, -0.0500001, -0.05, -0.049, 0.0, 1e-300, 1.0, 1.0000001, 100.0)


def _domain_edge(rng: random.Random) -> Case:
    basis, life, _ = rng.choice(BASES[:8])
    rate = rng.choice(EDGE_RATES)
    interest: dict = (
        {"rate": rate} if rng.random() < 0.6 else {"spot_rates": [0.02, rate, 0.03][: rng.randint(2, 3)]}
    )
    benefit = rng.choice([
        {"type": "endowment", "term": rng.choice([1, 10, 100, 1000])},
        {"type": "pure-endowment", "term": rng.choice([1, 100, 1000])},
        {"type": "life-annuity", "timing": "advance", "frequency": 12, "approximation": "udd"},
        {"type": "life-annuity", "timing": "arrears", "frequency": 4, "approximation": "woolhouse"},
        {"type": "life-annuity", "timing": "continuous", "increasing": True},
        {"type": "life-insurance", "timing": "moment-of-death", "increasing": True},
        {"type": "life-insurance", "timing": "end-of-period", "frequency": 12, "term": 50},
    ])
    if rng.random() < 0.3:
        benefit = {**benefit, "net_premium": {}}
    body = {"basis": basis, "lives": [life], "interest": interest, "benefits": [benefit]}
    return Case("domain-edge", "/v1/present-values", json.dumps(body).encode(), {},
                f"interest {interest} {benefit['type']}")


def _high_age(rng: random.Random) -> Case:
    basis, life, oldest = rng.choice(BASES)
    gap = rng.choice([1e-9, 1e-4, 0.25, 0.5, 1.0, 3.0])
    age = oldest - gap
    if "ages" in life:
        new_life = {"ages": [age, min(age, life["ages"][1])]}
    elif "duration" in life:
        new_life = {"age": age, "duration": life["duration"]}
    else:
        new_life = {"age": age}
    path, body = _valid(rng, basis, new_life)
    if path == "/v1/survival":
        body["t"] = [0.0, 0.5, 2.5, 1e3, 1e300]
    elif path == "/v1/deferred-death":
        body["deferral"] = [0.0, 2.5, 10.0, 1e19]
    return Case("high-age", path, json.dumps(body).encode(), {},
                f"{path} basis {str(basis)[:50]} life {new_life}")


_MAKERS = {
    "huge-number": _huge_number,
    "deep-nesting": _deep_nesting,
    "accept": _accept,
    "domain-edge": _domain_edge,
    "high-age": _high_age,
}


def cases(seed: int, count: int) -> Iterator[Case]:
    """``count`` cases, the families in turn, from a seeded generator (the same every run)."""
    rng = random.Random(seed)
    for i in range(count):
        yield _MAKERS[FAMILIES[i % len(FAMILIES)]](rng)


def _finite_json(text: str) -> object:
    def refuse(name: str) -> object:
        raise ValueError(f"{name} in the answer")

    return json.loads(text, parse_constant=refuse)


def check(case: Case, status: int, content_type: str, text: str) -> str | None:
    """What is wrong with this answer, or None."""
    if status >= 500:
        return f"status {status}"
    if content_type.startswith("text/csv"):
        return None if status == 200 else f"CSV with status {status}"
    try:
        body = _finite_json(text)
    except ValueError as exc:
        return f"not strict JSON: {exc}"
    if status >= 400:
        if not content_type.startswith("application/problem+json"):
            return f"error {status} as {content_type}"
        header_problem = body.get("type") == "/problems/invalid-header"  # its detail names it
        if status in (400, 422) and not body.get("errors") and not header_problem:
            return f"error {status} names no field"
        return None
    for result in body.get("results", []):
        for name in MUST_EXIST.get(case.path, ()):
            values = result.get(name)
            values = values if isinstance(values, list) else [values]
            if any(v is None for v in values):
                return f"{name} is null: {values}"
        for benefit in result.get("benefits", []):
            if benefit.get("value") is None:
                return f"present value is null: {benefit}"
    return None

"""Fixtures shared by every test folder."""

from __future__ import annotations

import hashlib
import math
import re

import pytest


def _number(x: float) -> str:
    """A float as the canonical form documents it: the shortest text that reads back to the
    same float (Python's repr), with a fraction or an exponent, the exponent written without
    "+" or leading zeros (2.7e-6, 1e22), negative zero as 0.0."""
    assert math.isfinite(x)
    if x == 0.0:
        return "0.0"
    text = repr(x)
    return re.sub(r"e([+-])0*(\d)", lambda m: "e" + ("-" if m.group(1) == "-" else "") + m.group(2), text)


def canonical(value) -> str:
    """The README's canonical JSON, written with the standard library alone: keys sorted, no
    white space, UTF-8 text, floats as ``_number``, integers and booleans as JSON has them."""
    if isinstance(value, dict):
        return "{" + ",".join(f"{canonical(str(k))}:{canonical(value[k])}" for k in sorted(value)) + "}"
    if isinstance(value, list):
        return "[" + ",".join(canonical(v) for v in value) + "]"
    if isinstance(value, bool) or value is None:
        return {True: "true", False: "false", None: "null"}[value]
    if isinstance(value, float):
        return _number(value)
    if isinstance(value, int):
        return str(value)
    if isinstance(value, str):
        # JSON escapes only what it must: the quote, the backslash, control characters
        escapes = {'"': '\\"', "\\": "\\\\", "\n": "\\n", "\r": "\\r", "\t": "\\t",
                   "\b": "\\b", "\f": "\\f"}
        return '"' + "".join(
            escapes.get(ch) or (f"\\u{ord(ch):04x}" if ord(ch) < 0x20 else ch) for ch in value
        ) + '"'
    raise TypeError(type(value))


def sha256_of(document) -> str:
    return "sha256:" + hashlib.sha256(canonical(document).encode("utf-8")).hexdigest()


@pytest.fixture(scope="session")
def canonical_json():
    """The canonical JSON text of a builtins value (README: the calculation fingerprint)."""
    return canonical


def _without_absent_dates(arguments: dict) -> dict:
    """The README's rule for the fields of lives given by date: a life's date fields only when
    given, calculation_date and age_convention only when calculation_date is given."""
    out = {k: v for k, v in arguments.items()
           if arguments.get("calculation_date") is not None
           or k not in ("calculation_date", "age_convention")}
    if "lives" in out:
        out["lives"] = [{k: v for k, v in life.items()
                         if v is not None or not k.startswith("date")} for life in out["lives"]]
    return out


@pytest.fixture(scope="session")
def calculation_fingerprint_of():
    """calculation_fingerprint(endpoint, arguments with defaults filled in, basis fingerprint,
    service version), recomputed from the README's definition."""

    def compute(endpoint: str, arguments: dict, basis_fingerprint: str, version: str) -> str:
        return sha256_of(
            {
                "arguments": _without_absent_dates(arguments),
                "basis": basis_fingerprint,
                "endpoint": endpoint,
                "service_version": version,
            }
        )

    return compute

"""msgspec validation errors in plain words: (JSON path, message) for one field.

Shared by the HTTP layer (400 answers) and the stored-basis loader (start-up errors), so a
field that does not fit reads the same wherever it is reported.
"""

from __future__ import annotations

import re

import msgspec

from .definitions import BASIS_KINDS

_AT = re.compile(r"^(?P<message>.*?)(?: - at `(?P<path>\$[^`]*)`)?$", re.S)
_BOUND = re.compile(r"^Expected `(?P<type>\w+)` (?P<op>>=|<=|>|<) (?P<bound>\S+)$")
_LENGTH = re.compile(r"^Expected `(?P<type>\w+)` of length (?P<op>>=|<=) (?P<bound>\d+)$")
_TYPE = re.compile(r"^Expected `(?P<expected>[^`]+)`, got `(?P<got>[^`]+)`$")
_UNKNOWN = re.compile(r"^Object contains unknown field `(?P<name>[^`]*)`$")
_MISSING = re.compile(r"^Object missing required field `(?P<name>[^`]*)`$")
_INVALID_VALUE = re.compile(r"^Invalid (?:enum )?value (?P<value>.*)$")

_OPS = {">": "greater than", ">=": "at least", "<": "less than", "<=": "at most"}
_TYPE_WORDS = {
    "float": "a number",
    "int": "a whole number",
    "str": "a string",
    "array": "a list",
    "object": "an object",
    "bool": "true or false",
    "null": "null",
    "date": "a date (YYYY-MM-DD)",
}
_BASIS_TYPES = ", ".join(k.__struct_config__.tag for k in BASIS_KINDS)  # type: ignore[misc]
_FRACTIONAL = "udd, constant-force, balducci"


#: (pattern of a JSON path, allowed values) for invalid choices, most specific first; the
#: modules that declare tagged unions and Literal fields register theirs (``allow``)
_CHOICES: list[tuple[re.Pattern, str]] = [
    (re.compile(r"\.fractional_ages$"), _FRACTIONAL),
    (re.compile(r"(?:^\$\.basis|\.base|\.members\[\d+\]|\.definition)\.type$"), _BASIS_TYPES),
]


def allow(path_pattern: str, allowed: str) -> None:
    """Name the allowed values of the fields whose JSON path matches ``path_pattern``."""
    _CHOICES.insert(0, (re.compile(path_pattern), allowed))


def literal_choices(structs: tuple[type, ...]) -> dict[str, str]:
    """field name → its allowed values, from the Literal-typed fields of ``structs`` (for a
    field of several Structs, each set with the tags of the Structs that take it)."""
    import typing

    by_field: dict[str, dict[tuple, list[str]]] = {}
    for struct in structs:
        hints = typing.get_type_hints(struct, include_extras=True)
        tag = struct.__struct_config__.tag
        for name, hint in hints.items():
            while typing.get_origin(hint) is typing.Annotated:
                hint = typing.get_args(hint)[0]
            if typing.get_origin(hint) is typing.Literal:
                values = tuple(typing.get_args(hint))
                by_field.setdefault(name, {}).setdefault(values, []).append(str(tag))
    out = {}
    for name, groups in by_field.items():
        parts = [", ".join(values) + (f" ({', '.join(tags)})" if len(groups) > 1 else "")
                 for values, tags in groups.items()]
        out[name] = "; ".join(parts)
    return out


def _words(type_text: str) -> str:
    parts = [p.strip() for p in type_text.split("|")]
    return " or ".join(_TYPE_WORDS.get(p, p) for p in parts)


def _child(path: str, name: str) -> str:
    if re.fullmatch(r"[A-Za-z_][A-Za-z0-9_]*", name):
        return f"{path}.{name}"
    return f"{path}[{msgspec.json.encode(name).decode()}]"


def outside_domain(text: str) -> bool:
    """Whether a msgspec ValidationError is a value outside its documented bounds (a number
    above or below a limit, a list too long or too short), rather than a body that does not
    fit the schema. The service's one rule: a value of the right type outside its domain is
    a 422, a missing or unknown field or a wrong type a 400."""
    m = _AT.match(text)
    message = m.group("message") if m else text
    return bool(_BOUND.match(message) or _LENGTH.match(message))


def field_error(text: str) -> tuple[str, str]:
    """(JSON path, message) for a msgspec ValidationError's text, in plain words."""
    m = _AT.match(text)
    message = m.group("message") if m else text
    path = (m.group("path") if m else None) or "$"
    if found := _UNKNOWN.match(message):
        name = found.group("name")
        return _child(path, name), f"unknown field {name!r}: not a field here"
    if found := _MISSING.match(message):
        name = found.group("name")
        if name == "type" and (path == "$.basis" or path.endswith(".definition")):
            return _child(path, name), f"required field is missing: one of {_BASIS_TYPES}"
        return _child(path, name), "required field is missing"
    if found := _BOUND.match(message):
        what = _words(found.group("type"))
        return path, f"must be {what} {_OPS[found.group('op')]} {found.group('bound')}"
    if found := _LENGTH.match(message):
        count = int(found.group("bound"))
        op = "at least" if found.group("op") == ">=" else "at most"
        noun = "character" if found.group("type") == "str" else "item"
        return path, f"must hold {op} {count} {noun}{'' if count == 1 else 's'}"
    if found := _TYPE.match(message):
        expected, got = found.group("expected"), found.group("got")
        if path == "$.basis" and "object" in expected:
            expected = "str | object"
            return path, (
                f"must be the id of a stored basis (a string) or an inline basis (an "
                f"object), got {_words(got)}"
            )
        if got == "float" and "int" in expected.split(" | "):
            # msgspec decodes strictly: 20.0 is a float even though its value is whole
            return path, ("must be a whole number, written without a decimal point or an "
                          "exponent (20, not 20.0 or 2e1)")
        return path, f"must be {_words(expected)}, got {_words(got)}"
    if found := _INVALID_VALUE.match(message):
        value = found.group("value")
        what = "unknown type" if path.endswith(".type") else "invalid value"
        for pattern, allowed in _CHOICES:
            if pattern.search(path):
                return path, f"{what} {value}; allowed: {allowed}"
        return path, f"{what} {value}"
    if message == "Invalid RFC3339 encoded date":
        return path, ("not a date: must be a calendar date that exists, written YYYY-MM-DD "
                      "(ISO 8601; 29 February only in leap years)")
    if message == "Number out of range":
        return path, "number out of range: must be a finite number"
    return path, message

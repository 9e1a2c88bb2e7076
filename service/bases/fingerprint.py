"""The fingerprint of a basis definition: ``"sha256:"`` + the SHA-256 (hex) of its canonical JSON.

The canonical JSON of a definition is the definition decoded into its Struct (so every field
is present, defaults included, and unknown fields are impossible) and encoded by msgspec:

* object keys sorted, no white space;
* every parameter typed as a number is a float, written in the shortest form that reads back
  to the same float, always with a fraction or an exponent (``1`` sent by a client becomes
  ``1.0``; ``0.0000027`` becomes ``2.7e-6``); negative zero is written as ``0.0``;
* whole-number fields (``start_age``, ``ultimate_start_age``) are integers (``20``);
* strings as JSON strings in UTF-8, without escaping beyond what JSON requires.

So a definition gets the same fingerprint however a client spells its numbers, and a stored
basis and the same definition sent inline have the same fingerprint.

A basis built on other bases (a rating, an improvement, several lives) may name a stored basis
by its id. Its canonical JSON puts the stored basis's own definition in place of the id, so the
fingerprint records every rate and parameter the answer depends on: it changes when a stored
basis it names changes, and a definition naming a stored basis has the same fingerprint as the
same definition written out in full.
"""

from __future__ import annotations

import hashlib
import re
from collections.abc import Callable
from typing import Any

import msgspec

from .definitions import BasisDefinition

_ENCODER = msgspec.json.Encoder(order="sorted")
# msgspec writes -0.0 as "-0.0"; it can only appear as a whole value after ":", "," or "[".
_NEGATIVE_ZERO = re.compile(rb"(?<=[:,\[])-0\.0(?=[,\]}])")


#: the fields through which a definition names other bases
_NESTED_FIELDS = ("base", "members")

Expand = Callable[[str], BasisDefinition]


def _expanded(value: Any, expand: Expand) -> Any:
    """Builtins of a definition with every stored id of a nested basis replaced by the stored
    basis's own definition (itself expanded)."""
    if isinstance(value, dict):
        out = {}
        for key, item in value.items():
            if key in _NESTED_FIELDS:
                items = item if isinstance(item, list) else [item]
                items = [
                    _expanded(msgspec.to_builtins(expand(x)), expand) if isinstance(x, str)
                    else _expanded(x, expand)
                    for x in items
                ]
                out[key] = items if isinstance(item, list) else items[0]
            else:
                out[key] = item
        return out
    return value


def canonical_json(definition: BasisDefinition, expand: Expand | None = None) -> bytes:
    """The canonical JSON bytes of a definition (see the module docstring).

    ``expand`` gives the definition of a stored basis by id; it is needed only for
    definitions that name stored bases.
    """
    if expand is not None and any(getattr(definition, f, None) is not None for f in _NESTED_FIELDS):
        return canonical_bytes(_expanded(msgspec.to_builtins(definition), expand))
    return canonical_bytes(definition)


def canonical_bytes(value: Any) -> bytes:
    """The canonical JSON of any Struct or builtins value (the rules of the module docstring)."""
    encoded = _ENCODER.encode(value)
    if b"-0.0" in encoded:
        encoded = _NEGATIVE_ZERO.sub(b"0.0", encoded)
    return encoded


def fingerprint(definition: BasisDefinition, expand: Expand | None = None) -> str:
    return "sha256:" + hashlib.sha256(canonical_json(definition, expand)).hexdigest()

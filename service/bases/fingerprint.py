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
"""

from __future__ import annotations

import hashlib
import re

import msgspec

from .definitions import BasisDefinition

_ENCODER = msgspec.json.Encoder(order="sorted")
# msgspec writes -0.0 as "-0.0"; it can only appear as a whole value after ":", "," or "[".
_NEGATIVE_ZERO = re.compile(rb"(?<=[:,\[])-0\.0(?=[,\]}])")


def canonical_json(definition: BasisDefinition) -> bytes:
    """The canonical JSON bytes of a definition (see the module docstring)."""
    encoded = _ENCODER.encode(definition)
    if b"-0.0" in encoded:
        encoded = _NEGATIVE_ZERO.sub(b"0.0", encoded)
    return encoded


def fingerprint(definition: BasisDefinition) -> str:
    return "sha256:" + hashlib.sha256(canonical_json(definition)).hexdigest()

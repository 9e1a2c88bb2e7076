"""The calculation fingerprint: one hash over everything an answer depends on.

``calculation_fingerprint`` is ``"sha256:"`` + the SHA-256 (hex) of the canonical JSON of

    {"arguments": <the request without "basis">,
     "basis": <the basis fingerprint>,
     "endpoint": <the path, e.g. "/v1/survival">,
     "service_version": <service_version(), e.g. "0.1.0+g3ff4c88a1b2c">}

where the request is the decoded request Struct, so every field is present with its default
filled in (``"duration": 0.0`` for a life that did not give one) but for the fields for lives
given by date: a life's ``date_of_birth``, ``date_of_entry``, ``dates_of_birth`` and
``dates_of_entry`` are left out when null, and the request's ``calculation_date`` and
``age_convention`` when calculation_date is null (no date can then be given, and the
convention counts nothing), so a request without dates has the fingerprint it had before
them. Dates are ISO 8601 strings (``"1979-04-17"``). The canonical JSON is the
one of basis fingerprints (``service/bases/fingerprint.py``): keys sorted, no white space,
numbers typed as numbers written as the shortest round-trip float (``60`` → ``60.0``), whole
numbers as integers, negative zero as ``0.0``, UTF-8. The basis enters by its fingerprint (which
already covers every rate and parameter, stored bases named inside it included), so a stored id
and the same definition sent inline give the same calculation fingerprint. The answer's media
type (JSON or CSV) is not part of it: both carry the same numbers.

Two answers with the same calculation fingerprint answered the same question with the same
build of the service. It is in every calculation answer (``calculation_fingerprint``), in the
``X-Calculation-Fingerprint`` header and in the request's access-log line.
"""

from __future__ import annotations

import hashlib
from typing import Any

import msgspec

from service.bases.fingerprint import canonical_bytes
from service.version import service_version

#: the fields of 0.2.0 for lives given by date: in the arguments only when given
REQUEST_DATE_FIELDS = ("calculation_date", "age_convention")
LIFE_DATE_FIELDS = ("date_of_birth", "date_of_entry", "dates_of_birth", "dates_of_entry")


def calculation_document(endpoint: str, request: msgspec.Struct, basis_fingerprint: str) -> dict:
    arguments = msgspec.to_builtins(request)
    arguments.pop("basis", None)
    if arguments.get("calculation_date", "") is None:
        for name in REQUEST_DATE_FIELDS:
            del arguments[name]
    for life in arguments.get("lives", ()):
        for name in LIFE_DATE_FIELDS:
            if life[name] is None:
                del life[name]
    return {
        "arguments": arguments,
        "basis": basis_fingerprint,
        "endpoint": endpoint,
        "service_version": service_version(),
    }


def calculation_fingerprint(endpoint: str, request: msgspec.Struct, basis_fingerprint: str) -> str:
    document = calculation_document(endpoint, request, basis_fingerprint)
    return "sha256:" + hashlib.sha256(canonical_bytes(document)).hexdigest()


def record(scope: Any, endpoint: str, request: msgspec.Struct, basis_fingerprint: str) -> str:
    """The calculation fingerprint, also left in the request's state for the access log and
    the ``X-Calculation-Fingerprint`` header."""
    found = calculation_fingerprint(endpoint, request, basis_fingerprint)
    scope["state"]["calculation_fingerprint"] = found
    return found

"""Choosing the media type of an answer from the request's ``Accept`` header (RFC 9110 §12.5.1).

Hand-written because litestar's ``Accept`` parsing takes any float as a quality value (so
``q=inf`` raises and ``q=0`` still selects). Here a media range is weighted by ``q`` only when
``q`` is a valid qvalue (0 to 1 with at most three decimals); a range whose weight is malformed
is ignored, as is the whole header when it is unreadable. Each offer takes the weight of the
most specific range that matches it (``type/subtype`` over ``type/*`` over ``*/*``); ``q=0``
means "not acceptable". The offer with the highest weight wins, ties going to the first offer;
when no offer is acceptable the first (the default) is answered, as RFC 9110 allows instead of
406.
"""

from __future__ import annotations

import re
from collections.abc import Sequence

_QVALUE = re.compile(r"^(?:0(?:\.\d{0,3})?|1(?:\.0{0,3})?)$")
_TOKEN = re.compile(r"^[!#$%&'*+.^_`|~0-9A-Za-z-]+$")
#: most media ranges read from one header; the rest are ignored
MAX_RANGES = 64


def _ranges(header: str) -> list[tuple[str, str, float]]:
    """(type, subtype, weight) of each well-formed media range, lower-cased."""
    ranges = []
    for element in header.split(",")[:MAX_RANGES]:
        media, *params = element.split(";")
        kind, slash, subtype = media.strip().lower().partition("/")
        if not slash or not _TOKEN.match(kind) or not _TOKEN.match(subtype):
            continue
        if kind == "*" and subtype != "*":
            continue
        weight = 1.0
        valid = True
        for param in params:
            name, _, value = param.strip().partition("=")
            if name.strip().lower() == "q":
                value = value.strip()
                if not _QVALUE.match(value):
                    valid = False
                else:
                    weight = float(value)
                break  # parameters after the weight are accept-extensions
        if valid:
            ranges.append((kind, subtype, weight))
    return ranges


def _weight(offer: str, ranges: list[tuple[str, str, float]]) -> float:
    kind, _, subtype = offer.partition("/")
    best, best_specificity = 0.0, -1
    for r_kind, r_subtype, weight in ranges:
        if r_kind == kind and r_subtype == subtype:
            specificity = 2
        elif r_kind == kind and r_subtype == "*":
            specificity = 1
        elif r_kind == "*":
            specificity = 0
        else:
            continue
        if specificity > best_specificity:
            best, best_specificity = weight, specificity
    return best


def best_offer(accept: str | None, offers: Sequence[str]) -> str:
    """The offer (lower-case ``type/subtype``) to answer with; ``offers[0]`` is the default."""
    if not accept or not accept.strip():
        return offers[0]
    ranges = _ranges(accept)
    if not ranges:
        return offers[0]
    chosen, chosen_weight = offers[0], 0.0
    for offer in offers:
        weight = _weight(offer, ranges)
        if weight > chosen_weight:
            chosen, chosen_weight = offer, weight
    return chosen

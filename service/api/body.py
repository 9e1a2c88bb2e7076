"""Reading a calculation request: media type, size limit, strict JSON decoding.

The service reads request bodies itself rather than through litestar's ``data`` parameter,
so that it decodes in msgspec's strict mode (a string is never taken for a number, so
``"NaN"`` is a type error), enforces its own body limit while reading (a Content-Length
header is checked first, but not trusted), and maps every decoding error to a field path.
"""

from __future__ import annotations

import re
from typing import Any, TypeVar

import msgspec
import numpy as np
from litestar import Request

from .problems import ClientDisconnected, Problem, from_decode_error, from_validation_error

T = TypeVar("T")

#: the deepest nesting of arrays and objects a body may have. The deepest valid request (a
#: basis nested 8 deep through several-life statuses, two levels each, around a select table)
#: needs about 25; decoders and the basis walks recurse once per level, so the bound comes
#: before any of them runs.
MAX_JSON_DEPTH = 64

#: a JSON string, its loop unrolled (runs of plain characters, then an escape): the same
#: strings as ``"(?:[^"\\]|\\.)*"``, matched several times faster on bodies of many strings
_STRING = rb'"[^"\\]*(?:\\.[^"\\]*)*"'
_STRINGS = re.compile(_STRING)
_TOKENS = re.compile(_STRING + rb"|[\[\]{},:]")
_NOT_BRACKETS = bytes(b for b in range(256) if b not in b"[]{}")


def is_json_media_type(content_type: str | None) -> bool:
    if not content_type:
        return False
    media_type, _, params = content_type.partition(";")
    if media_type.strip().lower() != "application/json":
        return False
    for param in params.split(";"):
        name, _, value = param.partition("=")
        if name.strip().lower() == "charset" and value.strip().strip('"').lower() not in (
            "utf-8",
            "utf8",
        ):
            return False
    return True


async def read_body(request: Request[Any, Any, Any], max_bytes: int) -> bytes:
    """The request body, after checking its media type and size (415, 413)."""
    # the raw ASGI headers: cheaper than building litestar's Headers for two look-ups
    content_type = declared = None
    for name, value in request.scope["headers"]:
        if name == b"content-type":
            content_type = value.decode("latin-1")
        elif name == b"content-length":
            declared = value.decode("latin-1")
    if not is_json_media_type(content_type):
        shown = repr(content_type) if content_type else "none"
        raise Problem(
            "unsupported-media-type",
            f"the body must be application/json (Content-Type was {shown})",
        )
    if declared is not None and declared.strip().isdigit() and int(declared) > max_bytes:
        raise _too_large(max_bytes)
    chunks = []
    size = 0
    receive = request.receive
    while True:
        # the ASGI messages themselves, so that a client leaving mid-body is told apart
        # from a failure of the service (litestar's stream() raises a 500 exception there)
        message = await receive()
        if message["type"] == "http.disconnect":
            raise ClientDisconnected(size)
        chunk = message.get("body", b"")
        size += len(chunk)
        if size > max_bytes:
            raise _too_large(max_bytes)
        chunks.append(chunk)
        if not message.get("more_body", False):
            return b"".join(chunks)



def _too_large(max_bytes: int) -> Problem:
    return Problem(
        "body-too-large",
        f"the request body is larger than {max_bytes} bytes, the most this service accepts",
    )


def check_depth(body: bytes, limit: int = MAX_JSON_DEPTH) -> None:
    """400 naming the field when arrays and objects nest more than ``limit`` deep.

    Cheap for ordinary bodies: fewer brackets than the limit cannot nest that deep; otherwise
    the brackets outside strings are summed as +1 and −1 in one numpy pass. Only a body that
    is too deep is walked token by token, to name the field where it goes too deep.
    """
    if body.count(b"[") + body.count(b"{") <= limit:
        return
    outside = _STRINGS.sub(b"", body) if b'"' in body else body
    brackets = np.frombuffer(outside.translate(None, _NOT_BRACKETS), dtype=np.uint8)
    steps = np.where((brackets == ord("[")) | (brackets == ord("{")), 1, -1)
    if brackets.size == 0 or int(np.cumsum(steps).max()) <= limit:
        return
    field = _deep_field(body, limit)
    message = (
        f"arrays and objects nest more than {limit} levels deep here; a request needs far "
        f"fewer (a basis may nest at most 8 deep)"
    )
    raise Problem("invalid-request", f"{field}: {message}", [(field, message)])


def _deep_field(body: bytes, limit: int) -> str:
    """The JSON path of the container at which nesting first passes ``limit``."""
    path: list[Any] = []  # one entry per open container: an index, a key, or None
    kinds: list[bytes] = []
    expect_key = False
    for match in _TOKENS.finditer(body):
        token = match.group()
        if token in (b"[", b"{"):
            if len(kinds) >= limit:
                break
            kinds.append(token)
            path.append(0 if token == b"[" else None)
            expect_key = token == b"{"
        elif token in (b"]", b"}"):
            if kinds:
                kinds.pop()
                path.pop()
            expect_key = False
        elif token == b",":
            if kinds and kinds[-1] == b"[":
                path[-1] += 1
            expect_key = bool(kinds) and kinds[-1] == b"{"
        elif token == b":":
            expect_key = False
        elif expect_key and kinds:
            path[-1] = token[1:-1].decode("utf-8", "replace")
    parts = ["$"]
    for kind, step in zip(kinds, path):
        parts.append(f"[{step}]" if kind == b"[" else f".{step}" if step is not None else "")
    return "".join(parts)


def decode(decoder: msgspec.json.Decoder, body: bytes) -> Any:
    """Decode strictly; 400 with the field's JSON path when the body does not fit (or nests
    deeper than ``MAX_JSON_DEPTH``)."""
    check_depth(body)
    try:
        return decoder.decode(body)
    except msgspec.ValidationError as exc:
        raise from_validation_error(exc) from None
    except msgspec.DecodeError as exc:
        raise from_decode_error(exc) from None

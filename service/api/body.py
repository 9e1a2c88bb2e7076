"""Reading a calculation request: media type, size limit, strict JSON decoding.

The service reads request bodies itself rather than through litestar's ``data`` parameter,
so that it decodes in msgspec's strict mode (a string is never taken for a number, so
``"NaN"`` is a type error), enforces its own body limit while reading (a Content-Length
header is checked first, but not trusted), and maps every decoding error to a field path.
"""

from __future__ import annotations

from typing import Any, TypeVar

import msgspec
from litestar import Request

from .problems import Problem, from_decode_error, from_validation_error

T = TypeVar("T")


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
    async for chunk in request.stream():
        size += len(chunk)
        if size > max_bytes:
            raise _too_large(max_bytes)
        chunks.append(chunk)
    return b"".join(chunks)


def _too_large(max_bytes: int) -> Problem:
    return Problem(
        "body-too-large",
        f"the request body is larger than {max_bytes} bytes, the most this service accepts",
    )


def decode(decoder: msgspec.json.Decoder, body: bytes) -> Any:
    """Decode strictly; 400 with the field's JSON path when the body does not fit."""
    try:
        return decoder.decode(body)
    except msgspec.ValidationError as exc:
        raise from_validation_error(exc) from None
    except msgspec.DecodeError as exc:
        raise from_decode_error(exc) from None

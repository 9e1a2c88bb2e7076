"""Every setting of the service, in one Struct, from the environment and the command line.

Each setting ``name`` is read from the environment variable ``LIFETIME_<NAME>`` (for example
``LIFETIME_MAX_LIVES``) and from the command-line option ``--<name>`` with dashes (for example
``--max-lives``); the command line wins over the environment, which wins over the default.
"""

from __future__ import annotations

import argparse
import os
from collections.abc import Mapping, Sequence
from typing import Annotated, Literal

import msgspec
from msgspec import Meta

ENV_PREFIX = "LIFETIME_"

LogLevel = Literal["critical", "error", "warning", "info", "debug"]


class Settings(msgspec.Struct, frozen=True, forbid_unknown_fields=True, kw_only=True):
    """The service's settings; see the module docstring for where each comes from."""

    host: Annotated[str, Meta(min_length=1)] = "127.0.0.1"
    """Address to listen on. The default keeps the service on this machine."""
    port: Annotated[int, Meta(ge=0, le=65535)] = 8000
    """TCP port to listen on (0 picks a free port)."""
    workers: Annotated[int, Meta(ge=1, le=64)] = 1
    """Worker processes. Each keeps its own compiled-model cache and its own metrics."""
    bases_dir: str | None = None
    """Folder of stored bases; empty means the bases shipped with the service."""
    max_lives: Annotated[int, Meta(ge=1, le=10_000_000)] = 10_000
    """Most lives in one calculation request."""
    max_durations: Annotated[int, Meta(ge=1, le=1_000_000)] = 1_000
    """Most durations (t, deferral) in one request, and most rows of a life table."""
    max_values: Annotated[int, Meta(ge=1, le=1_000_000_000)] = 1_000_000
    """Most values in one answer array: lives times durations (bounds memory per request)."""
    max_body_bytes: Annotated[int, Meta(ge=1)] = 1_048_576
    """Largest request body accepted, in bytes."""
    cache_size: Annotated[int, Meta(ge=0, le=1_000_000)] = 256
    """How many compiled inline bases to keep (least recently used are dropped)."""
    max_request_seconds: Annotated[float, Meta(gt=0, le=3600)] = 2.0
    """Most computation one request may take, as estimated before it runs from its lives,
    durations, years, members, ratings and benefits; a request estimated above is refused (422,
    saying how to split it)."""
    cache_bytes: Annotated[int, Meta(ge=1_048_576, le=2**40)] = 134_217_728
    """Most memory the compiled inline bases kept may take, in bytes (least recently used are
    dropped first); an inline basis whose compiled form alone is larger is refused (422)."""
    max_header_bytes: Annotated[int, Meta(ge=1024, le=1_048_576)] = 32_768
    """Largest request line and headers, in bytes (431 beyond)."""
    request_timeout: Annotated[float, Meta(gt=0, le=3600)] = 10.0
    """Seconds a client may take to send one whole request, head and body (408 beyond)."""
    http: Literal["httptools", "h11"] = "httptools"
    """The HTTP/1.1 parser: httptools (in C, the fast one) or h11 (pure Python); both keep
    the header and timeout limits and answer their own errors as problem+json."""
    log_level: LogLevel = "info"
    """Lowest level of log lines written."""
    auth_token: (
        Annotated[str, Meta(min_length=16, max_length=4096, pattern=r"^[\x21-\x7e]+$")] | None
    ) = None
    """Bearer token every request must carry (except /health and /ready); none: no
    authentication. Prefer the environment variable, so the token does not show in process
    listings."""
    cors_origins: str = ""
    """Browser origins allowed to call the API (CORS), separated by commas; empty: CORS off."""


class SettingsError(ValueError):
    """A setting that cannot be used; the message names the variable or option."""


_FIELDS = Settings.__struct_fields__
#: settings whose values are names, read in any case
_LOWER_CASE = frozenset({"log_level", "http"})

_HELP = {
    "host": "address to listen on",
    "port": "TCP port to listen on",
    "workers": "worker processes",
    "bases_dir": "folder of stored bases, instead of those shipped with the service",
    "max_lives": "most lives in one request",
    "max_durations": "most durations in one request, and most rows of a life table",
    "max_values": "most values in one answer array (lives times durations)",
    "max_body_bytes": "largest request body in bytes",
    "cache_size": "compiled inline bases kept in memory",
    "max_request_seconds": "most estimated computation in seconds for one request",
    "cache_bytes": "most memory in bytes for the compiled inline bases kept",
    "max_header_bytes": "largest request line and headers in bytes",
    "request_timeout": "seconds a client may take to send one whole request",
    "http": "HTTP/1.1 parser: httptools or h11",
    "log_level": "lowest level of log lines: critical, error, warning, info or debug",
    "auth_token": "bearer token required on every request but /health and /ready; at least 16 "
    "printable characters; prefer the environment variable, which process listings do not show",
    "cors_origins": "origins allowed by CORS, separated by commas (empty: CORS off)",
}


def _env_name(field: str) -> str:
    return ENV_PREFIX + field.upper()


def _option_name(field: str) -> str:
    return "--" + field.replace("_", "-")


def _convert(values: Mapping[str, object], where: Mapping[str, str]) -> Settings:
    try:
        return msgspec.convert(dict(values), Settings, strict=False)
    except msgspec.ValidationError as exc:
        text = str(exc)
        field = text.rsplit("`$.", 1)[-1].rstrip("`") if "`$." in text else ""
        message = text.split(" - at `", 1)[0]
        origin = where.get(field, field or "settings")
        raise SettingsError(f"{origin}: {message}") from None


def from_environment(environ: Mapping[str, str] | None = None) -> Settings:
    """Settings from ``LIFETIME_*`` variables (others are ignored); defaults for the rest."""
    environ = os.environ if environ is None else environ
    values: dict[str, object] = {}
    where: dict[str, str] = {}
    for field in _FIELDS:
        raw = environ.get(_env_name(field))
        if raw is None:
            continue
        raw = raw.strip()
        if raw == "" and field in ("bases_dir", "auth_token"):
            continue
        values[field] = raw.lower() if field in _LOWER_CASE else raw
        where[field] = _env_name(field)
    return _convert(values, where)


def argument_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="python -m service",
        description="Run the lifetime service. Every option can also be set with the "
        "environment variable LIFETIME_<OPTION> (for example LIFETIME_PORT); options win.",
    )
    defaults = Settings()
    for field in _FIELDS:
        default = getattr(defaults, field)
        parser.add_argument(
            _option_name(field),
            dest=field,
            default=None,
            metavar=field.upper(),
            help=f"{_HELP[field]} (env {_env_name(field)}; default {default!r})",
        )
    return parser


def load(
    argv: Sequence[str] | None = None, environ: Mapping[str, str] | None = None
) -> Settings:
    """Settings from the command line over the environment over the defaults.

    Raises ``SettingsError`` naming the option or variable when a value cannot be used, and
    ``SystemExit`` (from argparse) for an unknown option.
    """
    base = from_environment(environ)
    args = argument_parser().parse_args(list(argv) if argv is not None else None)
    values = msgspec.structs.asdict(base)
    where = {field: _env_name(field) for field in _FIELDS}
    for field in _FIELDS:
        raw = getattr(args, field)
        if raw is not None:
            values[field] = raw.strip().lower() if field in _LOWER_CASE else raw
            where[field] = _option_name(field)
    for field in ("bases_dir", "auth_token"):
        if values.get(field) == "":
            values[field] = None
    return _convert(values, where)


def to_environment(settings: Settings) -> dict[str, str]:
    """The environment variables that reproduce ``settings`` (for worker processes)."""
    env = {}
    for field in _FIELDS:
        value = getattr(settings, field)
        env[_env_name(field)] = "" if value is None else str(value)
    return env

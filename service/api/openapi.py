"""The OpenAPI document: configuration, the request bodies, and the committed copy.

The service serves the document at ``/schema/openapi.json`` and an interactive page at
``/schema`` (Swagger UI, every file of it served by the service itself: see docs.py). The same document is committed
at ``openapi/openapi.json``; regenerate it with

    python -m service.api.openapi > openapi/openapi.json     (or: --write)

and a test fails whenever the committed copy differs from what the application generates.

Calculation handlers read their bodies themselves (strict decoding, see ``body.py``), so
litestar does not see a ``data`` parameter; ``add_request_bodies`` adds each request body to
the document from the same Structs, with msgspec's JSON Schema for them.
"""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path
from typing import Any

import msgspec
from litestar import Litestar
from litestar.openapi import OpenAPIConfig
from litestar.openapi.plugins import JsonRenderPlugin
from litestar.openapi.spec import Components, OpenAPIMediaType, RequestBody, Tag

from service.version import __version__

from .docs import render_plugin

CAUTION = (
    "Life-contingency calculations for quote systems and internal tools, on a mortality basis "
    "(a stored basis, or a law or table sent inline): the distribution of future lifetime "
    "(survival and death probabilities, the force of mortality, deferred death probabilities, "
    "complete and curtate expectations of life with their variances and higher moments, "
    "quantiles, derived life tables); present values of life annuities, insurances, pure "
    "endowments and endowments at interest (level, increasing, decreasing or escalating; "
    "reversionary and contingent benefits on two lives), with their second moments, net "
    "level premiums (paid m times a year), prospective policy values, expected cash flows per period "
    "and sensitivities to mortality and interest; ratings (age shifts, multiples of q or of "
    "the force, extra mortality), generational mortality improvement, and several lives "
    "(joint-life and last-survivor statuses)."
    "\n\n"
    "**Caution.** Every result depends on the basis chosen, and a basis is an assumption about "
    "future mortality, not a fact. The results are not actuarial advice. Decisions that rest "
    "on them are for the responsible actuary, who should apply the professional standards and "
    "the regulation that govern their work where they practise."
    "\n\n"
    "Every calculation answer names its basis and that basis's fingerprint, the build that "
    "answered (`service_version`) and a `calculation_fingerprint` over the whole question. "
    "Calculations answer JSON, or CSV with `Accept: text/csv`. "
    "Errors are `application/problem+json` (RFC 9457) with `errors: [{field, message}]` "
    "naming each field at fault by its JSON path (`$.basis.c`, `$.lives[3].age`)."
)

TAGS = [
    Tag(name="calculations", description="The distribution of future lifetime of given lives."),
    Tag(name="bases", description="The stored bases and the inline basis types."),
    Tag(name="operations", description="Health, readiness and metrics."),
]

SCHEMA_REF = "#/components/schemas/{name}"


def openapi_config() -> OpenAPIConfig:
    return OpenAPIConfig(
        title="Lifetime Service",
        version=__version__,
        description=CAUTION,
        tags=TAGS,
        path="/schema",
        render_plugins=[
            render_plugin(),
            JsonRenderPlugin(path="/openapi.json"),
        ],
        components=Components(),
        create_examples=False,
        use_handler_docstrings=True,
    )


def add_request_bodies(app: Litestar, request_types: dict[str, type[msgspec.Struct]]) -> None:
    """Give each calculation operation its request body (msgspec JSON Schema components)."""
    document = app.openapi_schema
    types = list(request_types.values())
    refs, components = msgspec.json.schema_components(types, ref_template=SCHEMA_REF)
    schemas: dict[str, Any] = dict(document.components.schemas or {})
    for name, schema in components.items():
        schemas[name] = schema  # same names as litestar's own for shared Structs; ours win
    document.components.schemas = dict(sorted(schemas.items()))
    for (path, struct), ref in zip(request_types.items(), refs):
        operation = document.paths[path].post
        assert operation is not None, path
        operation.request_body = RequestBody(
            content={"application/json": OpenAPIMediaType(schema=ref)},  # type: ignore[arg-type]
            required=True,
            description=(struct.__doc__ or "").strip().splitlines()[0],
        )
    listings = [("/v1/bases", "get"), ("/v1/bases/{basis_id}/versions", "get")]
    for path, method in [(p, "post") for p in request_types] + listings:  # CSV too (tabular.py)
        operation = getattr(document.paths[path], method)
        assert operation is not None and operation.responses is not None
        ok = operation.responses["200"]
        if getattr(ok, "content", None) is not None:
            ok.content["text/csv"] = OpenAPIMediaType(  # type: ignore[index]
                schema={"type": "string", "description": CSV_DESCRIPTIONS.get(path, CSV_ROWS)}  # type: ignore[arg-type]
            )


CSV_ROWS = (
    "with Accept: text/csv, the same results as CSV: a header row, then one row per life (and "
    "per value of the argument the results follow: t, deferral, order, probability or "
    "benefit), the life's age and duration first; a value that does not exist is empty"
)
CSV_DESCRIPTIONS = {
    "/v1/bases": "with Accept: text/csv, one row per stored basis: id,title,type,source,"
    "fingerprint",
    "/v1/bases/{basis_id}/versions": "with Accept: text/csv, one row per version: version,"
    "title,fingerprint,current",
    "/v1/life-table": "with Accept: text/csv, the same columns as CSV, with a header row "
    "age,l,d,q,complete,curtate (age_0, age_1, … for a status); a value that does not exist "
    "is empty",
}


def document_json(app: Litestar) -> str:
    """The document as served, formatted for the committed copy."""
    return json.dumps(app.openapi_schema.to_schema(), indent=2, ensure_ascii=False) + "\n"


#: the committed copy, relative to the project root
COMMITTED_PATH = Path(__file__).resolve().parents[2] / "openapi" / "openapi.json"


def main(argv: list[str] | None = None) -> None:
    from .app import create_app

    parser = argparse.ArgumentParser(description="Print (or --write) the OpenAPI document.")
    parser.add_argument(
        "--write", action="store_true", help="write openapi/openapi.json instead of printing"
    )
    args = parser.parse_args(argv)
    text = document_json(create_app())
    if args.write:
        COMMITTED_PATH.parent.mkdir(parents=True, exist_ok=True)
        COMMITTED_PATH.write_text(text, encoding="utf-8")
    else:
        sys.stdout.write(text)


if __name__ == "__main__":
    main()

"""The documentation a person reads: ``GET /`` and the interactive page at ``/schema``.

The page is Swagger UI. Its scripts, styles and icon come from the ``swagger-ui-py`` package
(pinned with hashes in requirements.lock), read once at start-up and served by the service at
``/schema/assets/<file>``, so the page works on a machine without internet access. The
package is only read, never imported (its Python side wants template engines the service does
not use). ``GET /`` answers JSON (or a small HTML page for a browser) that names the docs, the
OpenAPI document and the health endpoints.
"""

from __future__ import annotations

import html
import importlib.util
from pathlib import Path
from typing import Any

import msgspec
from litestar import Request, Response, get
from litestar.openapi.plugins import SwaggerRenderPlugin
from litestar.params import FromPath

from service.version import service_version

from .conventions import chosen_media_type
from .problems import Problem

ASSETS_PATH = "/schema/assets"

#: the files the page loads, and their media types
ASSET_TYPES = {
    "swagger-ui-bundle.js": "text/javascript",
    "swagger-ui-standalone-preset.js": "text/javascript",
    "swagger-ui.css": "text/css",
    "favicon-32x32.png": "image/png",
}

#: what GET / points to: (path, what it is)
LINKS = {
    "docs": ("/schema", "the interactive API documentation (works offline)"),
    "openapi": ("/schema/openapi.json", "the OpenAPI document, the machine-readable contract"),
    "health": ("/health", "200 while the process runs"),
    "ready": ("/ready", "200 once every stored basis is loaded and compiled, 503 before"),
    "metrics": ("/metrics", "Prometheus metrics"),
    "bases": ("/v1/bases", "the stored bases and their fingerprints"),
    "laws": ("/v1/laws", "every inline basis type with its parameters"),
}


def assets_folder() -> Path:
    """The static folder of the installed swagger-ui-py package (found, not imported)."""
    spec = importlib.util.find_spec("swagger_ui")
    if spec is None or not spec.submodule_search_locations:
        raise RuntimeError(
            "the swagger-ui-py package is not installed; it is a dependency of the service "
            "(pip install -r requirements.lock)"
        )
    return Path(next(iter(spec.submodule_search_locations))) / "static"


def load_assets() -> dict[str, bytes]:
    folder = assets_folder()
    return {name: (folder / name).read_bytes() for name in ASSET_TYPES}


def render_plugin() -> SwaggerRenderPlugin:
    """Swagger UI with every file from the service itself."""
    return SwaggerRenderPlugin(
        js_url=f"{ASSETS_PATH}/swagger-ui-bundle.js",
        css_url=f"{ASSETS_PATH}/swagger-ui.css",
        standalone_preset_js_url=f"{ASSETS_PATH}/swagger-ui-standalone-preset.js",
        favicon=f"<link rel='icon' type='image/png' href='{ASSETS_PATH}/favicon-32x32.png'>",
        path="/swagger",
    )


class Link(msgspec.Struct, frozen=True):
    href: str
    description: str


class IndexResponse(msgspec.Struct, frozen=True):
    """What this service is and where to read more."""

    service: str
    service_version: str
    description: str
    links: dict[str, Link]


INDEX_DESCRIPTION = (
    "The distribution of future lifetime on a mortality basis, behind a JSON API. Results "
    "depend on the basis chosen; they are not actuarial advice."
)


def _index_html(answer: IndexResponse) -> str:
    items = "".join(
        f'<li><a href="{html.escape(link.href)}">{html.escape(link.href)}</a>: '
        f"{html.escape(link.description)}</li>"
        for link in answer.links.values()
    )
    return (
        "<!DOCTYPE html><html lang='en'><head><meta charset='utf-8'>"
        f"<title>{html.escape(answer.service)}</title></head><body>"
        f"<h1>{html.escape(answer.service)} {html.escape(answer.service_version)}</h1>"
        f"<p>{html.escape(answer.description)}</p><ul>{items}</ul></body></html>"
    )


def docs_handlers() -> list[Any]:
    assets = load_assets()
    answer = IndexResponse(
        service="Lifetime Service",
        service_version=service_version(),
        description=INDEX_DESCRIPTION,
        links={key: Link(href, text) for key, (href, text) in LINKS.items()},
    )
    page = _index_html(answer).encode("utf-8")
    common: dict[str, Any] = {"sync_to_thread": False, "tags": ["operations"]}

    @get(
        "/",
        operation_id="index",
        summary="Where to start: the docs, the OpenAPI document, the health endpoints",
        opt={"produces": ["application/json", "text/html"]},
        **common,
    )
    def index(request: Request[Any, Any, Any]) -> Response[IndexResponse]:
        """The service's name and version, and links to its documentation (JSON; HTML when
        the Accept header prefers it, as a browser's does)."""
        if chosen_media_type(request).startswith("text/html"):
            return Response(page, media_type="text/html")  # type: ignore[arg-type]
        return Response(answer)

    @get(f"{ASSETS_PATH}/{{name:str}}", include_in_schema=False,
         opt={"negotiate": False}, **common)
    def asset(name: FromPath[str]) -> Response[bytes]:
        """One file of the page (not negotiated: a browser asks with whatever Accept)."""
        content = assets.get(name)
        if content is None:
            raise Problem("not-found", f"nothing at {ASSETS_PATH}/{name}")
        return Response(
            content,
            media_type=ASSET_TYPES[name],
            headers={"Cache-Control": "public, max-age=86400"},
        )

    return [index, asset]

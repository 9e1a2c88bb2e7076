"""create_app(): the litestar application with its routes, errors, metrics and OpenAPI."""

from __future__ import annotations

import gc
from pathlib import Path
from typing import Any

from litestar import Litestar

from service.bases.catalogue import Catalogue
from service.settings import Settings, from_environment

from .bases import bases_handlers
from .calculations import REQUEST_TYPES, calculation_handlers
from .cash_flows import cash_flow_handlers
from .conventions import errors_as_problems, head_as_get, negotiate
from .docs import docs_handlers
from .observability import Metrics, observe
from .openapi import add_request_bodies, openapi_config
from .operations import operations_handlers
from .present_values import present_value_handlers
from .problems import EXCEPTION_HANDLERS
from .protocol import configure as configure_protocol
from .security import cors_config, document_authentication, require_token
from .value_schemas import REQUEST_TYPES as PRESENT_VALUE_TYPES


def _freeze_startup_objects() -> None:
    """Move everything alive after start-up (modules, compiled stored bases) out of the
    garbage collector's reach: they live as long as the process, and without this every full
    collection walks them again, which costs a request tens of microseconds on average."""
    gc.collect()
    gc.freeze()


class LifetimeApp(Litestar):
    """Litestar, with every HTTP request (matched or not) passing through ``observe``."""

    _observed: Any = None

    async def __call__(self, scope: Any, receive: Any, send: Any) -> None:
        if scope["type"] == "http" and self._observed is not None:
            await self._observed(scope, receive, send)
        else:
            await super().__call__(scope, receive, send)


def create_app(settings: Settings | None = None, catalogue: Catalogue | None = None) -> LifetimeApp:
    """The application. Stored bases are loaded at start-up unless ``catalogue`` is loaded.

    ``GET /ready`` answers 503 until they are.
    """
    settings = settings or Settings()
    if catalogue is None:
        folder = Path(settings.bases_dir) if settings.bases_dir else None
        catalogue = Catalogue(folder, settings.cache_size, settings.cache_bytes)
    metrics = Metrics(catalogue)
    app = LifetimeApp(
        route_handlers=[
            *calculation_handlers(settings, catalogue),
            *present_value_handlers(settings, catalogue),
            *cash_flow_handlers(settings, catalogue),
            *bases_handlers(catalogue),
            *operations_handlers(catalogue, metrics),
            *docs_handlers(),
        ],
        before_request=negotiate,
        exception_handlers=EXCEPTION_HANDLERS,  # type: ignore[arg-type]
        on_startup=[catalogue.load, metrics.worker_started, _freeze_startup_objects],
        on_shutdown=[metrics.worker_stopped],
        openapi_config=openapi_config(),
        request_max_body_size=None,  # the calculation handlers enforce max_body_bytes
        cors_config=cors_config(settings.cors_origins),
        logging_config=None,
        debug=False,
    )
    add_request_bodies(app, {**REQUEST_TYPES, **PRESENT_VALUE_TYPES})
    if settings.auth_token is not None:
        document_authentication(app)
    app.state["settings"] = settings
    app.state["catalogue"] = catalogue
    app.state["metrics"] = metrics
    parent_call = Litestar.__call__

    async def call_litestar(scope: Any, receive: Any, send: Any) -> None:
        await parent_call(app, scope, receive, send)

    app._observed = observe(
        require_token(head_as_get(errors_as_problems(call_litestar)), settings.auth_token), metrics
    )
    return app


def create_app_from_environment() -> LifetimeApp:
    """For worker processes started by uvicorn: settings from ``LIFETIME_*`` variables (the
    connection limits of this worker too)."""
    settings = from_environment()
    configure_protocol(settings.max_header_bytes, settings.request_timeout, settings.http)
    return create_app(settings)
